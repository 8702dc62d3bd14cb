//! A write that fails part-way (a full disk, or a file-size limit) gives a clear error,
//! leaves no truncated output that a rerun could take for finished work, and a rerun with
//! room to write finishes with the same results as a run that never failed.
//!
//! The failure is made with the process file-size limit (RLIMIT_FSIZE, `ulimit -f` in
//! the shell that starts the binary): a write past it fails with EFBIG ("File too
//! large"), through the same code path as ENOSPC on a full disk, and it needs neither
//! root nor a small file system. The images are invented noisy gradients, so every
//! reduced PNG is larger than the limit while the palette documents are smaller.

#![cfg(unix)]

mod common;

use common::{run, stderr, tree};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// File-size limit for the failing runs: 8 blocks, 4 KiB or 8 KiB depending on the
/// shell's block size, both below the size of every reduced PNG here.
const LIMIT_BLOCKS: u32 = 8;

/// xorshift64*: seeded noise for the test pictures.
fn noise(state: &mut u64) -> u64 {
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    state.wrapping_mul(0x2545_F491_4F6C_DD1D)
}

/// A folder of `n` noisy gradients in two sub-folders.
fn folder(root: &Path, n: usize) -> PathBuf {
    let dir = root.join("shoot");
    let (w, h) = (160u32, 120u32);
    for i in 0..n {
        let sub = dir.join(if i % 2 == 0 { "day1" } else { "day2" });
        std::fs::create_dir_all(&sub).unwrap();
        let mut s = 0x51A7_E5EE_D000_0001u64 ^ (i as u64);
        let mut rgb = Vec::new();
        for y in 0..h {
            for x in 0..w {
                let base = [x * 255 / w, y * 255 / h, (x + 2 * y + 50 * i as u32) % 256];
                for b in base {
                    let j = (noise(&mut s) % 31) as i32 - 15;
                    rgb.push((b as i32 + j).clamp(0, 255) as u8);
                }
            }
        }
        common::write_rgb(&sub.join(format!("img{i}.png")), w, h, &rgb);
    }
    dir
}

/// Runs the binary under a file-size limit of `blocks`.
fn run_limited(blocks: u32, args: &[&str]) -> Output {
    Command::new("sh")
        .arg("-c")
        .arg(format!("ulimit -f {blocks} && exec \"$0\" \"$@\""))
        .arg(env!("CARGO_BIN_EXE_chromasift"))
        .args(args)
        .output()
        .unwrap()
}

/// Files under `dir` whose names mark them as our temporary files.
fn temporaries(dir: &Path) -> Vec<String> {
    tree(dir)
        .into_keys()
        .map(|p| p.to_string_lossy().into_owned())
        .filter(|p| p.contains(".chromasift-tmp-"))
        .collect()
}

/// Every output file except the batch reports, with its bytes.
fn outputs(dir: &Path) -> std::collections::BTreeMap<PathBuf, Vec<u8>> {
    let mut t = tree(dir);
    t.retain(|p, _| !p.to_string_lossy().starts_with("batch-report."));
    t
}

#[test]
fn reduce_refuses_cleanly_when_a_write_fails() {
    let dir = tempfile::tempdir().unwrap();
    let input = folder(dir.path(), 1).join("day1/img0.png");
    let before = std::fs::read(&input).unwrap();
    let out = dir.path().join("out");
    let args = [
        "reduce",
        input.to_str().unwrap(),
        "-k",
        "8",
        "-o",
        out.to_str().unwrap(),
    ];
    let o = run_limited(LIMIT_BLOCKS, &args);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    assert!(
        err.contains("img0") && err.to_lowercase().contains("too large"),
        "names the file and the problem: {err}"
    );
    // Nothing at all is left: no truncated image, no temporaries, no palette document.
    let left = if out.exists() {
        tree(&out)
    } else {
        Default::default()
    };
    assert!(
        left.is_empty(),
        "left behind: {:?}",
        left.keys().collect::<Vec<_>>()
    );
    assert_eq!(std::fs::read(&input).unwrap(), before, "input untouched");

    // With room to write, the same command succeeds.
    let o = run(&args, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(out.join("img0.reduced.png").exists());
}

#[test]
fn batch_with_failing_writes_leaves_nothing_a_rerun_would_skip() {
    let dir = tempfile::tempdir().unwrap();
    let input = folder(dir.path(), 4);
    let before = tree(&input);
    let out = dir.path().join("out");
    let args = |o: &Path| -> Vec<String> {
        [
            "batch",
            input.to_str().unwrap(),
            "-k",
            "6",
            "-o",
            o.to_str().unwrap(),
            "--jobs",
            "1",
            "--quiet",
        ]
        .map(String::from)
        .to_vec()
    };
    let a = args(&out);
    let a: Vec<&str> = a.iter().map(String::as_str).collect();

    // Every image fails on its reduced PNG; the batch goes on, reports each failure with
    // its cause, and exits 1.
    let o = run_limited(LIMIT_BLOCKS, &a);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    let report: Value =
        serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap();
    let files = report["files"].as_array().expect("files in the report");
    assert_eq!(files.len(), 4);
    for f in files {
        assert_eq!(f["status"], "failed", "{f}");
        let e = f["error"].as_str().unwrap().to_lowercase();
        assert!(e.contains("too large"), "{e}");
    }
    // No temporaries, and no image has a palette document, the mark of a finished set.
    assert!(temporaries(&out).is_empty(), "{:?}", temporaries(&out));
    let palettes: Vec<_> = tree(&out)
        .into_keys()
        .filter(|p| p.to_string_lossy().ends_with(".palette.json"))
        .collect();
    assert!(palettes.is_empty(), "{palettes:?}");
    assert_eq!(tree(&input), before, "input tree untouched");

    // The rerun with room to write redoes every image (none is taken as up to date) and
    // ends with exactly the outputs of a batch that never failed.
    let o = run(&a, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    let report: Value =
        serde_json::from_slice(&std::fs::read(out.join("batch-report.json")).unwrap()).unwrap();
    for f in report["files"].as_array().unwrap() {
        assert_eq!(f["status"], "ok", "{f}");
    }
    let clean = dir.path().join("clean");
    let c = args(&clean);
    let c: Vec<&str> = c.iter().map(String::as_str).collect();
    let o = run(&c, &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert_eq!(outputs(&out), outputs(&clean));
    assert!(temporaries(&out).is_empty());
}
