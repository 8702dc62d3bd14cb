//! Arbitrary bytes as a palette document, read the way `apply --palette` and
//! `batch --palette` read it (JSON into `PaletteDocument`, then `FixedPalette`), and
//! every accepted palette applied to a small fixed image.
//!
//! Invariants: the reduced image uses only palette colours, and the document's scores
//! and every pixel's uncertainty are finite (uncertainty in 0..1).
#![no_main]

use chromasift::raster::Decoded;
use chromasift::reduce::{reduce_image_with, FixedPalette, PaletteDocument, ReduceOptions};
use libfuzzer_sys::fuzz_target;

fn image() -> Decoded {
    // 4 × 3 pixels: primaries, greys and one half-transparent pixel.
    let px: [[u8; 4]; 12] = [
        [255, 0, 0, 255],
        [0, 255, 0, 255],
        [0, 0, 255, 255],
        [0, 0, 0, 255],
        [255, 255, 255, 255],
        [128, 128, 128, 255],
        [200, 30, 90, 128],
        [10, 200, 210, 255],
        [250, 240, 10, 255],
        [60, 60, 70, 255],
        [90, 40, 20, 255],
        [0, 0, 0, 0],
    ];
    Decoded::from_rgba8(4, 3, px.concat())
}

fuzz_target!(|data: &[u8]| {
    let Ok(doc) = serde_json::from_slice::<PaletteDocument>(data) else {
        return;
    };
    let Ok(fixed) = FixedPalette::from_document(&doc) else {
        return;
    };
    let mut opts = ReduceOptions::new(fixed.colours.len().max(1));
    opts.space = doc.space;
    let Ok(red) = reduce_image_with(&image(), &opts, Some(&fixed)) else {
        return;
    };
    for c in &red.palette {
        assert!(fixed.colours.contains(c), "{c:?} is not in the palette");
    }
    let d = &red.document;
    assert!(d.sse.is_finite() && d.mean_delta_e2000.is_finite() && d.mean_delta_e76.is_finite());
    for u in &red.entry_uncertainty {
        assert!((0.0..=1.0).contains(u), "uncertainty {u}");
    }
    for c in &d.colors {
        assert!(c.mean_uncertainty.is_finite() && c.share.is_finite());
    }
});
