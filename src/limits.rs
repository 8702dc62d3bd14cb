//! Decoding and memory limits: plain data with safe defaults, checked before allocation.

/// Limits applied before any pixel buffer is allocated.
///
/// Defaults: 200 million pixels per image (about 800 MB as 8-bit RGBA) and
/// 3 GiB for any single decoder allocation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// Largest width × height accepted, in pixels.
    pub max_pixels: u64,
    /// Largest single allocation a decoder may make, in bytes.
    pub max_alloc: u64,
    /// Largest text input (ink library, palette document), in bytes. Default: 16 MiB.
    pub max_text_bytes: u64,
    /// Most inks in an ink library, and most colours in a palette document given to
    /// `apply` or `batch --palette`. Default: 4096.
    pub max_entries: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_pixels: 200_000_000,
            max_alloc: 3 << 30,
            max_text_bytes: 16 << 20,
            max_entries: 4096,
        }
    }
}

impl Limits {
    /// No limits at all (for trusted input only).
    pub fn none() -> Self {
        Limits {
            max_pixels: u64::MAX,
            max_alloc: u64::MAX,
            max_text_bytes: u64::MAX,
            max_entries: usize::MAX,
        }
    }

    /// Default limits with a different pixel cap.
    pub fn with_max_pixels(max_pixels: u64) -> Self {
        Limits {
            max_pixels,
            ..Limits::default()
        }
    }

    /// Reads a text file (or a device or pipe; `-` is standard input) of at most
    /// `max_text_bytes`, as UTF-8 with any byte-order mark removed. `what` names the input in messages ("ink library").
    pub fn read_text(&self, path: &std::path::Path, what: &str) -> crate::Result<String> {
        use std::io::Read;
        let open = |source| crate::Error::Open {
            path: path.into(),
            source,
        };
        let mut bytes = Vec::new();
        if path.as_os_str() == "-" {
            // `-`: standard input, under the same limit.
            std::io::stdin()
                .lock()
                .take(self.max_text_bytes.saturating_add(1))
                .read_to_end(&mut bytes)
                .map_err(open)?;
        } else {
            let file = std::fs::File::open(path).map_err(open)?;
            if file.metadata().map(|m| m.is_dir()).unwrap_or(false) {
                return Err(crate::Error::Decode {
                    path: path.into(),
                    message: format!("is a folder, not a {what}"),
                });
            }
            file.take(self.max_text_bytes.saturating_add(1))
                .read_to_end(&mut bytes)
                .map_err(open)?;
        }
        if bytes.len() as u64 > self.max_text_bytes {
            return Err(crate::Error::LimitExceeded {
                path: path.into(),
                message: format!(
                    "the {what} is over the limit of {} bytes",
                    self.max_text_bytes
                ),
            });
        }
        let text = String::from_utf8(bytes).map_err(|_| crate::Error::Decode {
            path: path.into(),
            message: format!("the {what} is not UTF-8 text"),
        })?;
        Ok(match text.strip_prefix('\u{feff}') {
            Some(rest) => rest.to_string(),
            None => text,
        })
    }

    /// Checks a declared size; returns a message when it is over the limit.
    pub fn check_dimensions(
        &self,
        width: u32,
        height: u32,
        channels: u32,
        bytes_per_sample: u32,
    ) -> Result<(), String> {
        let pixels = width as u64 * height as u64;
        if width == 0 || height == 0 {
            return Err(format!("image has no pixels ({width} x {height})"));
        }
        if pixels > self.max_pixels {
            return Err(format!(
                "image is {width} x {height} = {pixels} pixels, over the limit of {} pixels (raise it with `max_pixels`)",
                self.max_pixels
            ));
        }
        let bytes = pixels
            .saturating_mul(channels as u64)
            .saturating_mul(bytes_per_sample as u64);
        if bytes > self.max_alloc {
            return Err(format!(
                "decoding {width} x {height} would need {bytes} bytes, over the limit of {} bytes",
                self.max_alloc
            ));
        }
        Ok(())
    }
}
