//! One palette, one numbering: with a given palette (`batch --palette`, `batch --shared`,
//! `apply`), every image's JSON, CSV and indexed PNG list the palette's colours in its
//! own order, all of them, with their names. The PNG palettes and pixel values are read
//! back with the `png` crate (PLTE chunk and raw indices), a reader independent of ours.

mod common;

use common::{run, stderr};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Six named colours, in a deliberate order (not by lightness or by any pixel count).
const PALETTE: [(&str, [u8; 3]); 6] = [
    ("Moss", [90, 122, 58]),
    ("Navy", [27, 42, 74]),
    ("Off White, warm", [242, 239, 230]),
    ("Brick", [162, 59, 42]),
    ("Mustard", [214, 170, 40]),
    ("Slate", [96, 104, 118]),
];

/// An image of vertical stripes: `(palette index, columns)` in turn, 10 rows high. Its
/// pixels are exactly palette colours, so each maps onto its own colour.
fn stripes(path: &Path, parts: &[(usize, u32)]) -> Vec<u64> {
    let w: u32 = parts.iter().map(|p| p.1).sum();
    let h = 10u32;
    let mut rgb = Vec::new();
    let mut counts = vec![0u64; PALETTE.len()];
    for _ in 0..h {
        for &(i, n) in parts {
            for _ in 0..n {
                rgb.extend_from_slice(&PALETTE[i].1);
            }
        }
    }
    for &(i, n) in parts {
        counts[i] += (n * h) as u64;
    }
    common::write_rgb(path, w, h, &rgb);
    counts
}

