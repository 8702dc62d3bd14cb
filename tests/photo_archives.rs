//! Photo archives: palettes from any table, colour-managed input, metadata carried, the
//! loss map and the review page, checked against values computed outside the project.

#[path = "common/artwork.rs"]
mod artwork;
mod common;

use chromasift::learn::read_palette;
use common::{fixture, read_csv, run, stderr};

/// sRGB8 colours with their CIELAB (D65) from colour-science 0.4.7
/// (`fixtures/reference/srgb_to_lab_derived_matrix.csv`, made by
/// `tests/reference/make_fixtures.py`).
fn reference_colours() -> Vec<([u8; 3], [f64; 3])> {
    let (header, rows) = read_csv("reference/srgb_to_lab_derived_matrix.csv");
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    let (r, g, b, l, a, bb) = (at("r"), at("g"), at("b"), at("L"), at("a"), at("b_"));
    rows.iter()
        .map(|row| {
            let c = [r, g, b].map(|i| row[i].parse::<u8>().unwrap());
            let lab = [l, a, bb].map(|i| row[i].parse::<f64>().unwrap());
            (c, lab)
        })
        .collect()
}

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Distinct colours of the reference set (a palette holds each colour once).
fn distinct_reference() -> Vec<([u8; 3], [f64; 3])> {
    let mut seen = std::collections::HashSet::new();
    reference_colours()
        .into_iter()
        .filter(|(c, _)| seen.insert(*c))
        .collect()
}

#[test]
fn palettes_are_read_from_tables_lists_and_json_arrays() {
    let dir = tempfile::tempdir().unwrap();
    let refs = distinct_reference();
    let want: Vec<[u8; 3]> = refs.iter().map(|(c, _)| *c).collect();
    // A CSV with both columns, the CIELAB from colour-science: every row agrees.
    let mut both = String::from("name,hex,L,a,b\n");
    // Only CIELAB: each row is read as its nearest sRGB colour, which must be the colour
    // colour-science computed the value from.
    let mut lab_only = String::from("L,a,b\n");
    // A plain list with comments, and a JSON array.
    let mut list = String::from("# brand colours\n\n// from the reference set\n");
    let mut json = Vec::new();
    for (i, (c, lab)) in refs.iter().enumerate() {
        both.push_str(&format!(
            "colour {i},{},{},{},{}\n",
            hex(*c),
            lab[0],
            lab[1],
            lab[2]
        ));
        lab_only.push_str(&format!("{},{},{}\n", lab[0], lab[1], lab[2]));
        list.push_str(&format!("{} colour {i}\n", hex(*c)));
        json.push(serde_json::json!({"hex": hex(*c), "L": lab[0], "a": lab[1], "b": lab[2]}));
    }
    for (name, text) in [
        ("both.csv", both),
        ("lab.csv", lab_only),
        ("list.txt", list),
        ("array.json", serde_json::to_string(&json).unwrap()),
    ] {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        let pal = read_palette(&p).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(pal.colours, want, "{name}");
    }
}

#[test]
fn a_row_whose_hex_and_lab_disagree_is_refused_with_both_values() {
    let dir = tempfile::tempdir().unwrap();
    let refs = distinct_reference();
    let mut text = String::from("name,hex,L,a,b\n");
    for (i, (c, lab)) in refs.iter().take(5).enumerate() {
        // Row 4 (line 5) has its L raised by 3: ΔE2000 about 2 or more, over the 1.0 allowed.
        let l = if i == 3 { lab[0] + 3.0 } else { lab[0] };
        text.push_str(&format!("c{i},{},{l},{},{}\n", hex(*c), lab[1], lab[2]));
    }
    let p = dir.path().join("edited.csv");
    std::fs::write(&p, &text).unwrap();
    let e = read_palette(&p).unwrap_err().to_string();
    let (c, lab) = refs[3];
    assert!(e.contains("edited.csv") && e.contains("line 5"), "{e}");
    assert!(e.contains(&hex(c)), "{e}");
    assert!(e.contains(&format!("{:.2}", lab[0] + 3.0)), "{e}");

    // The same through the command line: one line, exit status 2, nothing written.
    let out = dir.path().join("out");
    let img = fixture("demo/harbour-poster.png");
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            p.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert_eq!(stderr(&o).trim().lines().count(), 1, "{}", stderr(&o));
    assert!(stderr(&o).contains("edited.csv"));
    assert!(!out.join("harbour-poster.reduced.png").exists());
}

