//! TIFF image file directories built by hand, little-endian, for the tiled writer: the
//! entries of one directory, its size before its offsets are known, and its bytes once they
//! are. Classic TIFF (TIFF 6.0 §2: 12-byte entries, values over 4 bytes stored after the
//! directory) and BigTIFF (20-byte entries, values over 8 bytes after the directory).

use super::tags::{GeoTagValue, GeoTags, TAG_GDAL_NODATA};

/// TIFF field types used here (TIFF 6.0 §2; LONG8 from BigTIFF).
pub(super) const ASCII: u16 = 2;
pub(super) const SHORT: u16 = 3;
pub(super) const LONG: u16 = 4;
pub(super) const FLOAT: u16 = 11;
pub(super) const DOUBLE: u16 = 12;
pub(super) const LONG8: u16 = 16;

/// One directory entry: tag, field type, value count and the values' little-endian bytes.
#[derive(Debug, Clone)]
pub(super) struct Entry {
    pub(super) tag: u16,
    pub(super) kind: u16,
    pub(super) count: u64,
    pub(super) bytes: Vec<u8>,
}

impl Entry {
    pub(super) fn shorts(tag: u16, v: &[u16]) -> Entry {
        let bytes = v.iter().flat_map(|x| x.to_le_bytes()).collect();
        Entry {
            tag,
            kind: SHORT,
            count: v.len() as u64,
            bytes,
        }
    }

    pub(super) fn short(tag: u16, v: u16) -> Entry {
        Entry::shorts(tag, &[v])
    }

    pub(super) fn long(tag: u16, v: u32) -> Entry {
        Entry {
            tag,
            kind: LONG,
            count: 1,
            bytes: v.to_le_bytes().to_vec(),
        }
    }

    /// Offsets or byte counts: LONG in classic TIFF, LONG8 in BigTIFF. In classic TIFF the
    /// values must fit in 32 bits (checked by the caller before the bytes are made).
    pub(super) fn offsets(tag: u16, v: &[u64], big: bool) -> Entry {
        let bytes = if big {
            v.iter().flat_map(|x| x.to_le_bytes()).collect()
        } else {
            v.iter().flat_map(|&x| (x as u32).to_le_bytes()).collect()
        };
        Entry {
            tag,
            kind: if big { LONG8 } else { LONG },
            count: v.len() as u64,
            bytes,
        }
    }

    /// ASCII text with its terminating NUL (TIFF 6.0 §2).
    pub(super) fn ascii(tag: u16, s: &str) -> Entry {
        let mut bytes = s.as_bytes().to_vec();
        bytes.push(0);
        Entry {
            tag,
            kind: ASCII,
            count: bytes.len() as u64,
            bytes,
        }
    }

    fn geo(tag: u16, v: &GeoTagValue) -> Entry {
        let (kind, count, bytes): (u16, usize, Vec<u8>) = match v {
            GeoTagValue::Short(v) => return Entry::shorts(tag, v),
            GeoTagValue::Ascii(s) => return Entry::ascii(tag, s),
            GeoTagValue::Long(v) => (
                LONG,
                v.len(),
                v.iter().flat_map(|x| x.to_le_bytes()).collect(),
            ),
            GeoTagValue::Float(v) => (
                FLOAT,
                v.len(),
                v.iter().flat_map(|x| x.to_le_bytes()).collect(),
            ),
            GeoTagValue::Double(v) => (
                DOUBLE,
                v.len(),
                v.iter().flat_map(|x| x.to_le_bytes()).collect(),
            ),
        };
        Entry {
            tag,
            kind,
            count: count as u64,
            bytes,
        }
    }
}

/// The GeoTIFF tags (unchanged) and GDAL_NODATA as entries.
pub(super) fn geo_entries(geo: &GeoTags, nodata: Option<&str>) -> Vec<Entry> {
    let mut v: Vec<Entry> = geo
        .entries()
        .into_iter()
        .map(|(c, x)| Entry::geo(c, x))
        .collect();
    if let Some(text) = nodata {
        v.push(Entry::ascii(TAG_GDAL_NODATA, text));
    }
    v
}

/// Bytes of the file header: 8 for classic TIFF, 16 for BigTIFF.
pub(super) fn header_len(big: bool) -> u64 {
    if big {
        16
    } else {
        8
    }
}

/// The little-endian file header pointing at the first directory.
pub(super) fn header(big: bool, first_ifd: u64) -> Vec<u8> {
    let mut h = b"II".to_vec();
    if big {
        h.extend_from_slice(&43u16.to_le_bytes());
        h.extend_from_slice(&8u16.to_le_bytes());
        h.extend_from_slice(&0u16.to_le_bytes());
        h.extend_from_slice(&first_ifd.to_le_bytes());
    } else {
        h.extend_from_slice(&42u16.to_le_bytes());
        h.extend_from_slice(&(first_ifd as u32).to_le_bytes());
    }
    h
}

/// Sizes of one layout: (entry count field, entry, inline value room, next-IFD pointer).
fn sizes(big: bool) -> (u64, u64, usize, u64) {
    if big {
        (8, 20, 8, 8)
    } else {
        (2, 12, 4, 4)
    }
}

/// Bytes a directory takes, its out-of-line values included (each padded to an even length).
pub(super) fn ifd_len(entries: &[Entry], big: bool) -> u64 {
    let (head, entry, inline, next) = sizes(big);
    let values: u64 = entries
        .iter()
        .filter(|e| e.bytes.len() > inline)
        .map(|e| e.bytes.len().next_multiple_of(2) as u64)
        .sum();
    head + entry * entries.len() as u64 + next + values
}

/// The directory written at byte `at`, its entries sorted by tag (TIFF 6.0 §2), followed by
/// its out-of-line values; `next` is the following directory's offset (0 for the last).
pub(super) fn ifd_bytes(entries: &[Entry], at: u64, next: u64, big: bool) -> Vec<u8> {
    let (head, entry, inline, next_len) = sizes(big);
    let mut sorted: Vec<&Entry> = entries.iter().collect();
    sorted.sort_by_key(|e| e.tag);
    let mut out = Vec::with_capacity(ifd_len(entries, big) as usize);
    let mut values: Vec<u8> = Vec::new();
    let values_at = at + head + entry * sorted.len() as u64 + next_len;
    let put = |out: &mut Vec<u8>, v: u64| {
        if big {
            out.extend_from_slice(&v.to_le_bytes());
        } else {
            out.extend_from_slice(&(v as u32).to_le_bytes());
        }
    };
    if big {
        out.extend_from_slice(&(sorted.len() as u64).to_le_bytes());
    } else {
        out.extend_from_slice(&(sorted.len() as u16).to_le_bytes());
    }
    for e in &sorted {
        out.extend_from_slice(&e.tag.to_le_bytes());
        out.extend_from_slice(&e.kind.to_le_bytes());
        put(&mut out, e.count);
        if e.bytes.len() <= inline {
            let mut field = e.bytes.clone();
            field.resize(inline, 0);
            out.extend_from_slice(&field);
        } else {
            put(&mut out, values_at + values.len() as u64);
            values.extend_from_slice(&e.bytes);
            if values.len() % 2 == 1 {
                values.push(0);
            }
        }
    }
    put(&mut out, next);
    out.extend_from_slice(&values);
    out
}
