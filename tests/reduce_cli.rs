//! `chromasift reduce` end to end: every output file on invented demo images, the edge
//! cases the issue names, determinism across thread counts, and each kind of bad input.

mod common;

use chromasift::colour::{self, delta_e2000};
use common::{crc32, files_in, fixture, read_rgba, run, stderr, write_rgb, write_rgba};
use serde_json::Value;
use std::path::Path;

fn reduce_ok(args: &[&str]) -> std::process::Output {
    let o = run(args, &[]);
    assert!(o.status.success(), "{:?} failed: {}", args, stderr(&o));
    o
}

fn palette_doc(dir: &Path, stem: &str) -> Value {
    serde_json::from_slice(&std::fs::read(dir.join(format!("{stem}.palette.json"))).unwrap())
        .unwrap()
}

fn hex_of(p: &image::Rgba<u8>) -> String {
    colour::hex([p[0], p[1], p[2]])
}

/// Checks every output file of a run against the input and against each other.
fn check_outputs(input: &Path, dir: &Path, stem: &str, k_expected: usize) -> Value {
    let doc = palette_doc(dir, stem);
    for field in [
        "tool_version",
        "space",
        "mode",
        "k",
        "beta",
        "seed",
        "iterations",
        "sse",
        "mean_delta_e76",
        "mean_delta_e2000",
        "colors",
    ] {
        assert!(doc.get(field).is_some(), "palette.json lacks {field}");
    }
    assert_eq!(doc["k"].as_u64().unwrap() as usize, k_expected);
    let colors = doc["colors"].as_array().unwrap();
    assert_eq!(colors.len(), k_expected);
    let src = read_rgba(input);
    let out = read_rgba(&dir.join(format!("{stem}.reduced.png")));
    assert_eq!(src.dimensions(), out.dimensions());
    let opaque = src.pixels().filter(|p| p[3] > 0).count() as u64;

    // Colours: sorted by pixels, counts and shares consistent with the image itself.
    let mut counts = std::collections::HashMap::new();
    let mut de_sum = 0.0;
    for (s, o) in src.pixels().zip(out.pixels()) {
        if s[3] == 0 {
            assert_eq!(o[3], 0, "transparent pixels stay transparent");
            continue;
        }
        assert_eq!(o[3], s[3], "alpha is kept");
        *counts.entry(hex_of(o)).or_insert(0u64) += 1;
        de_sum += delta_e2000(
            colour::srgb8_to_lab([s[0], s[1], s[2]]),
            colour::srgb8_to_lab([o[0], o[1], o[2]]),
        );
    }
    let mut last = u64::MAX;
    let mut share_sum = 0.0;
    for (i, c) in colors.iter().enumerate() {
        assert_eq!(c["index"].as_u64().unwrap() as usize, i);
        let px = c["pixels"].as_u64().unwrap();
        assert!(px <= last, "colours sorted by pixels, most first");
        last = px;
        let hex = c["hex"].as_str().unwrap();
        assert_eq!(counts.get(hex).copied(), Some(px), "{hex} pixel count");
        share_sum += c["share"].as_f64().unwrap();
        let lab = c["lab"].as_array().unwrap();
        let want = colour::srgb8_to_lab(colour::parse_hex(hex).unwrap());
        for d in 0..3 {
            assert!((lab[d].as_f64().unwrap() - want[d]).abs() < 1e-9);
        }
        let u = c["mean_uncertainty"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&u));
    }
    assert_eq!(
        counts.len(),
        k_expected,
        "the image uses exactly the palette colours"
    );
    assert!((share_sum - 1.0).abs() < 1e-9);
    assert_eq!(counts.values().sum::<u64>(), opaque);
    let mean_de = de_sum / opaque as f64;
    let doc_de = doc["mean_delta_e2000"].as_f64().unwrap();
    assert!(
        (mean_de - doc_de).abs() < 1e-9 * mean_de.max(1.0),
        "ΔE2000 {mean_de} vs document {doc_de}"
    );

    // CSV: header and the same rows.
    let csv = std::fs::read_to_string(dir.join(format!("{stem}.palette.csv"))).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines[0], "index,hex,L,a,b,pixels,share,mean_uncertainty");
    assert_eq!(lines.len(), k_expected + 1);
    for (line, c) in lines[1..].iter().zip(colors) {
        let f: Vec<&str> = line.split(',').collect();
        assert_eq!(f[1], c["hex"].as_str().unwrap());
        assert_eq!(f[5].parse::<u64>().unwrap(), c["pixels"].as_u64().unwrap());
    }

    // Uncertainty map: 8-bit grey, same size.
    let u = image::open(dir.join(format!("{stem}.uncertainty.png"))).unwrap();
    assert_eq!(u.color(), image::ColorType::L8);
    assert_eq!((u.width(), u.height()), src.dimensions());
    doc
}

