//! `chromasift separate --films`: films read back with other crates (the `tiff` crate for
//! TIFF 6.0 tags, `lopdf` for the PDF boxes of ISO 32000-1), the underbase choke against
//! a brute-force erosion, the refusal to mix runs, the alpha threshold, and coverage as
//! printed after trapping.

mod common;

use common::{files_in, fixture, run, stderr, write_rgba};
use serde_json::Value;
use std::io::Cursor;
use std::path::Path;

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

fn poster() -> String {
    fixture("demo/harbour-poster.png")
        .to_str()
        .unwrap()
        .to_string()
}

fn quayside() -> String {
    fixture("demo/quayside-inks.csv")
        .to_str()
        .unwrap()
        .to_string()
}

/// Runs `separate` on the demo poster with extra flags into `out`.
fn separate_poster(out: &Path, extra: &[&str]) -> std::process::Output {
    let (p, q) = (poster(), quayside());
    let mut args = vec![
        "separate",
        p.as_str(),
        "--inks",
        q.as_str(),
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    run(&args, &[])
}

/// A 1-bit TIFF: (width, height, dpi, ink per pixel).
fn read_tiff(path: &Path) -> (u32, u32, f64, Vec<bool>) {
    use tiff::decoder::{ifd::Value as T, Decoder, DecodingResult};
    use tiff::tags::Tag;
    let mut d = Decoder::new(Cursor::new(std::fs::read(path).unwrap())).unwrap();
    let (w, h) = d.dimensions().unwrap();
    // TIFF 6.0: a bilevel image has BitsPerSample 1; ResolutionUnit 2 = inch.
    assert_eq!(d.get_tag_u32(Tag::BitsPerSample).unwrap(), 1, "{path:?}");
    assert_eq!(d.get_tag_u32(Tag::ResolutionUnit).unwrap(), 2, "{path:?}");
    let mut res = |tag| match d.get_tag(tag).unwrap() {
        T::Rational(n, den) => n as f64 / den as f64,
        other => panic!("{tag:?} is {other:?}"),
    };
    let (xr, yr) = (res(Tag::XResolution), res(Tag::YResolution));
    assert_eq!(xr, yr, "{path:?}: square pixels");
    // PhotometricInterpretation 0 = WhiteIsZero: a set bit is ink (black). The tiff
    // crate hands the samples back as black-is-zero, so there a clear bit is ink (the
    // colour-film-equals-plate check below confirms the sense).
    assert_eq!(d.get_tag_u32(Tag::PhotometricInterpretation).unwrap(), 0);
    let DecodingResult::U8(data) = d.read_image().unwrap() else {
        panic!("8-bit buffer expected for a 1-bit image")
    };
    let rb = (w as usize).div_ceil(8);
    let ink = (0..w as usize * h as usize)
        .map(|i| {
            let (x, y) = (i % w as usize, i / w as usize);
            data[y * rb + x / 8] & (0x80 >> (x % 8)) == 0
        })
        .collect();
    (w, h, xr, ink)
}

/// Plate PNG (1-bit, 0 = ink) as ink per pixel.
fn read_plate(path: &Path) -> (u32, u32, Vec<bool>) {
    let img = image::open(path).unwrap().to_luma8();
    let (w, h) = img.dimensions();
    (w, h, img.pixels().map(|p| p.0[0] == 0).collect())
}

/// The TrimBox of every PDF page in film pixels from the top-left: (x, y, w, h), plus
/// the MediaBox size in points.
fn pdf_boxes(path: &Path, dpi: f64) -> Vec<([f64; 4], [f64; 2])> {
    let doc = lopdf::Document::load(path).unwrap();
    doc.get_pages()
        .values()
        .map(|&id| {
            let get = |key: &[u8]| common::pdf_box(&doc, id, key);
            let media = get(b"MediaBox");
            let trim = get(b"TrimBox");
            // ISO 32000-1 §8.3.2.3: 72 points per inch; y points up.
            let px = |pt: f64| pt / 72.0 * dpi;
            (
                [
                    px(trim[0]).round(),
                    px(media[3] - trim[3]).round(),
                    px(trim[2] - trim[0]).round(),
                    px(trim[3] - trim[1]).round(),
                ],
                [media[2] - media[0], media[3] - media[1]],
            )
        })
        .collect()
}

#[test]
fn the_dark_garment_demo_writes_true_size_films_with_an_underbase() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("films");
    let o = separate_poster(
        &out,
        &[
            "-k",
            "5",
            "--substrate",
            "#101010",
            "--underbase",
            "--halftone",
            "round",
            "--tints",
            "--films",
            "tiff,pdf",
            "--dpi",
            "300",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join("harbour-poster.separation.json"));
    let films = doc["films"]["films"].as_array().unwrap();
    let inks = doc["inks"].as_array().unwrap();
    assert_eq!(
        films.len(),
        inks.len() + 1,
        "one film per ink plus the underbase"
    );
    assert_eq!(films[0]["role"], "underbase");
    assert_eq!(films[0]["print_order"], 1, "the underbase prints first");
    assert!(
        films
            .iter()
            .any(|f| f["screen"].as_str().unwrap().contains("lpi")),
        "the tints are halftoned: {films:?}"
    );
    let mut size = None;
    for f in films {
        let name = f["files"][0].as_str().unwrap();
        assert!(name.ends_with(".tif"));
        let (w, h, dpi, _) = read_tiff(&out.join(name));
        assert_eq!(dpi, 300.0, "{name}: resolution tags");
        // The artwork (320 × 240 px) plus at least the 20 mm default margin on each side.
        let margin = 20.0 / 25.4 * 300.0;
        assert!(w as f64 >= 320.0 + 2.0 * margin - 1.0 && h as f64 >= 240.0 + 2.0 * margin - 1.0);
        assert_eq!(
            *size.get_or_insert((w, h)),
            (w, h),
            "every film has one size"
        );
    }
    let (w, h) = size.unwrap();
    let boxes = pdf_boxes(&out.join("harbour-poster.films.pdf"), 300.0);
    assert_eq!(boxes.len(), films.len(), "one PDF page per film");
    for (trim, media) in boxes {
        assert!(
            (media[0] - w as f64 / 300.0 * 72.0).abs() < 0.01,
            "{media:?}"
        );
        assert!(
            (media[1] - h as f64 / 300.0 * 72.0).abs() < 0.01,
            "{media:?}"
        );
        assert_eq!(
            (trim[2], trim[3]),
            (320.0, 240.0),
            "the artwork box is the artwork"
        );
    }
    // The stacked proof and a preview per film.
    let names = files_in(&out);
    assert!(names.contains(&"harbour-poster.stack.png".to_string()));
    assert_eq!(
        names.iter().filter(|n| n.contains(".preview-")).count(),
        films.len()
    );
    let stack = image::open(out.join("harbour-poster.stack.png"))
        .unwrap()
        .to_rgb8();
    assert_eq!(stack.dimensions(), (320, 240));
    // Every pixel is the garment, the white or one of the chosen inks, and all show.
    let mut allowed: Vec<[u8; 3]> = vec![[0x10, 0x10, 0x10], [255, 255, 255]];
    for ink in inks {
        let hex = ink["hex"].as_str().unwrap();
        let v = |i: usize| u8::from_str_radix(&hex[i..i + 2], 16).unwrap();
        allowed.push([v(1), v(3), v(5)]);
    }
    let mut seen = vec![false; allowed.len()];
    for p in stack.pixels() {
        let i = allowed.iter().position(|c| *c == p.0);
        assert!(i.is_some(), "{:?} is no ink of the set", p.0);
        seen[i.unwrap()] = true;
    }
    assert!(seen.iter().all(|&s| s), "{seen:?}");
}

#[test]
fn the_underbase_is_the_union_of_the_colours_eroded_by_the_choke() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("films");
    // Solid plates (no tints), so every colour film is its plate.
    let o = separate_poster(
        &out,
        &[
            "-k",
            "4",
            "--substrate",
            "#101010",
            "--underbase",
            "--choke-mm",
            "0.5",
            "--films",
            "tiff,pdf",
            "--dpi",
            "300",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join("harbour-poster.separation.json"));
    let (w, h) = (320usize, 240usize);
    let mut union = vec![false; w * h];
    for ink in doc["inks"].as_array().unwrap() {
        let (pw, ph, mask) = read_plate(&out.join(ink["plate"].as_str().unwrap()));
        assert_eq!((pw as usize, ph as usize), (w, h));
        for (u, m) in union.iter_mut().zip(mask) {
            *u |= m;
        }
    }
    let boxes = pdf_boxes(&out.join("harbour-poster.films.pdf"), 300.0);
    let [ax, ay, _, _] = boxes[0].0;
    let films = doc["films"]["films"].as_array().unwrap();
    let film_art = |name: &str| -> Vec<bool> {
        let (fw, _, _, ink) = read_tiff(&out.join(name));
        (0..w * h)
            .map(|i| ink[(ay as usize + i / w) * fw as usize + ax as usize + i % w])
            .collect()
    };
    // The colour films are the plates (this checks the art box and the bit sense).
    let first_colour = film_art(films[1]["files"][0].as_str().unwrap());
    let (_, _, plate) = read_plate(&out.join(doc["inks"][0]["plate"].as_str().unwrap()));
    assert_eq!(first_colour, plate);
    let ub = film_art(films[0]["files"][0].as_str().unwrap());
    // Brute-force erosion by a disc of radius 0.5 mm at 300 dpi (5.9 px), the outside of
    // the artwork counting as un-inked: a pixel keeps its white when every pixel within
    // the radius (centre to centre, boundary included) is inked.
    let r: f64 = 0.5 / 25.4 * 300.0;
    let ri = r.ceil() as i64;
    let mut expected = vec![false; w * h];
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            let mut keep = union[y as usize * w + x as usize];
            'disc: for dy in -ri..=ri {
                for dx in -ri..=ri {
                    if !keep {
                        break 'disc;
                    }
                    if ((dx * dx + dy * dy) as f64) > r * r {
                        continue;
                    }
                    let (qx, qy) = (x + dx, y + dy);
                    keep = qx >= 0
                        && qy >= 0
                        && qx < w as i64
                        && qy < h as i64
                        && union[qy as usize * w + qx as usize];
                }
            }
            expected[y as usize * w + x as usize] = keep;
        }
    }
    let differ = ub.iter().zip(&expected).filter(|(a, b)| a != b).count();
    assert_eq!(differ, 0, "underbase vs erosion of the colours");
    assert!(
        ub.iter().filter(|&&v| v).count() > w * h / 4,
        "an underbase is there"
    );
}

