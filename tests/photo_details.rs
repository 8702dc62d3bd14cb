//! Details of the photo workflow: review thumbnails turned as EXIF says, a damaged
//! embedded profile reported rather than taken for an untagged image, a folder without
//! images refused, and the wording of help and messages.

mod common;

use common::{fixture, run, stderr};
use std::path::Path;

/// A minimal EXIF block (TIFF 6.0 section 2 header and one IFD, little-endian) holding
/// only the Orientation tag (274 = 0x0112, SHORT, count 1), as EXIF 2.32 / CIPA DC-008
/// section 4.6.4 lays it out.
fn exif_orientation(value: u16) -> Vec<u8> {
    let mut v = b"II*\0".to_vec();
    v.extend_from_slice(&8u32.to_le_bytes()); // offset of IFD0
    v.extend_from_slice(&1u16.to_le_bytes()); // one entry
    v.extend_from_slice(&0x0112u16.to_le_bytes());
    v.extend_from_slice(&3u16.to_le_bytes()); // SHORT
    v.extend_from_slice(&1u32.to_le_bytes());
    v.extend_from_slice(&value.to_le_bytes());
    v.extend_from_slice(&[0, 0]); // a SHORT is left-justified in the 4-byte field
    v.extend_from_slice(&0u32.to_le_bytes()); // no next IFD
    v
}

/// An 8-bit RGB PNG written by the `png` crate, with extra chunks (type, data) placed
/// before the image data; the crate computes each chunk's CRC.
fn png_with_chunks(w: u32, h: u32, rgb: &[u8], chunks: &[([u8; 4], Vec<u8>)]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut e = png::Encoder::new(&mut out, w, h);
    e.set_color(png::ColorType::Rgb);
    e.set_depth(png::BitDepth::Eight);
    let mut wr = e.write_header().unwrap();
    for (kind, data) in chunks {
        wr.write_chunk(png::chunk::ChunkType(*kind), data).unwrap();
    }
    wr.write_image_data(rgb).unwrap();
    wr.finish().unwrap();
    out
}

const RED: [u8; 3] = [220, 20, 30];
const GREY: [u8; 3] = [190, 190, 190];

/// 64 × 32 stored pixels: grey, with a red 16 × 16 block at the stored top-left corner.
fn corner_picture() -> Vec<u8> {
    let mut v = Vec::new();
    for y in 0..32 {
        for x in 0..64 {
            v.extend_from_slice(if x < 16 && y < 16 { &RED } else { &GREY });
        }
    }
    v
}

/// `reduce FILE -k K [EXTRA...] -o OUT`.
fn reduce(file: &Path, k: &str, extra: &[&str], out: &Path) -> std::process::Output {
    let mut args = vec!["reduce", file.to_str().unwrap(), "-k", k];
    args.extend_from_slice(extra);
    args.extend(["-o", out.to_str().unwrap()]);
    run(&args, &[])
}

fn near(p: &image::Rgba<u8>, c: [u8; 3]) -> bool {
    (0..3).all(|i| (p.0[i] as i32 - c[i] as i32).abs() <= 40)
}

