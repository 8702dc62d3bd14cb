//! Arbitrary bytes through the multi-band raster reader: `GeoRaster::open` (TIFF header,
//! band layout, GeoTIFF tags and their consistency checks, GDAL_NODATA), every block,
//! and `read_geotags`.
//!
//! The reader opens files by path, so each input is written to one temporary file that
//! is reused. Invariants: an opened raster is within the pixel limit with 1–16 bands,
//! its blocks tile the rows top to bottom, and each block holds rows × width × bands
//! samples.
//!
//! The reader turns a panic inside the `tiff` crate into an error on purpose (see
//! `guarded` in src/geotiff.rs). libFuzzer's panic hook would abort on those caught
//! panics, so this target installs a hook that only prints each new panic location; a
//! panic that escapes chromasift still aborts (libfuzzer-sys aborts after the unwind).
#![no_main]

use chromasift::geotiff::{read_geotags, GeoRaster};
use chromasift::Limits;
use libfuzzer_sys::fuzz_target;
use std::collections::HashSet;
use std::path::PathBuf;
use std::sync::{Mutex, OnceLock};

const LIMITS: Limits = Limits {
    max_pixels: 1 << 20,
    max_alloc: 64 << 20,
    max_text_bytes: 1 << 20,
    max_entries: 4096,
};

fn scratch() -> &'static PathBuf {
    static P: OnceLock<PathBuf> = OnceLock::new();
    P.get_or_init(|| {
        let seen: Mutex<HashSet<String>> = Mutex::new(HashSet::new());
        std::panic::set_hook(Box::new(move |info| {
            let at = info
                .location()
                .map(|l| format!("{}:{}", l.file(), l.line()))
                .unwrap_or_default();
            if seen.lock().map(|mut s| s.insert(at)).unwrap_or(false) {
                eprintln!("panic (caught or not): {info}");
            }
        }));
        let dir = std::env::temp_dir().join(format!("chromasift-fuzz-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("scratch folder");
        dir.join("input.tif")
    })
}

fuzz_target!(|data: &[u8]| {
    let path = scratch();
    std::fs::write(path, data).expect("scratch file");
    if let Ok(mut r) = GeoRaster::open(path, &LIMITS) {
        let info = r.info().clone();
        assert!((info.width as u64 * info.height as u64) <= LIMITS.max_pixels);
        assert!((1..=16).contains(&info.bands));
        let _ = info.geo.validate();
        let _ = info.geo.pixel_area_m2();
        let mut next_row = 0u32;
        for i in 0..r.block_count() {
            match r.read_block(i) {
                Ok(b) => {
                    assert_eq!(b.y0, next_row, "blocks tile the rows in order");
                    assert_eq!(
                        b.data.len(),
                        b.rows as usize * info.width as usize * info.bands
                    );
                    next_row = b.y0 + b.rows;
                }
                Err(_) => break,
            }
        }
    }
    let _ = read_geotags(path);
});
