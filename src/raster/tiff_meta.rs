//! What a TIFF photo's own tags say about it, carried into the reduced PNG as the other
//! formats' metadata are: the print resolution (TIFF 6.0 tags 282 XResolution, 283
//! YResolution, 296 ResolutionUnit) and the orientation and camera tags of its first
//! directory, written again as a small EXIF block (a TIFF header and one directory, the
//! layout EXIF 2.32 section 4.6 uses), since the reduced image keeps the stored pixels.

use std::io::Cursor;
use tiff::decoder::{ifd::Value, Decoder};
use tiff::tags::Tag;

/// Longest text tag carried, in bytes.
const MAX_TEXT: usize = 1024;

/// The resolution (dots per inch) and the EXIF block of a TIFF's first image, where its
/// tags give them.
pub(super) fn tiff_metadata(bytes: &[u8]) -> (Option<f64>, Option<Vec<u8>>) {
    let Ok(mut d) = Decoder::new(Cursor::new(bytes)) else {
        return (None, None);
    };
    (dpi(&mut d), exif(&mut d))
}

fn dpi(d: &mut Decoder<Cursor<&[u8]>>) -> Option<f64> {
    let x = match d.find_tag(Tag::XResolution).ok()?? {
        Value::Rational(n, den) if den > 0 && n > 0 => n as f64 / den as f64,
        _ => return None,
    };
    // ResolutionUnit: 1 none, 2 inch (the default), 3 centimetre.
    match d
        .find_tag_unsigned::<u16>(Tag::ResolutionUnit)
        .ok()?
        .unwrap_or(2)
    {
        2 => Some(x),
        3 => Some(x * 2.54),
        _ => None,
    }
}

/// The text tags carried (TIFF 6.0 numbers, ASCII), in ascending order with Orientation.
const TEXT_TAGS: [(u16, Tag); 6] = [
    (271, Tag::Make),
    (272, Tag::Model),
    (305, Tag::Software),
    (306, Tag::DateTime),
    (315, Tag::Artist),
    (33432, Tag::Copyright),
];

fn exif(d: &mut Decoder<Cursor<&[u8]>>) -> Option<Vec<u8>> {
    // (tag, type, count, value bytes): type 2 ASCII (NUL-terminated), 3 SHORT.
    let mut entries: Vec<(u16, u16, u32, Vec<u8>)> = Vec::new();
    for (number, tag) in TEXT_TAGS {
        if let Ok(s) = d.get_tag_ascii_string(tag) {
            let s = s.trim_end_matches('\0');
            if !s.is_empty() && s.len() <= MAX_TEXT {
                let mut v = s.as_bytes().to_vec();
                v.push(0);
                entries.push((number, 2, v.len() as u32, v));
            }
        }
    }
    if let Ok(Some(o)) = d.find_tag_unsigned::<u16>(Tag::Orientation) {
        if (1..=8).contains(&o) {
            entries.push((274, 3, 1, o.to_le_bytes().to_vec()));
        }
    }
    if entries.is_empty() {
        return None;
    }
    entries.sort_by_key(|e| e.0);
    Some(exif_block(&entries))
}

/// A little-endian TIFF structure: header, one directory of `entries`, no next
/// directory, and the values longer than 4 bytes after it.
fn exif_block(entries: &[(u16, u16, u32, Vec<u8>)]) -> Vec<u8> {
    let dir_len = 2 + 12 * entries.len() + 4;
    let mut out = b"II*\0".to_vec();
    out.extend_from_slice(&8u32.to_le_bytes());
    let mut extra: Vec<u8> = Vec::new();
    out.extend_from_slice(&(entries.len() as u16).to_le_bytes());
    for (tag, kind, count, value) in entries {
        out.extend_from_slice(&tag.to_le_bytes());
        out.extend_from_slice(&kind.to_le_bytes());
        out.extend_from_slice(&count.to_le_bytes());
        if value.len() <= 4 {
            let mut field = value.clone();
            field.resize(4, 0);
            out.extend_from_slice(&field);
        } else {
            let at = 8 + dir_len + extra.len();
            out.extend_from_slice(&(at as u32).to_le_bytes());
            extra.extend_from_slice(value);
            // Values start on a word boundary (TIFF 6.0, section 2).
            if extra.len() % 2 == 1 {
                extra.push(0);
            }
        }
    }
    out.extend_from_slice(&0u32.to_le_bytes());
    out.extend_from_slice(&extra);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_block_reads_back_with_the_image_crates_exif_reader() {
        let entries = vec![
            (271u16, 2u16, 8u32, b"Maker 1\0".to_vec()),
            (274, 3, 1, 8u16.to_le_bytes().to_vec()),
        ];
        let block = exif_block(&entries);
        assert_eq!(
            image::metadata::Orientation::from_exif_chunk(&block),
            Some(image::metadata::Orientation::Rotate270)
        );
        // The text value lies after the directory, where its offset points.
        let off = u32::from_le_bytes(block[18..22].try_into().unwrap()) as usize;
        assert_eq!(&block[off..off + 8], b"Maker 1\0");
    }
}