#[test]
fn poster_round_trip_checks_every_output() {
    let dir = tempfile::tempdir().unwrap();
    let input = fixture("demo/harbour-poster.png");
    let o = reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "6",
        "-o",
        dir.path().to_str().unwrap(),
    ]);
    assert_eq!(
        files_in(dir.path()),
        vec![
            "harbour-poster.palette.csv",
            "harbour-poster.palette.json",
            "harbour-poster.reduced.png",
            "harbour-poster.uncertainty.png"
        ]
    );
    let doc = check_outputs(&input, dir.path(), "harbour-poster", 6);
    assert_eq!(doc["space"], "cielab");
    assert_eq!(doc["mode"], "hard");
    assert!(doc["beta"].as_f64().unwrap() > 0.0);
    // Indexed PNG.
    let dec = png::Decoder::new(std::io::BufReader::new(
        std::fs::File::open(dir.path().join("harbour-poster.reduced.png")).unwrap(),
    ));
    let reader = dec.read_info().unwrap();
    assert_eq!(reader.info().color_type, png::ColorType::Indexed);
    // A summary line on stderr, after at most one note (colour families kept) and one
    // warning (areas still far from their colour).
    let err = stderr(&o);
    let lines: Vec<&str> = err.lines().collect();
    let last = lines.last().copied().unwrap_or_default();
    assert!(
        last.contains("6 colours") && last.contains("ΔE2000"),
        "{err}"
    );
    assert!(lines.len() <= 3, "{err}");
    assert!(
        lines[..lines.len() - 1]
            .iter()
            .all(|l| l.starts_with("chromasift: note: ") || l.starts_with("chromasift: warning: ")),
        "{err}"
    );
    assert!(
        lines.iter().filter(|l| l.contains("warning")).count() <= 1,
        "{err}"
    );
}

#[test]
fn aerial_with_transparent_strip_soft_oklab_and_raw_uncertainty() {
    let dir = tempfile::tempdir().unwrap();
    let input = fixture("demo/valley-aerial.png");
    let o = reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "5",
        "--mode",
        "soft",
        "--beta",
        "auto",
        "--space",
        "oklab",
        "--uncertainty-raw",
        "--json",
        "-o",
        dir.path().to_str().unwrap(),
    ]);
    let doc = check_outputs(&input, dir.path(), "valley-aerial", 5);
    assert_eq!(doc["mode"], "soft");
    assert_eq!(doc["space"], "oklab");
    // --json prints the same document.
    let printed: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(printed, doc);
    // Float map agrees with the 8-bit map.
    let grey = image::open(dir.path().join("valley-aerial.uncertainty.png"))
        .unwrap()
        .to_luma8();
    let mut dec = tiff::decoder::Decoder::new(
        std::fs::File::open(dir.path().join("valley-aerial.uncertainty.tif")).unwrap(),
    )
    .unwrap();
    let (w, h) = dec.dimensions().unwrap();
    assert_eq!((w, h), grey.dimensions());
    let tiff::decoder::DecodingResult::F32(vals) = dec.read_image().unwrap() else {
        panic!("32-bit float TIFF expected")
    };
    for (v, g) in vals.iter().zip(grey.pixels()) {
        assert!((0.0..=1.0).contains(v));
        assert!((v * 255.0 - g[0] as f32).abs() <= 0.5 + 1e-3);
    }
    // Pixels at the transparent strip are certain (0) and took no part.
    assert!(vals[..10].iter().all(|&v| v == 0.0));
}

