//! Histogram files, which let a large archive be summarised in shards, and the merged
//! histogram of many inputs (folders, images and histogram files).

use crate::error::{Error, Result};
use crate::features::histogram::{self, Histogram};
use crate::limits::Limits;
use crate::output::fnv1a;
use crate::raster::walk::collect_images;
use crate::raster::{self, Pixels};
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Histogram of one image file (8-bit images merge with 8-bit ones; 16-bit images are
/// brought to 8 bits so that a whole folder shares one table).
pub fn histogram_of_file(path: &Path, limits: &Limits) -> Result<Histogram> {
    let img = raster::decode(path, limits)?;
    let rgba8: Vec<u8> = match img.pixels {
        Pixels::Rgba8(p) => p,
        Pixels::Rgba16(p) => p.iter().map(|&v| ((v as u32 + 128) / 257) as u8).collect(),
    };
    Ok(histogram::from_rgba8(&rgba8).histogram)
}

/// Histograms waiting to be merged, per worker, before they are merged into one.
const MERGE_EVERY: usize = 16;

/// Merges `pending` into one histogram once it holds [`MERGE_EVERY`], so a worker never
/// holds more than that many. Merging sums exact counts, so the result does not depend on
/// the order. Parts of different depths cannot merge and are kept as they are, for the
/// final merge to report.
fn squash(pending: Vec<Histogram>) -> Vec<Histogram> {
    if pending.len() >= MERGE_EVERY {
        if let Some(merged) = Histogram::merge(&pending) {
            return vec![merged];
        }
    }
    pending
}

/// Reads a histogram from each item in parallel and merges them as they arrive (see
/// [`squash`]). Returns the unmerged remainder (one part per depth, at most a few) and
/// the items that failed, by index.
pub(crate) fn merge_as_they_arrive<T: Sync>(
    items: &[T],
    read: impl Fn(&T) -> Result<Histogram> + Sync,
) -> (Vec<Histogram>, Vec<(usize, Error)>) {
    items
        .par_iter()
        .enumerate()
        .fold(
            || (Vec::<Histogram>::new(), Vec::<(usize, Error)>::new()),
            |(mut pending, mut fails), (i, item)| {
                match read(item) {
                    Ok(h) => {
                        pending.push(h);
                        pending = squash(pending);
                    }
                    Err(e) => fails.push((i, e)),
                }
                (pending, fails)
            },
        )
        .reduce(
            || (Vec::new(), Vec::new()),
            |(mut a, mut fa), (b, fb)| {
                a.extend(b);
                fa.extend(fb);
                (squash(a), fa)
            },
        )
}

/// First bytes of a histogram file: "CSHIST", a NUL, and the format version (1).
pub const HIST_MAGIC: &[u8; 8] = b"CSHIST\x00\x01";

/// Encodes a histogram file (all integers little-endian):
/// magic (8) | depth u8 | 7 zero bytes | entries u64 | entries × (r, g, b u16; count u64) |
/// FNV-1a 64 checksum of everything before it (u64).
pub fn encode(h: &Histogram) -> Vec<u8> {
    let mut v = Vec::with_capacity(32 + h.len() * 14);
    v.extend_from_slice(HIST_MAGIC);
    v.push(h.depth);
    v.extend_from_slice(&[0u8; 7]);
    v.extend_from_slice(&(h.len() as u64).to_le_bytes());
    for (c, &n) in h.colours.iter().zip(&h.counts) {
        for ch in c {
            v.extend_from_slice(&ch.to_le_bytes());
        }
        v.extend_from_slice(&n.to_le_bytes());
    }
    let sum = fnv1a(&v);
    v.extend_from_slice(&sum.to_le_bytes());
    v
}

/// Decodes and checks a histogram file; `path` is used in messages.
pub fn decode(bytes: &[u8], path: &Path) -> Result<Histogram> {
    let bad = |m: &str| Error::Decode {
        path: path.into(),
        message: format!("not a valid chromasift histogram file: {m}"),
    };
    if bytes.len() < 8 || &bytes[..6] != b"CSHIST" {
        return Err(bad("wrong first bytes"));
    }
    if bytes[6..8] != HIST_MAGIC[6..8] {
        return Err(bad(&format!(
            "format version {} is not supported (this tool reads version 1)",
            bytes[7]
        )));
    }
    if bytes.len() < 32 {
        return Err(bad("file is too short"));
    }
    let depth = bytes[8];
    if depth != 8 && depth != 16 {
        return Err(bad("sample depth must be 8 or 16"));
    }
    if bytes[9..16].iter().any(|&b| b != 0) {
        return Err(bad("the 7 reserved header bytes are not zero"));
    }
    let n = u64::from_le_bytes(bytes[16..24].try_into().unwrap());
    let expected = n.checked_mul(14).and_then(|b| b.checked_add(32));
    if expected != Some(bytes.len() as u64) {
        return Err(bad("size does not match the entry count (truncated?)"));
    }
    let body = &bytes[..bytes.len() - 8];
    let sum = u64::from_le_bytes(bytes[bytes.len() - 8..].try_into().unwrap());
    if fnv1a(body) != sum {
        return Err(bad("checksum mismatch (damaged file)"));
    }
    let mut colours = Vec::with_capacity(n as usize);
    let mut counts = Vec::with_capacity(n as usize);
    let mut total = 0u64;
    for e in body[24..].chunks_exact(14) {
        let c = [
            u16::from_le_bytes([e[0], e[1]]),
            u16::from_le_bytes([e[2], e[3]]),
            u16::from_le_bytes([e[4], e[5]]),
        ];
        let count = u64::from_le_bytes(e[6..14].try_into().unwrap());
        if depth == 8 && c.iter().any(|&v| v > 255) {
            return Err(bad("an 8-bit entry holds a value above 255"));
        }
        if count == 0 {
            return Err(bad("an entry has a zero count"));
        }
        total = total.saturating_add(count);
        if total > histogram::MAX_TOTAL {
            return Err(bad(
                "the counts add up to more than 2^53 pixels (damaged file?)",
            ));
        }
        if colours.last().is_some_and(|l: &[u16; 3]| *l >= c) {
            return Err(bad("entries are not in strictly increasing colour order"));
        }
        colours.push(c);
        counts.push(count);
    }
    Ok(Histogram {
        depth,
        colours,
        counts,
    })
}

/// The files `learn` and `histogram` read for `inputs`: each folder's images, and
/// every other input as given.
pub fn input_files(inputs: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for i in inputs {
        if i.is_dir() {
            files.extend(collect_images(i)?.0);
        } else {
            files.push(i.clone());
        }
    }
    Ok(files)
}

/// Merged histogram of every input: folders (their images), image files and histogram files.
pub fn gather(inputs: &[PathBuf], limits: &Limits) -> Result<Histogram> {
    let (hist, failures) = gather_lenient(inputs, limits)?;
    match failures.into_iter().next() {
        Some((_, e)) => Err(e),
        None => Ok(hist),
    }
}

/// As [`gather`], but a file that cannot be read does not stop the others: the
/// histogram of the files that could be read, and each failure (path and error, in input
/// order). Fails only when no file could be read (with the first error) or on a merge
/// that cannot be made.
pub fn gather_lenient(
    inputs: &[PathBuf],
    limits: &Limits,
) -> Result<(Histogram, Vec<(PathBuf, Error)>)> {
    let files = input_files(inputs)?;
    if files.is_empty() {
        let given: Vec<String> = inputs.iter().map(|p| p.display().to_string()).collect();
        return Err(Error::Data(format!(
            "{}: no images or histogram files found",
            if given.is_empty() {
                "(no inputs)".to_string()
            } else {
                given.join(", ")
            }
        )));
    }
    let _keep = (files.len() > 1).then(crate::features::histogram::KeepTables::new);
    // Merged as they arrive (see `squash`), so memory stays bounded however many files
    // there are; the first failing file in input order is the error reported.
    let read = |f: &PathBuf| match read_histogram_file(f, limits.max_alloc)? {
        Some(bytes) => decode(&bytes, f),
        None => histogram_of_file(f, limits),
    };
    let (parts, mut failures) = merge_as_they_arrive(&files, read);
    failures.sort_by_key(|(i, _)| *i);
    let failures: Vec<(PathBuf, Error)> = failures
        .into_iter()
        .map(|(i, e)| (files[i].clone(), e))
        .collect();
    if parts.is_empty() && !failures.is_empty() {
        let (_, e) = failures.into_iter().next().expect("a failure");
        return Err(e);
    }
    let total = parts.iter().fold(0u64, |a, p| a.saturating_add(p.total()));
    if total > histogram::MAX_TOTAL {
        return Err(Error::Data(format!(
            "the inputs count {total} pixels in all, more than the 2^53 a histogram holds \
             exactly"
        )));
    }
    let hist = Histogram::merge(&parts).ok_or_else(|| {
        Error::Data("the histograms mix 8- and 16-bit tables and cannot be merged".into())
    })?;
    Ok((hist, failures))
}

/// The bytes of `path` when it is a histogram file (it starts with "CSHIST"), or `None`
/// for any other file. At most `limit` bytes are read, and only the first 8 of a file
/// that is not a histogram, so a device or pipe that never ends is not read to its end.
fn read_histogram_file(path: &Path, limit: u64) -> Result<Option<Vec<u8>>> {
    use std::io::Read;
    let open_error = |source| Error::Open {
        path: path.into(),
        source,
    };
    let mut file = std::fs::File::open(path).map_err(open_error)?;
    let mut bytes = Vec::new();
    (&mut file)
        .take(8)
        .read_to_end(&mut bytes)
        .map_err(open_error)?;
    if !bytes.starts_with(b"CSHIST") {
        return Ok(None);
    }
    file.take(limit.saturating_add(1))
        .read_to_end(&mut bytes)
        .map_err(open_error)?;
    if bytes.len() as u64 > limit {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!("histogram file is over the limit of {limit} bytes"),
        });
    }
    Ok(Some(bytes))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn many_histogram_files_merge_as_they_arrive_to_the_whole() {
        // More files than MERGE_EVERY, on more than one worker: the result equals one
        // merge of everything; a bad file is reported, the first in input order.
        let dir = tempfile::tempdir().unwrap();
        let mut r = crate::rng::Rng::new(9, 0);
        let mut parts = Vec::new();
        let mut paths = Vec::new();
        for f in 0..(3 * MERGE_EVERY + 5) {
            let mut colours: Vec<[u16; 3]> = (0..20)
                .map(|_| [r.below(4) as u16, r.below(4) as u16, r.below(256) as u16])
                .collect();
            colours.sort_unstable();
            colours.dedup();
            let counts = colours.iter().map(|_| 1 + r.below(1000) as u64).collect();
            let h = Histogram {
                depth: 8,
                colours,
                counts,
            };
            let path = dir.path().join(format!("part{f:03}.hist"));
            std::fs::write(&path, encode(&h)).unwrap();
            parts.push(h);
            paths.push(path);
        }
        let limits = Limits::default();
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(3)
            .build()
            .unwrap();
        let got = pool.install(|| gather(&paths, &limits)).unwrap();
        assert_eq!(got, Histogram::merge(&parts).unwrap());

        let mut bad = paths.clone();
        for (i, name) in [(7, "bad-b.hist"), (3, "bad-a.hist")] {
            let p = dir.path().join(name);
            std::fs::write(&p, b"CSHIST\x00\x01 truncated").unwrap();
            bad.insert(i, p);
        }
        let e = pool
            .install(|| gather(&bad, &limits))
            .unwrap_err()
            .to_string();
        assert!(e.contains("bad-a.hist"), "{e}");
    }
}
