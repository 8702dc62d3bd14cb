//! Reading images through the decode limits (with their colour profile and EXIF), and
//! writing PNG and TIFF outputs (`write.rs`).

pub mod geotiff;
mod tiff_meta;
pub mod walk;
mod write;
pub(crate) use write::png_pixel_dims;

pub use write::{
    write_f32_tiff, write_grey_png, write_indexed_png, write_indexed_png_with, write_rgb_png,
    write_rgba_png, write_rgba_png_with, PngExtras,
};

use crate::error::{Error, Result};
use crate::limits::Limits;
use image::{ColorType, DynamicImage, ImageDecoder, ImageReader};
use std::io::{Cursor, Read};
use std::path::Path;

/// Decoded pixels, always RGBA.
#[derive(Debug, Clone, PartialEq)]
pub enum Pixels {
    /// 8 bits per sample, `4 × width × height` values.
    Rgba8(Vec<u8>),
    /// 16 bits per sample, `4 × width × height` values.
    Rgba16(Vec<u16>),
}

/// A decoded image.
#[derive(Debug, Clone, PartialEq)]
pub struct Decoded {
    pub width: u32,
    pub height: u32,
    pub pixels: Pixels,
    /// True when the source carried an alpha channel.
    pub has_alpha: bool,
    /// Print resolution recorded in the file (PNG pHYs in metres, JPEG JFIF density), in
    /// dots per inch.
    pub dpi: Option<f64>,
    /// True when the file holds more frames or pages than the first, which alone was
    /// decoded (an animated GIF, PNG or WebP, a multi-page TIFF).
    pub more_frames: bool,
    /// The embedded ICC profile, as stored (`None`: untagged, read as sRGB).
    pub icc_profile: Option<Vec<u8>>,
    /// The EXIF block (TIFF-structured, without the JPEG `Exif\0\0` prefix), as stored.
    pub exif: Option<Vec<u8>>,
    /// Why an embedded profile that is present could not be taken out of the file (a PNG
    /// iCCP chunk whose data does not inflate); the image is then read as sRGB, with a note.
    pub icc_unreadable: Option<String>,
}

impl Decoded {
    /// Number of pixels.
    pub fn pixel_count(&self) -> usize {
        self.width as usize * self.height as usize
    }

    /// Alpha of every pixel scaled to 8 bits.
    pub fn alpha8(&self) -> Vec<u8> {
        match &self.pixels {
            Pixels::Rgba8(p) => p.chunks_exact(4).map(|c| c[3]).collect(),
            Pixels::Rgba16(p) => p
                .chunks_exact(4)
                .map(|c| ((c[3] as u32 + 128) / 257) as u8)
                .collect(),
        }
    }

    /// An 8-bit RGBA image from raw samples (for library callers and tests).
    pub fn from_rgba8(width: u32, height: u32, rgba: Vec<u8>) -> Self {
        assert_eq!(
            rgba.len(),
            width as usize * height as usize * 4,
            "RGBA buffer size"
        );
        let has_alpha = rgba.chunks_exact(4).any(|p| p[3] != 255);
        Decoded {
            width,
            height,
            pixels: Pixels::Rgba8(rgba),
            has_alpha,
            dpi: None,
            more_frames: false,
            icc_profile: None,
            exif: None,
            icc_unreadable: None,
        }
    }
}

