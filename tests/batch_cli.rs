//! `batch`, `learn`, `apply` and `histogram` end to end on an invented folder of images.

mod common;

use common::{fixture, run, stderr, tree};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// An invented shoot: two demo images, a small gradient in a sub-folder, a corrupt JPEG
/// and a text file.
fn shoot(root: &Path) -> PathBuf {
    let s = root.join("shoot");
    std::fs::create_dir_all(s.join("day2/raw")).unwrap();
    std::fs::copy(fixture("demo/harbour-poster.png"), s.join("poster.png")).unwrap();
    std::fs::copy(fixture("demo/valley-aerial.png"), s.join("day2/aerial.png")).unwrap();
    common::write_rgb(
        &s.join("day2/raw/ramp.png"),
        64,
        16,
        &common::gradient(64, 16, [10, 30, 90], [250, 220, 120]),
    );
    std::fs::write(
        s.join("day2/broken.jpg"),
        b"\xff\xd8\xff\xe0 not really a jpeg",
    )
    .unwrap();
    std::fs::write(s.join("notes.txt"), b"shot list").unwrap();
    s
}

fn report(out: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap()
}

fn status_of(r: &Value, input: &str) -> String {
    r["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["input"] == input)
        .unwrap()["status"]
        .as_str()
        .unwrap()
        .to_string()
}

#[test]
fn batch_mirrors_reports_survives_a_bad_file_and_resumes() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    let before = tree(&s);
    let out = root.path().join("reduced");
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "5",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(1), "one file failed: {}", stderr(&o));
    assert_eq!(tree(&s), before, "the input tree is untouched");
    for f in [
        "poster.reduced.png",
        "poster.palette.json",
        "day2/aerial.uncertainty.png",
        "day2/raw/ramp.palette.csv",
    ] {
        assert!(out.join(f).is_file(), "{f}");
    }
    let r = report(&out);
    assert_eq!(status_of(&r, "poster.png"), "ok");
    assert_eq!(status_of(&r, "day2/broken.jpg"), "failed");
    let broken = r["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["input"] == "day2/broken.jpg")
        .unwrap();
    assert!(broken["error"].as_str().unwrap().contains("broken.jpg"));
    assert_eq!(r["totals"]["ok"], 3);
    assert_eq!(r["totals"]["failed"], 1);
    assert_eq!(r["skipped_not_images"], serde_json::json!(["notes.txt"]));
    let csv = std::fs::read_to_string(out.join("batch-report.csv")).unwrap();
    assert!(csv.starts_with(
        "input,status,error,colors,mean_delta_e2000,p95_delta_e2000,p99_delta_e2000,seconds\n"
    ));
    // One header and one row per file, every row with the header's eight fields (a plain
    // CSV reader takes the file whole; RFC 4180 section 2, item 4).
    assert_eq!(csv.lines().count(), 1 + 4);
    let fields = |l: &str| {
        let mut quoted = false;
        1 + l
            .chars()
            .filter(|&c| {
                if c == '"' {
                    quoted = !quoted;
                }
                c == ',' && !quoted
            })
            .count()
    };
    assert!(csv.lines().all(|l| fields(l) == 8), "{csv}");
    assert!(!csv.contains("TOTAL"));
    assert!(!tree(&out)
        .keys()
        .any(|k| k.to_string_lossy().contains(".chromasift-tmp-")));

    // A rerun skips what is up to date; a changed input is redone.
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "5",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(1));
    let r = report(&out);
    assert_eq!(r["totals"]["skipped"], 3);
    std::fs::copy(fixture("demo/harbour-poster.png"), s.join("poster.png")).unwrap();
    let later = std::time::SystemTime::now() + std::time::Duration::from_secs(5);
    std::fs::File::options()
        .write(true)
        .open(s.join("poster.png"))
        .unwrap()
        .set_modified(later)
        .unwrap();
    run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "5",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    let r = report(&out);
    assert_eq!(status_of(&r, "poster.png"), "ok");
    assert_eq!(status_of(&r, "day2/aerial.png"), "skipped");
    // Other settings: everything is redone; --force redoes all.
    run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(report(&out)["totals"]["ok"], 3);
    // Split-and-merge moves are a setting too: adding them redoes every image.
    run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "4",
            "--split-merge",
            "8",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(report(&out)["totals"]["ok"], 3);
    run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "4",
            "--force",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(report(&out)["totals"]["ok"], 3);
}

