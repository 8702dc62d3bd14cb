//! A batch stopped part-way, by Ctrl-C (SIGINT) or by SIGKILL, leaves no partial output,
//! and the next run finishes the rest with the same results as an uninterrupted run.
//!
//! The images are invented for these tests (smooth gradients with seeded noise, so each
//! has tens of thousands of distinct colours and takes a measurable time to reduce).

mod common;

use common::{run, stderr, tree};
use serde_json::Value;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const TEMP_PREFIX: &str = ".chromasift-tmp-";

/// xorshift64*: a small seeded generator for test pictures.
struct Noise(u64);
impl Noise {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
}

/// A folder of `n` invented photos in two sub-folders.
fn folder(root: &Path, n: usize) -> PathBuf {
    let dir = root.join("roll");
    let (w, h) = (240u32, 200u32);
    for i in 0..n {
        let sub = dir.join(if i % 2 == 0 { "a" } else { "b/c" });
        std::fs::create_dir_all(&sub).unwrap();
        let mut rng = Noise(0x9E37_79B9_7F4A_7C15 ^ (i as u64 + 1));
        let mut rgb = Vec::with_capacity((w * h * 3) as usize);
        for y in 0..h {
            for x in 0..w {
                let base = [
                    (x * 255 / w) as i32,
                    (y * 255 / h) as i32,
                    ((x + y + 40 * i as u32) % 256) as i32,
                ];
                for b in base {
                    let jitter = (rng.next() % 25) as i32 - 12;
                    rgb.push((b + jitter).clamp(0, 255) as u8);
                }
            }
        }
        common::write_rgb(&sub.join(format!("frame{i:03}.png")), w, h, &rgb);
    }
    dir
}

fn batch_args<'a>(input: &'a str, out: &'a str) -> Vec<&'a str> {
    vec![
        "batch", input, "-k", "8", "-o", out, "--jobs", "1", "--quiet",
    ]
}

fn spawn(args: &[&str]) -> Child {
    Command::new(env!("CARGO_BIN_EXE_chromasift"))
        .args(args)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary starts")
}

/// Every file under `dir` except the batch reports.
fn outputs(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut t = tree(dir);
    t.retain(|p, _| !p.to_string_lossy().starts_with("batch-report."));
    t
}

/// Asserts every non-temporary file under `out` is complete: PNGs decode in full, JSON
/// parses, and a palette.json is only present beside the rest of its set.
fn assert_no_partial_files(out: &Path) {
    for (rel, bytes) in tree(out) {
        let name = rel.file_name().unwrap().to_string_lossy().into_owned();
        if name.starts_with(TEMP_PREFIX) {
            continue;
        }
        if name.ends_with(".png") {
            image::load_from_memory(&bytes)
                .unwrap_or_else(|e| panic!("{} is not a complete PNG: {e}", rel.display()));
        } else if name.ends_with(".json") {
            serde_json::from_slice::<Value>(&bytes)
                .unwrap_or_else(|e| panic!("{} is not complete JSON: {e}", rel.display()));
        } else if name.ends_with(".csv") {
            assert!(bytes.ends_with(b"\n"), "{} ends mid-line", rel.display());
        }
        if let Some(stem) = name.strip_suffix(".palette.json") {
            let dir = out.join(rel.parent().unwrap());
            for other in ["reduced.png", "palette.csv", "uncertainty.png"] {
                assert!(
                    dir.join(format!("{stem}.{other}")).is_file(),
                    "{} present without {stem}.{other}",
                    rel.display()
                );
            }
        }
    }
}

fn temporaries(out: &Path) -> Vec<PathBuf> {
    tree(out)
        .into_keys()
        .filter(|p| {
            p.file_name()
                .unwrap()
                .to_string_lossy()
                .starts_with(TEMP_PREFIX)
        })
        .collect()
}

/// Per-file (colours, mean ΔE2000) from a batch report.
fn results(out: &Path) -> BTreeMap<String, (Value, Value)> {
    let r: Value =
        serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap();
    r["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| {
            (
                f["input"].as_str().unwrap().to_string(),
                (f["colors"].clone(), f["mean_delta_e2000"].clone()),
            )
        })
        .collect()
}

fn statuses(out: &Path) -> Vec<String> {
    let r: Value =
        serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap();
    r["files"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["status"].as_str().unwrap().to_string())
        .collect()
}

/// Names of the files under `dir`, read while a batch is still writing there: entries
/// that vanish between listing and reading (temporaries being renamed) are passed over.
fn names_while_running(dir: &Path) -> Vec<String> {
    let mut names = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(entries) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            match e.file_type() {
                Ok(t) if t.is_dir() => stack.push(e.path()),
                Ok(_) => names.push(e.file_name().to_string_lossy().into_owned()),
                Err(_) => {}
            }
        }
    }
    names
}