/// Whether an image file holds more than one frame or page (only the first is decoded):
/// a GIF with a second image descriptor, a PNG with an animation control chunk (acTL), a
/// WebP with an animation chunk (ANIM), a TIFF whose first directory links to a next one.
pub fn has_more_frames(bytes: &[u8]) -> bool {
    let u16le = |b: &[u8], o: usize| b.get(o..o + 2).map(|x| u16::from_le_bytes([x[0], x[1]]));
    if bytes.starts_with(b"GIF8") {
        // Header (6), logical screen descriptor (7), global colour table, then blocks.
        let Some(&flags) = bytes.get(10) else {
            return false;
        };
        let mut pos = 13
            + if flags & 0x80 != 0 {
                3 << ((flags & 7) + 1)
            } else {
                0
            };
        let mut images = 0;
        let skip_sub_blocks = |mut pos: usize| -> Option<usize> {
            loop {
                let len = *bytes.get(pos)? as usize;
                pos += 1 + len;
                if len == 0 {
                    return Some(pos);
                }
            }
        };
        while let Some(&b) = bytes.get(pos) {
            match b {
                0x21 => match skip_sub_blocks(pos + 2) {
                    Some(p) => pos = p,
                    None => return false,
                },
                0x2c => {
                    images += 1;
                    if images > 1 {
                        return true;
                    }
                    let Some(&f) = bytes.get(pos + 9) else {
                        return false;
                    };
                    pos += 10 + if f & 0x80 != 0 { 3 << ((f & 7) + 1) } else { 0 };
                    match skip_sub_blocks(pos + 1) {
                        Some(p) => pos = p,
                        None => return false,
                    }
                }
                _ => return false,
            }
        }
        return false;
    }
    if bytes.starts_with(b"\x89PNG\r\n\x1a\n") {
        let mut pos = 8usize;
        while pos + 8 <= bytes.len() {
            let len =
                u32::from_be_bytes([bytes[pos], bytes[pos + 1], bytes[pos + 2], bytes[pos + 3]])
                    as usize;
            match &bytes[pos + 4..pos + 8] {
                b"acTL" => return true,
                b"IDAT" | b"IEND" => return false,
                _ => {}
            }
            pos = match pos.checked_add(12 + len) {
                Some(p) => p,
                None => return false,
            };
        }
        return false;
    }
    if bytes.starts_with(b"RIFF") && bytes.get(8..12) == Some(b"WEBP") {
        let mut pos = 12usize;
        while pos + 8 <= bytes.len() {
            let len = u32::from_le_bytes([
                bytes[pos + 4],
                bytes[pos + 5],
                bytes[pos + 6],
                bytes[pos + 7],
            ]) as usize;
            if &bytes[pos..pos + 4] == b"ANIM" {
                return true;
            }
            pos = match pos.checked_add(8 + len + (len & 1)) {
                Some(p) => p,
                None => return false,
            };
        }
        return false;
    }
    let (le, be) = (bytes.starts_with(b"II*\0"), bytes.starts_with(b"MM\0*"));
    if le || be {
        let u32_at = |o: usize| {
            bytes.get(o..o + 4).map(|x| {
                let a = [x[0], x[1], x[2], x[3]];
                if le {
                    u32::from_le_bytes(a)
                } else {
                    u32::from_be_bytes(a)
                }
            })
        };
        let u16_at = |o: usize| {
            if le {
                u16le(bytes, o)
            } else {
                bytes
                    .get(o..o + 2)
                    .map(|x| u16::from_be_bytes([x[0], x[1]]))
            }
        };
        let Some(ifd) = u32_at(4) else { return false };
        let Some(n) = u16_at(ifd as usize) else {
            return false;
        };
        let next = (ifd as usize).checked_add(2 + 12 * n as usize);
        return next.and_then(u32_at).is_some_and(|o| o != 0);
    }
    false
}

/// A PNG without its embedded colour profiles (iCCP chunks), or `None` when it has none
/// (or is not a well-formed chunk sequence, which the decoder then reports). The profile is
/// not used, and its compressed text could inflate to gigabytes before any pixel limit
/// applies, so the decoder never sees it.
pub fn png_without_profile(bytes: &[u8]) -> Option<Vec<u8>> {
    const PNG_SIG: &[u8] = b"\x89PNG\r\n\x1a\n";
    if !bytes.starts_with(PNG_SIG) {
        return None;
    }
    let mut pos = 8usize;
    let mut spans = Vec::new();
    let mut found = false;
    while pos + 12 <= bytes.len() {
        let len = u32::from_be_bytes(bytes[pos..pos + 4].try_into().ok()?) as usize;
        let end = match pos.checked_add(12).and_then(|e| e.checked_add(len)) {
            Some(end) if end <= bytes.len() => end,
            // A chunk cut short: the rest goes to the decoder as it is (it reports the cut),
            // without the profiles found before it.
            _ => break,
        };
        let kind = &bytes[pos + 4..pos + 8];
        if kind == b"iCCP" {
            found = true;
        } else {
            spans.push(pos..end);
        }
        pos = end;
        if kind == b"IEND" {
            break;
        }
    }
    if !found {
        return None;
    }
    let mut out = PNG_SIG.to_vec();
    for span in spans {
        out.extend_from_slice(&bytes[span]);
    }
    out.extend_from_slice(&bytes[pos..]);
    Some(out)
}

