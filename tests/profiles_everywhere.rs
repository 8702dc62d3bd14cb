//! Every command that takes an image's colours reads them through its embedded ICC
//! profile: `learn`, `histogram` files and `batch --shared` agree with `reduce` and with
//! colour-science, and record what profile each input had; grey-profile images give the
//! lightness of their grey curve.

#[path = "common/artwork.rs"]
mod artwork;
mod common;

use chromasift::colour::Space;
use chromasift::features::rows::entry_features;
use chromasift::histogram::Histogram;
use common::{fixture, read_csv, run, stderr, write_rgb};
use serde_json::Value;
use std::path::Path;

/// A patch of the profile fixtures, by colour-science 0.4.7
/// (`fixtures/profiles/lab_reference.csv`, made by
/// `tests/reference/make_profile_fixtures.py`).
struct Patch {
    space: String,
    rgb: [u16; 3],
    lab: [f64; 3],
    /// The 8-bit sRGB colour colour-science gives for `lab` (clipped to 0..1, rounded).
    srgb: [u8; 3],
    /// `srgb` as 8-bit numbers of the patch's own space (colour-science; `None` for grey).
    written: Option<[u8; 3]>,
}

fn patches(space: &str) -> Vec<Patch> {
    let (header, rows) = read_csv("profiles/lab_reference.csv");
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    rows.iter()
        .map(|r| Patch {
            space: r[at("space")].clone(),
            rgb: [at("r"), at("g"), at("b")].map(|i| r[i].parse().unwrap()),
            lab: [at("L"), at("a"), at("b_")].map(|i| r[i].parse().unwrap()),
            srgb: chromasift::colour::parse_hex(&r[at("srgb_hex")]).unwrap(),
            written: chromasift::colour::parse_hex(&r[at("written_hex")]).ok(),
        })
        .filter(|p| p.space == space)
        .collect()
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap())
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn ok(args: &[&str]) -> std::process::Output {
    let o = run(args, &[]);
    assert!(o.status.success(), "{args:?}: {}", stderr(&o));
    o
}