fn any_palette_written(out: &Path) -> bool {
    out.is_dir()
        && names_while_running(out)
            .iter()
            .any(|n| n.ends_with(".palette.json"))
}

/// The reference: the same batch run to the end without interruption.
fn reference(root: &Path, input: &Path) -> (PathBuf, f64) {
    let out = root.join("reference");
    let t = Instant::now();
    let o = run(
        &batch_args(input.to_str().unwrap(), out.to_str().unwrap()),
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    (out, t.elapsed().as_secs_f64())
}

#[test]
fn ctrl_c_stops_cleanly_and_a_rerun_finishes_the_rest() {
    let root = tempfile::tempdir().unwrap();
    let input = folder(root.path(), 24);
    let before = tree(&input);
    let (reference, _) = reference(root.path(), &input);

    let out = root.path().join("out");
    let (i, o) = (input.to_str().unwrap(), out.to_str().unwrap());
    let child = spawn(&batch_args(i, o));
    let t = Instant::now();
    while !any_palette_written(&out) {
        assert!(t.elapsed() < Duration::from_secs(120), "no image finished");
        std::thread::sleep(Duration::from_millis(2));
    }
    let k = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(k.success());
    let o_int = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o_int.stderr);
    assert_eq!(
        o_int.status.code(),
        Some(130),
        "exit 130 after Ctrl-C: {err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        temporaries(&out).is_empty(),
        "no temporary files after a clean stop"
    );
    assert_no_partial_files(&out);
    let st = statuses(&out);
    assert!(st.iter().any(|s| s == "interrupted"), "{st:?}");
    assert!(st.iter().any(|s| s == "ok"), "{st:?}");

    let o2 = run(&batch_args(i, o), &[]);
    assert_eq!(o2.status.code(), Some(0), "{}", stderr(&o2));
    let st = statuses(&out);
    assert!(st.iter().all(|s| s == "ok" || s == "skipped"), "{st:?}");
    assert!(
        st.iter().any(|s| s == "skipped"),
        "finished images are not redone"
    );
    assert_eq!(
        outputs(&out),
        outputs(&reference),
        "same files as an uninterrupted run"
    );
    assert_eq!(results(&out), results(&reference));
    assert_eq!(tree(&input), before, "the input folder is untouched");
}

#[test]
fn sigkill_at_seeded_moments_leaves_no_partial_output() {
    let root = tempfile::tempdir().unwrap();
    let input = folder(root.path(), 16);
    let before = tree(&input);
    let (reference, seconds) = reference(root.path(), &input);

    // Kill moments spread over the run: seeded fractions of the reference duration.
    let mut rng = Noise(20261202);
    let mut cut_mid_run = 0;
    for trial in 0..3 {
        let out = root.path().join(format!("out{trial}"));
        let (i, o) = (input.to_str().unwrap(), out.to_str().unwrap());
        let fraction = 0.1 + 0.8 * (rng.next() % 1000) as f64 / 1000.0;
        let mut child = spawn(&batch_args(i, o));
        std::thread::sleep(Duration::from_secs_f64(seconds * fraction));
        let _ = child.kill(); // SIGKILL on Unix
        let _ = child.wait();
        if out.is_dir() {
            assert_no_partial_files(&out);
            let done = tree(&out)
                .keys()
                .filter(|p| p.to_string_lossy().ends_with(".palette.json"))
                .count();
            if done > 0 && done < 16 {
                cut_mid_run += 1;
            }
        }

        let o2 = run(&batch_args(i, o), &[]);
        assert_eq!(o2.status.code(), Some(0), "trial {trial}: {}", stderr(&o2));
        assert!(
            temporaries(&out).is_empty(),
            "trial {trial}: the rerun removes stale temporaries"
        );
        assert_eq!(
            outputs(&out),
            outputs(&reference),
            "trial {trial} (killed at {:.0} % of the run)",
            fraction * 100.0
        );
        assert_eq!(results(&out), results(&reference), "trial {trial}");
    }
    assert!(
        cut_mid_run > 0,
        "at least one kill landed part-way through the batch"
    );
    assert_eq!(tree(&input), before, "the input folder is untouched");
}

/// Names of the temporary files in `dir` (none when it does not exist), without reading them.
fn temp_names(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .map(|rd| {
            rd.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| n.starts_with(TEMP_PREFIX))
                .collect()
        })
        .unwrap_or_default()
}