/// Dots per inch of a PNG's whole pixels per metre: the whole number of dots per inch that
/// a writer would have stored as `ppm` when there is one (5906 px/m is 150 dpi, not
/// 150.0124), otherwise the exact conversion.
fn dpi_of_pixels_per_metre(ppm: f64) -> f64 {
    let exact = ppm * 0.0254;
    let whole = exact.round();
    if whole > 0.0 && (whole / 0.0254).round() == ppm {
        whole
    } else {
        exact
    }
}

/// Reads the print resolution from a PNG pHYs chunk (unit: metre) or a JPEG JFIF header,
/// in dots per inch. Returns `None` when the file records none.
pub fn sniff_dpi(bytes: &[u8]) -> Option<f64> {
    const PNG_SIG: &[u8] = b"\x89PNG\r\n\x1a\n";
    if bytes.starts_with(PNG_SIG) {
        let mut pos = 8usize;
        while pos + 8 <= bytes.len() {
            let len = u32::from_be_bytes(bytes[pos..pos + 4].try_into().ok()?) as usize;
            let kind = &bytes[pos + 4..pos + 8];
            let data = bytes.get(pos + 8..pos.checked_add(8)?.checked_add(len)?)?;
            if kind == b"pHYs" && len == 9 {
                let x = u32::from_be_bytes(data[0..4].try_into().ok()?) as f64;
                return (data[8] == 1 && x > 0.0).then(|| dpi_of_pixels_per_metre(x));
            }
            if kind == b"IDAT" || kind == b"IEND" {
                return None;
            }
            pos = pos.checked_add(12)?.checked_add(len)?;
        }
        return None;
    }
    if bytes.len() >= 18
        && bytes[0] == 0xff
        && bytes[1] == 0xd8
        && bytes[2] == 0xff
        && bytes[3] == 0xe0
        && &bytes[6..11] == b"JFIF\0"
    {
        let units = bytes[13];
        let x = u16::from_be_bytes([bytes[14], bytes[15]]) as f64;
        return match units {
            1 if x > 0.0 => Some(x),
            2 if x > 0.0 => Some(x * 2.54),
            _ => None,
        };
    }
    None
}

/// A decoder message without Rust debug dumps: `ChunkType { type: IDAT, critical: … }`
/// (from the PNG decoder) becomes `IDAT`.
fn readable(message: &str) -> String {
    let mut out = String::new();
    let mut rest = message;
    while let Some(at) = rest.find("ChunkType { type: ") {
        out.push_str(&rest[..at]);
        let after = &rest[at + "ChunkType { type: ".len()..];
        let name_end = after.find([',', ' ', '}']).unwrap_or(after.len());
        out.push_str(&after[..name_end]);
        rest = match after.find('}') {
            Some(close) => &after[close + 1..],
            None => "",
        };
    }
    out.push_str(rest);
    out
}

fn decode_error(path: &Path, e: image::ImageError) -> Error {
    use image::ImageError as E;
    let message = match e {
        E::Limits(l) => {
            return Error::LimitExceeded {
                path: path.into(),
                message: format!("refused before decoding: {l}"),
            }
        }
        E::Unsupported(u) => format!("unsupported image: {u}"),
        E::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "image data ends early (truncated file?)".to_string()
        }
        other => format!("cannot decode image: {}", readable(&other.to_string())),
    };
    Error::Decode {
        path: path.into(),
        message,
    }
}

