//! Bounded memory and honest results under hostile or careless input: sizes a file or a
//! user sets are bounded before allocation, silent changes of meaning become notes or
//! refusals. Memory checks run the binary under an address-space limit (`ulimit -v`), so a
//! regression fails instead of exhausting the machine.

mod common;

use common::{fixture, run, stderr};
use serde_json::Value;
use std::path::Path;
use std::process::Command;

/// Runs the binary under an address-space limit of `kib` KiB through `sh`.
fn run_limited(kib: u64, args: &[&str]) -> std::process::Output {
    let bin = env!("CARGO_BIN_EXE_chromasift");
    let quoted: Vec<String> = args.iter().map(|a| format!("'{a}'")).collect();
    Command::new("sh")
        .arg("-c")
        .arg(format!(
            "ulimit -v {kib}; exec '{bin}' {}",
            quoted.join(" ")
        ))
        .output()
        .unwrap()
}

/// A zlib stream that inflates to `n` zero bytes, written by hand (RFC 1950/1951): one
/// fixed-Huffman block of a literal 0 and copies of 258 bytes at distance 1. About 13 bits
/// per 258 bytes, so a few megabytes hold gigabytes.
fn zlib_zeros(n: u64) -> Vec<u8> {
    struct Bits {
        out: Vec<u8>,
        acc: u64,
        len: u32,
    }
    impl Bits {
        fn put(&mut self, value: u64, len: u32) {
            self.acc |= value << self.len;
            self.len += len;
            while self.len >= 8 {
                self.out.push(self.acc as u8);
                self.acc >>= 8;
                self.len -= 8;
            }
        }
        // Huffman codes go most significant bit first.
        fn code(&mut self, code: u64, len: u32) {
            let mut r = 0;
            for i in 0..len {
                r |= ((code >> i) & 1) << (len - 1 - i);
            }
            self.put(r, len);
        }
    }
    let mut b = Bits {
        out: vec![0x78, 0x01],
        acc: 0,
        len: 0,
    };
    b.put(1, 1); // final block
    b.put(1, 2); // fixed Huffman
    b.code(0x30, 8); // literal 0
    let mut left = n - 1;
    while left >= 258 {
        b.code(0b1100_0101, 8); // length 258 (symbol 285)
        b.code(0, 5); // distance 1
        left -= 258;
    }
    for _ in 0..left {
        b.code(0x30, 8);
    }
    b.code(0, 7); // end of block (256)
    if b.len > 0 {
        b.put(0, 8 - b.len);
    }
    // Adler-32 of n zeros: a = 1, b = n mod 65521.
    let adler = ((n % 65521) << 16) | 1;
    b.out.extend_from_slice(&(adler as u32).to_be_bytes());
    b.out
}

fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xffff_ffffu32;
    for &x in bytes {
        c ^= x as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                (c >> 1) ^ 0xedb8_8320
            } else {
                c >> 1
            };
        }
    }
    !c
}

fn chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
    let mut v = (data.len() as u32).to_be_bytes().to_vec();
    v.extend_from_slice(kind);
    v.extend_from_slice(data);
    let mut crc_in = kind.to_vec();
    crc_in.extend_from_slice(data);
    v.extend_from_slice(&crc32(&crc_in).to_be_bytes());
    v
}

