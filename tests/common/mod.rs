//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Path of a file under `fixtures/`.
pub fn fixture(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(rel)
}

/// Rows of a reference CSV: `#` comment lines skipped, header returned separately.
pub fn read_csv(rel: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(fixture(rel)).unwrap();
    let mut lines = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty());
    let header = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    (header, rows)
}

/// Runs the binary with `args` (and extra environment variables).
pub fn run(args: &[&str], env: &[(&str, &str)]) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_chromasift"));
    c.args(args);
    for (k, v) in env {
        c.env(k, v);
    }
    c.output().expect("binary runs")
}

/// Standard error as text.
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Files in a folder, sorted (empty when it does not exist).
pub fn files_in(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// Writes an 8-bit RGBA PNG.
pub fn write_rgba(path: &Path, w: u32, h: u32, rgba: &[u8]) {
    image::save_buffer(path, rgba, w, h, image::ExtendedColorType::Rgba8).unwrap();
}

/// Writes an 8-bit RGB PNG.
pub fn write_rgb(path: &Path, w: u32, h: u32, rgb: &[u8]) {
    image::save_buffer(path, rgb, w, h, image::ExtendedColorType::Rgb8).unwrap();
}

/// Reads any image as 8-bit RGBA.
pub fn read_rgba(path: &Path) -> image::RgbaImage {
    image::open(path).unwrap().to_rgba8()
}

/// A smooth two-colour gradient, left colour `a` to right colour `b`, invented for tests.
pub fn gradient(w: u32, h: u32, a: [u8; 3], b: [u8; 3]) -> Vec<u8> {
    let mut v = Vec::with_capacity((w * h * 3) as usize);
    for _y in 0..h {
        for x in 0..w {
            let t = x as f64 / (w - 1) as f64;
            for c in 0..3 {
                v.push((a[c] as f64 * (1.0 - t) + b[c] as f64 * t).round() as u8);
            }
        }
    }
    v
}

/// Every file under `dir` (recursively) with its bytes, keyed by relative path.
pub fn tree(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(
                    p.strip_prefix(dir).unwrap().to_path_buf(),
                    std::fs::read(&p).unwrap(),
                );
            }
        }
    }
    out
}
