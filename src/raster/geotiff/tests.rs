use super::write::{rows_per_strip, write_band};
use super::*;
use crate::error::Error;
use crate::limits::Limits;
use serde_json::Value as Json;
use std::fs::File;
use std::io::{Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};
use tiff::decoder::{Decoder, DecodingResult};
use tiff::encoder::colortype;
use tiff::tags::Tag;
use tiff::ColorType;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/rasters")
}

fn expected() -> Json {
    let text = std::fs::read_to_string(fixtures().join("expected.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn files() -> Vec<Json> {
    expected()["files"].as_array().unwrap().clone()
}

fn file(name: &str) -> Json {
    files()
        .into_iter()
        .find(|f| f["file"] == name)
        .unwrap_or_else(|| panic!("{name} not in expected.json"))
}

/// Reads every block in order, checking that they tile the rows exactly once.
fn read_all(r: &mut GeoRaster) -> Vec<f32> {
    let info = r.info().clone();
    let mut all = Vec::new();
    let mut next_row = 0u32;
    for i in 0..r.block_count() {
        let b = r.read_block(i).unwrap();
        assert_eq!(b.y0, next_row, "block {i} starts at the next row");
        assert!(b.rows >= 1);
        assert_eq!(
            b.data.len(),
            b.rows as usize * info.width as usize * info.bands
        );
        next_row += b.rows;
        all.extend_from_slice(&b.data);
    }
    assert_eq!(next_row, info.height, "blocks cover every row once");
    all
}

fn open(name: &str) -> GeoRaster {
    GeoRaster::open(&fixtures().join(name), &Limits::default())
        .unwrap_or_else(|e| panic!("{name}: {e}"))
}

fn weight(y: usize, x: usize) -> f64 {
    (1 + (31 * y + 17 * x) % 101) as f64
}

fn sample_name(s: SampleKind) -> &'static str {
    s.name()
}

#[test]
fn every_fixture_decodes_to_the_expected_values() {
    let list = files();
    assert_eq!(list.len(), 11);
    for f in list {
        let name = f["file"].as_str().unwrap();
        let mut r = open(name);
        let info = r.info().clone();
        assert_eq!(info.width as u64, f["width"].as_u64().unwrap(), "{name}");
        assert_eq!(info.height as u64, f["height"].as_u64().unwrap(), "{name}");
        assert_eq!(info.bands as u64, f["bands"].as_u64().unwrap(), "{name}");
        assert_eq!(
            sample_name(info.sample),
            f["sample"].as_str().unwrap(),
            "{name}"
        );
        assert_eq!(info.planar, f["planar"].as_bool().unwrap(), "{name}");
        assert_eq!(info.tiled, f["tiled"].as_bool().unwrap(), "{name}");
        let all = read_all(&mut r);
        let (w, h, bands) = (info.width as usize, info.height as usize, info.bands);
        for (b, sums) in f["checksums"].as_array().unwrap().iter().enumerate() {
            let (mut count, mut nan_count, mut sum, mut wsum, mut nan_wsum) =
                (0u64, 0u64, 0f64, 0f64, 0f64);
            for y in 0..h {
                for x in 0..w {
                    let v = all[(y * w + x) * bands + b] as f64;
                    if v.is_nan() {
                        nan_count += 1;
                        nan_wsum += weight(y, x);
                    } else {
                        count += 1;
                        sum += v;
                        wsum += v * weight(y, x);
                    }
                }
            }
            assert_eq!(count, sums["count"].as_u64().unwrap(), "{name} band {b}");
            assert_eq!(
                nan_count,
                sums["nan_count"].as_u64().unwrap(),
                "{name} band {b}"
            );
            assert_eq!(sum, sums["sum"].as_f64().unwrap(), "{name} band {b}");
            assert_eq!(wsum, sums["wsum"].as_f64().unwrap(), "{name} band {b}");
            assert_eq!(
                nan_wsum,
                sums["nan_wsum"].as_f64().unwrap(),
                "{name} band {b}"
            );
        }
        for px in f["pixels"].as_array().unwrap() {
            let (y, x) = (
                px["y"].as_u64().unwrap() as usize,
                px["x"].as_u64().unwrap() as usize,
            );
            for (b, want) in px["values"].as_array().unwrap().iter().enumerate() {
                let got = all[(y * w + x) * bands + b];
                match want.as_f64() {
                    Some(v) => assert_eq!(got as f64, v, "{name} ({y},{x}) band {b}"),
                    None => assert!(got.is_nan(), "{name} ({y},{x}) band {b}"),
                }
            }
        }
    }
}

#[test]
fn u16_layouts_decode_identically() {
    let base = read_all(&mut open("utm_u16_4band_strips.tif"));
    for name in [
        "utm_u16_4band_planar_tiled_deflate.tif",
        "utm_u16_4band_lzw.tif",
        // Big-endian BigTIFF whose PhotometricInterpretation says RGB: all four bands.
        "utm_u16_rgbn_bigtiff_be.tif",
    ] {
        assert_eq!(read_all(&mut open(name)), base, "{name}");
    }
    // The i16 file holds the first three bands minus 30000.
    let i16 = read_all(&mut open("utm_i16_3band_tiled.tif"));
    for p in 0..40 * 30 {
        for b in 0..3 {
            assert_eq!(i16[p * 3 + b], base[p * 4 + b] - 30000.0);
        }
    }
    // The 4-band u8 file is the base data modulo 251, all four bands.
    let rgbn = read_all(&mut open("utm_u8_rgbn_photometric_rgb.tif"));
    assert_eq!(rgbn.len(), base.len());
    for (a, b) in rgbn.iter().zip(&base) {
        assert_eq!(*a, (*b as u32 % 251) as f32);
    }
}

#[test]
fn block_layouts_and_random_access() {
    for (name, blocks, rows) in [
        ("utm_u16_4band_strips.tif", 5, 7),
        ("utm_u16_4band_planar_tiled_deflate.tif", 2, 16),
        ("utm_u16_4band_lzw.tif", 8, 4),
        ("utm_i16_3band_tiled.tif", 2, 16),
        ("utm_f32_6band_nan.tif", 4, 8),
        ("geographic_u8_rgb.tif", 1, 30),
        ("utm_u16_rgbn_bigtiff_be.tif", 6, 5),
    ] {
        let mut r = open(name);
        assert_eq!(r.block_count(), blocks, "{name}");
        assert_eq!(r.block_rows(), rows, "{name}");
        let forward = read_all(&mut r);
        // Backwards, then again: same blocks.
        let mut back: Vec<Block> = (0..blocks)
            .rev()
            .map(|i| r.read_block(i).unwrap())
            .collect();
        back.reverse();
        let joined: Vec<f32> = back.iter().flat_map(|b| b.data.clone()).collect();
        assert_eq!(
            joined.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            forward.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
            "{name}"
        );
        let last = back.last().unwrap();
        assert_eq!(last.y0 + last.rows, 30);
        assert!(matches!(r.read_block(blocks), Err(Error::Decode { .. })));
    }
}

fn json_reals(v: &Json) -> Option<GeoTagValue> {
    v.as_array()
        .map(|a| GeoTagValue::Double(a.iter().map(|x| x.as_f64().unwrap()).collect()))
}

fn expected_geo(f: &Json) -> GeoTags {
    let g = &f["geo"];
    if g.is_null() {
        return GeoTags::default();
    }
    GeoTags {
        pixel_scale: json_reals(&g["pixel_scale"]),
        tiepoint: json_reals(&g["tiepoint"]),
        transformation: json_reals(&g["transformation"]),
        key_directory: g["key_directory"]
            .as_array()
            .map(|a| GeoTagValue::Short(a.iter().map(|x| x.as_u64().unwrap() as u16).collect())),
        double_params: json_reals(&g["double_params"]),
        ascii_params: g["ascii_params"]
            .as_str()
            .map(|s| GeoTagValue::Ascii(s.to_string())),
    }
}

#[test]
fn geotags_read_as_written() {
    for f in files() {
        let name = f["file"].as_str().unwrap();
        let want = expected_geo(&f);
        let r = open(name);
        assert_eq!(r.info().geo, want, "{name}");
        assert_eq!(
            read_geotags(&fixtures().join(name)).unwrap(),
            want,
            "{name}"
        );
        assert_eq!(want.is_empty(), name.starts_with("plain_"), "{name}");
        if !want.is_empty() {
            assert_eq!(want.validate(), Ok(()), "{name}");
        }
    }
    let utm = open("utm_u16_4band_strips.tif");
    assert_eq!(utm.info().geo.geo_key(1024), Some(1));
    assert_eq!(utm.info().geo.geo_key(3072), Some(32633));
    assert_eq!(utm.info().geo.geo_key(3076), Some(9001));
    assert_eq!(
        utm.info().geo.geo_key(1026),
        None,
        "ASCII key is not a SHORT"
    );
    assert_eq!(utm.info().geo.geo_key(4096), None);
}

#[test]
fn pixel_area_in_square_metres() {
    let area = |name: &str| open(name).info().geo.pixel_area_m2();
    for name in [
        "utm_u16_4band_strips.tif",
        "utm_u16_4band_planar_tiled_deflate.tif",
        "utm_f32_6band_nan.tif",
    ] {
        assert_eq!(area(name), Some(100.0), "{name}");
    }
    assert_eq!(area("utm_u8_rgbn_photometric_rgb.tif"), Some(0.25));
    assert_eq!(area("geographic_u8_rgb.tif"), None);
    assert_eq!(area("plain_u32_1band.tif"), None);
    let t = area("transform_f64_1band.tif").unwrap();
    assert!((t - 4.0).abs() < 1e-9, "{t}");
}

fn keys(entries: &[[u16; 4]]) -> GeoTagValue {
    let mut v = vec![1, 1, 0, entries.len() as u16];
    for e in entries {
        v.extend_from_slice(e);
    }
    GeoTagValue::Short(v)
}

#[test]
fn pixel_area_rules() {
    let scale = Some(GeoTagValue::Double(vec![30.0, 20.0, 0.0]));
    let with = |k: &[[u16; 4]]| GeoTags {
        pixel_scale: scale.clone(),
        key_directory: Some(keys(k)),
        ..GeoTags::default()
    };
    // Projected + metre units.
    assert_eq!(
        with(&[[1024, 0, 1, 1], [3076, 0, 1, 9001]]).pixel_area_m2(),
        Some(600.0)
    );
    // UTM code alone (no model type, no units).
    assert_eq!(with(&[[3072, 0, 1, 32755]]).pixel_area_m2(), Some(600.0));
    // UTM code with feet.
    assert_eq!(
        with(&[[3072, 0, 1, 32633], [3076, 0, 1, 9002]]).pixel_area_m2(),
        None
    );
    // Non-UTM projected code without units: unknown.
    assert_eq!(
        with(&[[1024, 0, 1, 1], [3072, 0, 1, 3857]]).pixel_area_m2(),
        None
    );
    // Geographic.
    assert_eq!(
        with(&[[1024, 0, 1, 2], [2048, 0, 1, 4326]]).pixel_area_m2(),
        None
    );
    // No key directory at all.
    let bare = GeoTags {
        pixel_scale: scale.clone(),
        ..GeoTags::default()
    };
    assert_eq!(bare.pixel_area_m2(), None);
    // Bad scale.
    let mut g = with(&[[3072, 0, 1, 32633]]);
    g.pixel_scale = Some(GeoTagValue::Double(vec![-30.0, 20.0, 0.0]));
    assert_eq!(g.pixel_area_m2(), None);
    g.pixel_scale = Some(GeoTagValue::Double(vec![f64::NAN, 20.0, 0.0]));
    assert_eq!(g.pixel_area_m2(), None);
    // Transformation: |det| of the 2x2 part.
    g.pixel_scale = None;
    let mut m = vec![0.0; 16];
    m[0] = 3.0;
    m[1] = 1.0;
    m[4] = 1.0;
    m[5] = -5.0;
    m[15] = 1.0;
    g.transformation = Some(GeoTagValue::Double(m));
    assert_eq!(g.pixel_area_m2(), Some(16.0));
}

fn good_geo() -> GeoTags {
    expected_geo(&file("utm_u16_4band_strips.tif"))
}

#[test]
fn validate_catches_each_inconsistency() {
    let good = good_geo();
    assert_eq!(good.validate(), Ok(()));
    assert_eq!(GeoTags::default().validate(), Ok(()));
    let d = |v: Vec<f64>| Some(GeoTagValue::Double(v));
    let mut identity = vec![0.0; 16];
    for i in 0..4 {
        identity[i * 5] = 1.0;
    }
    let cases: Vec<(&str, GeoTags)> = vec![
        (
            "zero scale",
            GeoTags {
                pixel_scale: d(vec![0.0, 10.0, 0.0]),
                ..good.clone()
            },
        ),
        (
            "negative scale",
            GeoTags {
                pixel_scale: d(vec![10.0, -10.0, 0.0]),
                ..good.clone()
            },
        ),
        (
            "NaN scale",
            GeoTags {
                pixel_scale: d(vec![f64::NAN, 10.0, 0.0]),
                ..good.clone()
            },
        ),
        (
            "infinite scale z",
            GeoTags {
                pixel_scale: d(vec![10.0, 10.0, f64::INFINITY]),
                ..good.clone()
            },
        ),
        (
            "short scale",
            GeoTags {
                pixel_scale: d(vec![10.0]),
                ..good.clone()
            },
        ),
        (
            "ascii scale",
            GeoTags {
                pixel_scale: Some(GeoTagValue::Ascii("10".into())),
                ..good.clone()
            },
        ),
        (
            "tiepoint of 5",
            GeoTags {
                tiepoint: d(vec![0.0; 5]),
                ..good.clone()
            },
        ),
        (
            "empty tiepoint",
            GeoTags {
                tiepoint: d(vec![]),
                ..good.clone()
            },
        ),
        (
            "NaN tiepoint",
            GeoTags {
                tiepoint: d(vec![0.0, 0.0, 0.0, f64::NAN, 1.0, 0.0]),
                ..good.clone()
            },
        ),
        (
            "transformation of 15",
            GeoTags {
                pixel_scale: None,
                tiepoint: None,
                transformation: d(vec![1.0; 15]),
                ..good.clone()
            },
        ),
        (
            "singular transformation",
            GeoTags {
                pixel_scale: None,
                tiepoint: None,
                transformation: d(vec![1.0; 16]),
                ..good.clone()
            },
        ),
        (
            "infinite transformation",
            GeoTags {
                pixel_scale: None,
                tiepoint: None,
                transformation: d({
                    let mut m = identity.clone();
                    m[3] = f64::INFINITY;
                    m
                }),
                ..good.clone()
            },
        ),
        (
            "scale+tiepoint and transformation",
            GeoTags {
                transformation: d(identity.clone()),
                ..good.clone()
            },
        ),
        (
            "tiepoint and transformation",
            GeoTags {
                pixel_scale: None,
                transformation: d(identity.clone()),
                ..good.clone()
            },
        ),
        (
            "key version 2",
            GeoTags {
                key_directory: Some(GeoTagValue::Short(vec![2, 1, 0, 1, 1024, 0, 1, 1])),
                ..good.clone()
            },
        ),
        (
            "key count too high",
            GeoTags {
                key_directory: Some(GeoTagValue::Short(vec![1, 1, 0, 2, 1024, 0, 1, 1])),
                ..good.clone()
            },
        ),
        (
            "key count too low",
            GeoTags {
                key_directory: Some(GeoTagValue::Short(vec![1, 1, 0, 0, 1024, 0, 1, 1])),
                ..good.clone()
            },
        ),
        (
            "short key header",
            GeoTags {
                key_directory: Some(GeoTagValue::Short(vec![1, 1])),
                ..good.clone()
            },
        ),
        (
            "double key directory",
            GeoTags {
                key_directory: Some(GeoTagValue::Double(vec![1.0, 1.0, 0.0, 0.0])),
                ..good.clone()
            },
        ),
        (
            "key past double params",
            GeoTags {
                key_directory: Some(keys(&[[2057, 34736, 1, 2]])),
                ..good.clone()
            },
        ),
        (
            "key without double params",
            GeoTags {
                double_params: None,
                ..good.clone()
            },
        ),
        (
            "key past ascii params",
            GeoTags {
                key_directory: Some(keys(&[[1026, 34737, 40, 0]])),
                ..good.clone()
            },
        ),
        (
            "key in unknown tag",
            GeoTags {
                key_directory: Some(keys(&[[1024, 300, 1, 0]])),
                ..good.clone()
            },
        ),
        (
            "inline key with count 2",
            GeoTags {
                key_directory: Some(keys(&[[1024, 0, 2, 1]])),
                ..good.clone()
            },
        ),
        (
            "ascii params as doubles",
            GeoTags {
                ascii_params: d(vec![1.0]),
                ..good.clone()
            },
        ),
    ];
    for (what, g) in cases {
        let r = g.validate();
        assert!(r.is_err(), "{what}: {g:?} passed validation");
    }
    // A transformation alone is fine.
    let t = GeoTags {
        pixel_scale: None,
        tiepoint: None,
        transformation: d(identity),
        ..good
    };
    assert_eq!(t.validate(), Ok(()));
}

#[test]
fn geotag_equality_is_by_type_and_bits() {
    let a = GeoTagValue::Short(vec![1, 2]);
    assert_ne!(a, GeoTagValue::Long(vec![1, 2]));
    assert_eq!(
        GeoTagValue::Double(vec![f64::NAN]),
        GeoTagValue::Double(vec![f64::NAN])
    );
    assert_ne!(
        GeoTagValue::Double(vec![0.0]),
        GeoTagValue::Double(vec![-0.0])
    );
    assert_ne!(
        GeoTagValue::Double(vec![1.0]),
        GeoTagValue::Float(vec![1.0])
    );
    let g = good_geo();
    let mut h = g.clone();
    assert_eq!(g, h);
    h.ascii_params = None;
    assert_ne!(g, h);
    assert_eq!(g.entries().len(), 5);
    assert!(!g.is_empty());
    assert!(GeoTags::default().is_empty());
}

#[test]
fn nodata_is_parsed() {
    assert_eq!(open("utm_u16_4band_strips.tif").info().nodata, Some(0.0));
    assert_eq!(open("utm_u16_4band_lzw.tif").info().nodata, Some(0.0));
    let f = open("utm_f32_6band_nan.tif");
    assert!(f.info().nodata.unwrap().is_nan());
    assert!(f.info().is_nodata(f32::NAN));
    assert!(!f.info().is_nodata(0.0));
    assert_eq!(open("utm_i16_3band_tiled.tif").info().nodata, None);
    assert_eq!(open("geographic_u8_rgb.tif").info().nodata, None);
    let u = open("utm_u16_4band_strips.tif");
    assert!(u.info().is_nodata(0.0));
    assert!(!u.info().is_nodata(1.0));
    assert_eq!(parse_nodata("-9999"), Some(-9999.0));
    assert_eq!(parse_nodata(" 1e3 \0"), Some(1000.0));
    assert_eq!(parse_nodata("-inf"), Some(f64::NEG_INFINITY));
    assert!(parse_nodata("NaN").unwrap().is_nan());
    assert_eq!(parse_nodata("none"), None);
    assert_eq!(parse_nodata(""), None);
}

fn read_back_u8(path: &Path) -> (u32, u32, Vec<u8>, u32) {
    let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
    assert_eq!(d.colortype().unwrap(), ColorType::Gray(8));
    let (w, h) = d.dimensions().unwrap();
    let strips = d.strip_count().unwrap();
    match d.read_image().unwrap() {
        DecodingResult::U8(v) => (w, h, v, strips),
        other => panic!("unexpected {other:?}"),
    }
}

fn read_back_f32(path: &Path) -> (u32, u32, Vec<f32>, u32) {
    let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
    assert_eq!(d.colortype().unwrap(), ColorType::Gray(32));
    let (w, h) = d.dimensions().unwrap();
    let strips = d.strip_count().unwrap();
    match d.read_image().unwrap() {
        DecodingResult::F32(v) => (w, h, v, strips),
        other => panic!("unexpected {other:?}"),
    }
}

fn nodata_text(path: &Path) -> Option<String> {
    let mut d = Decoder::new(File::open(path).unwrap()).unwrap();
    d.find_tag(Tag::GdalNodata)
        .unwrap()
        .map(|v| v.into_string().unwrap())
}

#[test]
fn u8_band_round_trip_keeps_pixels_and_geotags() {
    let input = fixtures().join("utm_u16_4band_strips.tif");
    let mut src = open("utm_u16_4band_strips.tif");
    let geo = src.info().geo.clone();
    let (w, h) = (src.info().width, src.info().height);
    let all = read_all(&mut src);
    let band0: Vec<u8> = all
        .chunks_exact(4)
        .map(|p| (p[0] as u32 % 256) as u8)
        .collect();

    let out = tempfile::NamedTempFile::new().unwrap();
    let mut calls = Vec::new();
    write_u8_band(
        out.reopen().unwrap(),
        w,
        h,
        &geo,
        Some("0"),
        &mut |y0, rows| {
            calls.push((y0, rows));
            Ok(band0[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec())
        },
    )
    .unwrap();
    assert_eq!(calls, vec![(0, 30)], "small images fit in one strip");
    let (ow, oh, pixels, _) = read_back_u8(out.path());
    assert_eq!((ow, oh), (w, h));
    assert_eq!(pixels, band0);
    assert_eq!(
        read_geotags(out.path()).unwrap(),
        read_geotags(&input).unwrap()
    );
    assert_eq!(nodata_text(out.path()).as_deref(), Some("0"));

    // And it opens as a one-band GeoRaster with the same georeferencing.
    let mut back = GeoRaster::open(out.path(), &Limits::default()).unwrap();
    assert_eq!(back.info().bands, 1);
    assert_eq!(back.info().sample, SampleKind::U8);
    assert_eq!(back.info().geo, geo);
    assert_eq!(back.info().nodata, Some(0.0));
    assert_eq!(back.info().geo.pixel_area_m2(), Some(100.0));
    let again: Vec<u8> = read_all(&mut back).iter().map(|&v| v as u8).collect();
    assert_eq!(again, band0);
}

#[test]
fn f32_band_round_trip_keeps_pixels_nan_and_geotags() {
    let input = fixtures().join("utm_f32_6band_nan.tif");
    let mut src = open("utm_f32_6band_nan.tif");
    let geo = src.info().geo.clone();
    let (w, h) = (src.info().width, src.info().height);
    let all = read_all(&mut src);
    let band2: Vec<f32> = all.chunks_exact(6).map(|p| p[2]).collect();
    assert!(band2.iter().any(|v| v.is_nan()));

    let out = tempfile::NamedTempFile::new().unwrap();
    write_f32_band(
        out.reopen().unwrap(),
        w,
        h,
        &geo,
        Some("nan"),
        &mut |y0, rows| Ok(band2[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec()),
    )
    .unwrap();
    let (ow, oh, pixels, _) = read_back_f32(out.path());
    assert_eq!((ow, oh), (w, h));
    let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&pixels), bits(&band2));
    assert_eq!(
        read_geotags(out.path()).unwrap(),
        read_geotags(&input).unwrap()
    );
    assert_eq!(nodata_text(out.path()).as_deref(), Some("nan"));

    // The transformation-georeferenced fixture round-trips too.
    let tin = fixtures().join("transform_f64_1band.tif");
    let tgeo = read_geotags(&tin).unwrap();
    let out2 = tempfile::NamedTempFile::new().unwrap();
    write_f32_band(out2.reopen().unwrap(), 3, 2, &tgeo, None, &mut |_, rows| {
        Ok(vec![1.5; rows as usize * 3])
    })
    .unwrap();
    assert_eq!(read_geotags(out2.path()).unwrap(), tgeo);
    assert_eq!(nodata_text(out2.path()), None);
}

#[test]
fn writers_go_strip_by_strip() {
    // A forced strip height: 4 strips of 3 rows and one of 1.
    let (w, h) = (5u32, 13u32);
    let values: Vec<u8> = (0..w * h).map(|v| (v * 7 % 256) as u8).collect();
    let out = tempfile::NamedTempFile::new().unwrap();
    let mut calls = Vec::new();
    write_band::<_, colortype::Gray8>(
        out.reopen().unwrap(),
        w,
        h,
        &GeoTags::default(),
        None,
        Some(3),
        &WriteOptions::default(),
        &mut |y0, rows| {
            calls.push((y0, rows));
            Ok(values[(y0 * w) as usize..((y0 + rows) * w) as usize].to_vec())
        },
    )
    .unwrap();
    assert_eq!(calls, vec![(0, 3), (3, 3), (6, 3), (9, 3), (12, 1)]);
    let (_, _, pixels, strips) = read_back_u8(out.path());
    assert_eq!(strips, 5);
    assert_eq!(pixels, values);
    assert!(read_geotags(out.path()).unwrap().is_empty());

    // The automatic choice keeps strips near 256 KiB: a 100000-pixel-wide f32 row is
    // 400 kB, so one row per strip.
    assert_eq!(rows_per_strip(400_000, 10), 1);
    assert_eq!(rows_per_strip(40, 30), 30);
    assert_eq!(rows_per_strip(1000, 100_000), 262);
    let (w, h) = (70_000u32, 3u32);
    let out = tempfile::NamedTempFile::new().unwrap();
    let mut calls = Vec::new();
    write_f32_band(
        out.reopen().unwrap(),
        w,
        h,
        &GeoTags::default(),
        None,
        &mut |y0, rows| {
            calls.push((y0, rows));
            Ok((0..rows * w).map(|i| (i + y0 * w) as f32).collect())
        },
    )
    .unwrap();
    assert_eq!(calls, vec![(0, 1), (1, 1), (2, 1)]);
    let (_, _, pixels, strips) = read_back_f32(out.path());
    assert_eq!(strips, 3);
    assert!(pixels.iter().enumerate().all(|(i, &v)| v == i as f32));
}

#[test]
fn writers_refuse_bad_input_without_panicking() {
    let geo = good_geo();
    let mut cur = std::io::Cursor::new(Vec::new());
    // Wrong number of values from the callback.
    let r = write_u8_band(&mut cur, 4, 4, &geo, None, &mut |_, _| Ok(vec![0; 3]));
    assert!(matches!(r, Err(Error::Output { .. })), "{r:?}");
    // The callback's own error comes back unchanged.
    let r = write_f32_band(&mut cur, 4, 4, &geo, None, &mut |_, _| {
        Err(Error::Data("no more rows".into()))
    });
    assert!(
        matches!(r, Err(Error::Data(ref m)) if m == "no more rows"),
        "{r:?}"
    );
    // Empty rasters and bad nodata text.
    let mut ok = |_: u32, rows: u32| Ok(vec![0u8; rows as usize * 4]);
    assert!(write_u8_band(&mut cur, 0, 4, &geo, None, &mut ok).is_err());
    assert!(write_u8_band(&mut cur, 4, 0, &geo, None, &mut ok).is_err());
    assert!(write_u8_band(&mut cur, 4, 4, &geo, Some("zero"), &mut ok).is_err());
    assert!(write_u8_band(&mut cur, 4, 4, &geo, Some("0\0"), &mut ok).is_err());
    let mut bad = geo.clone();
    bad.ascii_params = Some(GeoTagValue::Ascii("Zürich|".into()));
    assert!(write_u8_band(&mut cur, 4, 4, &bad, None, &mut ok).is_err());
    // A sink that refuses to write gives an I/O error.
    struct Full;
    impl Write for Full {
        fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
            Err(std::io::Error::other("disk full"))
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }
    impl Seek for Full {
        fn seek(&mut self, _: SeekFrom) -> std::io::Result<u64> {
            Ok(0)
        }
    }
    let r = write_u8_band(Full, 4, 4, &geo, None, &mut ok);
    assert!(matches!(r, Err(Error::Io { .. })), "{r:?}");
}

/// A little-endian classic TIFF with the given inline-valued entries (tag, type, count,
/// value), followed by `data_len` zero bytes; StripOffsets/TileOffsets should point at
/// offset `data_at()`.
fn tiny_tiff(entries: &[(u16, u16, u32, u32)], data_len: usize) -> Vec<u8> {
    let mut sorted = entries.to_vec();
    sorted.sort_by_key(|e| e.0);
    let mut b = Vec::new();
    b.extend_from_slice(b"II");
    b.extend_from_slice(&42u16.to_le_bytes());
    b.extend_from_slice(&8u32.to_le_bytes());
    b.extend_from_slice(&(sorted.len() as u16).to_le_bytes());
    for (tag, ty, count, value) in sorted {
        b.extend_from_slice(&tag.to_le_bytes());
        b.extend_from_slice(&ty.to_le_bytes());
        b.extend_from_slice(&count.to_le_bytes());
        if ty == 3 && count == 1 {
            b.extend_from_slice(&(value as u16).to_le_bytes());
            b.extend_from_slice(&[0, 0]);
        } else {
            b.extend_from_slice(&value.to_le_bytes());
        }
    }
    b.extend_from_slice(&0u32.to_le_bytes());
    b.resize(b.len() + data_len, 0);
    b
}

const DATA_AT: u32 = 512;

fn strip_tiff(width: u32, height: u32, rows_per_strip: u32, bytes: u32) -> Vec<u8> {
    let mut t = tiny_tiff(
        &[
            (256, 4, 1, width),
            (257, 4, 1, height),
            (258, 3, 1, 8),
            (259, 3, 1, 1),
            (262, 3, 1, 1),
            (273, 4, 1, DATA_AT),
            (277, 3, 1, 1),
            (278, 4, 1, rows_per_strip),
            (279, 4, 1, bytes),
        ],
        0,
    );
    t.resize(DATA_AT as usize + 64, 7);
    t
}

fn write_temp(bytes: &[u8]) -> tempfile::NamedTempFile {
    let mut f = tempfile::NamedTempFile::new().unwrap();
    f.write_all(bytes).unwrap();
    f.flush().unwrap();
    f
}

#[test]
fn tiny_tiff_helper_makes_a_readable_file() {
    let f = write_temp(&strip_tiff(8, 8, 8, 64));
    let mut r = GeoRaster::open(f.path(), &Limits::default()).unwrap();
    assert_eq!((r.info().width, r.info().bands), (8, 1));
    assert!(r.read_block(0).unwrap().data.iter().all(|&v| v == 7.0));
    // RowsPerStrip 2^32 - 1 means "all rows in one strip".
    let f = write_temp(&strip_tiff(8, 8, u32::MAX, 64));
    let mut r = GeoRaster::open(f.path(), &Limits::default()).unwrap();
    assert_eq!((r.block_count(), r.block_rows()), (1, 8));
    assert_eq!(r.read_block(0).unwrap().rows, 8);
}

#[test]
fn huge_headers_are_refused_quickly() {
    let start = Instant::now();
    // 100000 x 100000 in one strip: over max_pixels.
    let f = write_temp(&strip_tiff(100_000, 100_000, 100_000, 64));
    let r = GeoRaster::open(f.path(), &Limits::default());
    assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
    // Within max_pixels, but one strip would be 20000 x 20000 x 4 bytes as f32.
    let f = write_temp(&strip_tiff(20_000, 20_000, 20_000, 64));
    let limits = Limits {
        max_pixels: 1 << 40,
        max_alloc: 256 << 20,
        ..Limits::default()
    };
    let r = GeoRaster::open(f.path(), &limits);
    assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
    // A small image claiming enormous tiles.
    let mut t = tiny_tiff(
        &[
            (256, 4, 1, 8),
            (257, 4, 1, 8),
            (258, 3, 1, 8),
            (259, 3, 1, 1),
            (262, 3, 1, 1),
            (277, 3, 1, 1),
            (322, 4, 1, 1 << 30),
            (323, 4, 1, 1 << 30),
            (324, 4, 1, DATA_AT),
            (325, 4, 1, 64),
        ],
        0,
    );
    t.resize(DATA_AT as usize + 64, 0);
    let f = write_temp(&t);
    let r = GeoRaster::open(f.path(), &Limits::default());
    assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
    assert!(
        start.elapsed() < Duration::from_secs(2),
        "{:?}",
        start.elapsed()
    );
}

#[test]
fn truncated_files_give_errors_not_panics() {
    for f in files() {
        let name = f["file"].as_str().unwrap();
        let bytes = std::fs::read(fixtures().join(name)).unwrap();
        let n = bytes.len();
        // Bytes the decoder may never need: the end of a compressed stream (a Deflate
        // checksum, an LZW end code) and the bottom padding rows of the last tile.
        let spare = if f["tiled"] == true {
            200
        } else if f["compression"] != "none" {
            1
        } else {
            0
        };
        for cut in [0, 3, 4, 8, 9, 20, 100, 300, n / 4, n / 2, n - 100, n - 1] {
            let tmp = write_temp(&bytes[..cut]);
            let outcome = GeoRaster::open(tmp.path(), &Limits::default()).and_then(|mut r| {
                (0..r.block_count()).try_for_each(|i| r.read_block(i).map(|_| ()))
            });
            if cut < n - spare {
                assert!(
                    outcome.is_err(),
                    "{name} cut at {cut} of {n} read without error"
                );
            }
            if let Err(e) = outcome {
                assert!(!e.to_string().is_empty());
            }
        }
    }
}

#[test]
fn corrupt_bytes_give_errors_not_panics() {
    // Tight limits: a corrupted size must not make the test allocate gigabytes.
    let limits = Limits {
        max_pixels: 1 << 20,
        max_alloc: 32 << 20,
        ..Limits::default()
    };
    for name in [
        "utm_u16_4band_strips.tif",
        "utm_u16_4band_planar_tiled_deflate.tif",
        "utm_f32_6band_nan.tif",
    ] {
        let bytes = std::fs::read(fixtures().join(name)).unwrap();
        let tmp = tempfile::NamedTempFile::new().unwrap();
        // The header, the directory and the tag values live in the first ~500 bytes.
        for pos in 0..bytes.len().min(500) {
            for v in [0xffu8, bytes[pos] ^ 0x11] {
                let mut b = bytes.clone();
                b[pos] = v;
                std::fs::write(tmp.path(), &b).unwrap();
                if let Ok(mut r) = GeoRaster::open(tmp.path(), &limits) {
                    for i in 0..r.block_count() {
                        let _ = r.read_block(i);
                    }
                }
                let _ = read_geotags(tmp.path());
            }
        }
    }
}

#[test]
fn png_opens_as_three_bands() {
    let (w, h) = (5u32, 4u32);
    let rgb: Vec<u8> = (0..w * h * 3).map(|i| (i * 11 % 256) as u8).collect();
    let tmp = tempfile::Builder::new().suffix(".png").tempfile().unwrap();
    crate::raster::write_rgb_png(tmp.reopen().unwrap(), w, h, &rgb).unwrap();
    let mut r = GeoRaster::open(tmp.path(), &Limits::default()).unwrap();
    let info = r.info().clone();
    assert_eq!((info.width, info.height, info.bands), (w, h, 3));
    assert_eq!(info.sample, SampleKind::U8);
    assert!(info.geo.is_empty());
    assert_eq!(info.nodata, None);
    assert_eq!(r.block_count(), 1);
    let all = read_all(&mut r);
    assert_eq!(all, rgb.iter().map(|&v| v as f32).collect::<Vec<_>>());
    // Limits apply to non-TIFF input too.
    let r = GeoRaster::open(tmp.path(), &Limits::with_max_pixels(10));
    assert!(matches!(r, Err(Error::LimitExceeded { .. })), "{r:?}");
}

#[test]
fn missing_folders_and_non_images_are_clear_errors() {
    let r = GeoRaster::open(&fixtures().join("no-such-file.tif"), &Limits::default());
    assert!(matches!(r, Err(Error::Open { .. })), "{r:?}");
    let r = GeoRaster::open(&fixtures(), &Limits::default());
    assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
    let r = GeoRaster::open(&fixtures().join("expected.json"), &Limits::default());
    assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
    let empty = write_temp(b"");
    assert!(GeoRaster::open(empty.path(), &Limits::default()).is_err());
    let r = read_geotags(&fixtures().join("expected.json"));
    assert!(matches!(r, Err(Error::Decode { .. })), "{r:?}");
    // Sample types outside the supported set: 4-bit grey.
    let mut t = strip_tiff(8, 8, 8, 32);
    let at = t.windows(4).position(|w| w == [2, 1, 3, 0]).unwrap(); // BitsPerSample entry
    t[at + 8] = 4;
    let f = write_temp(&t);
    let r = GeoRaster::open(f.path(), &Limits::default());
    assert!(matches!(r, Err(Error::Unsupported { .. })), "{r:?}");
}