#[test]
fn output_inside_the_input_is_refused() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    let before = tree(&s);
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-o",
            s.join("out").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("inside the input folder"),
        "{}",
        stderr(&o)
    );
    assert_eq!(tree(&s), before);
}

fn palette_hexes(doc: &Value) -> Vec<String> {
    doc["colors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["hex"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn shared_palette_learn_apply_and_histogram_shards_agree() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    std::fs::remove_file(s.join("day2/broken.jpg")).unwrap();
    let out = root.path().join("shared");
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "6",
            "--shared",
            "--jobs",
            "2",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let shared: Value =
        serde_json::from_slice(&std::fs::read(out.join("shared.palette.json")).unwrap()).unwrap();
    let hexes = palette_hexes(&shared);
    assert_eq!(hexes.len(), 6);
    // Every output uses only the shared colours.
    for img in [
        "poster.reduced.png",
        "day2/aerial.reduced.png",
        "day2/raw/ramp.reduced.png",
    ] {
        let px = common::read_rgba(&out.join(img));
        for p in px.pixels().filter(|p| p[3] > 0) {
            let h = chromasift::colour::hex([p[0], p[1], p[2]]);
            assert!(
                hexes.contains(&h),
                "{img} uses {h}, not in the shared palette"
            );
        }
    }
    // The same palette from `learn` on the folder, and from histogram shards made by
    // separate processes (standing in for the nodes of a cluster).
    let learned = root.path().join("brand.palette.json");
    let o = run(
        &[
            "learn",
            s.to_str().unwrap(),
            "-k",
            "6",
            "-o",
            learned.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let part_a = root.path().join("a.hist");
    let part_b = root.path().join("b.hist");
    let mut kids = [
        std::process::Command::new(env!("CARGO_BIN_EXE_chromasift"))
            .args([
                "histogram",
                s.join("poster.png").to_str().unwrap(),
                "-o",
                part_a.to_str().unwrap(),
            ])
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap(),
        std::process::Command::new(env!("CARGO_BIN_EXE_chromasift"))
            .args([
                "histogram",
                s.join("day2").to_str().unwrap(),
                "-o",
                part_b.to_str().unwrap(),
            ])
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap(),
    ];
    for k in kids.iter_mut() {
        assert!(k.wait().unwrap().success());
    }
    let whole = root.path().join("whole.hist");
    assert!(run(
        &[
            "histogram",
            s.to_str().unwrap(),
            "-o",
            whole.to_str().unwrap()
        ],
        &[]
    )
    .status
    .success());
    let a = chromasift::batch::decode_histogram(&std::fs::read(&part_a).unwrap(), &part_a).unwrap();
    let b = chromasift::batch::decode_histogram(&std::fs::read(&part_b).unwrap(), &part_b).unwrap();
    let w = chromasift::batch::decode_histogram(&std::fs::read(&whole).unwrap(), &whole).unwrap();
    assert_eq!(
        chromasift::histogram::Histogram::merge(&[a, b]).unwrap(),
        w,
        "merged shards equal the whole"
    );
    let from_parts = root.path().join("parts.palette.json");
    assert!(run(
        &[
            "learn",
            part_a.to_str().unwrap(),
            part_b.to_str().unwrap(),
            "-k",
            "6",
            "-o",
            from_parts.to_str().unwrap()
        ],
        &[]
    )
    .status
    .success());
    let l1: Value = serde_json::from_slice(&std::fs::read(&learned).unwrap()).unwrap();
    assert_eq!(palette_hexes(&l1), hexes);
    // The histogram files list the images they were made from, so the palette learned
    // from them is the one learned from the folder byte for byte, inputs included: the
    // untagged images, by the paths they were given, in file-name order.
    let files: Vec<&str> = l1["input_profiles"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            assert_eq!(r["input"], "untagged", "{r}");
            r["file"].as_str().unwrap()
        })
        .collect();
    assert!(files.len() >= 2 && files.is_sorted(), "{files:?}");
    assert!(files.contains(&s.join("poster.png").to_str().unwrap()));
    assert_eq!(
        std::fs::read(&learned).unwrap(),
        std::fs::read(&from_parts).unwrap()
    );
    // apply with the learned palette equals the shared batch output, byte for byte.
    let applied = root.path().join("applied");
    let o = run(
        &[
            "apply",
            s.join("poster.png").to_str().unwrap(),
            "--palette",
            learned.to_str().unwrap(),
            "-o",
            applied.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    for f in ["poster.reduced.png", "poster.uncertainty.png"] {
        assert_eq!(
            std::fs::read(applied.join(f)).unwrap(),
            std::fs::read(out.join(f)).unwrap(),
            "{f}"
        );
    }
}

#[test]
fn one_and_two_jobs_give_the_same_outputs() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    let mut trees = Vec::new();
    for jobs in ["1", "2"] {
        let out = root.path().join(format!("j{jobs}"));
        run(
            &[
                "batch",
                s.to_str().unwrap(),
                "-k",
                "5",
                "--jobs",
                jobs,
                "-o",
                out.to_str().unwrap(),
            ],
            &[],
        );
        let mut t = tree(&out);
        t.remove(Path::new("batch-report.json"));
        t.remove(Path::new("batch-report.csv"));
        trees.push(t);
    }
    assert!(trees[0].len() >= 12);
    assert_eq!(trees[0], trees[1]);
}

#[test]
fn corrupt_or_foreign_histogram_files_are_refused() {
    let root = tempfile::tempdir().unwrap();
    let fake = root.path().join("part.hist");
    std::fs::write(&fake, b"CSHIST\x00\x01 truncated").unwrap();
    let o = run(
        &[
            "learn",
            fake.to_str().unwrap(),
            "-o",
            root.path().join("p.json").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("part.hist") && stderr(&o).contains("histogram file"),
        "{}",
        stderr(&o)
    );
    assert!(!root.path().join("p.json").exists());
    let bad_palette = root.path().join("pal.json");
    std::fs::write(&bad_palette, b"{\"not\": \"a palette\"}").unwrap();
    let o = run(
        &[
            "apply",
            fixture("demo/harbour-poster.png").to_str().unwrap(),
            "--palette",
            bad_palette.to_str().unwrap(),
            "-o",
            root.path().join("o").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("pal.json") && stderr(&o).contains("not a palette document"));
}

/// Two images of one folder that share a file stem (`scan.png`, `scan.bmp`) each keep
/// their own outputs, named by the whole file name, on any number of jobs; a rerun finds
/// both up to date.
#[test]
fn images_sharing_a_stem_keep_their_own_outputs() {
    let root = tempfile::tempdir().unwrap();
    let s = root.path().join("scans");
    std::fs::create_dir_all(&s).unwrap();
    let red = common::gradient(48, 12, [200, 20, 20], [250, 120, 90]);
    let blue = common::gradient(48, 12, [10, 30, 160], [90, 200, 250]);
    common::write_rgb(&s.join("scan.png"), 48, 12, &red);
    common::write_rgb(&s.join("scan.bmp"), 48, 12, &blue);
    common::write_rgb(&s.join("other.png"), 48, 12, &blue);
    for jobs in ["1", "2"] {
        let out = root.path().join(format!("out{jobs}"));
        let args = [
            "batch",
            s.to_str().unwrap(),
            "-k",
            "3",
            "--jobs",
            jobs,
            "--review-page",
            "-o",
            out.to_str().unwrap(),
        ];
        let o = run(&args, &[]);
        assert!(o.status.success(), "{}", stderr(&o));
        for (name, colour) in [("scan.png", &red), ("scan.bmp", &blue)] {
            let doc: Value = serde_json::from_slice(
                &std::fs::read(out.join(format!("{name}.palette.json"))).unwrap(),
            )
            .unwrap();
            assert_eq!(doc["input"], name);
            // The reduced image is made from this input: its first pixel is near the
            // input's first pixel, not the other image's.
            let px = common::read_rgba(&out.join(format!("{name}.reduced.png")));
            let p = px.get_pixel(0, 0);
            let d: i32 = (0..3).map(|c| (p[c] as i32 - colour[c] as i32).abs()).sum();
            assert!(d < 60, "{name}: {p:?} vs {:?}", &colour[..3]);
        }
        assert!(out.join("other.palette.json").is_file());
        assert!(!out.join("scan.palette.json").exists());
        let sheet = std::fs::read_to_string(out.join("review.html")).unwrap();
        assert!(sheet.contains("href=\"scan.bmp.reduced.png\""), "{sheet}");
        let again = run(&args, &[]);
        assert!(again.status.success(), "{}", stderr(&again));
        let r = report(&out);
        assert_eq!(status_of(&r, "scan.png"), "skipped");
        assert_eq!(status_of(&r, "scan.bmp"), "skipped");
    }
}

/// `batch --palette` never writes over the palette document it maps onto, even when that
/// document sits in the output folder under an output's name.
#[test]
fn batch_spares_its_palette_document() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    let out = root.path().join("out");
    let o = run(
        &[
            "reduce",
            s.join("poster.png").to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let pal = out.join("poster.palette.json");
    let before = std::fs::read(&pal).unwrap();
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "--palette",
            pal.to_str().unwrap(),
            "--force",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(std::fs::read(&pal).unwrap(), before);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let r = report(&out);
    assert_eq!(status_of(&r, "poster.png"), "failed");
    assert_eq!(status_of(&r, "day2/aerial.png"), "ok");
}

/// `apply` says when fitting flags cannot change its result (the palette is fixed).
#[test]
fn apply_refuses_fitting_flags_and_batch_notes_them() {
    let root = tempfile::tempdir().unwrap();
    let s = shoot(root.path());
    let pal_dir = root.path().join("pal");
    let poster = s.join("poster.png");
    let o = run(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            pal_dir.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let pal = pal_dir.join("poster.palette.json");
    let out = root.path().join("applied");
    let base = [
        "apply",
        poster.to_str().unwrap(),
        "--palette",
        pal.to_str().unwrap(),
    ];
    let plain = run(&[&base[..], &["-o", out.to_str().unwrap()]].concat(), &[]);
    assert!(plain.status.success(), "{}", stderr(&plain));
    assert!(!stderr(&plain).contains("no effect"), "{}", stderr(&plain));
    // `apply` shows only the flags it uses: a fitting flag is refused in one line that
    // names it, and nothing is written.
    let fresh = root.path().join("applied-k");
    let with_k = run(
        &[
            &base[..],
            &["--restarts", "4", "-o", fresh.to_str().unwrap()],
        ]
        .concat(),
        &[],
    );
    assert_eq!(with_k.status.code(), Some(2), "{}", stderr(&with_k));
    let err = stderr(&with_k);
    assert!(
        err.contains("--restarts") && err.trim_end().lines().count() == 1,
        "{err}"
    );
    assert!(!fresh.exists());
    // A batch given a palette takes the fitting flags (they shape per-image palettes
    // without --palette) and says they have no effect.
    // The same note from a batch given a palette.
    let batch_out = root.path().join("batch-applied");
    let b = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "--palette",
            pal.to_str().unwrap(),
            "--split-merge",
            "8",
            "-o",
            batch_out.to_str().unwrap(),
        ],
        &[],
    );
    let err = stderr(&b);
    assert!(
        err.contains("batch --palette")
            && err.contains("--split-merge")
            && err.contains("no effect"),
        "{err}"
    );
}

/// A link to an image is reduced like the image; links to folders are not followed, and
/// they and broken links are listed with the skipped files, not dropped silently.
#[test]
fn links_to_images_are_reduced_and_other_links_listed() {
    let root = tempfile::tempdir().unwrap();
    let s = root.path().join("links");
    std::fs::create_dir_all(&s).unwrap();
    let elsewhere = root.path().join("elsewhere");
    std::fs::create_dir_all(&elsewhere).unwrap();
    std::fs::copy(
        fixture("demo/harbour-poster.png"),
        elsewhere.join("poster.png"),
    )
    .unwrap();
    std::os::unix::fs::symlink(elsewhere.join("poster.png"), s.join("linked.png")).unwrap();
    std::os::unix::fs::symlink(&elsewhere, s.join("folder-link")).unwrap();
    std::os::unix::fs::symlink(root.path().join("gone.png"), s.join("broken.png")).unwrap();
    let out = root.path().join("out");
    let o = run(
        &[
            "batch",
            s.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join("linked.palette.json").is_file());
    let r = report(&out);
    assert_eq!(status_of(&r, "linked.png"), "ok");
    let skipped: Vec<&str> = r["skipped_not_images"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(skipped, vec!["broken.png", "folder-link"]);
}

/// The output folder may hold the input folder (`batch photos -o .`), but a batch whose
/// mirrored outputs would land inside its own input tree (here the outputs of `in/x.png`
/// would go to `top/in/`, next to another input image) is refused before anything is
/// written, and every input is kept.
#[test]
fn outputs_never_replace_an_input_image_of_the_batch() {
    let root = tempfile::tempdir().unwrap();
    let top = root.path().join("top");
    let input = top.join("in");
    std::fs::create_dir_all(input.join("in")).unwrap();
    let red = common::gradient(32, 8, [200, 20, 20], [250, 120, 90]);
    common::write_rgb(&input.join("in/x.png"), 32, 8, &red);
    // An input image named like the outputs that `in/x.png` would write to `top/in/`.
    common::write_rgb(&input.join("x.reduced.png"), 32, 8, &red);
    let kept = std::fs::read(input.join("x.reduced.png")).unwrap();
    let o = run(
        &[
            "batch",
            input.to_str().unwrap(),
            "-k",
            "3",
            "-o",
            top.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("inside the input folder"),
        "{}",
        stderr(&o)
    );
    assert_eq!(std::fs::read(input.join("x.reduced.png")).unwrap(), kept);
    assert!(!top.join("batch-report.json").exists());
}

#[test]
fn each_images_notes_and_warnings_reach_the_report_and_the_terminal() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in");
    std::fs::create_dir_all(&input).unwrap();
    std::fs::copy(fixture("demo/harbour-poster.png"), input.join("poster.png")).unwrap();
    std::fs::copy(fixture("demo/valley-aerial.png"), input.join("aerial.png")).unwrap();
    let out = dir.path().join("out");
    let (i, o) = (input.to_str().unwrap(), out.to_str().unwrap());
    let first = run(&["batch", i, "-o", o, "-k", "3", "--loss-map"], &[]);
    assert_eq!(first.status.code(), Some(0), "{}", stderr(&first));
    // Rerun without the loss map: each image's old loss files are left, and said so.
    let second = run(&["batch", i, "-o", o, "-k", "3", "--force"], &[]);
    assert_eq!(second.status.code(), Some(0), "{}", stderr(&second));
    let r = report(&out);
    for f in r["files"].as_array().unwrap() {
        let notes: Vec<&str> = f["notes"]
            .as_array()
            .unwrap_or_else(|| panic!("no notes: {f}"))
            .iter()
            .map(|n| n.as_str().unwrap())
            .collect();
        assert!(
            notes
                .iter()
                .any(|n| n.contains(".loss.tif") && n.contains("earlier run")),
            "{notes:?}"
        );
        // Three colours cannot hold either picture: lost areas are warned of, as
        // `reduce` warns of them, and listed in the image's palette document.
        let warnings = f["warnings"].as_array().unwrap();
        assert!(!warnings.is_empty(), "{f}");
        assert!(warnings[0].as_str().unwrap().contains("ΔE2000"), "{f}");
        let input = f["input"].as_str().unwrap();
        let stem = input.trim_end_matches(".png");
        let doc: Value = serde_json::from_slice(
            &std::fs::read(out.join(format!("{stem}.palette.json"))).unwrap(),
        )
        .unwrap();
        assert!(!doc["lost_areas"].as_array().unwrap().is_empty(), "{stem}");
        assert!(
            stderr(&second).contains(&format!("chromasift: warning: {input}: ")),
            "{}",
            stderr(&second)
        );
    }
    assert!(
        stderr(&second).contains("2 images have notes"),
        "{}",
        stderr(&second)
    );
    // The table keeps its one shape: eight columns on every row.
    let csv = std::fs::read_to_string(out.join("batch-report.csv")).unwrap();
    assert!(csv.lines().all(|l| l.split(',').count() == 8), "{csv}");
    // A rerun finds both images up to date: the lost colours their documents list are
    // warned of again, word for word.
    let third = run(&["batch", i, "-o", o, "-k", "3"], &[]);
    assert_eq!(third.status.code(), Some(0), "{}", stderr(&third));
    let again = report(&out);
    for (f, g) in r["files"]
        .as_array()
        .unwrap()
        .iter()
        .zip(again["files"].as_array().unwrap())
    {
        assert_eq!(g["status"], "skipped", "{g}");
        assert_eq!(f["warnings"], g["warnings"], "{g}");
    }
}

/// `--shared --equal-weight`: a small image counts as much as a large one in the shared
/// palette. A grey photograph beside a poster of sixteen times its pixels: by pixels the
/// poster's colours take the palette and the photograph's greys go to them; weighed
/// equally, the photograph keeps greys of its own.
#[test]
fn equal_weight_gives_a_small_image_its_share_of_the_palette() {
    let root = tempfile::tempdir().unwrap();
    let input = root.path().join("mixed");
    std::fs::create_dir_all(&input).unwrap();
    let poster = image::open(fixture("demo/harbour-poster.png")).unwrap();
    poster
        .resize_exact(1280, 960, image::imageops::FilterType::Nearest)
        .save(input.join("poster.png"))
        .unwrap();
    let grey = image::open(fixture("photos/chelsea.png"))
        .unwrap()
        .to_luma8();
    let (gw, gh) = grey.dimensions();
    assert!(u64::from(gw * gh) * 16 < 1280 * 960);
    grey.save(input.join("cat.png")).unwrap();
    let run_batch = |out: &Path, extra: &[&str]| -> Value {
        let mut args = vec![
            "batch",
            input.to_str().unwrap(),
            "--shared",
            "-k",
            "8",
            "-o",
            out.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let o = run(&args, &[]);
        assert!(o.status.success(), "{}", stderr(&o));
        report(out)
    };
    let error_of = |r: &Value, name: &str| {
        r["files"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["input"] == name)
            .unwrap()["mean_delta_e2000"]
            .as_f64()
            .unwrap()
    };
    let by_pixels = run_batch(&root.path().join("pixels"), &[]);
    let equal = run_batch(&root.path().join("equal"), &["--equal-weight"]);
    assert!(by_pixels.get("equal_weight").is_none());
    assert_eq!(equal["equal_weight"], true);
    let (a, b) = (error_of(&by_pixels, "cat.png"), error_of(&equal, "cat.png"));
    assert!(
        b < 0.8 * a,
        "grey photo: mean ΔE2000 {a} by pixels, {b} weighed equally"
    );
    // Without --shared the flag means nothing: refused.
    let o = run(
        &[
            "batch",
            input.to_str().unwrap(),
            "--equal-weight",
            "-o",
            root.path().join("x").to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
}