#[test]
fn an_earlier_run_with_other_plates_is_refused_unless_replaced() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plates");
    let o = separate_poster(&out, &["-k", "5", "--films", "tiff", "--dpi", "300"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let before = files_in(&out);
    let stamp: Vec<Vec<u8>> = before
        .iter()
        .map(|n| std::fs::read(out.join(n)).unwrap())
        .collect();
    // The same run again is no conflict.
    let o = separate_poster(&out, &["-k", "5", "--films", "tiff", "--dpi", "300"]);
    assert!(o.status.success(), "{}", stderr(&o));
    // Fewer inks: plates 04 and 05 and the other films would be left over.
    let o = separate_poster(&out, &["-k", "3", "--films", "tiff", "--dpi", "300"]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(
        err.contains("earlier run") && err.contains("--replace"),
        "{err}"
    );
    assert!(
        before
            .iter()
            .any(|n| n.contains(".plate-") && err.contains(n.as_str())),
        "the message names the earlier plates: {err}"
    );
    assert_eq!(files_in(&out), before, "nothing written or removed");
    let again: Vec<Vec<u8>> = before
        .iter()
        .map(|n| std::fs::read(out.join(n)).unwrap())
        .collect();
    assert_eq!(again, stamp);
    // Films of an earlier run count too: no films this time would leave them behind.
    let o = separate_poster(&out, &["-k", "5"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains(".film-"), "{}", stderr(&o));
    // With --replace the new set lands and the stale files go.
    let o = separate_poster(
        &out,
        &["-k", "3", "--films", "tiff", "--dpi", "300", "--replace"],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let after = files_in(&out);
    let plates: Vec<&String> = after.iter().filter(|n| n.contains(".plate-")).collect();
    let films: Vec<&String> = after.iter().filter(|n| n.contains(".film-")).collect();
    assert_eq!((plates.len(), films.len()), (3, 3), "{after:?}");
    let doc = json(&out.join("harbour-poster.separation.json"));
    for ink in doc["inks"].as_array().unwrap() {
        assert!(after.contains(&ink["plate"].as_str().unwrap().to_string()));
    }
    assert!(
        !after
            .iter()
            .any(|n| n.starts_with(".chromasift") || n.contains(".tmp")),
        "{after:?}"
    );
}

#[test]
fn films_without_a_resolution_are_refused_before_anything_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("none");
    // The demo poster records no resolution.
    let o = separate_poster(&out, &["--films", "tiff"]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert!(err.contains("--dpi"), "{err}");
    assert!(!out.exists(), "no output folder left behind");
    // Film settings without films are a usage error.
    let o = separate_poster(&out, &["--underbase"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--films"), "{}", stderr(&o));
}

/// Web-resolution artwork (72 dpi) still gives solid films and stochastic tints: only a
/// halftone grid needs two film pixels per cell (the step strip's screen follows the
/// resolution). Settings larger than the artwork are refused in one line, before anything
/// is written.
#[test]
fn low_resolution_films_and_outsized_settings() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (name, extra) in [
        ("solid", vec!["--films", "tiff", "--dpi", "72"]),
        (
            "fm",
            vec![
                "--films",
                "tiff",
                "--dpi",
                "72",
                "--tints",
                "--halftone",
                "stochastic",
            ],
        ),
    ] {
        let out = d.join(name);
        let mut args = vec!["-k", "4"];
        args.extend(extra);
        let o = separate_poster(&out, &args);
        assert!(o.status.success(), "{name}: {}", stderr(&o));
        assert!(files_in(&out).iter().any(|f| f.ends_with(".tif")), "{name}");
        // The plates carry the print resolution too (PNG pHYs: 2835 px/m is 72 dpi).
        let plate = files_in(&out)
            .into_iter()
            .find(|f| f.contains(".plate-01-") && f.ends_with(".png"))
            .unwrap();
        let bytes = std::fs::read(out.join(&plate)).unwrap();
        assert_eq!(chromasift::raster::sniff_dpi(&bytes), Some(72.0), "{plate}");
    }
    for (extra, words) in [
        (vec!["--trap", "100000"], vec!["--trap", "320 × 240"]),
        (vec!["--min-area", "76801"], vec!["--min-area", "76800 px"]),
        (
            vec![
                "--films",
                "tiff",
                "--dpi",
                "300",
                "--tints",
                "--halftone",
                "round",
                "--screen-angles",
                "45,400",
            ],
            vec!["400", "180"],
        ),
    ] {
        let out = d.join("refused");
        let mut args = vec!["-k", "4"];
        args.extend(extra);
        let o = separate_poster(&out, &args);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
        for w in words {
            assert!(err.contains(w), "{w:?} in {err}");
        }
        assert!(!out.exists());
    }
}

/// Plate pixels of a 40 × 30 artwork: the left half opaque red, the right half red with
/// alpha `a`.
fn alpha_run(a: u8, extra: &[&str]) -> u64 {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (40u32, 30u32);
    let rgba: Vec<u8> = (0..w * h)
        .flat_map(|i| [214, 40, 40, if i % w < 20 { 255 } else { a }])
        .collect();
    let input = dir.path().join("fill.png");
    write_rgba(&input, w, h, &rgba);
    let lib = dir.path().join("inks.csv");
    std::fs::write(&lib, "name,hex\nRed,#d62828\nBlack,#101010\n").unwrap();
    let out = dir.path().join("out");
    let mut args = vec![
        "separate",
        input.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "--use",
        "Red",
        "-k",
        "1",
        "--min-area",
        "1",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = run(&args, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join("fill.separation.json"));
    doc["inks"][0]["pixels"].as_u64().unwrap()
}

#[test]
fn the_alpha_threshold_defaults_to_half_opaque() {
    // 50 % threshold (common practice): alpha 128 of 255 is at or above half and prints;
    // 127 is below it and does not; a higher threshold drops the half-transparent fill.
    assert_eq!(alpha_run(128, &[]), 40 * 30);
    assert_eq!(alpha_run(127, &[]), 20 * 30);
    assert_eq!(alpha_run(128, &["--alpha-threshold", "60%"]), 20 * 30);
    assert_eq!(alpha_run(30, &["--alpha-threshold", "10"]), 40 * 30);
}

#[test]
fn coverage_as_printed_counts_the_trap() {
    let dir = tempfile::tempdir().unwrap();
    let plain = dir.path().join("plain");
    let o = separate_poster(&plain, &["-k", "4"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&plain.join("harbour-poster.separation.json"));
    for ink in doc["inks"].as_array().unwrap() {
        // Without trapping the plates do not overlap: as printed = as separated.
        assert_eq!(ink["pixels_printed"], ink["pixels"]);
        assert_eq!(ink["coverage_printed"], ink["coverage"]);
    }
    let trapped = dir.path().join("trapped");
    let o = separate_poster(&trapped, &["-k", "4", "--trap", "2"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&trapped.join("harbour-poster.separation.json"));
    let mut spread = 0;
    for ink in doc["inks"].as_array().unwrap() {
        let (c, cp) = (
            ink["coverage"].as_f64().unwrap(),
            ink["coverage_printed"].as_f64().unwrap(),
        );
        assert!(cp >= c, "{ink}");
        // pixels_printed is what the plate file holds.
        let (_, _, mask) = read_plate(&trapped.join(ink["plate"].as_str().unwrap()));
        assert_eq!(
            mask.iter().filter(|&&m| m).count() as u64,
            ink["pixels_printed"].as_u64().unwrap()
        );
        spread += ink["pixels_printed"].as_u64().unwrap() - ink["pixels"].as_u64().unwrap();
    }
    assert!(spread > 0, "a 2 px trap spreads some ink");
    assert!(
        stderr(&o).contains("printed"),
        "the summary table shows it: {}",
        stderr(&o)
    );
}

#[test]
fn films_are_the_same_on_any_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let mut sets = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.path().join(threads);
        let (p, q) = (poster(), quayside());
        let args = [
            "separate",
            p.as_str(),
            "--inks",
            q.as_str(),
            "-k",
            "4",
            "--substrate",
            "#101010",
            "--underbase",
            "--halftone",
            "round",
            "--tints",
            "--min-feature",
            "3threads@230",
            "--films",
            "all",
            "--dpi",
            "300",
            "-o",
            out.to_str().unwrap(),
        ];
        let o = run(&args, &[("RAYON_NUM_THREADS", threads)]);
        assert!(o.status.success(), "{}", stderr(&o));
        let names = files_in(&out);
        assert!(names.contains(&"harbour-poster.cleanup.csv".to_string()));
        let bytes: Vec<(String, Vec<u8>)> = names
            .into_iter()
            .filter(|n| !n.ends_with(".json"))
            .map(|n| {
                let b = std::fs::read(out.join(&n)).unwrap();
                (n, b)
            })
            .collect();
        sets.push(bytes);
    }
    assert_eq!(sets[0], sets[1]);
}

/// sRGB transfer (IEC 61966-2-1) and its inverse, for building the tint wedge.
fn to_linear(v: u8) -> f64 {
    let c = v as f64 / 255.0;
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

fn to_srgb8(l: f64) -> u8 {
    let c = if l <= 0.0031308 {
        12.92 * l
    } else {
        1.055 * l.powf(1.0 / 2.4) - 0.055
    };
    (c * 255.0).round() as u8
}

#[test]
fn tints_are_chosen_and_scored_as_they_print() {
    // A wedge of one ink over white paper at dot areas 1/8 .. 8/8, mixed by the
    // Murray–Davies relation (A. Murray, 1936: R = a·R_ink + (1 − a)·R_paper) in linear
    // sRGB, the model the README states. With tints, one ink reproduces every step; solid,
    // it cannot.
    let dir = tempfile::tempdir().unwrap();
    let ink = [0x1fu8, 0x4e, 0x9c];
    let (w, h) = (80u32, 20u32);
    let mut rgba = Vec::new();
    let mut expected = Vec::new();
    for _y in 0..h {
        for x in 0..w {
            let a = (x / 10 + 1) as f64 / 8.0;
            let px = ink.map(|c| to_srgb8(a * to_linear(c) + (1.0 - a)));
            rgba.extend_from_slice(&[px[0], px[1], px[2], 255]);
            expected.push(px);
        }
    }
    let art = dir.path().join("wedge.png");
    write_rgba(&art, w, h, &rgba);
    let lib = dir.path().join("inks.csv");
    std::fs::write(
        &lib,
        "name,hex\nHarbour Blue,#1f4e9c\nSignal Red,#c8102e\nPale Sky,#a9c4e8\n",
    )
    .unwrap();
    let sep = |out: &str, extra: &[&str]| -> Value {
        let o = dir.path().join(out);
        let mut args = vec![
            "separate",
            art.to_str().unwrap(),
            "--inks",
            lib.to_str().unwrap(),
            "-k",
            "1",
            "--dpi",
            "300",
            "--films",
            "png",
            "-o",
            o.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let r = run(&args, &[]);
        assert!(r.status.success(), "{}", stderr(&r));
        json(&o.join("wedge.separation.json"))
    };
    let tinted = sep("tinted", &["--tints"]);
    let solid = sep("solid", &[]);
    assert_eq!(tinted["inks"][0]["name"], "Harbour Blue");
    let de_tinted = tinted["mean_delta_e2000"].as_f64().unwrap();
    let de_solid = solid["mean_delta_e2000"].as_f64().unwrap();
    // 8-bit rounding of the wedge leaves well under one ΔE2000 unit.
    assert!(de_tinted < 1.0, "tinted mean ΔE2000 {de_tinted}");
    assert!(de_solid > 10.0, "solid mean ΔE2000 {de_solid}");
    // The proof shows the tints as they print: each step within 2 levels of the wedge.
    let proof = image::open(dir.path().join("tinted/wedge.proof.png"))
        .unwrap()
        .to_rgb8();
    for (p, want) in proof.pixels().zip(&expected) {
        for c in 0..3 {
            assert!(
                (p.0[c] as i32 - want[c] as i32).abs() <= 2,
                "{:?} vs {want:?}",
                p.0
            );
        }
    }
}

/// Writes `art` (RGB per pixel from `f`) and a two-ink library into `dir`, runs `separate`
/// with `extra`, and returns the output folder and the document.
fn separate_art(
    dir: &Path,
    name: &str,
    (w, h): (u32, u32),
    f: impl Fn(u32, u32) -> [u8; 3],
    extra: &[&str],
) -> (std::path::PathBuf, Value) {
    let mut rgba = Vec::new();
    for y in 0..h {
        for x in 0..w {
            rgba.extend_from_slice(&f(x, y));
            rgba.push(255);
        }
    }
    let art = dir.join(format!("{name}.png"));
    write_rgba(&art, w, h, &rgba);
    let lib = dir.join("inks.csv");
    std::fs::write(&lib, "name,hex\nInk Black,#000000\nInk Red,#c8102e\n").unwrap();
    let out = dir.join(name);
    let mut args = vec![
        "separate",
        art.to_str().unwrap(),
        "--inks",
        lib.to_str().unwrap(),
        "--dpi",
        "300",
        "-o",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = run(&args, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    let doc = json(&out.join(format!("{name}.separation.json")));
    (out, doc)
}

/// Ink per pixel of a film preview (artwork size): pixels of the ink's colour.
fn preview_ink(path: &Path, ink: [u8; 3]) -> (u32, Vec<bool>) {
    let img = image::open(path).unwrap().to_rgb8();
    (img.width(), img.pixels().map(|p| p.0 == ink).collect())
}

#[test]
fn mirrored_films_are_the_plain_films_flipped_left_to_right() {
    // Emulsion side down (common practice for screen films): the artwork, marks and strip
    // read right to left; only the label's words (which name the reading side) differ.
    // Checked on the TIFF read back by the `tiff` crate (TIFF 6.0), from the top of the
    // artwork (the PDF's TrimBox, ISO 32000-1) down.
    let dir = tempfile::tempdir().unwrap();
    let art = |x: u32, y: u32| match (x < 30, y < 10) {
        (true, true) => [0, 0, 0],
        (false, false) => [0xc8, 0x10, 0x2e],
        _ => [255, 255, 255],
    };
    let flags = ["-k", "2", "--films", "tiff,pdf", "--job", "flip check"];
    let (plain, doc) = separate_art(dir.path(), "plain", (60, 24), art, &flags);
    let mirror_flags = [&flags[..], &["--mirror"]].concat();
    let (mirrored, mdoc) = separate_art(dir.path(), "mirrored", (60, 24), art, &mirror_flags);
    assert_eq!(mdoc["films"]["mirror"], true);
    assert_eq!(doc["films"]["mirror"], false);
    let trim = pdf_boxes(&plain.join("plain.films.pdf"), 300.0)[0].0;
    let (ax, ay) = (trim[0] as usize, trim[1] as usize);
    let films = doc["films"]["films"].as_array().unwrap();
    assert_eq!(films.len(), 2);
    for (f, mf) in films.iter().zip(mdoc["films"]["films"].as_array().unwrap()) {
        let (w, h, _, ink) = read_tiff(&plain.join(f["files"][0].as_str().unwrap()));
        let (mw, mh, _, mink) = read_tiff(&mirrored.join(mf["files"][0].as_str().unwrap()));
        assert_eq!((w, h), (mw, mh));
        let (w, h) = (w as usize, h as usize);
        for y in ay..h {
            for x in 0..w {
                assert_eq!(ink[y * w + x], mink[y * w + (w - 1 - x)], "({x}, {y})");
            }
        }
        // The artwork is not symmetric, so the flip shows inside it.
        assert!((0..60).any(|x| ink[(ay + 2) * w + ax + x] != mink[(ay + 2) * w + ax + x]));
    }
}

#[test]
fn the_highlight_white_prints_last_on_the_lightest_artwork() {
    // CIE L* of sRGB greys (IEC 61966-2-1 transfer, CIE 15:2004 L* = 116 f(Y) − 16):
    // #ffffff is 100, #e6e6e6 about 91.5, #d9d9d9 about 87.1 (computed here, not recalled).
    let l_star = |v: u8| {
        let y = to_linear(v);
        let f = if y > (6.0f64 / 29.0).powi(3) {
            y.cbrt()
        } else {
            y / (3.0 * (6.0f64 / 29.0).powi(2)) + 4.0 / 29.0
        };
        116.0 * f - 16.0
    };
    let greys = [255u8, 0xe6, 0xd9, 0x20];
    let art = |x: u32, _y: u32| [greys[(x / 20) as usize]; 3];
    let dir = tempfile::tempdir().unwrap();
    for (limit, flag) in [(90.0, None), (95.0, Some("95"))] {
        let name = format!("grey{}", limit as u32);
        let mut flags = vec![
            "-k",
            "1",
            "--substrate",
            "#101010",
            "--underbase",
            "--films",
            "png",
            "--highlight-white",
        ];
        flags.extend(flag);
        let (out, doc) = separate_art(dir.path(), &name, (80, 10), art, &flags);
        let films = doc["films"]["films"].as_array().unwrap();
        let last = films.last().unwrap();
        assert_eq!(last["role"], "highlight white");
        assert_eq!(last["print_order"].as_u64().unwrap() as usize, films.len());
        let preview = out.join(format!(
            "{name}.preview-{:02}-highlight-white.png",
            films.len()
        ));
        let (w, ink) = preview_ink(&preview, [255, 255, 255]);
        for (i, &on) in ink.iter().enumerate() {
            let g = greys[(i as u32 % w / 20) as usize];
            assert_eq!(on, l_star(g) >= limit, "grey {g:#x} (L* {:.1})", l_star(g));
        }
    }
}

#[test]
fn the_minimum_feature_keeps_lines_and_text_strokes_and_drops_specks() {
    // 4 px at 300 dpi is 0.34 mm; `1thread@75` is 25.4 / 75 = 0.339 mm (thread spacing =
    // 25.4 mm / mesh count, common practice), also 4 px. A 1 px line 40 px long is thin but
    // long (kept), a 2 × 2 speck goes, a 5 × 5 square holds the limit.
    let art = |x: u32, y: u32| {
        let line = y == 5 && (5..45).contains(&x);
        let speck = (60..62).contains(&x) && (20..22).contains(&y);
        let square = (70..75).contains(&x) && (20..25).contains(&y);
        if line || speck || square {
            [0, 0, 0]
        } else {
            [255, 255, 255]
        }
    };
    let dir = tempfile::tempdir().unwrap();
    for (i, limit) in ["4px", "0.34mm", "1threads@75"].iter().enumerate() {
        let name = format!("marks{i}");
        let flags = [
            "-k",
            "1",
            "--substrate",
            "#ffffff",
            "--min-area",
            "1",
            "--films",
            "png",
            "--min-feature",
            limit,
        ];
        let (out, doc) = separate_art(dir.path(), &name, (90, 30), art, &flags);
        assert_eq!(doc["films"]["min_feature_px"], 4, "{limit}");
        assert_eq!(doc["films"]["cleanup_removed"], 1, "{limit}");
        let (w, ink) = preview_ink(
            &out.join(format!("{name}.preview-01-ink-black.png")),
            [0, 0, 0],
        );
        let at = |x: u32, y: u32| ink[(y * w + x) as usize];
        assert!(at(5, 5) && at(44, 5), "{limit}: the thin long line stays");
        assert!(
            at(70, 20) && at(74, 24),
            "{limit}: the square holds the limit"
        );
        assert!(!at(60, 20) && !at(61, 21), "{limit}: the speck goes");
        let csv = std::fs::read_to_string(out.join(format!("{name}.cleanup.csv"))).unwrap();
        assert_eq!(
            csv.lines().count(),
            2,
            "{limit}: a header and the speck: {csv}"
        );
        assert!(csv.contains("removed,60,20,2,2"), "{csv}");
    }
}
