//! Colour choice that keeps distinct colour families (`--objective families`, the default),
//! the lost-area report and pinned colours, on the synthetic posters of
//! `tests/common/artwork.rs` (scenes of our own: large flat areas with print grain and a
//! gentle gradient, small shapes of 0.1–1 % in colours at least ΔE2000 15 from the rest,
//! anti-aliased edges, PNG and JPEG).
//!
//! Outside reference: `fixtures/reference/families_sklearn.json`, written by
//! `tests/reference/families_sklearn.py`: one scikit-learn k-means++ run (KMeans, n_init=1)
//! per seed on the CIELAB pixels of the same files loses families on 12 of 13 posters.

mod common;

#[path = "common/artwork.rs"]
mod artwork;

use chromasift::colour::{delta_e2000, srgb8_to_lab};
use chromasift::families::Objective;
use chromasift::raster::{decode_bytes, Decoded};
use chromasift::reduce::{reduce_image, ReduceOptions, Reduction};
use chromasift::Limits;
use common::{fixture, run, stderr};
use serde_json::Value;
use std::path::Path;

/// Lost families of a reduction: (name, ΔE2000 from the family's colour to the nearest
/// palette colour) for every family more than 6 away.
fn lost(a: &artwork::Artwork, red: &Reduction) -> Vec<(String, f64)> {
    let palette: Vec<[f64; 3]> = red.palette.iter().map(|&c| srgb8_to_lab(c)).collect();
    a.families
        .iter()
        .filter_map(|f| {
            let d = palette
                .iter()
                .map(|&p| delta_e2000(f.lab, p))
                .fold(f64::INFINITY, f64::min);
            (d > 6.0).then(|| (f.name.clone(), d))
        })
        .collect()
}

fn decoded(bytes: &[u8], name: &str) -> Decoded {
    decode_bytes(bytes, Path::new(name), &Limits::default()).unwrap()
}

fn reduce(img: &Decoded, k: usize, seed: u64, objective: Objective) -> Reduction {
    let mut opts = ReduceOptions {
        objective,
        ..ReduceOptions::new(k)
    };
    opts.engine.seed = seed;
    reduce_image(img, &opts).unwrap()
}

/// Every family of every poster, as PNG and as JPEG (quality 85), stays within ΔE2000 6
/// of a palette colour at K = its number of families, on eight seeds; plain k-means on the
/// same images loses families (as scikit-learn's does in the reference), so the check can
/// fail.
#[test]
fn every_family_is_kept_at_k_on_every_seed() {
    let _tables = chromasift::histogram::KeepTables::new();
    let mut plain_lost = 0;
    let mut failures = Vec::new();
    for a in artwork::artwork_set() {
        for (kind, bytes) in [
            ("png", artwork::encode_png(&a)),
            ("jpg", artwork::encode_jpeg(&a, 85)),
        ] {
            let img = decoded(&bytes, &format!("{}.{kind}", a.name));
            for seed in 0..8 {
                let red = reduce(&img, a.k, seed, Objective::Families);
                for (name, d) in lost(&a, &red) {
                    failures.push(format!("{}.{kind} seed {seed}: {name} {d:.1}", a.name));
                }
                if seed < 3 {
                    plain_lost += lost(&a, &reduce(&img, a.k, seed, Objective::Plain)).len();
                }
            }
        }
    }
    assert!(failures.is_empty(), "lost families: {failures:#?}");
    assert!(
        plain_lost >= 10,
        "plain k-means lost only {plain_lost} families on 3 seeds"
    );
    // The outside reference agrees that plain k-means loses families on these images.
    let r: Value = serde_json::from_str(
        &std::fs::read_to_string(fixture("reference/families_sklearn.json")).unwrap(),
    )
    .unwrap();
    for kind in ["png", "jpg"] {
        let s = &r["summary"][kind];
        assert!(s["kept"].as_u64().unwrap() < s["total"].as_u64().unwrap());
    }
}