/// Does JPEG data run to its end-of-image marker? Walks the marker segments (ITU-T T.81
/// annex B): each segment's length is skipped, so markers inside metadata such as an
/// embedded thumbnail are never mistaken for the image's own; after each start of scan,
/// the entropy-coded data runs to the next marker other than a stuffed 0xFF00 or a
/// restart marker.
pub fn jpeg_is_complete(bytes: &[u8]) -> bool {
    if bytes.len() < 4 || bytes[0] != 0xFF || bytes[1] != 0xD8 {
        return false;
    }
    let mut i = 2;
    loop {
        // Find the next marker (0xFF fill bytes may precede it).
        while i < bytes.len() && bytes[i] != 0xFF {
            i += 1;
        }
        while i < bytes.len() && bytes[i] == 0xFF {
            i += 1;
        }
        let Some(&m) = bytes.get(i) else {
            return false;
        };
        i += 1;
        match m {
            0xD9 => return true,
            0x01 | 0xD0..=0xD7 => continue,
            _ => {}
        }
        let Some(len) = bytes
            .get(i..i + 2)
            .map(|b| u16::from_be_bytes([b[0], b[1]]) as usize)
        else {
            return false;
        };
        if len < 2 {
            return false;
        }
        i += len;
        if i > bytes.len() {
            return false;
        }
        if m == 0xDA {
            // Entropy-coded data: up to a marker that is not 0xFF00 or a restart.
            loop {
                while i < bytes.len() && bytes[i] != 0xFF {
                    i += 1;
                }
                let mut j = i;
                while j < bytes.len() && bytes[j] == 0xFF {
                    j += 1;
                }
                match bytes.get(j) {
                    None => return false,
                    Some(0x00) | Some(0xD0..=0xD7) => i = j + 1,
                    Some(_) => break,
                }
            }
        }
    }
}

/// Bytes read before the format is known (every signature the decoders know is shorter).
const SNIFF_BYTES: u64 = 64;

fn not_an_image(path: &Path) -> Error {
    Error::Decode {
        path: path.into(),
        message: "not an image in a format this tool reads (PNG, JPEG, TIFF, WebP, BMP, GIF)"
            .into(),
    }
}

/// Opens an input file and reads its metadata; a folder is refused.
pub(crate) fn open_file(path: &Path) -> Result<(std::fs::File, std::fs::Metadata)> {
    let open_error = |source| Error::Open {
        path: path.into(),
        source,
    };
    let file = std::fs::File::open(path).map_err(open_error)?;
    let meta = file.metadata().map_err(open_error)?;
    if meta.is_dir() {
        return Err(Error::Decode {
            path: path.into(),
            message: "is a folder, not an image file".into(),
        });
    }
    Ok((file, meta))
}

/// Reads and decodes an image file, refusing over-limit images before any pixel
/// buffer is allocated.
pub fn decode(path: &Path, limits: &Limits) -> Result<Decoded> {
    let (mut file, meta) = open_file(path)?;
    if meta.len() > limits.max_alloc {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "file is {} bytes, over the limit of {} bytes",
                meta.len(),
                limits.max_alloc
            ),
        });
    }
    // The size above is 0 for devices and pipes, which may never end: read at most one
    // byte over the limit, and look at the first bytes before reading on, so a stream
    // that is no image (such as /dev/zero) is refused at once.
    let read_error = |source| Error::Open {
        path: path.into(),
        source,
    };
    let mut bytes = Vec::with_capacity(meta.len() as usize);
    let mut reader = (&mut file).take(limits.max_alloc.saturating_add(1));
    (&mut reader)
        .take(SNIFF_BYTES)
        .read_to_end(&mut bytes)
        .map_err(read_error)?;
    if !bytes.is_empty() && image::guess_format(&bytes).is_err() {
        return Err(not_an_image(path));
    }
    reader.read_to_end(&mut bytes).map_err(read_error)?;
    if bytes.len() as u64 > limits.max_alloc {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!("input is over the limit of {} bytes", limits.max_alloc),
        });
    }
    decode_bytes(&bytes, path, limits)
}