#[test]
fn apply_batch_and_pins_take_a_list_of_hex_colours() {
    let dir = tempfile::tempdir().unwrap();
    let list = dir.path().join("brand.txt");
    // Five sRGB colours; which ones does not matter to the checks below.
    std::fs::write(&list, "#1d3557\n#e63946\n#f1faee\n#a8dadc\n#457b9d\n").unwrap();
    let img = fixture("demo/harbour-poster.png");
    let out = dir.path().join("a");
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.palette.json")).unwrap())
            .unwrap();
    let listed = std::fs::read_to_string(&list).unwrap();
    for c in doc["colors"].as_array().unwrap() {
        assert!(listed.contains(c["hex"].as_str().unwrap()), "{c}");
    }
    // Pinned from the same list: every listed colour is in the fitted palette exactly.
    let out = dir.path().join("p");
    let o = run(
        &[
            "reduce",
            img.to_str().unwrap(),
            "-k",
            "8",
            "--pin-file",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.palette.json")).unwrap())
            .unwrap();
    let pinned: Vec<&str> = doc["settings"]["pinned"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(pinned.len(), 5);
    for line in listed.lines() {
        assert!(pinned.contains(&line), "{line} not pinned: {pinned:?}");
    }
    // A bad list is one clear error naming the file and the line.
    std::fs::write(&list, "#1d3557\nnavy\n").unwrap();
    let o = run(
        &[
            "reduce",
            img.to_str().unwrap(),
            "--pin-file",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("brand.txt") && e.contains("line 2"), "{e}");
}

/// Reference CIELAB of the profile fixtures' patches, by colour-science 0.4.7
/// (`fixtures/profiles/lab_reference.csv`, made by
/// `tests/reference/make_profile_fixtures.py`): (space, RGB numbers, CIELAB D65).
fn profile_reference() -> Vec<(String, [u8; 3], [f64; 3])> {
    let (header, rows) = read_csv("profiles/lab_reference.csv");
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    rows.iter()
        .map(|r| {
            (
                r[at("space")].clone(),
                [at("r"), at("g"), at("b")].map(|i| r[i].parse().unwrap()),
                [at("L"), at("a"), at("b_")].map(|i| r[i].parse().unwrap()),
            )
        })
        .collect()
}

/// CIELAB of each distinct colour of a decoded image, read through its embedded profile.
/// Each decoded colour with its CIELAB.
type ColourLabs = Vec<([u16; 3], [f64; 3])>;

fn labs_through_profile(file: &str) -> (String, ColourLabs) {
    use chromasift::colour::profile::{read_profile, ProfileUse};
    let img = chromasift::raster::decode(&fixture(file), &chromasift::Limits::default()).unwrap();
    let icc = img
        .icc_profile
        .as_deref()
        .unwrap_or_else(|| panic!("{file}: no profile read"));
    let ProfileUse::Convert(p) = read_profile(icc) else {
        panic!("{file}: the profile is not applied");
    };
    let chromasift::raster::Pixels::Rgba8(px) = &img.pixels else {
        panic!("8-bit fixture");
    };
    let h = chromasift::histogram::from_rgba8(px)
        .histogram
        .read_through(Some(p.clone()));
    let (_, labs) =
        chromasift::features::rows::entry_features(&h, chromasift::colour::Space::Cielab);
    (
        p.description.clone(),
        h.colours.iter().copied().zip(labs).collect(),
    )
}

#[test]
fn tagged_images_are_read_through_their_profiles_as_colour_science_computes() {
    let refs = profile_reference();
    // Lossless files hold the patch numbers exactly: CIELAB within 0.05 ΔE2000 (the
    // profile stores its colorants in s15Fixed16 and the curves are evaluated in single
    // precision). The JPEG (quality 95) decodes within a step or two of them: 1.0.
    for (file, space, tolerance) in [
        ("profiles/p3.png", "display-p3", 0.05),
        ("profiles/p3.tif", "display-p3", 0.05),
        ("profiles/p3.webp", "display-p3", 0.05),
        ("profiles/wide.png", "wide-gamut", 0.05),
        ("profiles/p3.jpg", "display-p3", 1.0),
    ] {
        let (description, labs) = labs_through_profile(file);
        assert!(description.starts_with("chromasift test"), "{description}");
        for (_, rgb, want) in refs.iter().filter(|r| r.0 == space) {
            // The decoded colour nearest to the patch's numbers (exact for lossless files).
            let (_, got) = labs
                .iter()
                .min_by_key(|(c, _)| {
                    (0..3)
                        .map(|k| (c[k] as i32 - rgb[k] as i32).pow(2))
                        .sum::<i32>()
                })
                .unwrap();
            let de = artwork::ciede2000(*got, *want);
            assert!(
                de <= tolerance,
                "{file} {rgb:?}: ours {got:?}, colour-science {want:?}, ΔE2000 {de:.3}"
            );
        }
    }
}

/// The EXIF block (TIFF structure) of a PNG (eXIf chunk) or JPEG (APP1 `Exif\0\0`), read
/// by walking chunks and marker segments here (PNG spec 1.5 eXIf; JPEG ITU-T T.81 B.1.1).
fn exif_block(bytes: &[u8]) -> Option<Vec<u8>> {
    if bytes.starts_with(b"\x89PNG") {
        let mut pos = 8;
        while pos + 12 <= bytes.len() {
            let len = u32::from_be_bytes(bytes[pos..pos + 4].try_into().unwrap()) as usize;
            if &bytes[pos + 4..pos + 8] == b"eXIf" {
                return Some(bytes[pos + 8..pos + 8 + len].to_vec());
            }
            pos += 12 + len;
        }
        return None;
    }
    let mut i = 2;
    while i + 4 <= bytes.len() && bytes[i] == 0xFF {
        let m = bytes[i + 1];
        let len = u16::from_be_bytes([bytes[i + 2], bytes[i + 3]]) as usize;
        let body = &bytes[i + 4..i + 2 + len];
        if m == 0xE1 && body.starts_with(b"Exif\0\0") {
            return Some(body[6..].to_vec());
        }
        if m == 0xDA {
            break;
        }
        i += 2 + len;
    }
    None
}

/// Reads a written PNG's iCCP, eXIf, pHYs and palette with the `png` crate's decoder.
struct Written {
    icc: Option<Vec<u8>>,
    exif: Option<Vec<u8>>,
    ppm: Option<(u32, u32)>,
    palette: Option<Vec<u8>>,
}

fn written(path: &std::path::Path) -> Written {
    let bytes = std::fs::read(path).unwrap();
    let r = png::Decoder::new(std::io::Cursor::new(&bytes))
        .read_info()
        .unwrap();
    let info = r.info();
    Written {
        icc: info.icc_profile.as_ref().map(|c| c.to_vec()),
        exif: info.exif_metadata.as_ref().map(|c| c.to_vec()),
        ppm: info.pixel_dims.map(|d| (d.xppu, d.yppu)),
        palette: info.palette.as_ref().map(|c| c.to_vec()),
    }
}

fn reduce_fixture(file: &str, extra: &[&str], out: &std::path::Path) -> serde_json::Value {
    let f = fixture(file);
    let mut args = vec![
        "reduce",
        f.to_str().unwrap(),
        "-k",
        "12",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = run(&args, &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let stem = std::path::Path::new(file)
        .file_stem()
        .unwrap()
        .to_string_lossy()
        .into_owned();
    serde_json::from_slice(&std::fs::read(out.join(format!("{stem}.palette.json"))).unwrap())
        .unwrap()
}

#[test]
fn profile_exif_and_resolution_are_carried_into_the_reduced_image() {
    let dir = tempfile::tempdir().unwrap();
    let icc = std::fs::read(fixture("profiles/display-p3.icc")).unwrap();
    for (file, stem) in [("profiles/p3.png", "p3"), ("profiles/p3.jpg", "p3")] {
        let source_exif = exif_block(&std::fs::read(fixture(file)).unwrap()).unwrap();
        // Orientation 6 as written by the fixture script (TIFF 6.0 tag 274, EXIF 2.32).
        assert!(source_exif
            .windows(2)
            .any(|w| w == [0x01, 0x12] || w == [0x12, 0x01]));
        let out = dir.path().join(file.replace('/', "-"));
        let doc = reduce_fixture(file, &[], &out);
        assert_eq!(doc["colour_profile"]["input"], "icc");
        assert_eq!(doc["colour_profile"]["output"], "source");
        assert_eq!(
            doc["colour_profile"]["description"],
            "chromasift test Display P3"
        );
        let w = written(&out.join(format!("{stem}.reduced.png")));
        assert_eq!(w.icc.as_deref(), Some(&icc[..]), "{file}: profile");
        assert_eq!(w.exif.as_deref(), Some(&source_exif[..]), "{file}: EXIF");
        // 300 dpi = 11811 pixels per metre (PNG 1.2, pHYs; 1 inch = 0.0254 m).
        assert_eq!(w.ppm, Some((11811, 11811)), "{file}: resolution");

        // The palette written in the source's numbers reads back, through the profile, as
        // the document's CIELAB (within an 8-bit step of Display P3).
        use chromasift::colour::profile::{read_profile, ProfileUse};
        let ProfileUse::Convert(p) = read_profile(&icc) else {
            panic!()
        };
        let conv = p.to_linear();
        let plte = w.palette.unwrap();
        for (i, c) in doc["colors"].as_array().unwrap().iter().enumerate() {
            let rgb = [0, 1, 2].map(|k| plte[i * 3 + k] as f64 / 255.0);
            let lab = chromasift::colour::linear_to_lab(conv.linear(rgb));
            let want = [0, 1, 2].map(|k| c["lab"][k].as_f64().unwrap());
            let de = artwork::ciede2000(lab, want);
            assert!(de < 0.6, "{file} colour {i}: {lab:?} vs {want:?} ({de})");
        }

        // sRGB asked for: no profile, the sRGB palette itself; EXIF still kept.
        let out = dir.path().join(format!("{}-srgb", file.replace('/', "-")));
        let doc = reduce_fixture(file, &["--output-profile", "srgb"], &out);
        assert_eq!(doc["colour_profile"]["output"], "srgb");
        let w = written(&out.join(format!("{stem}.reduced.png")));
        assert!(w.icc.is_none() && w.exif.is_some());
        let plte = w.palette.unwrap();
        for (i, c) in doc["colors"].as_array().unwrap().iter().enumerate() {
            let hex = format!(
                "#{:02x}{:02x}{:02x}",
                plte[i * 3],
                plte[i * 3 + 1],
                plte[i * 3 + 2]
            );
            assert_eq!(c["hex"], hex.as_str());
        }

        // Dropped for privacy: no EXIF, profile or resolution.
        let out = dir.path().join(format!("{}-bare", file.replace('/', "-")));
        let doc = reduce_fixture(file, &["--strip-metadata"], &out);
        assert_eq!(doc["colour_profile"]["output"], "srgb");
        let w = written(&out.join(format!("{stem}.reduced.png")));
        assert!(w.icc.is_none() && w.exif.is_none() && w.ppm.is_none());
    }
    // An untagged image is read as sRGB and says so.
    let out = dir.path().join("plain");
    let doc = reduce_fixture("photos/coffee.png", &[], &out);
    assert_eq!(doc["colour_profile"]["input"], "untagged");
    assert!(written(&out.join("coffee.reduced.png")).icc.is_none());
}

/// The p-th percentile as numpy's `percentile(..., method="inverted_cdf")` defines it:
/// the smallest value with at least p of the values at or below it.
fn inverted_cdf(sorted: &[f64], p: f64) -> f64 {
    let k = (p * sorted.len() as f64).ceil() as usize;
    sorted[k.max(1) - 1]
}

#[test]
fn the_loss_map_holds_each_pixels_ciede2000_and_the_document_its_percentiles() {
    let dir = tempfile::tempdir().unwrap();
    for (k, dither) in [("4", "none"), ("6", "floyd-steinberg")] {
        let out = dir.path().join(dither);
        let f = fixture("photos/coffee.png");
        let o = run(
            &[
                "reduce",
                f.to_str().unwrap(),
                "-k",
                k,
                "--dither",
                dither,
                "--loss-map",
                "-o",
                out.to_str().unwrap(),
            ],
            &[],
        );
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        let src = image::open(&f).unwrap().to_rgb8();
        let red = image::open(out.join("coffee.reduced.png"))
            .unwrap()
            .to_rgb8();
        // Independent per-pixel CIEDE2000 (tests/common/artwork.rs, after Sharma, Wu &
        // Dalal 2005), source pixel against the written pixel.
        let mut want: Vec<f64> = src
            .pixels()
            .zip(red.pixels())
            .map(|(a, b)| {
                artwork::ciede2000(artwork::srgb8_to_lab(a.0), artwork::srgb8_to_lab(b.0))
            })
            .collect();
        let mut t =
            tiff::decoder::Decoder::new(std::fs::File::open(out.join("coffee.loss.tif")).unwrap())
                .unwrap();
        assert_eq!(t.dimensions().unwrap(), src.dimensions());
        let tiff::decoder::DecodingResult::F32(map) = t.read_image().unwrap() else {
            panic!("float TIFF expected")
        };
        // Within 0.02: the two sRGB → CIELAB paths agree to about that (see
        // tests/colour_reference.rs), and the map is single precision.
        for (i, (&got, &w)) in map.iter().zip(&want).enumerate() {
            assert!(
                (got as f64 - w).abs() < 0.02,
                "{dither} pixel {i}: {got} vs {w}"
            );
        }
        want.sort_by(f64::total_cmp);
        let doc: serde_json::Value =
            serde_json::from_slice(&std::fs::read(out.join("coffee.palette.json")).unwrap())
                .unwrap();
        for (key, p) in [("p95_delta_e2000", 0.95), ("p99_delta_e2000", 0.99)] {
            let got = doc[key].as_f64().unwrap();
            let w = inverted_cdf(&want, p);
            assert!((got - w).abs() < 0.02, "{dither} {key}: {got} vs {w}");
        }
        // The picture: the image above a 48-pixel legend, at least 220 pixels wide.
        let pic = image::open(out.join("coffee.loss.png")).unwrap();
        assert_eq!(
            (pic.width(), pic.height()),
            (src.width().max(220), src.height() + 48)
        );
    }
}

/// Every `src="…"` and `href="…"` of a page.
fn links(html: &str) -> Vec<String> {
    let mut out = Vec::new();
    for key in ["src=\"", "href=\""] {
        let mut rest = html;
        while let Some(at) = rest.find(key) {
            let after = &rest[at + key.len()..];
            let end = after.find('"').unwrap();
            out.push(after[..end].to_string());
            rest = &after[end..];
        }
    }
    out
}

#[test]
fn the_review_page_travels_with_its_folder_and_loads_in_a_browser() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    std::fs::create_dir_all(input.join("sub dir")).unwrap();
    std::fs::copy(fixture("profiles/p3.png"), input.join("p3.png")).unwrap();
    std::fs::copy(
        fixture("photos/coffee.png"),
        input.join("sub dir/coffee #1.png"),
    )
    .unwrap();
    std::fs::copy(fixture("demo/harbour-poster.png"), input.join("poster.png")).unwrap();
    std::fs::write(input.join("broken.jpg"), b"not a jpeg").unwrap();
    let out = dir.path().join("out");
    let o = run(
        &[
            "batch",
            input.to_str().unwrap(),
            "-k",
            "6",
            "--review-page",
            "--quiet",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(1), "one image fails: {}", stderr(&o));
    // Moved away from where it was made (and from the inputs): every link still resolves.
    let moved = dir.path().join("elsewhere");
    std::fs::rename(&out, &moved).unwrap();
    std::fs::rename(&input, dir.path().join("inputs-gone")).unwrap();
    let html = std::fs::read_to_string(moved.join("review.html")).unwrap();
    let found = links(&html);
    assert_eq!(found.len(), 3 * 2 + 3, "{found:?}");
    for l in &found {
        assert!(!l.contains(':') && !l.starts_with('/'), "not relative: {l}");
        // Percent-encoded names (RFC 3986): decode the two this test uses.
        let path = l.replace("%20", " ").replace("%23", "#");
        assert!(moved.join(&path).is_file(), "{l} does not resolve");
        if l.starts_with("review/") {
            let t = image::open(moved.join(&path)).unwrap();
            assert!(t.width().max(t.height()) <= 240, "{l}: not a thumbnail");
        }
    }
    // Worst mean ΔE2000 first, and the failed file named.
    let order: Vec<f64> = html
        .match_indices("data-de=\"")
        .map(|(i, m)| {
            let v = &html[i + m.len()..];
            v[..v.find('"').unwrap()].parse().unwrap()
        })
        .collect();
    assert_eq!(order.len(), 4);
    assert!(
        order.windows(2).all(|w| w[0] >= w[1] || w[1] < 0.0),
        "{order:?}"
    );
    assert!(html.contains("broken.jpg"));
    assert!(html.contains("lost"), "lost-colour warnings are shown");

    // A real browser (Chromium from the Debian packages): loads with no missing picture
    // and no script or console error. Skipped, with a notice, where it is not installed.
    let chromium = ["chromium", "chromium-browser"].into_iter().find(|c| {
        std::process::Command::new(c)
            .arg("--version")
            .output()
            .is_ok()
    });
    let Some(browser) = chromium else {
        eprintln!("NOTICE: chromium not found; the browser check of the review page was skipped");
        return;
    };
    let script =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/check-review-page.sh");
    let o = std::process::Command::new("sh")
        .arg(&script)
        .arg(&moved)
        .env("CHROMIUM", browser)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
}