/// The reduction with the default objective is the same on one and two threads.
#[test]
fn families_same_bytes_on_one_and_two_threads() {
    let input = fixture("families/sky-shapes.jpg");
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let dir = tempfile::tempdir().unwrap();
        let o = run(
            &[
                "reduce",
                input.to_str().unwrap(),
                "-k",
                "8",
                "-o",
                dir.path().to_str().unwrap(),
            ],
            &[("RAYON_NUM_THREADS", threads)],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        let files: Vec<Vec<u8>> = common::files_in(dir.path())
            .iter()
            .map(|f| std::fs::read(dir.path().join(f)).unwrap())
            .collect();
        outs.push(files);
    }
    assert_eq!(outs[0], outs[1]);
}

/// With plain k-means, the shapes it loses are reported: areas of at least 0.1 % of the
/// pixels, each more than ΔE2000 10 from its palette colour, with a bounding box inside
/// the image, and one warning line. The default objective keeps the shapes, and no
/// reported area is then a shape's colour.
#[test]
fn lost_areas_are_reported_and_kept_shapes_are_not() {
    let set = artwork::artwork_set();
    let a = set.iter().find(|a| a.name == "sky-shapes").unwrap();
    let img = decoded(&artwork::encode_png(a), "sky-shapes.png");
    let plain = reduce(&img, a.k, 1, Objective::Plain);
    let lost_plain = lost(a, &plain);
    assert!(!lost_plain.is_empty());
    let areas = &plain.document.lost_areas;
    assert!(!areas.is_empty());
    let min = (a.width * a.height) as f64 * 0.001;
    for ar in areas {
        assert!(ar.pixels as f64 >= min.min(400.0), "{ar:?}");
        assert!(ar.delta_e2000 > 10.0, "{ar:?}");
        assert!(ar.x + ar.width <= a.width && ar.y + ar.height <= a.height);
    }
    // Every lost shape of 0.1 % or more shows up as an area of its own colour.
    for (name, _) in &lost_plain {
        let f = a.families.iter().find(|f| &f.name == name).unwrap();
        if (f.pixels as f64) < 2.0 * min {
            continue;
        }
        assert!(
            areas
                .iter()
                .any(|ar| delta_e2000(ar.source_lab, f.lab) < 6.0),
            "{name} not reported: {areas:?}"
        );
    }
    assert_eq!(plain.warnings.len(), 1, "{:?}", plain.warnings);
    let kept = reduce(&img, a.k, 1, Objective::Families);
    assert!(lost(a, &kept).is_empty());
    for ar in &kept.document.lost_areas {
        for f in a.families.iter().filter(|f| f.small) {
            assert!(delta_e2000(ar.source_lab, f.lab) >= 6.0, "{ar:?}");
        }
    }
}

/// `separate` with a 12-ink library that holds an exact ink for each of the seven shapes on
/// the sky: the default choice gives every shape its ink at 8 inks; the lowest total
/// ΔE2000 alone spends inks on bands of the sky.
#[test]
fn separate_gives_every_shape_its_ink() {
    let set = artwork::artwork_set();
    let a = set.iter().find(|a| a.name == "sky-shapes").unwrap();
    let lib_path = fixture("families/sky-inks.csv");
    let library = chromasift::inks::read_library(&lib_path).unwrap();
    let shape_inks: Vec<String> = a
        .families
        .iter()
        .filter(|f| f.small)
        .map(|f| {
            library
                .iter()
                .find(|i| i.hex.eq_ignore_ascii_case(&chromasift::colour::hex(f.srgb)))
                .map(|i| i.name.clone())
                .unwrap_or_else(|| panic!("no exact ink for {}", f.name))
        })
        .collect();
    assert_eq!(shape_inks.len(), 7);
    for (kind, bytes) in [
        ("png", artwork::encode_png(a)),
        ("jpg", artwork::encode_jpeg(a, 85)),
    ] {
        let img = decoded(&bytes, &format!("sky-shapes.{kind}"));
        let chosen = |objective| {
            let opts = chromasift::separate::SeparateOptions {
                k: 8,
                objective,
                ..Default::default()
            };
            chromasift::separate::separate_image(&img, &library, &opts, &lib_path, "sky")
                .unwrap()
                .inks
                .iter()
                .map(|i| i.name.clone())
                .collect::<Vec<_>>()
        };
        let kept = chosen(Objective::Families);
        for ink in &shape_inks {
            assert!(kept.contains(ink), "{kind}: {ink} missing from {kept:?}");
        }
        let plain = chosen(Objective::Plain);
        assert!(
            shape_inks.iter().any(|i| !plain.contains(i)),
            "{kind}: the plain choice kept every shape ink: {plain:?}"
        );
    }
}

