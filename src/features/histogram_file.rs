//! Histogram files, which let a large archive be summarised in shards, and the merged
//! histogram of many inputs (folders, images and histogram files).

use crate::colour::profile::{read_profile, ProfileUse, SourceProfile};
use crate::error::{Error, Result};
use crate::features::histogram::{self, Histogram};
use crate::features::image::{image_colours_8bit, ImageColours, InputProfile};
use crate::limits::Limits;
use crate::output::fnv1a;
use crate::raster;
use crate::raster::walk::collect_images;
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Histogram of one image file, read through its embedded profile (8-bit images merge
/// with 8-bit ones; 16-bit images are brought to 8 bits so that a whole folder shares one
/// table).
pub fn histogram_of_file(path: &Path, limits: &Limits) -> Result<Histogram> {
    Ok(read_input(path, limits, String::new())?.0)
}

/// The histogram of one input (a histogram file, or an image read through its embedded
/// profile at 8 bits) and how its colours were read, recorded under `name`.
pub fn read_input(
    path: &Path,
    limits: &Limits,
    name: String,
) -> Result<(Histogram, Vec<InputProfile>)> {
    if let Some(bytes) = read_histogram_file(path, limits.max_alloc)? {
        let (h, inputs) = decode_with_inputs(&bytes, path)?;
        // A file that lists the images it was made from stands for them, so a palette
        // learned from shards records the same inputs as one learned from the images.
        let records = match inputs {
            Some(inputs) => inputs,
            None => vec![InputProfile::of_histogram_file(name, &h)],
        };
        return Ok((h, records));
    }
    let img = raster::decode(path, limits)?;
    let ImageColours { indexed, profile } = image_colours_8bit(&img);
    Ok((
        indexed.histogram,
        vec![InputProfile::of_image(name, profile.as_ref())],
    ))
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

/// What [`merge_as_they_arrive`] gathered: the unmerged remainder (one part per depth, at
/// most a few), what each item that was read says of itself and the items that failed,
/// both by index in input order.
pub(crate) struct Gathered<R> {
    pub parts: Vec<Histogram>,
    pub records: Vec<(usize, R)>,
    pub failures: Vec<(usize, Error)>,
}

/// Reads a histogram (and a record) from each item in parallel and merges them as they
/// arrive (see [`squash`]).
pub(crate) fn merge_as_they_arrive<T: Sync, R: Send>(
    items: &[T],
    read: impl Fn(&T) -> Result<(Histogram, R)> + Sync,
) -> Gathered<R> {
    let empty = || Gathered {
        parts: Vec::new(),
        records: Vec::new(),
        failures: Vec::new(),
    };
    let mut g = items
        .par_iter()
        .enumerate()
        .fold(empty, |mut g, (i, item)| {
            match read(item) {
                Ok((h, r)) => {
                    g.parts.push(h);
                    g.parts = squash(std::mem::take(&mut g.parts));
                    g.records.push((i, r));
                }
                Err(e) => g.failures.push((i, e)),
            }
            g
        })
        .reduce(empty, |mut a, b| {
            a.parts.extend(b.parts);
            a.parts = squash(a.parts);
            a.records.extend(b.records);
            a.failures.extend(b.failures);
            a
        });
    g.records.sort_by_key(|(i, _)| *i);
    g.failures.sort_by_key(|(i, _)| *i);
    g
}

/// First bytes of a histogram file: "CSHIST", a NUL, and the format version (1: every
/// entry sRGB; 2: some entries in other colour profiles, which the file holds).
pub const HIST_MAGIC: &[u8; 8] = b"CSHIST\x00\x01";

/// The first bytes of a version 2 file.
const HIST_MAGIC_2: &[u8; 8] = b"CSHIST\x00\x02";

/// The first bytes of a version 3 file.
const HIST_MAGIC_3: &[u8; 8] = b"CSHIST\x00\x03";

/// Encodes a histogram file (all integers little-endian). Version 1, when every entry is
/// sRGB:
/// magic (8) | depth u8 | 7 zero bytes | entries u64 | entries × (r, g, b u16; count u64) |
/// FNV-1a 64 checksum of everything before it (u64).
/// Version 2, when some entries are in other profiles: after the 7 zero bytes, the
/// profiles u64 | profiles × (length u64; the ICC profile) | entries u64 |
/// entries × (profile u32; r, g, b u16; count u64) | checksum; an entry's profile is 0
/// for sRGB or 1 + the index of its ICC profile.
pub fn encode(h: &Histogram) -> Vec<u8> {
    encode_as(h, None)
}

/// Version 3, the file `histogram` writes: the layout of version 2 (with possibly no
/// profile: profiles u64 = 0) and, after the entries, how each image in it was read:
/// length u64 | a JSON array of `input_profiles` records, as the palette documents list
/// them | checksum.
pub fn encode_with_inputs(h: &Histogram, inputs: &[InputProfile]) -> Vec<u8> {
    encode_as(h, Some(inputs))
}

fn encode_as(h: &Histogram, inputs: Option<&[InputProfile]>) -> Vec<u8> {
    let v3 = inputs.is_some();
    let v2 = v3 || !h.profiles.is_empty();
    let icc_bytes: usize = h.profiles.iter().map(|p| 8 + p.icc.len()).sum();
    let mut v = Vec::with_capacity(40 + icc_bytes + h.len() * 18);
    v.extend_from_slice(if v3 {
        HIST_MAGIC_3
    } else if v2 {
        HIST_MAGIC_2
    } else {
        HIST_MAGIC
    });
    v.push(h.depth);
    v.extend_from_slice(&[0u8; 7]);
    if v2 {
        v.extend_from_slice(&(h.profiles.len() as u64).to_le_bytes());
        for p in &h.profiles {
            v.extend_from_slice(&(p.icc.len() as u64).to_le_bytes());
            v.extend_from_slice(&p.icc);
        }
    }
    v.extend_from_slice(&(h.len() as u64).to_le_bytes());
    for (i, (c, &n)) in h.colours.iter().zip(&h.counts).enumerate() {
        if v2 {
            v.extend_from_slice(&h.profile_of(i).to_le_bytes());
        }
        for ch in c {
            v.extend_from_slice(&ch.to_le_bytes());
        }
        v.extend_from_slice(&n.to_le_bytes());
    }
    if let Some(inputs) = inputs {
        let json = serde_json::to_vec(inputs).expect("input records serialise");
        v.extend_from_slice(&(json.len() as u64).to_le_bytes());
        v.extend_from_slice(&json);
    }
    let sum = fnv1a(&v);
    v.extend_from_slice(&sum.to_le_bytes());
    v
}

/// Reads little-endian fields one after the other.
struct Fields<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Fields<'a> {
    fn take(&mut self, n: u64) -> Option<&'a [u8]> {
        let n = usize::try_from(n).ok()?;
        let end = self.at.checked_add(n).filter(|&e| e <= self.bytes.len())?;
        let s = &self.bytes[self.at..end];
        self.at = end;
        Some(s)
    }
    fn u64(&mut self) -> Option<u64> {
        Some(u64::from_le_bytes(self.take(8)?.try_into().ok()?))
    }
}