#[test]
fn same_output_bytes_on_one_and_two_threads() {
    let input = fixture("demo/valley-aerial.png");
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let dir = tempfile::tempdir().unwrap();
        let o = run(
            &[
                "reduce",
                input.to_str().unwrap(),
                "-k",
                "7",
                "--mode",
                "soft",
                "--restarts",
                "2",
                "--uncertainty-raw",
                "--dither",
                "floyd-steinberg",
                "-o",
                dir.path().to_str().unwrap(),
            ],
            &[("RAYON_NUM_THREADS", threads)],
        );
        assert!(o.status.success(), "{}", stderr(&o));
        let files: Vec<(String, Vec<u8>)> = files_in(dir.path())
            .into_iter()
            .map(|f| (f.clone(), std::fs::read(dir.path().join(&f)).unwrap()))
            .collect();
        outs.push(files);
    }
    assert_eq!(outs[0].len(), 5);
    assert_eq!(outs[0], outs[1]);
}

/// `--split-merge N` after a k-means++ start, and `--anneal` with its moves: the same
/// bytes on one and two threads, the setting recorded in the palette document, and an
/// SSE no higher than the same start without moves (each move is kept only if it lowers
/// the SSE on the grid summary; here, on the demo poster, it also does on every colour).
#[test]
fn split_merge_moves_same_bytes_on_one_and_two_threads() {
    let input = fixture("demo/harbour-poster.png");
    let sse_of = |dir: &std::path::Path| -> (f64, serde_json::Value) {
        let doc: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(dir.join("harbour-poster.palette.json")).unwrap(),
        )
        .unwrap();
        (doc["sse"].as_f64().unwrap(), doc)
    };
    let plain = tempfile::tempdir().unwrap();
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "12",
        "--objective",
        "plain",
        "-o",
        plain.path().to_str().unwrap(),
    ]);
    let (plain_sse, plain_doc) = sse_of(plain.path());
    assert!(plain_doc["settings"].get("split_merge").is_none());
    for extra in [&["--split-merge", "16"][..], &["--anneal"][..]] {
        let mut outs = Vec::new();
        for threads in ["1", "2"] {
            let dir = tempfile::tempdir().unwrap();
            let mut args = vec![
                "reduce",
                input.to_str().unwrap(),
                "-k",
                "12",
                "--objective",
                "plain",
            ];
            args.extend_from_slice(extra);
            args.extend_from_slice(&["-o", dir.path().to_str().unwrap()]);
            let o = run(&args, &[("RAYON_NUM_THREADS", threads)]);
            assert!(o.status.success(), "{}", stderr(&o));
            let files: Vec<(String, Vec<u8>)> = files_in(dir.path())
                .into_iter()
                .map(|f| (f.clone(), std::fs::read(dir.path().join(&f)).unwrap()))
                .collect();
            let (sse, doc) = sse_of(dir.path());
            if extra[0] == "--split-merge" {
                assert_eq!(doc["settings"]["split_merge"], 16, "{extra:?}");
                assert!(sse <= plain_sse, "{extra:?}: {sse} vs {plain_sse}");
            } else {
                assert_eq!(doc["settings"]["anneal"]["max_moves"], 32);
                assert!(doc["settings"].get("split_merge").is_none());
            }
            outs.push(files);
        }
        assert_eq!(outs[0], outs[1], "{extra:?}");
    }
    // With a ΔE2000 target, K comes from the warm-started path: the moves cannot act,
    // the user is told so, and the document does not claim them.
    let dir = tempfile::tempdir().unwrap();
    let o = run(
        &[
            "reduce",
            input.to_str().unwrap(),
            "--target-delta-e",
            "4",
            "--split-merge",
            "16",
            "-o",
            dir.path().to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("--split-merge have no effect"),
        "{}",
        stderr(&o)
    );
    assert!(sse_of(dir.path()).1["settings"]
        .get("split_merge")
        .is_none());
}

