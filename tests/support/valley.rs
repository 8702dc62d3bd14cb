//! The invented river valley of `landcover_cli.rs` (five surfaces with known spectra,
//! mixed boundary pixels, sensor noise, a nodata edge), written as 4-band 16-bit GeoTIFFs,
//! and the readers and measures the land-cover model tests use.
#![allow(dead_code)]

use chromasift::rng::Rng;
use std::path::Path;
use tiff::encoder::{colortype, TiffEncoder};
use tiff::tags::Tag;

/// GeoTIFF keys of our scenes: projected (GTModelType 1), pixel is area, WGS 84 / UTM
/// zone 33N (EPSG 32633), metres (9001).
pub const GEOKEYS: [u16; 20] = [
    1, 1, 0, 4, 1024, 0, 1, 1, 1025, 0, 1, 1, 3072, 0, 1, 32633, 3076, 0, 1, 9001,
];

pub fn write_scene_u16(
    path: &Path,
    w: u32,
    h: u32,
    bands4: &[u16],
    pixel_m: f64,
    geokeys: &[u16],
    nodata: Option<&str>,
) {
    write_scene_u16_at(
        path,
        w,
        h,
        bands4,
        pixel_m,
        (500_000.0, 5_000_000.0),
        geokeys,
        nodata,
    );
}

/// A 4-band scene whose top-left corner is at `origin` (easting, northing) in UTM 33N.
#[allow(clippy::too_many_arguments)]
pub fn write_scene_u16_at(
    path: &Path,
    w: u32,
    h: u32,
    bands4: &[u16],
    pixel_m: f64,
    origin: (f64, f64),
    geokeys: &[u16],
    nodata: Option<&str>,
) {
    write_scene_u16_with(path, w, h, bands4, pixel_m, origin, geokeys, nodata, None);
}

/// As [`write_scene_u16_at`], with a GDAL_METADATA text (tag 42112) when given.
#[allow(clippy::too_many_arguments)]
pub fn write_scene_u16_with(
    path: &Path,
    w: u32,
    h: u32,
    bands4: &[u16],
    pixel_m: f64,
    origin: (f64, f64),
    geokeys: &[u16],
    nodata: Option<&str>,
    gdal_metadata: Option<&str>,
) {
    let file = std::fs::File::create(path).unwrap();
    let mut enc = TiffEncoder::new(file).unwrap();
    let mut img = enc.new_image::<colortype::RGBA16>(w, h).unwrap();
    img.encoder()
        .write_tag(Tag::Unknown(33550), &[pixel_m, pixel_m, 0.0][..])
        .unwrap();
    img.encoder()
        .write_tag(
            Tag::Unknown(33922),
            &[0.0, 0.0, 0.0, origin.0, origin.1, 0.0][..],
        )
        .unwrap();
    img.encoder()
        .write_tag(Tag::Unknown(34735), geokeys)
        .unwrap();
    if let Some(n) = nodata {
        img.encoder().write_tag(Tag::Unknown(42113), n).unwrap();
    }
    if let Some(m) = gdal_metadata {
        img.encoder().write_tag(Tag::Unknown(42112), m).unwrap();
    }
    img.write_data(bands4).unwrap();
}

/// Reflectance spectra (blue, green, red, near infrared) of the invented surfaces.
pub const SURFACES: [[f64; 4]; 5] = [
    [0.06, 0.05, 0.03, 0.02], // water
    [0.03, 0.06, 0.04, 0.40], // woodland
    [0.05, 0.11, 0.07, 0.58], // crops
    [0.12, 0.16, 0.22, 0.28], // bare soil
    [0.20, 0.20, 0.21, 0.23], // built-up
];