/// Decodes and checks a histogram file (version 1, 2 or 3); `path` is used in messages.
pub fn decode(bytes: &[u8], path: &Path) -> Result<Histogram> {
    Ok(decode_with_inputs(bytes, path)?.0)
}

/// As [`decode`], with the records of the images a version 3 file was made from.
pub fn decode_with_inputs(
    bytes: &[u8],
    path: &Path,
) -> Result<(Histogram, Option<Vec<InputProfile>>)> {
    let bad = |m: &str| Error::Decode {
        path: path.into(),
        message: format!("not a valid chromasift histogram file: {m}"),
    };
    if bytes.len() < 8 || &bytes[..6] != b"CSHIST" {
        return Err(bad("wrong first bytes"));
    }
    let v3 = bytes[..8] == HIST_MAGIC_3[..];
    let v2 = v3 || bytes[..8] == HIST_MAGIC_2[..];
    if bytes[..8] != HIST_MAGIC[..] && !v2 {
        return Err(bad(&format!(
            "format version {} is not supported (this tool reads versions 1 to 3)",
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
    let body = &bytes[..bytes.len() - 8];
    let sum = u64::from_le_bytes(bytes[bytes.len() - 8..].try_into().unwrap());
    let truncated = || bad("size does not match the entry count (truncated?)");
    let mut f = Fields {
        bytes: body,
        at: 16,
    };
    let mut iccs: Vec<&[u8]> = Vec::new();
    if v2 {
        let count = f.u64().ok_or_else(truncated)?;
        if count == 0 && !v3 {
            return Err(bad("a version 2 file holds at least one colour profile"));
        }
        for _ in 0..count {
            let len = f.u64().ok_or_else(truncated)?;
            iccs.push(f.take(len).ok_or_else(truncated)?);
        }
    }
    let n = f.u64().ok_or_else(truncated)?;
    let size = if v2 { 18 } else { 14 };
    let entries = f
        .take(n.checked_mul(size).ok_or_else(truncated)?)
        .ok_or_else(truncated)?;
    let inputs = if v3 {
        let len = f.u64().ok_or_else(truncated)?;
        Some(f.take(len).ok_or_else(truncated)?)
    } else {
        None
    };
    if f.at != body.len() {
        return Err(truncated());
    }

    if fnv1a(body) != sum {
        return Err(bad("checksum mismatch (damaged file)"));
    }
    let mut profiles: Vec<Arc<SourceProfile>> = Vec::with_capacity(iccs.len());
    for (i, icc) in iccs.iter().enumerate() {
        let ProfileUse::Convert(p) = read_profile(icc) else {
            return Err(bad(&format!(
                "colour profile {} cannot be applied or is sRGB itself",
                i + 1
            )));
        };
        if i > 0 && iccs[i - 1] >= *icc {
            return Err(bad("the colour profiles are not in increasing byte order"));
        }
        profiles.push(p);
    }
    let mut colours = Vec::with_capacity(n as usize);
    let mut counts = Vec::with_capacity(n as usize);
    let mut entry_profile = Vec::with_capacity(if v2 { n as usize } else { 0 });
    let mut used = vec![false; profiles.len() + 1];
    let mut total = 0u64;
    let mut last: Option<(u32, [u16; 3])> = None;
    for e in entries.chunks_exact(size as usize) {
        let (profile, e) = if v2 {
            (u32::from_le_bytes(e[..4].try_into().unwrap()), &e[4..])
        } else {
            (0, e)
        };
        let c = [
            u16::from_le_bytes([e[0], e[1]]),
            u16::from_le_bytes([e[2], e[3]]),
            u16::from_le_bytes([e[4], e[5]]),
        ];
        let count = u64::from_le_bytes(e[6..14].try_into().unwrap());
        if profile as usize > profiles.len() {
            return Err(bad(
                "an entry names a colour profile the file does not hold",
            ));
        }
        used[profile as usize] = true;
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
        if last.is_some_and(|l| l >= (profile, c)) {
            return Err(bad("entries are not in strictly increasing colour order"));
        }
        last = Some((profile, c));
        colours.push(c);
        counts.push(count);
        if v2 {
            entry_profile.push(profile);
        }
    }
    if used[1..].iter().any(|u| !u) {
        return Err(bad("a colour profile is used by no entry"));
    }
    let inputs = match inputs {
        Some(json) => {
            let list = serde_json::from_slice::<Vec<InputProfile>>(json)
                .map_err(|e| bad(&format!("the list of images it was made from: {e}")))?;
            // Written compactly, as `encode_with_inputs` writes it: one encoding per file.
            if serde_json::to_vec(&list).ok().as_deref() != Some(json) {
                return Err(bad(
                    "the list of images it was made from is not written as this tool writes it",
                ));
            }
            Some(list)
        }
        None => None,
    };
    if profiles.is_empty() {
        // Every entry sRGB (a version 3 file may say so entry by entry): as version 1.
        entry_profile.clear();
    }
    let h = Histogram {
        depth,
        colours,
        counts,
        profiles,
        entry_profile,
    };
    Ok((h, inputs))
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
    let g = gather_lenient(inputs, limits)?;
    match g.failures.into_iter().next() {
        Some((_, e)) => Err(e),
        None => Ok(g.histogram),
    }
}

/// The merged histogram of many inputs, how each input's colours were read, and the
/// inputs that could not be read.
#[derive(Debug)]
pub struct Pooled {
    pub histogram: Histogram,
    /// How each image was read (a histogram file that lists its images stands for them),
    /// in file-name order.
    pub inputs: Vec<InputProfile>,
    /// Each input that could not be read (path and error), in input order.
    pub failures: Vec<(PathBuf, Error)>,
}

/// As [`gather`], but a file that cannot be read does not stop the others: the
/// histogram of the files that could be read, and each failure. Fails only when no file
/// could be read (with the first error) or on a merge that cannot be made.
pub fn gather_lenient(inputs: &[PathBuf], limits: &Limits) -> Result<Pooled> {
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
    let g = merge_as_they_arrive(&files, |f: &PathBuf| {
        read_input(f, limits, f.display().to_string())
    });
    pool(g, |i| files[i].clone())
}

/// Merges what [`merge_as_they_arrive`] gathered into one histogram; `path` names item
/// `i` in failures. Fails when nothing could be read (with the first error), past
/// [`histogram::MAX_TOTAL`] pixels, or on depths that cannot merge.
pub(crate) fn pool(
    g: Gathered<Vec<InputProfile>>,
    path: impl Fn(usize) -> PathBuf,
) -> Result<Pooled> {
    let failures: Vec<(PathBuf, Error)> =
        g.failures.into_iter().map(|(i, e)| (path(i), e)).collect();
    if g.parts.is_empty() {
        if let Some((_, e)) = failures.into_iter().next() {
            return Err(e);
        }
        return Err(Error::Data("no input could be read".into()));
    }
    let total = g
        .parts
        .iter()
        .fold(0u64, |a, p| a.saturating_add(p.total()));
    if total > histogram::MAX_TOTAL {
        return Err(Error::Data(format!(
            "the inputs count {total} pixels in all, more than the 2^53 a histogram holds \
             exactly"
        )));
    }
    let histogram = Histogram::merge(&g.parts).ok_or_else(|| {
        Error::Data("the histograms mix 8- and 16-bit tables and cannot be merged".into())
    })?;
    // Listed by file name, so the record, like the merged histogram, does not depend on
    // the order the inputs were given or gathered in (a folder learned whole and the same
    // images summarised in shards list the same inputs).
    let mut inputs: Vec<InputProfile> = g.records.into_iter().flat_map(|(_, r)| r).collect();
    inputs.sort_by(|a, b| a.file.cmp(&b.file));
    Ok(Pooled {
        histogram,
        inputs,
        failures,
    })
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
                ..Histogram::default()
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

    /// A histogram of sRGB and Display P3 entries (profile from
    /// `tests/reference/make_profile_fixtures.py`) and the grey profile's.
    fn tagged() -> (Histogram, Arc<SourceProfile>, Arc<SourceProfile>) {
        let read = |b: &[u8]| match read_profile(b) {
            ProfileUse::Convert(p) => p,
            other => panic!("{other:?}"),
        };
        let p3 = read(include_bytes!("../../fixtures/profiles/display-p3.icc"));
        let grey = read(include_bytes!("../../fixtures/profiles/grey-gamma.icc"));
        let part = |colours: Vec<[u16; 3]>, p: Option<Arc<SourceProfile>>| {
            let counts = colours.iter().map(|c| 1 + c[0] as u64).collect();
            Histogram {
                depth: 8,
                colours,
                counts,
                ..Histogram::default()
            }
            .read_through(p)
        };
        let h = Histogram::merge(&[
            part(vec![[1, 2, 3], [200, 0, 0]], Some(p3.clone())),
            part(vec![[1, 2, 3], [9, 9, 9]], None),
        ])
        .unwrap();
        (h, p3, grey)
    }

    #[test]
    fn version_3_files_carry_the_records_of_their_images() {
        let (tagged_h, _, _) = tagged();
        let plain = Histogram {
            depth: 8,
            colours: vec![[1, 2, 3], [9, 9, 9]],
            counts: vec![4, 1],
            ..Histogram::default()
        };
        let p = Path::new("shard.hist");
        for h in [plain, tagged_h] {
            let inputs = vec![
                InputProfile::of_image("a/one.png".into(), None),
                InputProfile::of_image("b/two.jpg".into(), None),
            ];
            let bytes = encode_with_inputs(&h, &inputs);
            assert!(bytes.starts_with(b"CSHIST\x00\x03"));
            let (back, listed) = decode_with_inputs(&bytes, p).unwrap();
            assert_eq!(back, h);
            assert_eq!(listed.as_ref(), Some(&inputs));
            // The records are written one way only (compact JSON): spaced out, refused.
            let json = serde_json::to_vec(&inputs).unwrap();
            let spaced = serde_json::to_vec_pretty(&inputs).unwrap();
            let head = bytes.len() - 8 - json.len() - 8;
            let mut v = bytes[..head].to_vec();
            v.extend_from_slice(&(spaced.len() as u64).to_le_bytes());
            v.extend_from_slice(&spaced);
            let sum = fnv1a(&v);
            v.extend_from_slice(&sum.to_le_bytes());
            assert!(decode(&v, p)
                .unwrap_err()
                .to_string()
                .contains("as this tool writes"));
            // The records are under the checksum, and cut short is refused.
            let mut v = bytes.clone();
            let at = v.len() - 10;
            v[at] ^= 1;
            assert!(decode(&v, p).unwrap_err().to_string().contains("checksum"));
            let mut v = bytes[..bytes.len() - 20].to_vec();
            let sum = fnv1a(&v);
            v.extend_from_slice(&sum.to_le_bytes());
            assert!(decode(&v, p).unwrap_err().to_string().contains("truncated"));
        }
        // Versions 1 and 2 list no images.
        let (h, _, _) = tagged();
        assert_eq!(decode_with_inputs(&encode(&h), p).unwrap().1, None);
    }

    #[test]
    fn tagged_histograms_round_trip_and_damage_is_refused() {
        let (h, p3, grey) = tagged();
        // sRGB entries first, then the P3 ones; the same colour in two profiles is two
        // entries.
        assert_eq!(
            h.colours,
            vec![[1, 2, 3], [9, 9, 9], [1, 2, 3], [200, 0, 0]]
        );
        assert_eq!(h.entry_profile, vec![0, 0, 1, 1]);
        let bytes = encode(&h);
        assert!(bytes.starts_with(b"CSHIST\x00\x02"));
        let p = Path::new("tagged.hist");
        assert_eq!(decode(&bytes, p).unwrap(), h);
        let with_sum = |mut v: Vec<u8>| {
            let n = v.len() - 8;
            let s = fnv1a(&v[..n]);
            v[n..].copy_from_slice(&s.to_le_bytes());
            v
        };
        let check = |v: Vec<u8>, m: &str| {
            let e = decode(&with_sum(v), p).unwrap_err().to_string();
            assert!(e.contains("tagged.hist") && e.contains(m), "{e}");
        };
        // An entry naming a second profile the file does not hold.
        let entries = bytes.len() - 8 - 4 * 18;
        let mut v = bytes.clone();
        v[entries + 3 * 18] = 2;
        check(v, "does not hold");
        // Entries out of order (the last entry moved to profile 0 ahead of the others).
        let mut v = bytes.clone();
        v[entries + 3 * 18] = 0;
        check(v, "increasing");
        // A second profile no entry uses, or profiles out of byte order.
        let two = |first: &SourceProfile, second: &SourceProfile| {
            let mut v = bytes[..16].to_vec();
            v.extend_from_slice(&2u64.to_le_bytes());
            for q in [first, second] {
                v.extend_from_slice(&(q.icc.len() as u64).to_le_bytes());
                v.extend_from_slice(&q.icc);
            }
            v.extend_from_slice(&bytes[24 + 8 + p3.icc.len()..]);
            v
        };
        let (lo, hi) = if grey.icc < p3.icc {
            (&grey, &p3)
        } else {
            (&p3, &grey)
        };
        check(two(lo, hi), "used by no entry");
        check(two(hi, lo), "byte order");
        // An sRGB-matching or unreadable profile is never written, so it is refused.
        let mut v = bytes[..24].to_vec();
        v.extend_from_slice(&(p3.icc.len() as u64).to_le_bytes());
        v.extend(std::iter::repeat_n(0u8, p3.icc.len()));
        v.extend_from_slice(&bytes[32 + p3.icc.len()..]);
        check(v, "cannot be applied");
        // Cut inside the profile.
        let e = decode(&bytes[..100], p).unwrap_err().to_string();
        assert!(e.contains("truncated"), "{e}");
    }
}
