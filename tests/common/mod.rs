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

/// Every entry under `dir` (recursively, links not followed): files with their bytes,
/// folders as `None`, links as the bytes of their target path.
pub fn everything_under(dir: &Path) -> BTreeMap<PathBuf, Option<Vec<u8>>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(rd) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in rd.flatten() {
            let p = e.path();
            let rel = p.strip_prefix(dir).unwrap().to_path_buf();
            let meta = std::fs::symlink_metadata(&p).unwrap();
            if meta.file_type().is_symlink() {
                let target = std::fs::read_link(&p).unwrap();
                out.insert(rel, Some(target.to_string_lossy().as_bytes().to_vec()));
            } else if meta.is_dir() {
                out.insert(rel, None);
                stack.push(p);
            } else {
                out.insert(rel, Some(std::fs::read(&p).unwrap()));
            }
        }
    }
    out
}

/// Checks the binary's refusal of a bad input: exit status 2, nothing on standard
/// output, and one short line on standard error that starts with "chromasift: error: ",
/// holds no panic, and contains each of `expect`. Returns that line, or what is wrong.
pub fn check_refusal(o: &Output, what: &str, expect: &[&str]) -> Result<String, String> {
    let err = stderr(o);
    let fail = |m: &str| Err(format!("{what}: {m}; stderr: {err}"));
    if o.status.code() != Some(2) {
        return fail(&format!("exit status {:?}, not 2", o.status.code()));
    }
    if err.contains("panicked") {
        return fail("a panic");
    }
    if err.trim_end().lines().count() != 1 || err.len() > 400 {
        return fail("not one short line");
    }
    if !err.starts_with("chromasift: error: ") {
        return fail("no 'chromasift: error: ' prefix");
    }
    for e in expect {
        if !err.contains(e) {
            return fail(&format!("'{e}' is not in the message"));
        }
    }
    if !o.stdout.is_empty() {
        return fail("something on standard output");
    }
    Ok(err)
}

/// [`check_refusal`], panicking on the first problem.
pub fn assert_refusal(o: &Output, what: &str, expect: &[&str]) -> String {
    check_refusal(o, what, expect).unwrap_or_else(|m| panic!("{m}"))
}

/// CRC-32 as specified for PNG chunks (ISO/IEC 15948, annex D).
pub fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xffff_ffffu32;
    for &b in bytes {
        c ^= b as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xedb8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    !c
}

/// A PNG chunk: length, type, data, CRC (ISO/IEC 15948, §5.3).
pub fn png_chunk(kind: &[u8; 4], data: &[u8]) -> Vec<u8> {
    let mut v = (data.len() as u32).to_be_bytes().to_vec();
    v.extend_from_slice(kind);
    v.extend_from_slice(data);
    v.extend_from_slice(&crc32(&v[4..]).to_be_bytes());
    v
}

/// A page box (`MediaBox`, `TrimBox`, …) of a PDF page as numbers, in points
/// (ISO 32000-1 §14.11.2: llx, lly, urx, ury).
pub fn pdf_box(doc: &lopdf::Document, page: lopdf::ObjectId, key: &[u8]) -> Vec<f64> {
    doc.get_dictionary(page)
        .unwrap()
        .get(key)
        .unwrap()
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_float().unwrap() as f64)
        .collect()
}