/// The invented river valley: truth class per pixel (0 = nodata edge) and the scene.
/// Each pixel sees its 3 × 3 neighbourhood (a sensor's point spread), so pixels on a
/// boundary are mixtures, as in real imagery; then sensor noise is added.
pub fn river_valley(w: u32, h: u32) -> (Vec<u8>, Vec<u16>) {
    let mut truth = vec![0u8; (w * h) as usize];
    for y in 0..h {
        for x in 6..w {
            let (xf, yf) = (x as f64, y as f64);
            let river_x = w as f64 * 0.45 + 12.0 * (yf / 15.0).sin();
            let t = if (xf - river_x).abs() < 5.0 {
                0
            } else if xf < river_x {
                if yf < h as f64 * 0.55 {
                    1
                } else {
                    3
                }
            } else if xf > w as f64 * 0.8 && yf > h as f64 * 0.6 {
                4
            } else {
                2
            };
            truth[(y * w + x) as usize] = t + 1;
        }
    }
    let mut data = vec![0u16; (w * h * 4) as usize];
    let mut r = Rng::new(2026, 0);
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            let p = (y * w as i64 + x) as usize;
            if truth[p] == 0 {
                continue; // nodata edge
            }
            let mut mean = [0.0f64; 4];
            let mut n = 0.0;
            for dy in -1..=1i64 {
                for dx in -1..=1i64 {
                    let (xx, yy) = (x + dx, y + dy);
                    if xx < 0 || yy < 0 || xx >= w as i64 || yy >= h as i64 {
                        continue;
                    }
                    let t = truth[(yy * w as i64 + xx) as usize];
                    if t == 0 {
                        continue;
                    }
                    for b in 0..4 {
                        mean[b] += SURFACES[t as usize - 1][b];
                    }
                    n += 1.0;
                }
            }
            for b in 0..4 {
                // Gaussian noise of 0.006 reflectance (Box–Muller).
                let (u1, u2) = (r.uniform().max(1e-300), r.uniform());
                let noise = (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos() * 0.006;
                data[p * 4 + b] = ((mean[b] / n + noise).max(0.001) * 10_000.0).round() as u16;
            }
        }
    }
    (truth, data)
}

/// Adjusted Rand index (Hubert & Arabie 1985) of two labelings.
pub fn adjusted_rand(a: &[u8], b: &[u8]) -> f64 {
    let mut table = std::collections::HashMap::new();
    let mut ra = std::collections::HashMap::new();
    let mut rb = std::collections::HashMap::new();
    for (&x, &y) in a.iter().zip(b) {
        *table.entry((x, y)).or_insert(0f64) += 1.0;
        *ra.entry(x).or_insert(0f64) += 1.0;
        *rb.entry(y).or_insert(0f64) += 1.0;
    }
    let c2 = |n: f64| n * (n - 1.0) / 2.0;
    let index: f64 = table.values().map(|&n| c2(n)).sum();
    let sa: f64 = ra.values().map(|&n| c2(n)).sum();
    let sb: f64 = rb.values().map(|&n| c2(n)).sum();
    let expected = sa * sb / c2(a.len() as f64);
    (index - expected) / (0.5 * (sa + sb) - expected)
}

/// A one-band 8-bit raster (a class raster may carry a colour table, which the `tiff`
/// crate's decoder does not read; the samples are read through our reader).
pub fn read_u8_tiff(path: &Path) -> (u32, u32, Vec<u8>) {
    let mut r =
        chromasift::geotiff::GeoRaster::open(path, &chromasift::limits::Limits::default()).unwrap();
    let (w, h) = (r.info().width, r.info().height);
    assert_eq!(r.info().bands, 1);
    let mut v = Vec::new();
    for i in 0..r.block_count() {
        v.extend(r.read_block(i).unwrap().data.iter().map(|&x| x as u8));
    }
    (w, h, v)
}

pub fn read_f32_tiff(path: &Path) -> Vec<f32> {
    let mut d = tiff::decoder::Decoder::new(std::fs::File::open(path).unwrap()).unwrap();
    let tiff::decoder::DecodingResult::F32(v) = d.read_image().unwrap() else {
        panic!("float raster expected")
    };
    v
}