/// `reduce` stopped by SIGTERM or Ctrl-C while it writes its outputs removes its temporary
/// files and exits 130; what it leaves is only complete outputs.
#[test]
fn reduce_stopped_while_writing_leaves_no_temporary_files() {
    let root = tempfile::tempdir().unwrap();
    let input = folder(root.path(), 1);
    // One larger invented photo: its outputs take long enough to write to be caught.
    let (w, h) = (1400u32, 1100u32);
    let mut rng = Noise(77);
    let rgb: Vec<u8> = (0..w * h * 3)
        .map(|i| ((i / 3 % w) as u64 * 255 / w as u64 + rng.next() % 40) as u8)
        .collect();
    let photo = input.join("large.png");
    common::write_rgb(&photo, w, h, &rgb);
    for (trial, signal) in ["-TERM", "-INT", "-TERM"].iter().enumerate() {
        let out = root.path().join(format!("single{trial}"));
        let child = spawn(&[
            "reduce",
            photo.to_str().unwrap(),
            "-k",
            "8",
            "--uncertainty-raw",
            "-o",
            out.to_str().unwrap(),
        ]);
        let t = Instant::now();
        // Wait for the write phase: a temporary file in the output folder.
        while temp_names(&out).is_empty() && t.elapsed() < Duration::from_secs(60) {
            std::thread::sleep(Duration::from_micros(500));
        }
        let _ = Command::new("kill")
            .args([*signal, &child.id().to_string()])
            .status();
        let o = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            matches!(o.status.code(), Some(130) | Some(0)),
            "trial {trial}: {:?} {err}",
            o.status.code()
        );
        assert!(!err.contains("panicked"), "{err}");
        assert!(
            temp_names(&out).is_empty(),
            "trial {trial} ({signal}): temporary files left: {:?}",
            temp_names(&out)
        );
        // Either the whole set landed (the signal came as it was renamed into place, and
        // the handler waited for it) or nothing did, not even the new folder.
        if out.is_dir() {
            assert_no_partial_files(&out);
            for name in [
                "reduced.png",
                "palette.json",
                "palette.csv",
                "uncertainty.png",
                "uncertainty.tif",
            ] {
                assert!(
                    out.join(format!("large.{name}")).is_file(),
                    "trial {trial}: a partial set: {:?}",
                    common::files_in(&out)
                );
            }
        }
    }
}

/// `landcover` stopped by a signal during pass 2, while its rasters' tiles wait in scratch
/// files beside the outputs: the scratch files and the outputs' temporary files are all
/// removed, and either the whole set landed or nothing did.
#[test]
fn landcover_stopped_while_tiling_leaves_no_scratch_files() {
    use tiff::encoder::{colortype, TiffEncoder};
    let root = tempfile::tempdir().unwrap();
    // A 4-band 16-bit scene of seeded noise over gradients, larger than a tile.
    let (w, h) = (1500u32, 1200u32);
    let mut rng = Noise(2026);
    let data: Vec<u16> = (0..w as u64 * h as u64 * 4)
        .map(|i| ((i / 4 % w as u64) * 20 + (i % 4) * 3000 + rng.next() % 900) as u16)
        .collect();
    let scene = root.path().join("scene.tif");
    TiffEncoder::new(std::fs::File::create(&scene).unwrap())
        .unwrap()
        .write_image::<colortype::RGBA16>(w, h, &data)
        .unwrap();
    let mut stopped = 0;
    for (trial, (signal, delay_ms)) in [("-INT", 0u64), ("-TERM", 40), ("-INT", 120)]
        .into_iter()
        .enumerate()
    {
        let out = root.path().join(format!("lc{trial}"));
        let child = spawn(&[
            "landcover",
            scene.to_str().unwrap(),
            "-k",
            "4",
            "-o",
            out.to_str().unwrap(),
        ]);
        let t = Instant::now();
        // Pass 2 has begun once the scratch files exist.
        while temp_names(&out).len() < 2 && t.elapsed() < Duration::from_secs(60) {
            std::thread::sleep(Duration::from_micros(500));
        }
        std::thread::sleep(Duration::from_millis(delay_ms));
        let _ = Command::new("kill")
            .args([signal, &child.id().to_string()])
            .status();
        let o = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            matches!(o.status.code(), Some(130) | Some(0)),
            "trial {trial}: {:?} {err}",
            o.status.code()
        );
        stopped += (o.status.code() == Some(130)) as usize;
        assert!(
            temp_names(&out).is_empty(),
            "trial {trial} ({signal}): temporary files left: {:?}",
            temp_names(&out)
        );
        if out.is_dir() {
            let mut files = common::files_in(&out);
            files.sort();
            assert_eq!(
                files,
                [
                    "scene.classes.csv",
                    "scene.classes.json",
                    "scene.classes.png",
                    "scene.classes.tif",
                    "scene.uncertainty.tif"
                ],
                "trial {trial}: a partial set"
            );
        }
    }
    assert!(stopped > 0, "at least one signal landed during the run");
}
