//! The tiled Cloud-Optimized writer, read back with the `tiff` crate's decoder (an
//! independent reader, through `tests/support/cog.rs`) and with the project's own reader:
//! pixels equal to the strip writer's, overviews equal to the reduction written from its
//! definition, the tags a GIS needs, the COG layout, BigTIFF, the same bytes on any thread
//! count, and refusals.

use super::cog_layout::{check_cog_layout, images, is_bigtiff, reduce};
use super::*;
use crate::limits::Limits;
use std::path::{Path, PathBuf};

fn utm_geo() -> GeoTags {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters/utm_u16_4band_strips.tif");
    read_geotags(&p).unwrap()
}

/// Classes 1..=6 in blocks and stripes with a nodata (0) frame, `w × h`.
fn class_pattern(w: u32, h: u32) -> Vec<u8> {
    (0..h)
        .flat_map(|y| {
            (0..w).map(move |x| {
                if x < 3 || y < 5 || x + 7 > w {
                    0
                } else {
                    (1 + (x / 37 + y / 23 + (x * y) % 5 / 4) % 6) as u8
                }
            })
        })
        .collect()
}

fn write_classes(path: &Path, w: u32, h: u32, v: &[u8], big: bool, colours: Vec<[u8; 3]>) {
    let opts = WriteOptions {
        big,
        deflate: true,
        colour_map: Some(colours),
    };
    let geo = utm_geo();
    let band = CogBand {
        width: w,
        height: h,
        geo: &geo,
        nodata: Some("0"),
        opts: &opts,
        description: None,
    };
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    write_u8_cog(&mut out, &band, &mut memory_scratch, &mut |y0, rows| {
        Ok(v[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec())
    })
    .unwrap();
}

fn colours() -> Vec<[u8; 3]> {
    vec![
        [0, 0, 0],
        [10, 200, 30],
        [250, 0, 0],
        [0, 0, 255],
        [9, 9, 9],
        [100, 50, 25],
        [1, 2, 3],
    ]
}

#[test]
fn class_raster_round_trips_with_overviews_in_cloud_optimized_order() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (600u32, 530u32);
    let v = class_pattern(w, h);
    let cog = dir.path().join("c.tif");
    write_classes(&cog, w, h, &v, false, colours());

    // The strip writer's file, for the full-resolution pixels.
    let strips = dir.path().join("s.tif");
    let opts = WriteOptions {
        big: false,
        deflate: true,
        colour_map: Some(colours()),
    };
    let mut next = 0usize;
    write_u8_band_with(
        std::fs::File::create(&strips).unwrap(),
        w,
        h,
        &utm_geo(),
        Some("0"),
        &opts,
        &mut |_, rows| {
            let n = (rows * w) as usize;
            next += n;
            Ok(v[next - n..next].to_vec())
        },
    )
    .unwrap();

    let ims = images(&cog);
    assert_eq!(ims.len(), 3, "600 × 530 → 300 × 265 → 150 × 133");
    check_cog_layout(&ims, w, h, TILE, false);
    assert!(!is_bigtiff(&cog));
    let strip_pixels = &images(&strips)[0].pixels;
    assert_eq!(
        &ims[0].pixels, strip_pixels,
        "same pixels as the strip writer"
    );
    // TIFF 6.0: Deflate (8), horizontal predictor (2), palette (3) with the same ColorMap
    // and GDAL_NODATA on every level.
    for im in &ims {
        assert_eq!(
            (
                im.compression,
                im.predictor,
                im.photometric,
                im.sample_format
            ),
            (8, 2, 3, 1)
        );
        let map = im.colour_map.as_ref().unwrap();
        assert_eq!(
            (map[1], map[256 + 1], map[512 + 1]),
            (10 * 257, 200 * 257, 30 * 257)
        );
        assert_eq!(im.nodata.as_deref(), Some("0"));
    }
    // Overviews: each level reduced from the one above it.
    for i in 1..ims.len() {
        let up = &ims[i - 1];
        let want = reduce(&up.pixels, up.width as usize, up.height as usize, true, 0.0);
        assert_eq!(ims[i].pixels, want, "level {i}");
    }
    // The project's reader reads the full resolution back, with the georeferencing.
    let mut r = GeoRaster::open(&cog, &Limits::default()).unwrap();
    assert_eq!(r.info().geo, utm_geo());
    assert_eq!(
        (r.info().width, r.info().height, r.info().nodata),
        (w, h, Some(0.0))
    );
    let mut back = Vec::new();
    for b in 0..r.block_count() {
        back.extend(r.read_block(b).unwrap().data.iter().map(|&x| x as u8));
    }
    assert_eq!(back, v);
}