/// Decodes an image held in memory; `name` is used in messages.
pub fn decode_bytes(bytes: &[u8], name: &Path, limits: &Limits) -> Result<Decoded> {
    if bytes.is_empty() {
        return Err(Error::Decode {
            path: name.into(),
            message: "file is empty".into(),
        });
    }
    let stripped = png_without_profile(bytes);
    let dpi = sniff_dpi(bytes);
    let more_frames = has_more_frames(bytes);
    // The PNG profile is read here, from the chunk the decoder will not see.
    let png_icc = stripped.as_ref().map(|_| png_icc_profile(bytes));
    let icc_unreadable = match &png_icc {
        Some(Err(why)) => Some(format!("the embedded ICC profile (PNG iCCP chunk) {why}")),
        _ => None,
    };
    let png_icc = png_icc.and_then(|r| r.ok());
    let bytes = stripped.as_deref().unwrap_or(bytes);
    let reader = ImageReader::new(Cursor::new(bytes))
        .with_guessed_format()
        .map_err(|e| decode_error(name, e.into()))?;
    let format = reader.format();
    if format.is_none() {
        return Err(not_an_image(name));
    }
    // The JPEG decoder fills a cut-off scan with grey and reports no error: look for the
    // end of the image first.
    if format == Some(image::ImageFormat::Jpeg) && !jpeg_is_complete(bytes) {
        return Err(Error::Decode {
            path: name.into(),
            message: "JPEG data ends before its end-of-image marker (truncated file?)".into(),
        });
    }
    let tiff = format == Some(image::ImageFormat::Tiff);
    let decode_error = |name: &Path, e: image::ImageError| match e {
        image::ImageError::Unsupported(u)
            if tiff
                && match u.kind() {
                    image::error::UnsupportedErrorKind::Color(_) => true,
                    image::error::UnsupportedErrorKind::GenericFeature(f) => {
                        f.contains("color type")
                    }
                    _ => false,
                } =>
        {
            Error::Decode {
                path: name.into(),
                message: "this TIFF is not a grey or RGB(A) image; for a multi-band raster use \
                      `landcover`, or `sweep` with `--bands`"
                    .into(),
            }
        }
        e => decode_error(name, e),
    };
    // Header first: refuse over-limit images before the decoder allocates.
    let (width, height) = reader
        .into_dimensions()
        .map_err(|e| decode_error(name, e))?;
    limits
        .check_dimensions(width, height, 4, 1)
        .map_err(|message| Error::LimitExceeded {
            path: name.into(),
            message,
        })?;
    // Every 8 × 8 block of a JPEG costs at least a bit or so, even in a progressive file
    // (DC code, end-of-band runs): a header declaring far more pixels than the data could
    // hold (below one byte per 2048 pixels) is forged or cut, and would make the decoder
    // fill gigabytes with grey.
    if format == Some(image::ImageFormat::Jpeg)
        && (bytes.len() as u64).saturating_mul(2048) < width as u64 * height as u64
    {
        return Err(Error::Decode {
            path: name.into(),
            message: format!(
                "the JPEG header declares {width} x {height} pixels, but the file holds only \
                 {} bytes, far too few for that many (forged or cut header?)",
                bytes.len()
            ),
        });
    }
    let mut reader = ImageReader::new(Cursor::new(bytes))
        .with_guessed_format()
        .map_err(|e| decode_error(name, e.into()))?;
    let mut il = image::Limits::default();
    il.max_image_width = Some(width);
    il.max_image_height = Some(height);
    il.max_alloc = Some(limits.max_alloc);
    reader.limits(il);
    let mut decoder = reader.into_decoder().map_err(|e| decode_error(name, e))?;
    // Metadata the reduced image carries on: the colour profile (PNG iCCP, read here with
    // a bound on its inflated size; JPEG APP2, TIFF tag 34675 and WebP ICCP from the
    // decoders) and EXIF. A profile or EXIF block that cannot be read is left out.
    let icc_profile = match stripped {
        Some(_) => png_icc,
        // The reader's TIFF decoder does not pass the profile on: read tag 34675 here.
        None if tiff => tiff_icc_profile(bytes),
        None => decoder.icc_profile().ok().flatten(),
    }
    .filter(|p| !p.is_empty());
    let exif = decoder
        .exif_metadata()
        .ok()
        .flatten()
        .filter(|e| !e.is_empty());
    let img = DynamicImage::from_decoder(decoder).map_err(|e| decode_error(name, e))?;
    let mut d = from_dynamic(img);
    d.dpi = dpi;
    d.more_frames = more_frames;
    d.icc_profile = icc_profile;
    d.exif = exif;
    d.icc_unreadable = icc_unreadable;
    if tiff {
        // The TIFF reader passes on neither: read the resolution and orientation tags here.
        let (tiff_dpi, tiff_exif) = tiff_meta::tiff_metadata(bytes);
        d.dpi = d.dpi.or(tiff_dpi);
        d.exif = d.exif.take().or(tiff_exif);
    }
    Ok(d)
}

