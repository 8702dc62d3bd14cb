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
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_pixels: 200_000_000,
            max_alloc: 3 << 30,
        }
    }
}

impl Limits {
    /// No limits at all (for trusted input only).
    pub fn none() -> Self {
        Limits {
            max_pixels: u64::MAX,
            max_alloc: u64::MAX,
        }
    }

    /// Default limits with a different pixel cap.
    pub fn with_max_pixels(max_pixels: u64) -> Self {
        Limits {
            max_pixels,
            ..Limits::default()
        }
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
                "image is {width} x {height} = {pixels} pixels, over the limit of {} pixels (raise it with --max-pixels)",
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