#[test]
fn uncertainty_raster_keeps_every_float_and_averages_its_overviews() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (513u32, 300u32);
    let v: Vec<f32> = (0..w * h)
        .map(|i| {
            let (x, y) = (i % w, i / w);
            if (x + y) % 11 == 0 || x > 500 {
                -1.0
            } else {
                ((x as f32 * 0.013).sin() * (y as f32 * 0.007).cos()).abs() / 3.0
            }
        })
        .collect();
    for big in [false, true] {
        let path = dir.path().join(format!("u{big}.tif"));
        let opts = WriteOptions {
            big,
            deflate: true,
            colour_map: None,
        };
        let geo = utm_geo();
        let band = CogBand {
            width: w,
            height: h,
            geo: &geo,
            nodata: Some("-1"),
            opts: &opts,
            description: None,
        };
        write_f32_cog(
            std::fs::File::create(&path).unwrap(),
            &band,
            &mut memory_scratch,
            &mut |y0, rows| Ok(v[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec()),
        )
        .unwrap();
        assert_eq!(is_bigtiff(&path), big);
        let ims = images(&path);
        assert_eq!(ims.len(), 3, "513 × 300 → 257 × 150 → 129 × 75");
        check_cog_layout(&ims, w, h, TILE, big);
        // Adobe TN3 floating-point predictor (3), IEEE samples (3), Deflate (8).
        for im in &ims {
            assert_eq!(
                (
                    im.compression,
                    im.predictor,
                    im.photometric,
                    im.sample_format
                ),
                (8, 3, 1, 3)
            );
            assert!(im.colour_map.is_none());
        }
        let full: Vec<f32> = ims[0].pixels.iter().map(|&x| x as f32).collect();
        assert!(full.iter().zip(&v).all(|(a, b)| a.to_bits() == b.to_bits()));
        for i in 1..ims.len() {
            let up = &ims[i - 1];
            let want = reduce(
                &up.pixels,
                up.width as usize,
                up.height as usize,
                false,
                -1.0,
            );
            for (k, (&got, &exp)) in ims[i].pixels.iter().zip(&want).enumerate() {
                assert!(
                    (got - exp).abs() <= 1e-6 * exp.abs().max(1.0),
                    "level {i} pixel {k}: {got} vs {exp}"
                );
            }
        }
        let r = GeoRaster::open(&path, &Limits::default()).unwrap();
        assert_eq!(r.info().nodata, Some(-1.0));
    }
}

#[test]
fn small_rasters_are_one_tile_without_overviews() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (64u32, 48u32);
    let v = class_pattern(w, h);
    let path = dir.path().join("small.tif");
    write_classes(&path, w, h, &v, true, colours());
    let ims = images(&path);
    assert_eq!(ims.len(), 1);
    check_cog_layout(&ims, w, h, TILE, true);
    assert!(is_bigtiff(&path));
    assert_eq!(
        ims[0].pixels.iter().map(|&x| x as u8).collect::<Vec<_>>(),
        v
    );
}