#[test]
fn uncertainty_peaks_at_the_boundary_of_a_two_colour_gradient() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("ramp.png");
    let (w, h) = (256u32, 8u32);
    write_rgb(
        &input,
        w,
        h,
        &common::gradient(w, h, [20, 40, 160], [240, 200, 40]),
    );
    let out = dir.path().join("out");
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "2",
        "-o",
        out.to_str().unwrap(),
    ]);
    let u = image::open(out.join("ramp.uncertainty.png"))
        .unwrap()
        .to_luma8();
    let red = read_rgba(&out.join("ramp.reduced.png"));
    let row: Vec<u8> = (0..w).map(|x| u.get_pixel(x, 0)[0]).collect();
    let peak = (0..w as usize)
        .max_by_key(|&x| (row[x], std::cmp::Reverse(x)))
        .unwrap();
    // The boundary is where the reduced colour switches.
    let switch = (1..w)
        .find(|&x| red.get_pixel(x, 0) != red.get_pixel(x - 1, 0))
        .unwrap() as usize;
    assert!(
        (peak as i64 - switch as i64).abs() <= 2,
        "peak {peak}, boundary {switch}"
    );
    assert!(
        row[peak] >= 250,
        "near-even split at the boundary: {}",
        row[peak]
    );
    assert!(
        row[0] < 60 && row[w as usize - 1] < 60,
        "ends are near certain: {} {}",
        row[0],
        row[w as usize - 1]
    );
    // Monotone rise towards the boundary from the left end.
    assert!(row[..switch.saturating_sub(2)]
        .windows(2)
        .all(|p| p[0] <= p[1]));
}

#[test]
fn dithering_uses_only_palette_colours_and_mixes_them() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("ramp.png");
    write_rgb(
        &input,
        128,
        16,
        &common::gradient(128, 16, [0, 0, 0], [255, 255, 255]),
    );
    let out = dir.path().join("out");
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "2",
        "--dither",
        "floyd-steinberg",
        "-o",
        out.to_str().unwrap(),
    ]);
    let doc = check_outputs(&input, &out, "ramp", 2);
    assert_eq!(doc["settings"]["dither"], "floyd-steinberg");
    let red = read_rgba(&out.join("ramp.reduced.png"));
    let switches = (1..128)
        .filter(|&x| red.get_pixel(x, 8) != red.get_pixel(x - 1, 8))
        .count();
    assert!(
        switches > 10,
        "error diffusion mixes the two colours ({switches} switches)"
    );
}

#[test]
fn k_above_the_distinct_colours_returns_them_all_once() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("three.png");
    let px: Vec<u8> = (0..60)
        .flat_map(|i| match i % 3 {
            0 => [255, 0, 0],
            1 => [0, 128, 0],
            _ => [10, 10, 250],
        })
        .collect();
    write_rgb(&input, 10, 6, &px);
    let out = dir.path().join("out");
    let o = reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "8",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(
        stderr(&o).contains("only 3 distinct colours"),
        "{}",
        stderr(&o)
    );
    let doc = check_outputs(&input, &out, "three", 3);
    assert_eq!(doc["mean_delta_e2000"].as_f64().unwrap(), 0.0);
    assert_eq!(doc["sse"].as_f64().unwrap(), 0.0);
}

#[test]
fn one_colour_image_gives_one_entry_and_a_zero_uncertainty_map() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("flat.png");
    write_rgb(&input, 9, 7, &[77u8, 120, 33].repeat(63));
    let out = dir.path().join("out");
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "4",
        "-o",
        out.to_str().unwrap(),
    ]);
    check_outputs(&input, &out, "flat", 1);
    let u = image::open(out.join("flat.uncertainty.png"))
        .unwrap()
        .to_luma8();
    assert!(u.pixels().all(|p| p[0] == 0));
}

#[test]
fn sixteen_bit_input_is_reduced() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("deep.png");
    let (w, h) = (64u32, 32u32);
    let mut px: Vec<u16> = Vec::new();
    for y in 0..h {
        for x in 0..w {
            px.extend_from_slice(&[(x * 1000) as u16, (y * 2000) as u16, 30000]);
        }
    }
    let bytes: Vec<u8> = px.iter().flat_map(|v| v.to_ne_bytes()).collect();
    image::save_buffer(&input, &bytes, w, h, image::ExtendedColorType::Rgb16).unwrap();
    let out = dir.path().join("out");
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "4",
        "-o",
        out.to_str().unwrap(),
    ]);
    let doc = palette_doc(&out, "deep");
    assert_eq!(doc["k"], 4);
    let total: u64 = doc["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["pixels"].as_u64().unwrap())
        .sum();
    assert_eq!(total, (w * h) as u64);
}

