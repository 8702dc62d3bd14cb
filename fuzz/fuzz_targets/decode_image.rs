//! Arbitrary bytes through chromasift's image decode path (format sniffing, the header
//! check against the limits, then the decoder with its allocation cap).
//!
//! Invariants checked on every input that decodes: the image is within the pixel limit,
//! the pixel buffer holds exactly width × height RGBA samples, and the histogram of the
//! pixels counts every opaque pixel once.
#![no_main]

use chromasift::histogram;
use chromasift::raster::{decode_bytes, Pixels};
use chromasift::Limits;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

/// Small limits: the fuzzer must see refusals, and no input may make us allocate much.
const LIMITS: Limits = Limits {
    max_pixels: 1 << 20,
    max_alloc: 64 << 20,
    max_text_bytes: 1 << 20,
    max_entries: 4096,
};

fuzz_target!(|data: &[u8]| {
    let Ok(img) = decode_bytes(data, Path::new("fuzz-input"), &LIMITS) else {
        return;
    };
    let pixels = img.width as u64 * img.height as u64;
    assert!(
        pixels >= 1 && pixels <= LIMITS.max_pixels,
        "{} x {}",
        img.width,
        img.height
    );
    let (len, opaque, total) = match &img.pixels {
        Pixels::Rgba8(p) => {
            let h = histogram::from_rgba8(p);
            let opaque = p.chunks_exact(4).filter(|px| px[3] != 0).count() as u64;
            (p.len(), opaque, h.histogram.total())
        }
        Pixels::Rgba16(p) => {
            let h = histogram::from_rgba16(p);
            let opaque = p.chunks_exact(4).filter(|px| px[3] != 0).count() as u64;
            (p.len(), opaque, h.histogram.total())
        }
    };
    assert_eq!(len as u64, pixels * 4);
    assert_eq!(total, opaque);
});