#[test]
fn same_bytes_on_one_and_four_threads() {
    let dir = tempfile::tempdir().unwrap();
    let (w, h) = (700u32, 300u32);
    let v = class_pattern(w, h);
    let files: Vec<PathBuf> = [1, 4]
        .iter()
        .map(|&n| {
            let p = dir.path().join(format!("t{n}.tif"));
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .unwrap();
            pool.install(|| write_classes(&p, w, h, &v, false, colours()));
            p
        })
        .collect();
    assert_eq!(
        std::fs::read(&files[0]).unwrap(),
        std::fs::read(&files[1]).unwrap()
    );
}

#[test]
fn bad_bands_are_refused_in_one_line() {
    let geo = utm_geo();
    let opts = WriteOptions::default();
    let band = |w, h, nodata| CogBand {
        width: w,
        height: h,
        geo: &geo,
        nodata,
        opts: &opts,
        description: None,
    };
    let mut sink = Vec::new();
    let mut rows = |_: u32, r: u32| Ok(vec![0u8; r as usize * 4]);
    let e = write_u8_cog(&mut sink, &band(0, 4, None), &mut memory_scratch, &mut rows).unwrap_err();
    assert!(e.to_string().contains("empty raster"), "{e}");
    let e = write_u8_cog(
        &mut sink,
        &band(4, 4, Some("zero")),
        &mut memory_scratch,
        &mut rows,
    )
    .unwrap_err();
    assert!(e.to_string().contains("not a number"), "{e}");
    let mut short = |_: u32, _: u32| Ok(vec![0u8; 3]);
    let e = write_u8_cog(
        &mut sink,
        &band(4, 4, None),
        &mut memory_scratch,
        &mut short,
    )
    .unwrap_err();
    assert!(e.to_string().contains("values"), "{e}");
    let e = write_f32_cog(
        &mut sink,
        &CogBand {
            opts: &WriteOptions {
                colour_map: Some(colours()),
                ..WriteOptions::default()
            },
            ..band(4, 4, None)
        },
        &mut memory_scratch,
        &mut |_, r| Ok(vec![0f32; r as usize * 4]),
    )
    .unwrap_err();
    assert!(e.to_string().contains("8-bit"), "{e}");
}

#[test]
fn size_bound_covers_every_level_and_picks_bigtiff_past_the_limit() {
    // 1e9 class pixels fit in classic TIFF; the same as floats do not.
    assert!(cog_size_bound(40_000, 25_000, 1) < BIGTIFF_ABOVE);
    assert!(cog_size_bound(40_000, 25_000, 4) > BIGTIFF_ABOVE);
    // At least the raw tiles of all levels (a third more than the full resolution).
    let tiles: u64 = cog_levels(10_000, 10_000)
        .iter()
        .map(|&(w, h)| (w.div_ceil(TILE) * h.div_ceil(TILE)) as u64)
        .sum();
    assert!(cog_size_bound(10_000, 10_000, 4) > tiles * 256 * 256 * 4);
    assert_eq!(cog_levels(10_000, 10_000).len(), 7);
}

#[test]
fn thin_and_odd_sizes_round_trip_on_every_level() {
    let dir = tempfile::tempdir().unwrap();
    for (w, h) in [
        (1u32, 700u32),
        (700, 1),
        (257, 257),
        (513, 2),
        (256, 256),
        (300, 1000),
    ] {
        let v = class_pattern(w, h)
            .iter()
            .map(|&c| c.max((w % 7) as u8))
            .collect::<Vec<u8>>();
        let path = dir.path().join(format!("{w}x{h}.tif"));
        write_classes(&path, w, h, &v, false, colours());
        let ims = images(&path);
        assert_eq!(ims.len(), cog_levels(w, h).len(), "{w} x {h}");
        check_cog_layout(&ims, w, h, TILE, false);
        assert_eq!(
            ims[0].pixels.iter().map(|&x| x as u8).collect::<Vec<_>>(),
            v,
            "{w} x {h}"
        );
        for i in 1..ims.len() {
            let up = &ims[i - 1];
            let want = reduce(&up.pixels, up.width as usize, up.height as usize, true, 0.0);
            assert_eq!(ims[i].pixels, want, "{w} x {h} level {i}");
        }
    }
}