/// Three images with different colour contents; the pixel count of every palette colour
/// in each.
fn folder(root: &Path) -> (PathBuf, Vec<(&'static str, Vec<u64>)>) {
    let d = root.join("scans");
    std::fs::create_dir_all(&d).unwrap();
    let a = stripes(&d.join("a.png"), &[(3, 30), (1, 5), (0, 12)]);
    let b = stripes(&d.join("b.png"), &[(4, 7), (2, 40)]);
    let c = stripes(&d.join("c.png"), &[(5, 9), (1, 21), (2, 3)]);
    (d, vec![("a", a), ("b", b), ("c", c)])
}

/// The PLTE entries and the pixel values of an indexed PNG, read with the `png` crate.
fn plte_and_indices(path: &Path) -> (Vec<[u8; 3]>, Vec<u8>) {
    let dec = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let mut reader = dec.read_info().unwrap();
    let info = reader.info();
    assert_eq!(
        info.color_type,
        png::ColorType::Indexed,
        "{}",
        path.display()
    );
    // 1, 2, 4 or 8 bits per index, as PNG allows (ISO/IEC 15948 table 11.1).
    let bits = info.bit_depth as usize;
    let width = info.width as usize;
    let plte: Vec<[u8; 3]> = info
        .palette
        .as_ref()
        .expect("an indexed PNG has a PLTE chunk")
        .chunks_exact(3)
        .map(|c| [c[0], c[1], c[2]])
        .collect();
    let mut buf = vec![0u8; reader.output_buffer_size().unwrap()];
    let frame = reader.next_frame(&mut buf).unwrap();
    // Rows are packed most significant bits first; unpack every index to a byte.
    let mut out = Vec::new();
    for row in buf[..frame.buffer_size()].chunks_exact(frame.line_size) {
        for x in 0..width {
            let bit = x * bits;
            let byte = row[bit / 8];
            let shift = 8 - bits - bit % 8;
            out.push((byte >> shift) & ((1u16 << bits) - 1) as u8);
        }
    }
    (plte, out)
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Every output of image `stem` in `out` follows `colours` (in order) and, when given,
/// `names`; pixel counts are `counts`.
fn check_outputs(out: &Path, stem: &str, colours: &[[u8; 3]], names: &[&str], counts: &[u64]) {
    // The indexed PNG: PLTE is the palette in its order (no transparent entry here), and
    // every pixel value is the index of the source pixel's colour in that palette.
    let (plte, idx) = plte_and_indices(&out.join(format!("{stem}.reduced.png")));
    assert_eq!(plte, colours, "{stem}: PLTE");
    let mut seen = vec![0u64; colours.len()];
    for &i in &idx {
        seen[i as usize] += 1;
    }
    assert_eq!(seen, counts, "{stem}: pixels per index in the PNG");
    // The palette document: every colour, in order, zero where unused, names carried.
    let doc = json(&out.join(format!("{stem}.palette.json")));
    let colors = doc["colors"].as_array().unwrap();
    assert_eq!(colors.len(), colours.len(), "{stem}: all colours listed");
    assert_eq!(doc["k"], colours.len());
    let total: u64 = counts.iter().sum();
    for (i, c) in colors.iter().enumerate() {
        assert_eq!(c["index"], i);
        assert_eq!(c["hex"], hex(colours[i]), "{stem}: colour {i}");
        assert_eq!(c["pixels"], counts[i], "{stem}: colour {i}");
        let share = c["share"].as_f64().unwrap();
        assert!((share - counts[i] as f64 / total as f64).abs() < 1e-12);
        if names.is_empty() {
            assert!(c.get("name").is_none(), "{c}");
        } else {
            assert_eq!(c["name"], names[i], "{stem}: colour {i}");
        }
    }
    // The CSV: one row per colour in the same order, one shape, a name column only when
    // the palette names its colours.
    let csv = std::fs::read_to_string(out.join(format!("{stem}.palette.csv"))).unwrap();
    let mut lines = csv.lines();
    let header = lines.next().unwrap();
    let want_header = if names.is_empty() {
        "index,hex,L,a,b,pixels,share,mean_uncertainty"
    } else {
        "index,hex,L,a,b,pixels,share,mean_uncertainty,name"
    };
    assert_eq!(header, want_header);
    let rows: Vec<&str> = lines.collect();
    assert_eq!(rows.len(), colours.len());
    for (i, r) in rows.iter().enumerate() {
        assert!(r.starts_with(&format!("{i},{},", hex(colours[i]))), "{r}");
        assert!(r.contains(&format!(",{},", counts[i])), "{r}");
        if let Some(n) = names.get(i) {
            let quoted = if n.contains(',') {
                format!("\"{n}\"")
            } else {
                n.to_string()
            };
            assert!(r.ends_with(&format!(",{quoted}")), "{r}");
        }
    }
}

/// SHA-256 as `sha256sum` prints it.
fn sha256(bytes: &[u8]) -> String {
    use sha2::Digest;
    sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

#[test]
fn batch_palette_keeps_the_palettes_order_names_and_numbers_in_every_file() {
    let root = tempfile::tempdir().unwrap();
    let (scans, images) = folder(root.path());
    let pal = root.path().join("house colours.csv");
    let mut text = String::from("name,hex\n");
    for (n, c) in PALETTE {
        let n = if n.contains(',') {
            format!("\"{n}\"")
        } else {
            n.into()
        };
        text.push_str(&format!("{n},{}\n", hex(c)));
    }
    std::fs::write(&pal, &text).unwrap();
    let out = root.path().join("out");
    let o = run(
        &[
            "batch",
            scans.to_str().unwrap(),
            "--palette",
            pal.to_str().unwrap(),
            "-k",
            "3",
            "--restarts",
            "4",
            "-o",
            out.to_str().unwrap(),
            "-q",
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    // One note on standard error for the settings the palette makes meaningless.
    let err = stderr(&o);
    assert_eq!(err.matches("no effect").count(), 1, "{err}");
    let colours: Vec<[u8; 3]> = PALETTE.iter().map(|p| p.1).collect();
    let names: Vec<&str> = PALETTE.iter().map(|p| p.0).collect();
    for (stem, counts) in &images {
        check_outputs(&out, stem, &colours, &names, counts);
        let doc = json(&out.join(format!("{stem}.palette.json")));
        // The palette applied, by its file name (not its folder: the same palette used
        // from two places gives the same documents), with the checksum of its bytes.
        assert_eq!(
            doc["given_palette"]["file"],
            pal.file_name().unwrap().to_str().unwrap()
        );
        assert_eq!(doc["given_palette"]["sha256"], sha256(text.as_bytes()));
        assert_eq!(doc["given_palette"]["colours"], 6);
        // No K claimed that was not asked for: the palette's size; the unused settings
        // are listed.
        assert_eq!(doc["settings"]["k_requested"], 6);
        assert_eq!(
            doc["settings"]["not_applied"],
            serde_json::json!(["k", "restarts"])
        );
        assert_eq!(doc["settings"]["restarts"], 1);
        assert_eq!(doc["mode"], doc["engine"]["mode"]);
        // Pixels are exactly palette colours: no loss.
        assert_eq!(doc["p95_delta_e2000"], 0.0);
    }
    // One colour, one index across files: each colour's index is the same in every PNG.
    let report = json(&out.join("batch-report.json"));
    assert_eq!(report["shared_palette"], pal.to_str().unwrap());
    assert_eq!(report["given_palette"]["sha256"], sha256(text.as_bytes()));
    assert_eq!(report["not_applied"], serde_json::json!(["k", "restarts"]));
    assert_eq!(report["engine"]["restarts"], 1);
    for f in report["files"].as_array().unwrap() {
        assert_eq!(f["colors"], 6);
        assert_eq!(f["p95_delta_e2000"], 0.0);
        assert_eq!(f["p99_delta_e2000"], 0.0);
    }
    let csv = std::fs::read_to_string(out.join("batch-report.csv")).unwrap();
    assert!(csv.starts_with(
        "input,status,error,colors,mean_delta_e2000,p95_delta_e2000,p99_delta_e2000,seconds\n"
    ));
    assert!(
        csv.lines().skip(1).all(|l| l.split(',').count() == 8),
        "{csv}"
    );

    // A document written by the batch is itself a palette: `apply` with it keeps the
    // order and the names.
    let applied = root.path().join("applied");
    let doc_path = out.join("b.palette.json");
    let o = run(
        &[
            "apply",
            scans.join("c.png").to_str().unwrap(),
            "--palette",
            doc_path.to_str().unwrap(),
            "-o",
            applied.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let counts_c = &images.iter().find(|i| i.0 == "c").unwrap().1;
    check_outputs(&applied, "c", &colours, &names, counts_c);
    let doc = json(&applied.join("c.palette.json"));
    assert_eq!(doc["settings"]["k_requested"], 6);
    assert!(doc["settings"].get("not_applied").is_none(), "{doc}");
    assert_eq!(
        doc["given_palette"]["sha256"],
        sha256(&std::fs::read(&doc_path).unwrap())
    );
}

#[test]
fn batch_shared_numbers_every_image_as_the_shared_palette() {
    let root = tempfile::tempdir().unwrap();
    let (scans, images) = folder(root.path());
    let out = root.path().join("out");
    let o = run(
        &[
            "batch",
            scans.to_str().unwrap(),
            "--shared",
            "-k",
            "8",
            "-o",
            out.to_str().unwrap(),
            "-q",
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let shared_path = out.join("shared.palette.json");
    let shared = json(&shared_path);
    // The six colours hold fewer distinct colours than K: each is its own palette colour,
    // in the shared palette's order (by pixel count over the whole folder).
    let colours: Vec<[u8; 3]> = shared["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let h = c["hex"].as_str().unwrap();
            let v = u32::from_str_radix(&h[1..], 16).unwrap();
            [(v >> 16) as u8, (v >> 8) as u8, v as u8]
        })
        .collect();
    assert_eq!(colours.len(), 6);
    let bytes = std::fs::read(&shared_path).unwrap();
    for (stem, counts) in &images {
        // Counts re-ordered as the shared palette orders the colours.
        let by_shared: Vec<u64> = colours
            .iter()
            .map(|c| counts[PALETTE.iter().position(|p| p.1 == *c).unwrap()])
            .collect();
        check_outputs(&out, stem, &colours, &[], &by_shared);
        let doc = json(&out.join(format!("{stem}.palette.json")));
        assert_eq!(doc["given_palette"]["file"], "shared.palette.json");
        assert_eq!(doc["given_palette"]["sha256"], sha256(&bytes));
        // The K asked for is recorded; the fitting settings acted on the shared palette.
        assert_eq!(doc["settings"]["k_requested"], 8);
        assert!(doc["settings"].get("not_applied").is_none());
    }
    let report = json(&out.join("batch-report.json"));
    assert_eq!(report["shared_palette"], "shared.palette.json");
    assert_eq!(report["given_palette"]["sha256"], sha256(&bytes));
    // A second run finds every image up to date.
    let o = run(
        &[
            "batch",
            scans.to_str().unwrap(),
            "--shared",
            "-k",
            "8",
            "-o",
            out.to_str().unwrap(),
            "-q",
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let report = json(&out.join("batch-report.json"));
    assert_eq!(report["totals"]["skipped"], 3, "{report}");
}

/// A fitted palette (no palette given) keeps its order by pixel count and lists only the
/// colours used.
#[test]
fn a_fitted_palette_is_still_ordered_by_pixel_count() {
    let root = tempfile::tempdir().unwrap();
    let (scans, _) = folder(root.path());
    let out = root.path().join("out");
    let o = run(
        &[
            "reduce",
            scans.join("a.png").to_str().unwrap(),
            "-k",
            "6",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    // a.png: Brick 300 px, Moss 120 px, Navy 50 px.
    let (plte, _) = plte_and_indices(&out.join("a.reduced.png"));
    assert_eq!(plte, [PALETTE[3].1, PALETTE[0].1, PALETTE[1].1]);
    let doc = json(&out.join("a.palette.json"));
    assert!(doc.get("given_palette").is_none());
    assert_eq!(doc["settings"]["k_requested"], 6);
}