#[test]
fn semi_transparent_pixels_keep_their_alpha() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("glass.png");
    let px: Vec<u8> = (0..64u32)
        .flat_map(|i| {
            [
                (i * 4) as u8,
                100,
                200,
                if i < 8 { 0 } else { 128 + i as u8 },
            ]
        })
        .collect();
    write_rgba(&input, 8, 8, &px);
    let out = dir.path().join("out");
    reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "3",
        "-o",
        out.to_str().unwrap(),
    ]);
    check_outputs(&input, &out, "glass", 3);
}

// ---- Bad input: one line naming the file and the problem, exit 2, nothing written ----

fn assert_refused(args: &[&str], out: &Path, expect_in_message: &[&str]) {
    let before = files_in(out);
    let o = run(args, &[]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    assert!(err.starts_with("chromasift: error: "), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    for e in expect_in_message {
        assert!(err.contains(e), "{args:?}: expected '{e}' in: {err}");
    }
    assert_eq!(files_in(out), before, "no output files left behind");
    assert!(o.stdout.is_empty());
}

fn bad_file(name: &str, bytes: &[u8]) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join(name);
    std::fs::write(&p, bytes).unwrap();
    (dir, p)
}

#[test]
fn missing_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    assert_refused(
        &["reduce", "no-such-file.png", "-o", out.to_str().unwrap()],
        &out,
        &["no-such-file.png", "cannot open"],
    );
    assert!(!out.exists());
}

#[test]
fn not_an_image() {
    let (dir, p) = bad_file("notes.png", b"these are words, not pixels\n");
    let out = dir.path().join("out");
    assert_refused(
        &["reduce", p.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &out,
        &["notes.png"],
    );
    assert!(
        !out.exists(),
        "an output folder made for a failed run is removed"
    );
}

#[test]
fn empty_file() {
    let (dir, p) = bad_file("empty.png", b"");
    let out = dir.path().join("out");
    assert_refused(
        &["reduce", p.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &out,
        &["empty.png", "empty"],
    );
}

#[test]
fn truncated_image() {
    let full = std::fs::read(fixture("demo/harbour-poster.png")).unwrap();
    let (dir, p) = bad_file("cut.png", &full[..full.len() / 2]);
    let out = dir.path().join("out");
    assert_refused(
        &["reduce", p.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &out,
        &["cut.png"],
    );
}

/// A PNG whose header claims 100 000 × 100 000 pixels (a decompression bomb): refused
/// from the header alone, at once and in little memory.
#[test]
fn huge_header_is_refused_before_decoding() {
    let mut png = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut png, 1, 1);
        enc.set_color(png::ColorType::Rgb);
        let mut w = enc.write_header().unwrap();
        w.write_image_data(&[1, 2, 3]).unwrap();
    }
    // Patch IHDR width and height (bytes 16..24) and its CRC (bytes 29..33).
    png[16..20].copy_from_slice(&100_000u32.to_be_bytes());
    png[20..24].copy_from_slice(&100_000u32.to_be_bytes());
    let crc = crc32(&png[12..29]);
    png[29..33].copy_from_slice(&crc.to_be_bytes());
    let (dir, p) = bad_file("bomb.png", &png);
    let out = dir.path().join("out");
    let t = std::time::Instant::now();
    assert_refused(
        &["reduce", p.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &out,
        &["bomb.png", "over the limit"],
    );
    assert!(t.elapsed().as_secs() < 10);
    // A tight --max-pixels refuses an ordinary image; a generous one accepts it.
    let poster = fixture("demo/harbour-poster.png");
    assert_refused(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "--max-pixels",
            "1000",
            "-o",
            out.to_str().unwrap(),
        ],
        &out,
        &["over the limit"],
    );
    reduce_ok(&[
        "reduce",
        poster.to_str().unwrap(),
        "-k",
        "2",
        "--max-pixels",
        "76800",
        "-o",
        out.to_str().unwrap(),
    ]);
}

#[test]
fn k_zero() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let poster = fixture("demo/harbour-poster.png");
    assert_refused(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "0",
            "-o",
            out.to_str().unwrap(),
        ],
        &out,
        &["k must be at least 1"],
    );
    assert!(!out.exists());
}