fn hexes(doc: &Value) -> Vec<[u8; 3]> {
    doc["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| chromasift::colour::parse_hex(c["hex"].as_str().unwrap()).unwrap())
        .collect()
}

/// Every patch has a palette colour within one 8-bit step per channel of the sRGB colour
/// colour-science gives for the patch's CIELAB (a step allows for a value that falls on a
/// rounding boundary in one computation and not in the other).
fn assert_palette_holds(palette: &[[u8; 3]], refs: &[Patch], what: &str) {
    for p in refs {
        assert!(
            palette.iter().any(|c| (0..3).all(|k| c[k].abs_diff(p.srgb[k]) <= 1)),
            "{what}: no palette colour for {} patch {:?} (colour-science: {:?}); palette {palette:?}",
            p.space,
            p.rgb,
            p.srgb
        );
    }
}

/// Each reference patch is an entry of `h`, read through the profile named `profile`,
/// whose CIELAB is within `tolerance` ΔE2000 of colour-science's.
fn assert_entries_match(h: &Histogram, profile: &str, refs: &[Patch], tolerance: f64) {
    let (_, labs) = entry_features(h, Space::Cielab);
    for p in refs {
        let i = (0..h.len())
            .find(|&i| {
                h.colours[i] == p.rgb
                    && match h.profile_of(i) {
                        0 => false,
                        n => h.profiles[n as usize - 1].description == profile,
                    }
            })
            .unwrap_or_else(|| panic!("no {profile} entry for {:?}", p.rgb));
        let de = artwork::ciede2000(labs[i], p.lab);
        assert!(
            de <= tolerance,
            "{profile} {:?}: ours {:?}, colour-science {:?}, ΔE2000 {de:.4}",
            p.rgb,
            labs[i],
            p.lab
        );
    }
}

const P3: &str = "chromasift test Display P3";
const WIDE: &str = "chromasift test wide gamut";
const GREY: &str = "chromasift test grey gamma 2.2";

/// Three flat sRGB colours with no profile (invented; none is the sRGB colour of a patch).
fn untagged_image(path: &Path) {
    let mut rgb = Vec::new();
    for c in [[10u8, 200, 240], [240, 10, 80], [120, 60, 200]] {
        for _ in 0..64 {
            rgb.extend_from_slice(&c);
        }
    }
    write_rgb(path, 8, 24, &rgb);
}

#[test]
fn learn_reads_a_display_p3_image_as_reduce_does() {
    let dir = tempfile::tempdir().unwrap();
    let p3 = fixture("profiles/p3.png");
    let out = dir.path().join("r");
    ok(&[
        "reduce",
        p3.to_str().unwrap(),
        "-k",
        "12",
        "-o",
        out.to_str().unwrap(),
    ]);
    let learned = dir.path().join("p3.learned.json");
    ok(&[
        "learn",
        p3.to_str().unwrap(),
        "-k",
        "12",
        "-o",
        learned.to_str().unwrap(),
    ]);
    let reduced = json(&out.join("p3.palette.json"));
    let learned = json(&learned);
    // The same palette, colour for colour (hex, CIELAB, pixels, shares).
    assert_eq!(learned["colors"], reduced["colors"]);
    assert_eq!(reduced["colour_profile"]["input"], "icc");
    // And it is the palette colour-science gives: every patch read through Display P3
    // (read as sRGB, patch (200, 120, 60) would be #c8783c, not colour-science's #d5732a).
    assert_palette_holds(&hexes(&learned), &patches("display-p3"), "learn");
    let inputs = learned["input_profiles"].as_array().unwrap();
    assert_eq!(inputs.len(), 1);
    assert_eq!(inputs[0]["file"], p3.to_str().unwrap());
    assert_eq!(inputs[0]["input"], "icc");
    assert_eq!(inputs[0]["description"], P3);
}

#[test]
fn histogram_files_keep_each_colours_profile() {
    let dir = tempfile::tempdir().unwrap();
    let p3 = fixture("profiles/p3.png");
    let plain = dir.path().join("plain.png");
    untagged_image(&plain);
    let hist = dir.path().join("mixed.hist");
    let o = ok(&[
        "histogram",
        p3.to_str().unwrap(),
        plain.to_str().unwrap(),
        "-o",
        hist.to_str().unwrap(),
        "--json",
    ]);
    let summary: Value = serde_json::from_slice(&o.stdout).unwrap();
    // Listed in file-name order.
    let inputs = summary["input_profiles"].as_array().unwrap();
    let of = |file: &Path| {
        inputs
            .iter()
            .find(|r| r["file"] == file.to_str().unwrap())
            .unwrap_or_else(|| panic!("{}: {summary}", file.display()))
    };
    assert_eq!(of(&p3)["input"], "icc");
    assert_eq!(of(&p3)["description"], P3);
    assert_eq!(of(&plain)["input"], "untagged");
    assert!(inputs[0]["file"].as_str() < inputs[1]["file"].as_str());
    assert_eq!(summary["distinct_colours"], 15);

    // The file holds the profile and the records of its images (format version 3), and
    // its entries read back through the profile as colour-science computes (lossless
    // PNG: within 0.05 ΔE2000, the tolerance of tests/photo_archives.rs).
    let bytes = std::fs::read(&hist).unwrap();
    assert!(bytes.starts_with(b"CSHIST\x00\x03"));
    let (h, listed) =
        chromasift::features::histogram_file::decode_with_inputs(&bytes, &hist).unwrap();
    assert_eq!(
        serde_json::to_value(listed.unwrap()).unwrap(),
        summary["input_profiles"]
    );
    assert_eq!(
        chromasift::features::histogram_file::encode_with_inputs(
            &h,
            &serde_json::from_value::<Vec<_>>(summary["input_profiles"].clone()).unwrap()
        ),
        bytes
    );
    assert_eq!(h.profiles.len(), 1);
    assert_entries_match(&h, P3, &patches("display-p3"), 0.05);

    // `learn` from the file equals `learn` from the images, and says what the file held.
    let (from_file, from_images) = (dir.path().join("f.json"), dir.path().join("i.json"));
    for (inputs, out) in [
        (vec![hist.as_path()], &from_file),
        (vec![p3.as_path(), plain.as_path()], &from_images),
    ] {
        let mut args = vec!["learn"];
        args.extend(inputs.iter().map(|p| p.to_str().unwrap()));
        args.extend(["-k", "15", "-o", out.to_str().unwrap()]);
        ok(&args);
    }
    let (f, i) = (json(&from_file), json(&from_images));
    assert_eq!(f["colors"], i["colors"]);
    assert_palette_holds(
        &hexes(&f),
        &patches("display-p3"),
        "learn from a histogram file",
    );
    // The file stands for its images: the same records as `learn` on the images.
    assert_eq!(f["input_profiles"], i["input_profiles"]);

    // Version 1 and 2 files are still what the library's `encode` writes, and they read
    // as before, recorded as histogram files.
    let v2 = dir.path().join("v2.hist");
    std::fs::write(&v2, chromasift::batch::encode_histogram(&h)).unwrap();
    assert!(std::fs::read(&v2).unwrap().starts_with(b"CSHIST\x00\x02"));
    let from_v2 = dir.path().join("v2.json");
    ok(&[
        "learn",
        v2.to_str().unwrap(),
        "-k",
        "15",
        "-o",
        from_v2.to_str().unwrap(),
    ]);
    let old = json(&from_v2);
    assert_eq!(old["colors"], i["colors"]);
    let rec = &old["input_profiles"][0];
    assert_eq!(rec["input"], "histogram-file");
    assert_eq!(rec["profiles"], serde_json::json!([P3]));
    let plain_hist = dir.path().join("plain.hist");
    ok(&[
        "histogram",
        plain.to_str().unwrap(),
        "-o",
        plain_hist.to_str().unwrap(),
    ]);
    assert!(std::fs::read(&plain_hist)
        .unwrap()
        .starts_with(b"CSHIST\x00\x03"));
    let v1 = chromasift::batch::encode_histogram(
        &chromasift::batch::decode_histogram(&std::fs::read(&plain_hist).unwrap(), &plain_hist)
            .unwrap(),
    );
    assert!(v1.starts_with(b"CSHIST\x00\x01"));
}

/// A folder of an untagged sRGB image, a Display P3 image and a wide-gamut image.
fn mixed_folder(root: &Path) -> std::path::PathBuf {
    let dir = root.join("in");
    std::fs::create_dir(&dir).unwrap();
    std::fs::copy(fixture("profiles/p3.png"), dir.join("b-p3.png")).unwrap();
    std::fs::copy(fixture("profiles/wide.png"), dir.join("c-wide.png")).unwrap();
    untagged_image(&dir.join("a-plain.png"));
    dir
}

#[test]
fn batch_shared_reads_each_image_through_its_own_profile() {
    let root = tempfile::tempdir().unwrap();
    let dir = mixed_folder(root.path());
    let mut docs = Vec::new();
    for jobs in ["1", "2"] {
        let out = root.path().join(format!("out{jobs}"));
        ok(&[
            "batch",
            dir.to_str().unwrap(),
            "--shared",
            "-k",
            "27",
            "--jobs",
            jobs,
            "-o",
            out.to_str().unwrap(),
        ]);
        docs.push(std::fs::read(out.join("shared.palette.json")).unwrap());
    }
    // The same shared palette on one worker and on two (merges meet in another order).
    assert_eq!(docs[0], docs[1]);
    let doc: Value = serde_json::from_slice(&docs[0]).unwrap();
    let rec = doc["input_profiles"].as_array().unwrap();
    let got: Vec<(&str, &str, Option<&str>)> = rec
        .iter()
        .map(|r| {
            (
                r["file"].as_str().unwrap(),
                r["input"].as_str().unwrap(),
                r["description"].as_str(),
            )
        })
        .collect();
    assert_eq!(
        got,
        [
            ("a-plain.png", "untagged", None),
            ("b-p3.png", "icc", Some(P3)),
            ("c-wide.png", "icc", Some(WIDE)),
        ]
    );
    // Every patch of both tagged images is in the shared palette as colour-science reads it.
    let palette = hexes(&doc);
    assert_palette_holds(&palette, &patches("display-p3"), "batch --shared (P3)");
    assert_palette_holds(&palette, &patches("wide-gamut"), "batch --shared (wide)");
    // The pooled histogram behind it (the same reader): each tagged patch within 0.05
    // ΔE2000 of colour-science (lossless PNGs).
    let h = chromasift::features::histogram_file::gather(&[dir], &Default::default()).unwrap();
    assert_eq!(h.profiles.len(), 2);
    assert_entries_match(&h, P3, &patches("display-p3"), 0.05);
    assert_entries_match(&h, WIDE, &patches("wide-gamut"), 0.05);
}

#[test]
fn grey_tagged_images_give_the_lightness_of_their_grey_curve() {
    let refs = patches("grey-gamma");
    let file = fixture("profiles/grey.png");
    // Library: the entries read through the grey profile, as colour-science computes
    // (L* of Y = v^(563/256); a* = b* = 0).
    let img = chromasift::raster::decode(&file, &Default::default()).unwrap();
    let colours = chromasift::features::image::image_colours(&img);
    let h = colours.indexed.histogram;
    assert_eq!(h.profiles.len(), 1);
    assert_entries_match(&h, GREY, &refs, 0.05);
    let (_, labs) = entry_features(&h, Space::Cielab);
    for lab in &labs {
        assert!(lab[1].abs() < 0.01 && lab[2].abs() < 0.01, "{lab:?}");
    }

    // Command line: reduce gives each grey as colour-science's sRGB grey, neutral, and
    // records the profile.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r");
    let o = ok(&[
        "reduce",
        file.to_str().unwrap(),
        "-k",
        "8",
        "-o",
        out.to_str().unwrap(),
    ]);
    let doc = json(&out.join("grey.palette.json"));
    assert_eq!(doc["colour_profile"]["input"], "icc");
    assert_eq!(doc["colour_profile"]["description"], GREY);
    // An RGB PNG cannot carry the grey profile: sRGB numbers, and a note says so.
    assert_eq!(doc["colour_profile"]["output"], "srgb");
    let e = stderr(&o);
    assert!(
        e.contains("note") && e.contains("grey colour profile"),
        "{e}"
    );
    assert_palette_holds(&hexes(&doc), &refs, "reduce (grey)");
    for c in doc["colors"].as_array().unwrap() {
        let (a, b) = (c["lab"][1].as_f64().unwrap(), c["lab"][2].as_f64().unwrap());
        assert!(a.abs() < 0.01 && b.abs() < 0.01, "{c}");
    }
    // Each palette colour is an 8-bit sRGB grey: its L* is within half an 8-bit step of
    // the patch's (at most about 0.4 L* away from black).
    for p in &refs {
        let nearest = doc["colors"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| (c["lab"][0].as_f64().unwrap() - p.lab[0]).abs())
            .fold(f64::INFINITY, f64::min);
        assert!(nearest < 0.5, "grey {:?}: L* off by {nearest:.3}", p.rgb);
    }
}

#[test]
fn separate_and_sweep_read_artwork_through_its_profile() {
    let dir = tempfile::tempdir().unwrap();
    // A flat patch of Display P3 numbers (200, 120, 60), tagged with the fixture profile
    // (written here by the `image` crate's PNG encoder).
    let p3 = patches("display-p3")
        .into_iter()
        .find(|p| p.rgb == [200, 120, 60])
        .unwrap();
    let art = dir.path().join("flat.png");
    {
        use image::ImageEncoder;
        let mut enc = image::codecs::png::PngEncoder::new(std::fs::File::create(&art).unwrap());
        enc.set_icc_profile(std::fs::read(fixture("profiles/display-p3.icc")).unwrap())
            .unwrap();
        let px: Vec<u8> = (0..256).flat_map(|_| [200u8, 120, 60]).collect();
        enc.write_image(&px, 16, 16, image::ExtendedColorType::Rgb8)
            .unwrap();
    }
    // Two inks: colour-science's sRGB colour of the patch, and the patch's numbers taken
    // as sRGB (#c8783c, ΔE2000 3.4 away by colour-science). Read through its profile, the
    // artwork takes the first.
    let lib = dir.path().join("inks.csv");
    let h = |c: [u8; 3]| format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2]);
    std::fs::write(
        &lib,
        format!(
            "name,hex\nthrough-profile,{}\nnumbers-as-srgb,#c8783c\n",
            h(p3.srgb)
        ),
    )
    .unwrap();
    let out = dir.path().join("sep");
    ok(&[
        "separate",
        art.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "-k",
        "1",
        "-o",
        out.to_str().unwrap(),
    ]);
    let doc = json(&out.join("flat.separation.json"));
    assert_eq!(doc["inks"][0]["name"], "through-profile", "{doc}");
    assert_eq!(doc["input_profile"]["input"], "icc");
    assert_eq!(doc["input_profile"]["file"], "flat.png");
    assert_eq!(doc["input_profile"]["description"], P3);

    let sw = dir.path().join("sweep");
    ok(&[
        "sweep",
        fixture("profiles/p3.png").to_str().unwrap(),
        "--k",
        "2..4",
        "-o",
        sw.to_str().unwrap(),
    ]);
    let doc = json(&sw.join("sweep.json"));
    assert_eq!(doc["input_profile"]["input"], "icc");
    assert_eq!(doc["input_profile"]["description"], P3);
}

