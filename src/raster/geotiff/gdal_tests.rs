//! Files written by GDAL 3.10 through rasterio 1.4 (`tests/reference/make_gdal_fixtures.py` →
//! `fixtures/rasters/gdal/`): sparse blocks, internal and external masks, alpha, ZSTD with 20
//! bands. The expected counts and sums come from the arrays the script wrote, which it read
//! back with rasterio before recording them.

use super::*;
use crate::limits::Limits;
use serde_json::Value as Json;
use std::path::{Path, PathBuf};

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters/gdal")
}

fn expected(name: &str) -> Json {
    let text = std::fs::read_to_string(dir().join("expected.json")).unwrap();
    let all: Json = serde_json::from_str(&text).unwrap();
    all["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["file"] == name)
        .unwrap_or_else(|| panic!("{name} not in expected.json"))
        .clone()
}

/// Valid pixels (every band finite) and per-band sums and weighted sums over them, as the
/// script computes them (w(y, x) = 1 + (31y + 17x) mod 101).
fn measure(r: &mut GeoRaster) -> (u64, Vec<f64>, Vec<f64>) {
    let info = r.info().clone();
    let (w, b) = (info.width as usize, info.bands);
    let (mut valid, mut sums, mut wsums) = (0u64, vec![0.0; b], vec![0.0; b]);
    for i in 0..r.block_count() {
        let block = r.read_block(i).unwrap();
        assert_eq!(block.data.len(), block.rows as usize * w * b);
        for (p, px) in block.data.chunks_exact(b).enumerate() {
            let nan = px.iter().filter(|v| v.is_nan()).count();
            assert!(
                nan == 0 || nan == b,
                "a pixel is either all data or all nodata"
            );
            if nan > 0 {
                continue;
            }
            let (y, x) = (block.y0 as usize + p / w, p % w);
            let wt = 1.0 + ((31 * y + 17 * x) % 101) as f64;
            valid += 1;
            for (k, &v) in px.iter().enumerate() {
                sums[k] += v as f64;
                wsums[k] += v as f64 * wt;
            }
        }
    }
    (valid, sums, wsums)
}

fn check(name: &str) -> GeoRaster {
    let e = expected(name);
    let mut r = GeoRaster::open(&dir().join(name), &Limits::default())
        .unwrap_or_else(|err| panic!("{name}: {err}"));
    assert_eq!(
        r.info().bands as u64,
        e["bands"].as_u64().unwrap(),
        "{name}: bands"
    );
    let (valid, sums, wsums) = measure(&mut r);
    assert_eq!(valid, e["valid"].as_u64().unwrap(), "{name}: valid pixels");
    for (k, (s, ws)) in sums.iter().zip(&wsums).enumerate() {
        assert_eq!(
            *s,
            e["sums"][k].as_f64().unwrap(),
            "{name}: band {} sum",
            k + 1
        );
        assert_eq!(
            *ws,
            e["wsums"][k].as_f64().unwrap(),
            "{name}: band {} weighted sum",
            k + 1
        );
    }
    r
}

#[test]
fn sparse_blocks_read_as_nodata_with_every_compression() {
    for name in [
        "sparse_none_tiles.tif",
        "sparse_deflate_tiles.tif",
        "sparse_lzw_tiles.tif",
        "sparse_zstd_tiles.tif",
        "sparse_deflate_strips.tif",
    ] {
        let r = check(name);
        assert!(r.info().sparse_chunks > 0, "{name}: sparse chunks counted");
    }
}

#[test]
fn gdal_masks_inside_and_beside_the_file_are_honoured() {
    let r = check("mask_internal.tif");
    assert_eq!(r.info().mask.as_deref(), Some("internal"));
    let r = check("mask_external.tif");
    assert_eq!(r.info().mask.as_deref(), Some("mask_external.tif.msk"));
}

#[test]
fn alpha_is_not_a_band_and_alpha_zero_is_nodata() {
    let r = check("alpha_rgba.tif");
    assert_eq!(r.info().alpha_band, Some(4));
    let r = check("alpha_4band.tif");
    assert_eq!(r.info().alpha_band, Some(5));
}

#[test]
fn zstd_with_twenty_bands() {
    let r = check("zstd_20band.tif");
    assert!(r.info().tiled);
    assert_eq!(r.info().alpha_band, None);
}

#[test]
fn scale_offset_file_reads_raw_values() {
    // Raw stored values; scale and offset are carried in the info for the features.
    let mut r = GeoRaster::open(&dir().join("scale_offset.tif"), &Limits::default()).unwrap();
    let b = r.read_block(0).unwrap();
    assert_eq!(b.data[0], 0.0, "nodata stays as stored");
    let e = expected("scale_offset.tif");
    let info = r.info();
    for k in 0..4 {
        let (s, o) = info.scale_offset[k];
        assert_eq!(s, e["scales"][k].as_f64().unwrap());
        assert_eq!(o, e["offsets"][k].as_f64().unwrap());
        assert_eq!(
            info.descriptions[k].as_deref(),
            e["descriptions"][k].as_str()
        );
    }
}

#[test]
fn exclusion_raster_on_the_same_grid_leaves_its_pixels_out() {
    let e = expected("scale_offset.tif + clouds_same_grid.tif");
    let mut r = GeoRaster::open(&dir().join("scale_offset.tif"), &Limits::default()).unwrap();
    r.exclude_where(&dir().join("clouds_same_grid.tif"), &Limits::default())
        .unwrap();
    let nodata = r.info().nodata.unwrap() as f32;
    let mut valid = 0u64;
    for i in 0..r.block_count() {
        let b = r.read_block(i).unwrap();
        valid += b
            .data
            .chunks_exact(4)
            .filter(|px| px.iter().all(|&v| v.is_finite() && v != nodata))
            .count() as u64;
    }
    assert_eq!(valid, e["valid"].as_u64().unwrap());
}

#[test]
fn exclusion_raster_off_the_grid_is_refused() {
    let mut r = GeoRaster::open(&dir().join("scale_offset.tif"), &Limits::default()).unwrap();
    let err = r
        .exclude_where(&dir().join("clouds_other_grid.tif"), &Limits::default())
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("clouds_other_grid.tif") && err.contains("not on the grid"),
        "{err}"
    );
    assert!(err.contains("transform"), "{err}");
    let err = r
        .exclude_where(
            &Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("fixtures/rasters/utm_u16_4band_strips.tif"),
            &Limits::default(),
        )
        .unwrap_err()
        .to_string();
    assert!(err.contains("40 x 30 pixels, the scene 64 x 48"), "{err}");
}