/// A 1 × 1 PNG whose colour profile (iCCP) inflates to 1 GiB: decoded under a 400 MB
/// address-space limit, as a plain 1 × 1 image (the profile is not used and never inflated).
#[test]
fn a_compressed_colour_profile_cannot_exhaust_memory() {
    let mut png = b"\x89PNG\r\n\x1a\n".to_vec();
    let mut ihdr = Vec::new();
    ihdr.extend_from_slice(&1u32.to_be_bytes());
    ihdr.extend_from_slice(&1u32.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]); // 8-bit RGB
    png.extend(chunk(b"IHDR", &ihdr));
    let mut iccp = b"bomb\0\0".to_vec(); // name, NUL, compression method 0
    iccp.extend(zlib_zeros(1 << 30));
    png.extend(chunk(b"iCCP", &iccp));
    // One scanline: filter byte 0 and one RGB pixel, stored (uncompressed) deflate block.
    let raw = [0u8, 200, 40, 30];
    let mut idat = vec![0x78, 0x01, 0x01, 4, 0, !4u8, 0xff];
    idat.extend_from_slice(&raw);
    let (mut a, mut b) = (1u32, 0u32);
    for &x in &raw {
        a = (a + x as u32) % 65521;
        b = (b + a) % 65521;
    }
    idat.extend_from_slice(&((b << 16) | a).to_be_bytes());
    png.extend(chunk(b"IDAT", &idat));
    png.extend(chunk(b"IEND", &[]));
    let dir = tempfile::tempdir().unwrap();
    // The same file with a chunk cut short after the image data: the profile must still
    // be left out (the decoder then reports the cut or ignores it, within the limit).
    let mut cut = png.clone();
    cut.truncate(cut.len() - 12);
    cut.extend_from_slice(&1000u32.to_be_bytes());
    cut.extend_from_slice(b"tEXtabcdefgh");
    let cut_input = dir.path().join("cut.png");
    std::fs::write(&cut_input, &cut).unwrap();
    let o = run_limited(
        400_000,
        &[
            "reduce",
            cut_input.to_str().unwrap(),
            "-o",
            dir.path().join("cut").to_str().unwrap(),
        ],
    );
    assert!(
        matches!(o.status.code(), Some(0) | Some(2)),
        "{}",
        stderr(&o)
    );
    assert!(!stderr(&o).contains("memory allocation"), "{}", stderr(&o));
    let input = dir.path().join("bomb.png");
    std::fs::write(&input, &png).unwrap();
    let o = run_limited(
        400_000,
        &[
            "reduce",
            input.to_str().unwrap(),
            "-k",
            "2",
            "-o",
            dir.path().to_str().unwrap(),
            "--json",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(doc["colors"][0]["hex"], "#c8281e");
}

/// Ink libraries and palette documents: read with a size limit (a device that never ends
/// is refused), at most 4096 entries, one line naming the file.
#[test]
fn text_inputs_and_tables_are_bounded() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let out = dir.path().join("out");
    let lib = dir.path().join("many.csv");
    let mut text = String::from("name,hex\n");
    for i in 0..5000 {
        text.push_str(&format!("ink {i},#{:06x}\n", i * 3));
    }
    std::fs::write(&lib, text).unwrap();
    for (inks, says) in [
        (lib.to_str().unwrap(), "at most 4096"),
        ("/dev/zero", "over the limit of 16777216 bytes"),
    ] {
        let o = run_limited(
            600_000,
            &[
                "separate",
                poster.to_str().unwrap(),
                "--inks",
                inks,
                "-o",
                out.to_str().unwrap(),
            ],
        );
        assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
        let err = stderr(&o);
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(err.contains(inks) && err.contains(says), "{err}");
    }
    let o = run(
        &[
            "apply",
            poster.to_str().unwrap(),
            "--palette",
            "/dev/zero",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("over the limit"), "{}", stderr(&o));
    assert!(!out.exists());
}

/// `apply` maps in the space the palette was chosen in, keeps a palette's byte-order mark
/// out of the way, and refuses a `lab` that disagrees with its `hex`.
#[test]
fn apply_uses_the_palettes_space_and_checks_lab_against_hex() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let learnt = dir.path().join("learnt");
    let o = run(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "5",
            "--space",
            "oklab",
            "-o",
            learnt.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc_path = learnt.join("harbour-poster.palette.json");
    let applied = dir.path().join("applied");
    let apply = |palette: &Path| {
        run(
            &[
                "apply",
                poster.to_str().unwrap(),
                "--palette",
                palette.to_str().unwrap(),
                "-o",
                applied.to_str().unwrap(),
                "--json",
            ],
            &[],
        )
    };
    let o = apply(&doc_path);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(doc["space"], "oklab");
    // With a byte-order mark in front.
    let text = std::fs::read_to_string(&doc_path).unwrap();
    let bom = dir.path().join("bom.json");
    std::fs::write(&bom, format!("\u{feff}{text}")).unwrap();
    assert!(apply(&bom).status.success());
    // An edited lab that no longer matches its hex.
    let mut v: Value = serde_json::from_str(&text).unwrap();
    v["colors"][1]["lab"] = serde_json::json!([50.0, 60.0, -20.0]);
    let edited = dir.path().join("edited.json");
    std::fs::write(&edited, v.to_string()).unwrap();
    let o = apply(&edited);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(
        err.contains("colour 1") && err.contains("make the two agree"),
        "{err}"
    );
    assert_eq!(err.lines().count(), 1, "{err}");
}

/// Silent changes of meaning: huge restarts refused, `--stdout` with `-o` refused, a
/// closed standard output is an error, and a β so small that the means collapse gets a
/// note.
#[test]
fn silent_changes_of_meaning_are_refused_or_noted() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let out = dir.path().to_str().unwrap();
    let p = poster.to_str().unwrap();
    let o = run(&["reduce", p, "--restarts", "4294967295", "-o", out], &[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("restarts must be between 1 and 1000"));
    let o = run(&["reduce", p, "--stdout", "palette", "-o", out], &[]);
    assert_eq!(o.status.code(), Some(2));
    let bin = env!("CARGO_BIN_EXE_chromasift");
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!("exec '{bin}' reduce '{p}' --stdout palette >&-"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("standard output is closed"));
    // Writing to /dev/null on purpose is fine.
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "exec '{bin}' reduce '{p}' --stdout palette >/dev/null"
        ))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = run(
        &[
            "reduce", p, "-k", "4", "--mode", "soft", "--beta", "1e-300", "-o", out,
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(err.contains("not the 4 asked for"), "{err}");
}

/// Ink library messages name the real problem: a semicolon-separated file gets a hint, and
/// a very long ink name is refused without being echoed whole.
#[test]
fn ink_library_messages_name_the_cause() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let semi = dir.path().join("semi.csv");
    std::fs::write(&semi, "name;hex\nRed;#ff0000\n").unwrap();
    let long = dir.path().join("long.csv");
    std::fs::write(
        &long,
        format!("name,hex\n{},#ff0000\n", "x".repeat(100_000)),
    )
    .unwrap();
    for (lib, says) in [
        (&semi, "uses semicolons"),
        (&long, "100000 characters long"),
    ] {
        let o = run(
            &[
                "separate",
                poster.to_str().unwrap(),
                "--inks",
                lib.to_str().unwrap(),
                "-o",
                dir.path().join("out").to_str().unwrap(),
            ],
            &[],
        );
        assert_eq!(o.status.code(), Some(2));
        let err = stderr(&o);
        assert!(err.contains(says), "{err}");
        assert!(err.len() < 400, "{err}");
    }
}

