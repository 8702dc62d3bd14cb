//! Plumbing around the `tiff` crate's decoder shared by the readers: error kinds, the panic
//! guard, decoder limits, the reader that patches PhotometricInterpretation, and size checks
//! of tags against the file.

use crate::error::{Error, Result};
use crate::limits::Limits;
use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::Path;
use tiff::decoder::Decoder;
use tiff::tags::{Tag, Type};
use tiff::TiffError;

pub(super) fn decode(path: &Path, message: impl Into<String>) -> Error {
    Error::Decode {
        path: path.into(),
        message: message.into(),
    }
}

pub(super) fn unsupported(path: &Path, message: impl Into<String>) -> Error {
    Error::Unsupported {
        path: path.into(),
        message: message.into(),
    }
}

pub(super) fn over_limit(path: &Path, message: impl Into<String>) -> Error {
    Error::LimitExceeded {
        path: path.into(),
        message: message.into(),
    }
}

pub(super) fn read_up_to(r: &mut impl Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut n = 0;
    while n < buf.len() {
        match r.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(n)
}

pub(super) fn is_tiff_magic(b: &[u8]) -> bool {
    matches!(b, [b'I', b'I', 42 | 43, 0] | [b'M', b'M', 0, 42 | 43])
}

/// Runs `f`, turning a panic inside the third-party TIFF code into a decode error, so that no
/// input file can bring the caller down.
pub(super) fn guarded<T>(path: &Path, what: &str, f: impl FnOnce() -> Result<T>) -> Result<T> {
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)) {
        Ok(r) => r,
        Err(_) => Err(decode(
            path,
            format!("the TIFF decoder failed while {what} (corrupt file?)"),
        )),
    }
}

/// Maps a `tiff` crate error onto the library's error kinds.
pub(super) fn tiff_error(path: &Path, e: TiffError) -> Error {
    match e {
        TiffError::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            decode(path, "TIFF data ends early (truncated file?)")
        }
        TiffError::IoError(io) => decode(path, format!("cannot read TIFF data: {io}")),
        TiffError::LimitsExceeded => over_limit(
            path,
            "a TIFF strip, tile or tag is larger than the decoder accepts \
             (re-save with smaller strips or tiles, or raise the memory limit)",
        ),
        TiffError::IntSizeError => over_limit(path, "TIFF sizes exceed what this platform handles"),
        TiffError::UnsupportedError(u) => unsupported(path, format!("TIFF feature: {u}")),
        TiffError::FormatError(f) => decode(path, format!("not a valid TIFF: {f}")),
        other => decode(path, format!("cannot decode TIFF: {other}")),
    }
}

fn tiff_limits(limits: &Limits) -> tiff::decoder::Limits {
    let cap = usize::try_from(limits.max_alloc).unwrap_or(usize::MAX);
    let mut l = tiff::decoder::Limits::default();
    l.decoding_buffer_size = cap;
    l.intermediate_buffer_size = cap;
    l
}

/// A reader that overlays two bytes at a fixed offset. Used to let the decoder read a file whose
/// PhotometricInterpretation says RGB while it holds more than three bands (common for
/// red-green-blue-near-infrared imagery): the value is read as BlackIsZero, which the decoder
/// exposes as plain multi-band data.
#[derive(Debug)]
pub(super) struct PatchedReader<R> {
    inner: R,
    pos: u64,
    patch: Option<(u64, [u8; 2])>,
}

impl<R: Read> Read for PatchedReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        if let Some((at, bytes)) = self.patch {
            for (k, &b) in bytes.iter().enumerate() {
                let p = at + k as u64;
                if p >= self.pos && p < self.pos + n as u64 {
                    buf[(p - self.pos) as usize] = b;
                }
            }
        }
        self.pos += n as u64;
        Ok(n)
    }
}

impl<R: Seek> Seek for PatchedReader<R> {
    fn seek(&mut self, to: SeekFrom) -> std::io::Result<u64> {
        self.pos = self.inner.seek(to)?;
        Ok(self.pos)
    }
}

pub(super) fn tiff_decoder(
    path: &Path,
    patch: Option<(u64, [u8; 2])>,
    limits: &Limits,
) -> Result<Decoder<PatchedReader<BufReader<File>>>> {
    let file = File::open(path).map_err(|source| Error::Open {
        path: path.into(),
        source,
    })?;
    let reader = PatchedReader {
        inner: BufReader::new(file),
        pos: 0,
        patch,
    };
    Ok(Decoder::new(reader)
        .map_err(|e| tiff_error(path, e))?
        .with_limits(tiff_limits(limits)))
}

/// Bytes one value of a TIFF field type takes in the file (TIFF 6.0 §2; BigTIFF adds the
/// 8-byte types).
fn type_bytes(t: Type) -> u64 {
    match t {
        Type::BYTE | Type::SBYTE | Type::ASCII | Type::UNDEFINED => 1,
        Type::SHORT | Type::SSHORT => 2,
        Type::LONG | Type::SLONG | Type::FLOAT | Type::IFD => 4,
        Type::LONG8
        | Type::SLONG8
        | Type::DOUBLE
        | Type::RATIONAL
        | Type::SRATIONAL
        | Type::IFD8 => 8,
        _ => 1,
    }
}

/// The size of the file at `path`, in bytes.
pub(super) fn file_len(path: &Path) -> Result<u64> {
    std::fs::metadata(path)
        .map(|m| m.len())
        .map_err(|source| Error::Open {
            path: path.into(),
            source,
        })
}

/// Refuses a tag of the first image whose declared values are longer than the whole file.
/// The `tiff` crate sizes its buffer from the declared count before it reads, and bounds
/// that only by the decoding limit, so a file of a few hundred bytes could otherwise make
/// it allocate gigabytes for one tag.
pub(super) fn check_tag_fits<R: Read + Seek>(
    decoder: &mut Decoder<R>,
    tag: Tag,
    what: &str,
    path: &Path,
) -> Result<()> {
    let Some(entry) = decoder.image_ifd().find_entry(tag) else {
        return Ok(());
    };
    let file_len = file_len(path)?;
    let bytes = entry.count().saturating_mul(type_bytes(entry.field_type()));
    if bytes > file_len {
        return Err(decode(
            path,
            format!(
                "TIFF tag {what} claims {} values ({bytes} bytes) but the file has only \
                 {file_len} bytes (corrupt file?)",
                entry.count()
            ),
        ));
    }
    Ok(())
}