/// The colour profile of a TIFF's first image (tag 34675, InterColorProfile).
fn tiff_icc_profile(bytes: &[u8]) -> Option<Vec<u8>> {
    let mut d = tiff::decoder::Decoder::new(Cursor::new(bytes)).ok()?;
    d.get_tag_u8_vec(tiff::tags::Tag::IccProfile)
        .ok()
        .filter(|p| p.len() <= MAX_PROFILE_BYTES)
}

/// Largest embedded colour profile read, inflated (the largest profiles in use, with
/// lookup tables, are a few hundred kilobytes).
pub const MAX_PROFILE_BYTES: usize = 4 << 20;

/// The first iCCP chunk's profile, inflated to at most [`MAX_PROFILE_BYTES`]; or, for a
/// file with an iCCP chunk (PNG 3rd edition, 11.3.2.3: name, NUL, compression method 0,
/// zlib data) that cannot be read, why not.
pub fn png_icc_profile(bytes: &[u8]) -> std::result::Result<Vec<u8>, String> {
    let missing = || "is missing or comes after the image data".to_string();
    let mut pos = 8usize;
    while pos + 12 <= bytes.len() {
        let len = u32::from_be_bytes([bytes[pos], bytes[pos + 1], bytes[pos + 2], bytes[pos + 3]])
            as usize;
        let Some(data) = pos
            .checked_add(8 + len)
            .and_then(|end| bytes.get(pos + 8..end))
        else {
            return Err("is cut short".into());
        };
        match &bytes[pos + 4..pos + 8] {
            b"iCCP" => {
                let Some(z) = data
                    .iter()
                    .position(|&b| b == 0)
                    .and_then(|nul| data.get(nul + 2..))
                else {
                    return Err("has no profile name or compression method".into());
                };
                return miniz_oxide::inflate::decompress_to_vec_zlib_with_limit(
                    z,
                    MAX_PROFILE_BYTES,
                )
                .map_err(|e| match e.status {
                    miniz_oxide::inflate::TINFLStatus::HasMoreOutput => {
                        format!("inflates to more than {} MiB", MAX_PROFILE_BYTES >> 20)
                    }
                    _ => "cannot be inflated (damaged compressed data)".into(),
                });
            }
            b"IDAT" | b"IEND" => return Err(missing()),
            _ => {}
        }
        pos += 12 + len;
    }
    Err(missing())
}

fn from_dynamic(img: DynamicImage) -> Decoded {
    let (width, height) = (img.width(), img.height());
    let colour = img.color();
    let has_alpha = colour.has_alpha();
    let deep = matches!(
        colour,
        ColorType::L16
            | ColorType::La16
            | ColorType::Rgb16
            | ColorType::Rgba16
            | ColorType::Rgb32F
            | ColorType::Rgba32F
    );
    let pixels = if deep {
        Pixels::Rgba16(img.into_rgba16().into_raw())
    } else {
        Pixels::Rgba8(img.into_rgba8().into_raw())
    };
    Decoded {
        width,
        height,
        pixels,
        has_alpha,
        dpi: None,
        more_frames: false,
        icc_profile: None,
        exif: None,
        icc_unreadable: None,
    }
}

/// The note for a file with more frames or pages than the first.
pub const MORE_FRAMES_NOTE: &str =
    "the file holds more frames or pages than the first; only the first was used";

#[cfg(test)]
mod tests {
    use super::*;