/// Two batches cannot write into one folder at once (a lock with the process id; a lock
/// left by a process that has ended is taken over), and a batch whose mirrored outputs
/// would land inside its own input tree is refused.
#[test]
fn batch_output_folders_are_locked_and_kept_out_of_the_input() {
    let root = tempfile::tempdir().unwrap();
    let input = root.path().join("in");
    std::fs::create_dir_all(input.join("in")).unwrap();
    std::fs::copy(
        fixture("demo/harbour-poster.png"),
        input.join("in/poster.png"),
    )
    .unwrap();
    let out = root.path().join("out");
    std::fs::create_dir_all(&out).unwrap();
    let lock = out.join(".chromasift-batch.lock");
    // A running process holds the lock: this test's own.
    std::fs::write(&lock, format!("{}\n", std::process::id())).unwrap();
    let args = [
        "batch",
        input.to_str().unwrap(),
        "-k",
        "3",
        "-o",
        out.to_str().unwrap(),
    ];
    let o = run(&args, &[]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("another batch"), "{}", stderr(&o));
    assert!(!out.join("in/poster.reduced.png").exists());
    // A process that has ended: the lock is stale and taken over, then removed.
    let mut child = Command::new("true").spawn().unwrap();
    let dead = child.id();
    child.wait().unwrap();
    std::fs::write(&lock, format!("{dead}\n")).unwrap();
    let o = run(&args, &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(out.join("in/poster.reduced.png").is_file());
    assert!(!lock.exists());
    // `batch P/in -o P`: the outputs of P/in/in/poster.png would go to P/in/.
    let o = run(
        &[
            "batch",
            input.to_str().unwrap(),
            "-k",
            "3",
            "-o",
            root.path().to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("inside the input folder"),
        "{}",
        stderr(&o)
    );
    assert!(!input.join("poster.reduced.png").exists());
}

/// `histogram` and `learn` report a file they cannot read and carry on with the others
/// (exit 1, as `batch` does); with no readable file at all they fail (exit 2).
#[test]
fn histogram_and_learn_carry_on_past_a_bad_file() {
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.png");
    std::fs::write(&bad, b"\x89PNG\r\n\x1a\n not really").unwrap();
    let good = fixture("demo/harbour-poster.png");
    let hist = dir.path().join("all.hist");
    let o = run(
        &[
            "histogram",
            good.to_str().unwrap(),
            bad.to_str().unwrap(),
            "-o",
            hist.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("bad.png"), "{}", stderr(&o));
    assert!(hist.is_file());
    let palette = dir.path().join("p.json");
    let o = run(
        &[
            "learn",
            bad.to_str().unwrap(),
            hist.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            palette.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&palette).unwrap()).unwrap();
    assert_eq!(doc["k"], 4);
    let o = run(
        &[
            "learn",
            bad.to_str().unwrap(),
            "-o",
            palette.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

/// Only the first frame of an animated GIF is used, and a note says so; a still GIF gets no
/// such note.
#[test]
fn extra_frames_are_noted() {
    use image::codecs::gif::GifEncoder;
    use image::{Delay, Frame, RgbaImage};
    let dir = tempfile::tempdir().unwrap();
    let frame = |c: [u8; 4]| {
        Frame::from_parts(
            RgbaImage::from_pixel(8, 8, image::Rgba(c)),
            0,
            0,
            Delay::from_numer_denom_ms(100, 1),
        )
    };
    for (name, frames) in [("moving.gif", 2usize), ("still.gif", 1)] {
        let path = dir.path().join(name);
        {
            let f = std::fs::File::create(&path).unwrap();
            let mut enc = GifEncoder::new(f);
            let all = [frame([200, 20, 20, 255]), frame([20, 20, 200, 255])];
            enc.encode_frames(all.into_iter().take(frames)).unwrap();
        }
        let o = run(
            &[
                "reduce",
                path.to_str().unwrap(),
                "-k",
                "2",
                "-o",
                dir.path().join("out").to_str().unwrap(),
            ],
            &[],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        assert_eq!(
            stderr(&o).contains("only the first was used"),
            frames > 1,
            "{name}: {}",
            stderr(&o)
        );
    }
}

/// A JPEG whose header declares 14000 × 14000 pixels over a few hundred bytes of data is
/// refused (under a 600 MB address-space limit) before the decoder fills gigabytes with
/// grey. (A flat 4000 × 3000 JPEG at quality 85 is about 190 KB, 30 times the bound.)
#[test]
fn a_forged_jpeg_size_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut small = Vec::new();
    image::codecs::jpeg::JpegEncoder::new_with_quality(&mut small, 85)
        .encode(
            &[120u8; 64 * 64 * 3],
            64,
            64,
            image::ExtendedColorType::Rgb8,
        )
        .unwrap();
    let sof = small.windows(2).position(|w| w == [0xff, 0xc0]).unwrap();
    small[sof + 5..sof + 7].copy_from_slice(&14000u16.to_be_bytes());
    small[sof + 7..sof + 9].copy_from_slice(&14000u16.to_be_bytes());
    let forged = dir.path().join("forged.jpg");
    std::fs::write(&forged, &small).unwrap();
    let o = run_limited(
        600_000,
        &[
            "reduce",
            forged.to_str().unwrap(),
            "-o",
            dir.path().join("out").to_str().unwrap(),
        ],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("far too few"), "{}", stderr(&o));
}

/// `sweep --silhouette-sample` is bounded (its time grows with the square): huge values are
/// refused at once, and a sample larger than the image is drawn only as large as the image.
#[test]
fn silhouette_samples_are_bounded() {
    let dir = tempfile::tempdir().unwrap();
    let poster = fixture("demo/harbour-poster.png");
    let out = dir.path().join("out");
    for huge in ["18446744073709551615", "1000000000", "10000000"] {
        let o = run_limited(
            600_000,
            &[
                "sweep",
                poster.to_str().unwrap(),
                "--k",
                "2..3",
                "--silhouette-sample",
                huge,
                "-o",
                out.to_str().unwrap(),
            ],
        );
        assert_eq!(o.status.code(), Some(2), "{huge}: {}", stderr(&o));
        assert!(stderr(&o).contains("between 2 and 50000"), "{}", stderr(&o));
    }
    // A 6 × 4 image: 24 pixels, asked for 50 000 draws.
    let tiny = dir.path().join("tiny.png");
    let px: Vec<u8> = (0..24u8)
        .flat_map(|i| [i * 10, 255 - i * 10, 128])
        .collect();
    image::save_buffer(&tiny, &px, 6, 4, image::ExtendedColorType::Rgb8).unwrap();
    let o = run(
        &[
            "sweep",
            tiny.to_str().unwrap(),
            "--k",
            "2..3",
            "--silhouette-sample",
            "50000",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
}

/// A file name that is not UTF-8 still gets outputs, named with U+FFFD where its bytes
/// are invalid.
#[cfg(unix)]
#[test]
fn a_non_utf8_file_name_gets_a_lossy_output_name() {
    use std::os::unix::ffi::OsStrExt;
    let dir = tempfile::tempdir().unwrap();
    let name = std::ffi::OsStr::from_bytes(b"caf\xe9.png");
    let input = dir.path().join(name);
    std::fs::copy(fixture("demo/harbour-poster.png"), &input).unwrap();
    let out = dir.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_chromasift"))
        .arg("reduce")
        .arg(&input)
        .args(["-k", "3", "-o"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join("caf\u{fffd}.reduced.png").is_file());
}

/// `landcover` on a full disk (here a file-size limit, `ulimit -f`, that one of the two
/// rasters passes: since both are compressed, the class raster with its colour table is
/// the larger here) names the file and the cause, not that a writer "stopped early", and
/// leaves nothing behind.
#[test]
fn landcover_names_the_cause_of_a_failed_write() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let scene = fixture("rasters/utm_u16_4band_strips.tif");
    let bin = env!("CARGO_BIN_EXE_chromasift");
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "ulimit -f 4; exec '{bin}' landcover '{}' -k 3 -o '{}'",
            scene.display(),
            out.display()
        ))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        (err.contains("uncertainty.tif") || err.contains("classes.tif"))
            && err.contains("too large"),
        "{err}"
    );
    assert!(!err.contains("stopped early"), "{err}");
    assert!(
        common::files_in(&out).is_empty(),
        "{:?}",
        common::files_in(&out)
    );
}

/// `-` means standard input or output wherever a command reads or writes one file:
/// `separate -`, `--inks -`, `--palette -`, `learn -o -`, `histogram -o -`.
#[test]
fn a_dash_is_standard_input_or_output_everywhere() {
    use std::io::Write;
    use std::process::Stdio;
    let dir = tempfile::tempdir().unwrap();
    let bin = env!("CARGO_BIN_EXE_chromasift");
    let poster = fixture("demo/harbour-poster.png");
    let inks = fixture("demo/quayside-inks.csv");
    let piped = |args: &[&str], input: &[u8]| {
        let mut c = Command::new(bin)
            .args(args)
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        c.stdin.take().unwrap().write_all(input).unwrap();
        c.wait_with_output().unwrap()
    };
    let out = dir.path().join("plates");
    let o = piped(
        &[
            "separate",
            "-",
            "--inks",
            inks.to_str().unwrap(),
            "-k",
            "3",
            "-o",
            out.to_str().unwrap(),
        ],
        &std::fs::read(&poster).unwrap(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join("stdin.separation.json").is_file());
    let out2 = dir.path().join("plates2");
    let o = piped(
        &[
            "separate",
            poster.to_str().unwrap(),
            "--inks",
            "-",
            "-k",
            "3",
            "-o",
            out2.to_str().unwrap(),
        ],
        &std::fs::read(&inks).unwrap(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out2.join("harbour-poster.separation.json").is_file());
    let o = run(
        &["learn", poster.to_str().unwrap(), "-k", "3", "-o", "-"],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(doc["k"], 3);
    assert!(!Path::new("-").exists());
    let palette = dir.path().join("p.json");
    std::fs::write(&palette, &o.stdout).unwrap();
    let applied = dir.path().join("applied");
    let o = piped(
        &[
            "apply",
            poster.to_str().unwrap(),
            "--palette",
            "-",
            "-o",
            applied.to_str().unwrap(),
        ],
        &std::fs::read(&palette).unwrap(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(applied.join("harbour-poster.reduced.png").is_file());
    let o = run(&["histogram", poster.to_str().unwrap(), "-o", "-"], &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(o.stdout.starts_with(b"CSHIST"));
}

/// `batch --jobs 256` runs at most twice as many workers as cores (and one per 256 MB of
/// available memory), so twelve images fit in a 1 GB address space, where 256 workers
/// each with a 64 MiB colour table would not.
#[test]
fn batch_workers_are_bounded() {
    let root = tempfile::tempdir().unwrap();
    let input = root.path().join("in");
    std::fs::create_dir_all(&input).unwrap();
    for i in 0..12 {
        std::fs::copy(
            fixture("demo/harbour-poster.png"),
            input.join(format!("p{i:02}.png")),
        )
        .unwrap();
    }
    let out = root.path().join("out");
    let o = run_limited(
        1_000_000,
        &[
            "batch",
            input.to_str().unwrap(),
            "-k",
            "4",
            "--jobs",
            "256",
            "-o",
            out.to_str().unwrap(),
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let r: Value =
        serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap();
    assert_eq!(r["totals"]["ok"], 12);
}

/// Mapping onto a given palette with dithering, where the diffused error leaves one palette
/// colour with no pixel at all: the lost-area report names the colour each area shows as
/// written (this once indexed past the palette).
#[test]
fn dithered_mapping_reports_lost_areas_without_failing() {
    let dir = tempfile::tempdir().unwrap();
    // A palette of black, white and a green, from a three-colour image.
    let pal_img = dir.path().join("pal.png");
    let px: Vec<u8> = [[0u8, 0, 0], [255, 255, 255], [0x28, 0xaa, 0x3c]]
        .iter()
        .flat_map(|c| c.iter().copied())
        .collect();
    image::save_buffer(&pal_img, &px, 3, 1, image::ExtendedColorType::Rgb8).unwrap();
    let pal_out = dir.path().join("pal");
    let o = run(
        &[
            "reduce",
            pal_img.to_str().unwrap(),
            "-k",
            "3",
            "-o",
            pal_out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    // Red everywhere (far outside the palette), a white ring and a small green block.
    let (w, h) = (200u32, 100u32);
    let mut img = vec![0u8; (w * h * 3) as usize];
    for y in 0..h {
        for x in 0..w {
            let c = if (95..=106).contains(&x) && (45..=75).contains(&y) {
                if (99..=101).contains(&x) && (50..=69).contains(&y) {
                    [0, 255, 0]
                } else {
                    [255, 255, 255]
                }
            } else {
                [255, 0, 0]
            };
            let i = ((y * w + x) * 3) as usize;
            img[i..i + 3].copy_from_slice(&c);
        }
    }
    let input = dir.path().join("red.png");
    image::save_buffer(&input, &img, w, h, image::ExtendedColorType::Rgb8).unwrap();
    let o = run(
        &[
            "apply",
            input.to_str().unwrap(),
            "--palette",
            pal_out.join("pal.palette.json").to_str().unwrap(),
            "--dither",
            "floyd-steinberg",
            "-o",
            dir.path().join("out").to_str().unwrap(),
            "--json",
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value = serde_json::from_slice(&o.stdout).unwrap();
    for a in doc["lost_areas"].as_array().unwrap() {
        assert!(a["rendered"].as_str().unwrap().starts_with('#'), "{a}");
    }
}