/// A reduced image written in its source profile holds, for each patch, the palette
/// colour encoded in that profile as colour-science encodes it
/// (`lab_reference.csv`'s `written_hex`): within one level a channel. Both fixtures: the
/// Display P3 profile (parametric sRGB curve) and the wide-gamut one, whose curve is a
/// single gamma value (a one-entry `curv`), which once came out white.
#[test]
fn reduced_images_are_written_in_their_source_profile_as_colour_science_encodes() {
    let dir = tempfile::tempdir().unwrap();
    for (file, space, stem) in [
        ("profiles/p3.png", "display-p3", "p3"),
        ("profiles/wide.png", "wide-gamut", "wide"),
    ] {
        let out = dir.path().join(space);
        ok(&[
            "reduce",
            fixture(file).to_str().unwrap(),
            "-k",
            "12",
            "-o",
            out.to_str().unwrap(),
        ]);
        let doc = json(&out.join(format!("{stem}.palette.json")));
        assert_eq!(doc["colour_profile"]["output"], "source", "{file}");
        let img = image::open(out.join(format!("{stem}.reduced.png")))
            .unwrap()
            .to_rgb8();
        for (i, p) in patches(space).iter().enumerate() {
            let want = p.written.unwrap();
            // Patch i is the 8 × 8 block at row i / 4, column i % 4 (the script's layout).
            let (x, y) = ((i % 4) as u32 * 8 + 4, (i / 4) as u32 * 8 + 4);
            let got = img.get_pixel(x, y).0;
            assert!(
                (0..3).all(|k| (got[k] as i32 - want[k] as i32).abs() <= 1),
                "{file} patch {i}: written {got:?}, colour-science {want:?}"
            );
        }
    }
}