#[test]
fn review_thumbnails_are_turned_as_the_exif_orientation_says() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    std::fs::create_dir_all(&input).unwrap();
    let png = png_with_chunks(
        64,
        32,
        &corner_picture(),
        &[(*b"eXIf", exif_orientation(6))],
    );
    std::fs::write(input.join("turned.png"), png).unwrap();
    // A camera-style JPEG with orientation 6 (made by the fixture script).
    std::fs::copy(fixture("profiles/p3.jpg"), input.join("p3.jpg")).unwrap();
    let out = dir.path().join("out");
    let o = run(
        &[
            "batch",
            input.to_str().unwrap(),
            "-k",
            "2",
            "--review-page",
            "--quiet",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // Files are in sorted order: p3.jpg is 0001, turned.png 0002.
    let stored = image::open(input.join("p3.jpg")).unwrap();
    for side in ["before", "after"] {
        let t = image::open(out.join(format!("review/0001.{side}.png"))).unwrap();
        let (w, h) = (stored.width() as f64, stored.height() as f64);
        let (tw, th) = (t.width() as f64, t.height() as f64);
        // Orientation 6 (EXIF 2.32, the standard's definition): the 0th row is the
        // visual right-hand side, so the picture is shown turned a quarter: width and
        // height swap.
        assert!(
            ((tw / th) - (h / w)).abs() < 0.05,
            "p3.jpg {side}: thumbnail {tw}x{th}, stored {w}x{h}"
        );
        let t = image::open(out.join(format!("review/0002.{side}.png")))
            .unwrap()
            .to_rgba8();
        assert_eq!(t.dimensions(), (32, 64), "turned.png {side}");
        // The stored top-left corner (the 0th row's 0th column) is shown at the top right.
        assert!(
            near(t.get_pixel(24, 7), RED),
            "{side}: {:?}",
            t.get_pixel(24, 7)
        );
        assert!(
            near(t.get_pixel(7, 7), GREY),
            "{side}: {:?}",
            t.get_pixel(7, 7)
        );
        assert!(near(t.get_pixel(24, 56), GREY), "{side}");
    }
}

/// zlib stream (RFC 1950) of `data`.
fn zlib(data: &[u8]) -> Vec<u8> {
    miniz_oxide::deflate::compress_to_vec_zlib(data, 6)
}

#[test]
fn a_damaged_iccp_chunk_is_reported_like_an_unusable_profile() {
    let dir = tempfile::tempdir().unwrap();
    let picture = corner_picture();
    // iCCP (PNG 3rd edition 11.3.2.3): name, NUL, method 0, then zlib data. Damaged: a
    // zlib header followed by a deflate block of the reserved type 3 (RFC 1951 3.2.3),
    // which no inflater accepts; the chunk's CRC is right (written by the png crate).
    let mut damaged = b"camera\0\0".to_vec();
    damaged.extend_from_slice(&[0x78, 0x9C, 0xFF, 0xFF, 0x00, 0x12, 0x34]);
    // Junk that inflates: the case the profile reader already reports.
    let mut junk = b"camera\0\0".to_vec();
    junk.extend(zlib(&[7u8; 300]));
    let mut records = Vec::new();
    for (name, chunk) in [("damaged", damaged), ("junk", junk)] {
        let file = dir.path().join(format!("{name}.png"));
        std::fs::write(
            &file,
            png_with_chunks(64, 32, &picture, &[(*b"iCCP", chunk)]),
        )
        .unwrap();
        let out = dir.path().join(name);
        let o = reduce(&file, "2", &[], &out);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        let note = stderr(&o)
            .lines()
            .find(|l| l.contains("note:") && l.contains("ICC profile"))
            .unwrap_or_else(|| panic!("{name}: no profile note in {}", stderr(&o)))
            .to_string();
        assert!(note.contains("read as sRGB"), "{note}");
        let doc: serde_json::Value = serde_json::from_slice(
            &std::fs::read(out.join(format!("{name}.palette.json"))).unwrap(),
        )
        .unwrap();
        assert_eq!(doc["colour_profile"]["input"], "icc-unused", "{name}");
        assert_eq!(doc["colour_profile"]["output"], "srgb", "{name}");
        // Nothing unreadable is embedded again in the reduced image.
        let bytes = std::fs::read(out.join(format!("{name}.reduced.png"))).unwrap();
        assert!(!bytes.windows(4).any(|w| w == b"iCCP"), "{name}");
        records.push(doc["colour_profile"].clone());
    }
    assert_eq!(records[0], records[1]);
}

#[test]
fn a_batch_over_a_folder_without_images_is_refused_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("empty shoot");
    std::fs::create_dir_all(input.join("sub")).unwrap();
    std::fs::write(input.join("notes.txt"), "no pictures here").unwrap();
    let out = dir.path().join("out");
    for extra in [&[][..], &["--shared"][..]] {
        let mut args = vec![
            "batch",
            input.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let o = run(&args, &[]);
        assert_eq!(o.status.code(), Some(2), "{extra:?}: {}", stderr(&o));
        let err = stderr(&o);
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(
            err.contains("empty shoot") && err.contains("no images"),
            "{err}"
        );
        assert!(!out.exists(), "{extra:?}: the output folder was made");
    }
}

fn help(args: &[&str]) -> String {
    let o = run(args, &[]);
    assert_eq!(o.status.code(), Some(0));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

#[test]
fn help_says_what_each_option_reads_and_writes() {
    for cmd in ["apply", "batch"] {
        let h = help(&[cmd, "--help"]);
        let at = h.find("--palette <FILE>").unwrap();
        let text = &h[at..at + 400];
        assert!(
            text.contains("hex colours") && text.contains("CSV"),
            "{cmd}: {text}"
        );
    }
    let apply = help(&["apply", "--help"]);
    assert!(!apply.contains("scene"), "{apply}");
    assert!(apply.contains("uncertainty map"));
    let batch = help(&["batch", "--help"]);
    assert!(batch.contains("twice the cores"), "{batch}");
    let reduce = help(&["reduce", "--help"]);
    assert!(reduce.contains("STEM.loss.tif") && reduce.contains("STEM.loss.png"));
    // The README's table of options lists every engine flag `reduce --help` shows.
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    for flag in ["--refine", "--split-merge", "--anneal", "--restarts"] {
        assert!(reduce.contains(flag));
        assert!(readme.contains(&format!("| `{flag}")), "README: {flag}");
    }
}

#[test]
fn palette_file_errors_are_one_plain_line_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let img = dir.path().join("img.png");
    common::write_rgb(&img, 64, 32, &corner_picture());
    // A spreadsheet saved with semicolons (common where the decimal mark is a comma).
    let semi = dir.path().join("brand.csv");
    std::fs::write(&semi, "name;hex\nNavy;#1d3557\nOff White;#f1faee\n").unwrap();
    let out = dir.path().join("out");
    let (i, s, o) = (
        img.to_str().unwrap(),
        semi.to_str().unwrap(),
        out.to_str().unwrap(),
    );
    for args in [
        vec!["reduce", i, "-k", "3", "--pin-file", s, "-o", o],
        vec!["apply", i, "--palette", s, "-o", o],
        vec![
            "batch",
            dir.path().to_str().unwrap(),
            "--palette",
            s,
            "-o",
            o,
        ],
    ] {
        let r = run(&args, &[]);
        assert_eq!(r.status.code(), Some(2), "{args:?}");
        let err = stderr(&r);
        assert_eq!(err.lines().count(), 1, "{args:?}: {err}");
        assert!(err.starts_with("chromasift: error: "), "{err}");
        assert!(err.contains("brand.csv"), "{err}");
        assert!(err.contains("separated by commas"), "{err}");
        assert!(
            !err.contains("invalid value") && !err.contains("--help"),
            "{err}"
        );
        assert!(!out.exists());
    }
}

#[cfg(target_os = "linux")]
#[test]
fn an_unwritable_folder_is_named_without_temporary_file_names() {
    let dir = tempfile::tempdir().unwrap();
    let img = dir.path().join("img.png");
    common::write_rgb(&img, 64, 32, &corner_picture());
    // No file can be made in /proc, not even by root.
    let o = run(
        &[
            "reduce",
            img.to_str().unwrap(),
            "-k",
            "2",
            "-o",
            "/proc/self",
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(err.contains("/proc/self"), "{err}");
    assert!(!err.contains(".chromasift-tmp"), "{err}");
}

#[test]
fn counts_agree_with_their_nouns() {
    let dir = tempfile::tempdir().unwrap();
    let img = dir.path().join("flat.png");
    common::write_rgb(&img, 8, 8, &GREY.repeat(64));
    let o = reduce(&img, "1", &[], &dir.path().join("out"));
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(err.contains(": 1 colour,"), "{err}");
    // Whatever the count of iterations, its noun agrees with it.
    let line = err.lines().find(|l| l.contains("iteration")).unwrap();
    let words: Vec<&str> = line.split([' ', ',']).collect();
    let at = words
        .iter()
        .position(|w| w.starts_with("iteration"))
        .unwrap();
    let n: u64 = words[at - 1].parse().unwrap();
    assert_eq!(words[at] == "iteration", n == 1, "{line}");
}

#[test]
fn a_colour_lost_by_apply_is_to_be_added_to_the_palette() {
    let dir = tempfile::tempdir().unwrap();
    let img = dir.path().join("img.png");
    common::write_rgb(&img, 64, 32, &corner_picture());
    // The palette has no red: the 256 red pixels are shown grey, far beyond ΔE2000 10.
    let list = dir.path().join("greys.txt");
    std::fs::write(&list, "#bebebe\n#202020\n").unwrap();
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            list.to_str().unwrap(),
            "-o",
            dir.path().join("out").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let warning = stderr(&o)
        .lines()
        .find(|l| l.contains("warning:"))
        .unwrap_or_else(|| panic!("{}", stderr(&o)))
        .to_string();
    assert!(
        warning.contains("add the colour to the palette"),
        "{warning}"
    );
    assert!(
        !warning.contains("pin") && !warning.contains("raise"),
        "{warning}"
    );
}

#[test]
fn a_tiffs_resolution_orientation_and_camera_tags_reach_the_reduced_png() {
    use tiff::encoder::{colortype::RGB8, Rational, TiffEncoder};
    use tiff::tags::{ResolutionUnit, Tag};
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("scan.tif");
    {
        let mut f = std::fs::File::create(&file).unwrap();
        let mut enc = TiffEncoder::new(&mut f).unwrap();
        let mut img = enc.new_image::<RGB8>(64, 32).unwrap();
        img.encoder().write_tag(Tag::Make, "Test Maker").unwrap();
        img.encoder()
            .write_tag(Tag::DateTime, "2026:12:03 10:00:00")
            .unwrap();
        img.encoder().write_tag(Tag::Orientation, 8u16).unwrap();
        img.resolution(ResolutionUnit::Centimeter, Rational { n: 118, d: 1 });
        img.write_data(&corner_picture()).unwrap();
    }
    let out = dir.path().join("out");
    let o = reduce(&file, "2", &[], &out);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let bytes = std::fs::read(out.join("scan.reduced.png")).unwrap();
    let r = png::Decoder::new(std::io::Cursor::new(&bytes))
        .read_info()
        .unwrap();
    let info = r.info();
    // 118 pixels per centimetre = 11800 per metre (PNG pHYs, unit 1 = metre).
    let dims = info.pixel_dims.unwrap();
    assert_eq!((dims.xppu, dims.yppu), (11800, 11800));
    let exif = info.exif_metadata.as_ref().unwrap().to_vec();
    // Read back by the image crate's EXIF reader: orientation 8 is a turn of 270°
    // clockwise to show (EXIF 2.32: the 0th row is the visual left-hand side).
    assert_eq!(
        image::metadata::Orientation::from_exif_chunk(&exif),
        Some(image::metadata::Orientation::Rotate270)
    );
    for text in ["Test Maker", "2026:12:03 10:00:00"] {
        assert!(
            exif.windows(text.len()).any(|w| w == text.as_bytes()),
            "{text}"
        );
    }
    // Dropped for privacy.
    let bare = dir.path().join("bare");
    let o = reduce(&file, "2", &["--strip-metadata"], &bare);
    assert_eq!(o.status.code(), Some(0));
    let bytes = std::fs::read(bare.join("scan.reduced.png")).unwrap();
    assert!(!bytes.windows(4).any(|w| w == b"eXIf" || w == b"pHYs"));
}

#[test]
fn outputs_an_earlier_run_left_behind_are_pointed_out() {
    let dir = tempfile::tempdir().unwrap();
    let img = dir.path().join("img.png");
    common::write_rgb(&img, 64, 32, &corner_picture());
    let out = dir.path().join("out");
    let both = ["--loss-map", "--uncertainty-raw"];
    let first = reduce(&img, "3", &both, &out);
    assert_eq!(first.status.code(), Some(0), "{}", stderr(&first));
    assert!(!stderr(&first).contains("earlier run"));
    // Without the loss map: the old loss files stay (nothing of the user's is deleted)
    // and each is named in a note.
    let second = reduce(&img, "4", &[], &out);
    assert_eq!(second.status.code(), Some(0));
    let err = stderr(&second);
    for name in ["img.loss.tif", "img.loss.png", "img.uncertainty.tif"] {
        assert!(out.join(name).is_file(), "{name}");
        let line = err
            .lines()
            .find(|l| l.contains(name))
            .unwrap_or_else(|| panic!("{name}: {err}"));
        assert!(line.contains("earlier run"), "{line}");
    }
    // Asked for again, they are rewritten and nothing is said.
    let third = reduce(&img, "4", &both, &out);
    assert!(
        !stderr(&third).contains("earlier run"),
        "{}",
        stderr(&third)
    );
}