/// Pinned colours are in the palette exactly, also when no pixel is near them and in soft
/// mode; they count toward k; bad values and too many pins are refused with one line.
#[test]
fn pinned_colours_stay_exact() {
    let set = artwork::artwork_set();
    let a = set.iter().find(|a| a.name == "sky-shapes").unwrap();
    let img = decoded(&artwork::encode_png(a), "sky-shapes.png");
    let pins = [[0xd7u8, 0x1e, 0x28], [0x7f, 0x00, 0xff]];
    for mode in [
        chromasift::cluster::Mode::Hard,
        chromasift::cluster::Mode::Soft,
    ] {
        let mut opts = ReduceOptions {
            pinned: pins.to_vec(),
            ..ReduceOptions::new(5)
        };
        opts.engine.mode = mode;
        let red = reduce_image(&img, &opts).unwrap();
        assert!(red.palette.len() <= 5);
        for p in pins {
            assert!(
                red.palette.contains(&p),
                "{mode:?}: {p:?} not in {:?}",
                red.palette
            );
        }
        assert_eq!(red.document.settings.pinned, vec!["#d71e28", "#7f00ff"]);
    }
    let too_many = ReduceOptions {
        pinned: pins.to_vec(),
        ..ReduceOptions::new(1)
    };
    let e = reduce_image(&img, &too_many).unwrap_err().to_string();
    assert!(e.contains("pinned") && e.contains("k is 1"), "{e}");

    // Command line: hex and CIELAB values, and clear refusals.
    let input = fixture("families/sky-shapes.png");
    let dir = tempfile::tempdir().unwrap();
    let o = run(
        &[
            "reduce",
            input.to_str().unwrap(),
            "-k",
            "4",
            "--pin",
            "#d71e28",
            "--pin",
            "53.24,80.09,67.2",
            "-o",
            dir.path().to_str().unwrap(),
            "--json",
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value = serde_json::from_slice(&o.stdout).unwrap();
    let hexes: Vec<&str> = doc["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["hex"].as_str().unwrap())
        .collect();
    // CIELAB 53.24, 80.09, 67.20 is sRGB red (#ff0000), as the sRGB standard's primaries
    // give it (value recalled from memory, checked against our own conversion here).
    assert!(
        hexes.contains(&"#d71e28") && hexes.contains(&"#ff0000"),
        "{hexes:?}"
    );
    for (bad, says) in [
        ("#12345", "not a colour"),
        ("50,200,0", "outside sRGB"),
        ("120,0,0", "between 0 and 100"),
        ("teal", "neither"),
    ] {
        let o = run(
            &[
                "reduce",
                input.to_str().unwrap(),
                "--pin",
                bad,
                "-o",
                dir.path().to_str().unwrap(),
            ],
            &[],
        );
        assert_eq!(o.status.code(), Some(2), "{bad}");
        let err = stderr(&o);
        assert!(err.contains(says), "{bad}: {err}");
    }
    let o = run(
        &[
            "reduce",
            input.to_str().unwrap(),
            "-k",
            "1",
            "--pin",
            "#000000",
            "--pin",
            "#ffffff",
            "-o",
            dir.path().to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(stderr(&o).lines().count(), 1, "{}", stderr(&o));
    assert!(stderr(&o).contains("pinned"), "{}", stderr(&o));
}

/// A palette learnt from a histogram alone (no image, so families are judged on its
/// colours) keeps the shapes of a poster that plain k-means loses.
#[test]
fn learnt_palette_keeps_families_too() {
    let set = artwork::artwork_set();
    let mut kept_all = 0;
    let mut plain_all = 0;
    for a in set.iter().filter(|a| a.name != "sky-shapes") {
        let img = decoded(&artwork::encode_png(a), "a.png");
        let rgba = match &img.pixels {
            chromasift::raster::Pixels::Rgba8(p) => p.clone(),
            _ => unreachable!(),
        };
        let hist = chromasift::histogram::from_rgba8(&rgba).histogram;
        let count = |objective| {
            let mut opts = ReduceOptions {
                objective,
                ..ReduceOptions::new(a.k)
            };
            opts.engine.seed = 2;
            let doc = chromasift::reduce::learn_palette(&hist, &opts).unwrap();
            let palette: Vec<[f64; 3]> = doc.colors.iter().map(|c| c.lab).collect();
            a.families
                .iter()
                .filter(|f| {
                    palette
                        .iter()
                        .map(|&p| delta_e2000(f.lab, p))
                        .fold(f64::INFINITY, f64::min)
                        <= 6.0
                })
                .count()
        };
        kept_all += count(Objective::Families);
        plain_all += count(Objective::Plain);
    }
    assert!(kept_all > plain_all, "{kept_all} vs {plain_all}");
}

/// Two touching blocks, red and blue, mapped onto black and white (`apply`): both are far
/// from what they became (CIELAB of sRGB red, blue, black and white by IEC 61966-2-1 and
/// CIE 15: red is nearer white, blue nearer black), and they are two lost areas, each
/// named by its own colour and the palette colour it took, not one area of their mean.
#[test]
fn touching_lost_areas_of_different_colours_are_reported_apart() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (60u32, 40u32);
    let mut rgb = Vec::new();
    for y in 0..h {
        for x in 0..w {
            let c = match (x, y) {
                (10..30, 10..30) => [255u8, 0, 0],
                (30..50, 10..30) => [0, 0, 255],
                _ => [255, 255, 255],
            };
            rgb.extend_from_slice(&c);
        }
    }
    let img = dir.path().join("blocks.png");
    common::write_rgb(&img, w, h, &rgb);
    let pal = dir.path().join("bw.txt");
    std::fs::write(&pal, "#000000\n#ffffff\n").unwrap();
    let out = dir.path().join("out");
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            pal.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("blocks.palette.json")).unwrap()).unwrap();
    let mut areas: Vec<(String, String, u64, u64)> = doc["lost_areas"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| {
            (
                a["source"].as_str().unwrap().to_string(),
                a["rendered"].as_str().unwrap().to_string(),
                a["pixels"].as_u64().unwrap(),
                a["x"].as_u64().unwrap(),
            )
        })
        .collect();
    areas.sort();
    assert_eq!(
        areas,
        vec![
            ("#0000ff".to_string(), "#000000".to_string(), 400, 30),
            ("#ff0000".to_string(), "#ffffff".to_string(), 400, 10),
        ],
        "{}",
        doc["lost_areas"]
    );
}

/// A smooth 800 × 600 gradient from blue to beige with one solid red dot (#dc141e) 14
/// pixels across, written as PNG in `dir`: the file and the dot's pixel count (about 150,
/// under 0.1 % of the image and so under the size asked of larger areas and families).
fn gradient_with_dot(dir: &Path) -> (std::path::PathBuf, u64) {
    let (w, h) = (800u32, 600u32);
    let (cx, cy) = (607.0f64, 307.0f64);
    let mut rgb = Vec::new();
    let mut dot_pixels = 0u64;
    for y in 0..h {
        for x in 0..w {
            let (fx, fy) = (x as f64 + 0.5, y as f64 + 0.5);
            if (fx - cx).powi(2) + (fy - cy).powi(2) <= 49.0 {
                dot_pixels += 1;
                rgb.extend_from_slice(&DOT);
                continue;
            }
            let t = (0.7 * x as f64 / (w - 1) as f64 + 0.3 * y as f64 / (h - 1) as f64).min(1.0);
            let mix = |a: f64, b: f64| (a + (b - a) * t).round() as u8;
            rgb.extend_from_slice(&[mix(40.0, 232.0), mix(70.0, 214.0), mix(170.0, 176.0)]);
        }
    }
    assert!(dot_pixels < 200, "{dot_pixels}");
    let img = dir.join("dot.png");
    common::write_rgb(&img, w, h, &rgb);
    (img, dot_pixels)
}

const DOT: [u8; 3] = [0xdc, 0x14, 0x1e];

/// `reduce -k 8` of [`gradient_with_dot`] with extra arguments: the palette document and
/// the standard error.
fn reduce_dot(dir: &Path, img: &Path, extra: &[&str]) -> (Value, String) {
    let out = dir.join("out");
    let mut args = vec![
        "reduce",
        img.to_str().unwrap(),
        "-k",
        "8",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = run(&args, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc: Value =
        serde_json::from_slice(&std::fs::read(out.join("dot.palette.json")).unwrap()).unwrap();
    (doc, stderr(&o))
}

/// On [`gradient_with_dot`], plain k-means at 8 colours spends them on the gradient and
/// paints the dot in a gradient colour; the report must still name it, with its own colour,
/// its pixels and box as drawn, and the CIEDE2000 (checked against Sharma, Wu & Dalal 2005
/// in `tests/colour_reference.rs`) between the dot and the colour it took, and warn once.
#[test]
fn a_small_dot_far_from_its_colour_is_reported_in_a_large_image() {
    let dir = tempfile::tempdir().unwrap();
    let (img, dot_pixels) = gradient_with_dot(dir.path());
    let (doc, err) = reduce_dot(dir.path(), &img, &["--objective", "plain"]);
    let areas = doc["lost_areas"].as_array().unwrap();
    assert_eq!(areas.len(), 1, "{}", doc["lost_areas"]);
    let a = &areas[0];
    assert_eq!(a["source"].as_str().unwrap(), "#dc141e");
    assert_eq!(a["pixels"].as_u64().unwrap(), dot_pixels);
    let bx: Vec<u64> = ["x", "y", "width", "height"]
        .iter()
        .map(|k| a[k].as_u64().unwrap())
        .collect();
    assert_eq!(bx, vec![600, 300, 14, 14]);
    let rendered = chromasift::colour::parse_hex(a["rendered"].as_str().unwrap()).unwrap();
    let d = delta_e2000(srgb8_to_lab(DOT), srgb8_to_lab(rendered));
    assert!(d >= 20.0, "{d}");
    assert!(
        (a["delta_e2000"].as_f64().unwrap() - d).abs() < 1e-6,
        "{a} vs {d}"
    );
    let warnings: Vec<&str> = err.lines().filter(|l| l.contains("warning")).collect();
    assert_eq!(warnings.len(), 1, "{err}");
    assert!(
        warnings[0].contains("1 area rendered") && warnings[0].contains("#dc141e"),
        "{err}"
    );
}

/// The default objective brings the dot of [`gradient_with_dot`] back: a palette colour
/// within ΔE2000 6 of it (CIEDE2000 checked against Sharma, Wu & Dalal 2005), a note of
/// the move, and nothing lost.
#[test]
fn the_default_objective_keeps_a_small_dot_unlike_anything_else() {
    let dir = tempfile::tempdir().unwrap();
    let (img, _) = gradient_with_dot(dir.path());
    let (doc, err) = reduce_dot(dir.path(), &img, &[]);
    let nearest = doc["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let p = chromasift::colour::parse_hex(c["hex"].as_str().unwrap()).unwrap();
            delta_e2000(srgb8_to_lab(DOT), srgb8_to_lab(p))
        })
        .fold(f64::INFINITY, f64::min);
    assert!(nearest <= 6.0, "{nearest}: {}", doc["colors"]);
    assert!(doc["lost_areas"].as_array().unwrap().is_empty(), "{err}");
    assert!(err.contains("moved 1 palette colour"), "{err}");
}