#[test]
fn bad_beta_values() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let poster = fixture("demo/harbour-poster.png");
    for b in ["0", "-1", "nan", "inf", "-inf"] {
        let args = [
            "reduce",
            poster.to_str().unwrap(),
            "--mode",
            "soft",
            "--beta",
            b,
            "-o",
            out.to_str().unwrap(),
        ];
        assert_refused(&args, &out, &["beta must be a positive finite number"]);
    }
}

#[test]
fn output_path_is_an_existing_file() {
    let (dir, file) = bad_file("taken", b"keep me");
    let poster = fixture("demo/harbour-poster.png");
    assert_refused(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-o",
            file.to_str().unwrap(),
        ],
        dir.path(),
        &["taken", "not a folder"],
    );
    assert_eq!(std::fs::read(&file).unwrap(), b"keep me");
}

#[test]
fn output_not_writable() {
    let (dir, file) = bad_file("plain-file", b"x");
    let poster = fixture("demo/harbour-poster.png");
    let out = file.join("sub");
    assert_refused(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        dir.path(),
        &["plain-file", "cannot use output folder"],
    );
}

/// An output that would land on the input (here through a link named like the output)
/// is refused, and the input is untouched.
#[test]
fn output_would_overwrite_the_input() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("art.png");
    std::fs::copy(fixture("demo/harbour-poster.png"), &input).unwrap();
    let before = std::fs::read(&input).unwrap();
    let out = dir.path().join("out");
    std::fs::create_dir(&out).unwrap();
    std::os::unix::fs::symlink(&input, out.join("art.palette.json")).unwrap();
    assert_refused(
        &[
            "reduce",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &out,
        &["art.palette.json", "overwrite the input"],
    );
    assert_eq!(std::fs::read(&input).unwrap(), before);
}

#[test]
fn all_transparent_image() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("clear.png");
    write_rgba(&input, 4, 4, &[0u8; 64]);
    let out = dir.path().join("out");
    assert_refused(
        &[
            "reduce",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &out,
        &["clear.png", "transparent"],
    );
}

#[test]
fn unknown_option_value_is_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let poster = fixture("demo/harbour-poster.png");
    assert_refused(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "--space",
            "rgb",
            "-o",
            out.to_str().unwrap(),
        ],
        &out,
        &["rgb"],
    );
}

#[test]
fn help_shows_examples() {
    let o = run(&["reduce", "--help"], &[]);
    assert!(o.status.success());
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("Examples:")
            && text.contains("chromasift reduce fixtures/demo/harbour-poster.png"),
        "{text}"
    );
}

/// A document printed with `--json` that cannot be written (a full device) is an error:
/// exit status 2 and one line naming standard output, not a silent success.
#[test]
fn a_failed_write_to_standard_output_is_an_error() {
    let Ok(full) = std::fs::OpenOptions::new().write(true).open("/dev/full") else {
        return; // not Linux: no device that is always full
    };
    let dir = tempfile::tempdir().unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_chromasift"))
        .args([
            "reduce",
            fixture("demo/harbour-poster.png").to_str().unwrap(),
            "-k",
            "4",
            "--json",
            "-o",
            dir.path().to_str().unwrap(),
        ])
        .stdout(full)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("chromasift: error: standard output:"),
        "{}",
        stderr(&o)
    );
}

/// Two inputs of one name stem into one folder: the second run says it replaced the
/// first's outputs; running the same input again says nothing of the kind.
#[test]
fn outputs_of_another_input_with_the_same_stem_are_named_when_replaced() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let (png, jpg) = (fixture("profiles/p3.png"), fixture("profiles/p3.jpg"));
    let go = |input: &Path| {
        stderr(&reduce_ok(&[
            "reduce",
            input.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ]))
    };
    assert!(!go(&png).contains("same name stem"));
    let e = go(&jpg);
    assert!(
        e.contains("made from p3.png") && e.contains("p3.jpg"),
        "{e}"
    );
    assert_eq!(palette_doc(&out, "p3")["input"], "p3.jpg");
    assert!(!go(&jpg).contains("same name stem"));
}

#[test]
fn one_colour_is_named_in_the_singular() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("one.png");
    write_rgb(&input, 4, 3, &[200u8, 30, 30].repeat(12));
    let out = dir.path().join("out");
    let o = reduce_ok(&[
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "4",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert!(
        stderr(&o).contains("only 1 distinct colour; returning it instead of 4"),
        "{}",
        stderr(&o)
    );
}