    /// A baseline JPEG from the image crate's encoder, of a ripple of our own.
    fn ripple_jpeg() -> Vec<u8> {
        let px: Vec<u8> = (0..40 * 30 * 3).map(|i| ((i * 29) % 253) as u8).collect();
        let mut v = Cursor::new(Vec::new());
        image::RgbImage::from_raw(40, 30, px)
            .unwrap()
            .write_to(&mut v, image::ImageFormat::Jpeg)
            .unwrap();
        v.into_inner()
    }

    #[test]
    fn whole_dpi_are_read_back_from_pixels_per_metre() {
        // PNG 1.2 (ISO/IEC 15948) stores pixels per metre as an integer: 72 dpi is written
        // 2835, 150 dpi 5906, 300 dpi 11811 (1 inch = 0.0254 m exactly).
        assert_eq!(dpi_of_pixels_per_metre(2835.0), 72.0);
        assert_eq!(dpi_of_pixels_per_metre(5906.0), 150.0);
        assert_eq!(dpi_of_pixels_per_metre(11811.0), 300.0);
        // A resolution set in metres stays as it is: 4000 px/m is 101.6 dpi.
        assert!((dpi_of_pixels_per_metre(4000.0) - 101.6).abs() < 1e-9);
    }

    #[test]
    fn a_jpeg_is_complete_only_up_to_its_end_of_image_marker() {
        let jpeg = ripple_jpeg();
        assert!(jpeg_is_complete(&jpeg));
        // Every cut short of the end-of-image marker is incomplete.
        for cut in (0..jpeg.len() - 1).step_by(7).chain([jpeg.len() - 1]) {
            assert!(
                !jpeg_is_complete(&jpeg[..cut]),
                "cut at {cut} of {}",
                jpeg.len()
            );
        }
        // Bytes after the marker (common in camera files) are allowed.
        let mut tail = jpeg.clone();
        tail.extend_from_slice(b"trailing data");
        assert!(jpeg_is_complete(&tail));
    }

    #[test]
    fn a_thumbnail_end_marker_does_not_complete_a_cut_jpeg() {
        // An APP1 segment holding a whole small JPEG, then the main image cut in its scan:
        // the thumbnail's end-of-image marker is inside the segment and must be skipped.
        let thumb = ripple_jpeg();
        let main = ripple_jpeg();
        let mut v = vec![0xFF, 0xD8, 0xFF, 0xE1];
        v.extend_from_slice(&((thumb.len() + 2) as u16).to_be_bytes());
        v.extend_from_slice(&thumb);
        v.extend_from_slice(&main[2..main.len() * 3 / 4]);
        assert!(!jpeg_is_complete(&v));
        v.extend_from_slice(&main[main.len() * 3 / 4..]);
        assert!(jpeg_is_complete(&v));
    }

    #[test]
    fn decoder_messages_lose_their_debug_dumps() {
        assert_eq!(
            readable("CRC error while decoding ChunkType { type: IDAT, critical: true, private: false } chunk."),
            "CRC error while decoding IDAT chunk."
        );
        assert_eq!(readable("plain words"), "plain words");
    }

    #[test]
    fn indexed_png_decodes_to_the_palette_colour_of_every_index() {
        // Every bit depth (2, 4, 16 and 200 colours), with widths that leave a part byte
        // at the end of each row; decoded by the image crate's PNG reader.
        for (colours, width) in [(2usize, 13u32), (4, 7), (16, 5), (16, 64), (200, 9)] {
            let palette: Vec<[u8; 3]> = (0..colours)
                .map(|i| [i as u8, (i * 7 % 256) as u8, 255 - i as u8])
                .collect();
            let height = 6u32;
            let indices: Vec<u8> = (0..width * height)
                .map(|p| ((p * 31 + p / 3) % colours as u32) as u8)
                .collect();
            let mut bytes = Vec::new();
            write_indexed_png(&mut bytes, width, height, &palette, None, &indices).unwrap();
            let img = image::load_from_memory_with_format(&bytes, image::ImageFormat::Png)
                .unwrap()
                .to_rgb8();
            assert_eq!(img.dimensions(), (width, height));
            for (p, px) in img.pixels().enumerate() {
                assert_eq!(
                    px.0, palette[indices[p] as usize],
                    "{colours} colours, pixel {p}"
                );
            }
        }
    }
}
