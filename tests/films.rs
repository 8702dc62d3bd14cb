//! Films: files read back with independent readers (the `tiff` crate's decoder, the `png`
//! crate's decoder, `lopdf`), dot area against the tint and against the geometry of the
//! dot, the underbase choke against a brute-force distance check, minimum-feature
//! cleanup, marks, mirror, and bad options.
//!
//! References:
//! - TIFF 6.0 (Adobe, 1992): tags ImageWidth 256, ImageLength 257, BitsPerSample 258,
//!   Compression 259 (32773 = PackBits), PhotometricInterpretation 262 (0 = WhiteIsZero),
//!   XResolution 282, YResolution 283, ResolutionUnit 296 (2 = inch).
//! - PNG (ISO/IEC 15948:2004 §11.3.5.3): pHYs in pixels per unit, unit 1 = metre.
//! - PDF 1.7 (ISO 32000-1:2008): 72 user-space units (points) per inch by default
//!   (§8.3.2.3), MediaBox and TrimBox (§14.11.2), image XObjects with Width, Height,
//!   BitsPerComponent and Decode (§8.9.5).
//! - Murray–Davies: the dot area of a halftone is the share of the area the dots cover;
//!   on a 1-bit film that is the share of ink pixels.
//! - 1 inch = 25.4 mm exactly (international inch).

mod common;

use chromasift::film::{
    self, auto_angles, make_films, pdf_bytes, png_bytes, squared_distance_to_background,
    tiff_bytes, write_films, AlphaRule, CleanupAction, DotShape, FilmFormats, FilmOptions,
    Halftone, Length, MinFeature, PlateImage, ScreenKind, Screener, SmallFeature, UnderbaseFill,
    UnderbaseOptions,
};
use chromasift::Error;
use std::io::Cursor;

/// A plate of `w × h` whose amount is `f(x, y)`.
fn plate(ink: &str, n: usize, w: u32, h: u32, f: impl Fn(u32, u32) -> u8) -> PlateImage {
    let amount = (0..h)
        .flat_map(|y| (0..w).map(move |x| (x, y)))
        .map(|(x, y)| f(x, y))
        .collect();
    PlateImage::new(ink, n, n, w, h, amount).unwrap()
}

/// Three plates of one small artwork: a solid block, a ring, a gradient.
fn three_plates() -> Vec<PlateImage> {
    let (w, h) = (240, 160);
    vec![
        plate(
            "Warm red",
            1,
            w,
            h,
            |x, y| if x < 100 && y < 80 { 255 } else { 0 },
        ),
        plate("Process blue", 2, w, h, |x, y| {
            let d = ((x as f64 - 170.0).powi(2) + (y as f64 - 90.0).powi(2)).sqrt();
            if (30.0..50.0).contains(&d) {
                255
            } else {
                0
            }
        }),
        plate("Black", 3, w, h, |x, y| {
            if y > 120 {
                (x * 255 / (w - 1)) as u8
            } else {
                0
            }
        }),
    ]
}

fn opts(dpi: f64) -> FilmOptions {
    let mut o = FilmOptions::new(dpi);
    o.job = "Test job".into();
    o.halftone = Some(Halftone::default());
    o
}

fn is_params(e: &Error) -> bool {
    matches!(e, Error::Params(_))
}

// ---------------------------------------------------------------------------------------
// Files read back

#[test]
fn tiff_carries_size_resolution_and_the_bits() {
    use tiff::decoder::{ifd::Value, Decoder, DecodingResult};
    use tiff::tags::Tag;
    for dpi in [300.0, 600.0, 254.0] {
        let films = make_films(&three_plates(), None, &opts(dpi)).unwrap();
        for page in &films.pages {
            let bytes = tiff_bytes(page, "Test job").unwrap();
            let mut d = Decoder::new(Cursor::new(bytes)).unwrap();
            let (w, h) = d.dimensions().unwrap();
            assert_eq!((w, h), (page.bitmap.width(), page.bitmap.height()));
            // TIFF 6.0: BitsPerSample 1, PackBits 32773, WhiteIsZero 0, inch 2.
            assert_eq!(d.get_tag_u32(Tag::BitsPerSample).unwrap(), 1);
            assert_eq!(d.get_tag_u32(Tag::Compression).unwrap(), 32773);
            assert_eq!(d.get_tag_u32(Tag::PhotometricInterpretation).unwrap(), 0);
            assert_eq!(d.get_tag_u32(Tag::ResolutionUnit).unwrap(), 2);
            for tag in [Tag::XResolution, Tag::YResolution] {
                match d.get_tag(tag).unwrap() {
                    Value::Rational(n, den) => assert_eq!(n as f64 / den as f64, dpi),
                    other => panic!("{tag:?} is {other:?}"),
                }
            }
            // Physical size = pixels / dpi: the artwork plus two 20 mm margins tall.
            let height_mm = h as f64 / dpi * 25.4;
            let expected = 160.0 / dpi * 25.4 + 2.0 * 20.0;
            assert!(
                (height_mm - expected).abs() <= 25.4 / dpi,
                "{height_mm} vs {expected}"
            );
            // The decoder returns black-is-zero samples, rows padded to whole bytes.
            let DecodingResult::U8(data) = d.read_image().unwrap() else {
                panic!("8-bit buffer expected for a 1-bit image")
            };
            let rb = (w as usize).div_ceil(8);
            assert_eq!(data.len(), rb * h as usize);
            for y in 0..h as usize {
                for x in 0..w as usize {
                    let white = data[y * rb + x / 8] & (0x80 >> (x % 8)) != 0;
                    assert_eq!(!white, page.bitmap.get(x as i64, y as i64), "({x}, {y})");
                }
            }
        }
    }
}

#[test]
fn png_carries_pixels_per_metre() {
    let films = make_films(&three_plates(), None, &opts(300.0)).unwrap();
    let page = &films.pages[1];
    let bytes = png_bytes(page).unwrap();
    let dec = png::Decoder::new(Cursor::new(bytes));
    let mut reader = dec.read_info().unwrap();
    let info = reader.info();
    assert_eq!(info.bit_depth, png::BitDepth::One);
    assert_eq!(info.color_type, png::ColorType::Grayscale);
    let dims = info.pixel_dims.expect("pHYs present");
    assert_eq!(dims.unit, png::Unit::Meter);
    // 300 dpi = 300 / 0.0254 m = 11811.02 pixels per metre.
    assert_eq!((dims.xppu, dims.yppu), (11811, 11811));
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let frame = reader.next_frame(&mut buf).unwrap();
    assert_eq!(
        (frame.width, frame.height),
        (page.bitmap.width(), page.bitmap.height())
    );
    // 0 is black in PNG greyscale: ink.
    let rb = frame.line_size;
    let ink = |x: usize, y: usize| buf[y * rb + x / 8] & (0x80 >> (x % 8)) == 0;
    let a = page.art;
    let (cx, cy) = (a.x as usize + 170 + 40, a.y as usize + 90);
    assert!(ink(cx, cy) && page.bitmap.get(cx as i64, cy as i64));
    assert!(!ink(a.x as usize + 170, cy));
}

#[test]
fn pdf_has_one_true_size_page_per_film() {
    let mut o = opts(300.0);
    o.underbase = Some(UnderbaseOptions::default());
    let films = make_films(&three_plates(), None, &o).unwrap();
    assert_eq!(films.pages.len(), 4, "three colours and the underbase");
    let bytes = pdf_bytes(&films.pages, "Test job");
    let doc = lopdf::Document::load_mem(&bytes).unwrap();
    let pages = doc.get_pages();
    assert_eq!(pages.len(), 4);
    for ((_, &id), film) in pages.iter().zip(&films.pages) {
        let page = doc.get_dictionary(id).unwrap();
        let boxed = |key: &[u8]| common::pdf_box(&doc, id, key);
        // ISO 32000-1: 72 points per inch.
        let media = boxed(b"MediaBox");
        let w_pt = film.bitmap.width() as f64 / 300.0 * 72.0;
        let h_pt = film.bitmap.height() as f64 / 300.0 * 72.0;
        assert!(media[0] == 0.0 && media[1] == 0.0);
        assert!(
            (media[2] - w_pt).abs() < 0.01 && (media[3] - h_pt).abs() < 0.01,
            "{media:?}"
        );
        // TrimBox: the artwork, 240 × 160 px, i.e. 57.6 × 38.4 pt, 20 mm (56.69 pt) from
        // the bottom.
        let trim = boxed(b"TrimBox");
        assert!((trim[2] - trim[0] - 57.6).abs() < 0.01 && (trim[3] - trim[1] - 38.4).abs() < 0.01);
        assert!((trim[1] - 20.0 / 25.4 * 72.0).abs() < 0.3, "{trim:?}");
        // The image: 1 bit, the page's size, Flate, and the same bits.
        let xobjects = doc
            .get_dict_in_dict(page, b"Resources")
            .unwrap()
            .get(b"XObject")
            .unwrap()
            .as_dict()
            .unwrap();
        let (_, r) = xobjects.iter().next().unwrap();
        let stream = doc
            .get_object(r.as_reference().unwrap())
            .unwrap()
            .as_stream()
            .unwrap();
        let d = &stream.dict;
        assert_eq!(d.get(b"BitsPerComponent").unwrap().as_i64().unwrap(), 1);
        assert_eq!(
            d.get(b"Width").unwrap().as_i64().unwrap(),
            film.bitmap.width() as i64
        );
        assert_eq!(
            d.get(b"Height").unwrap().as_i64().unwrap(),
            film.bitmap.height() as i64
        );
        assert_eq!(d.get(b"Filter").unwrap().as_name().unwrap(), b"FlateDecode");
        assert_eq!(stream.decompressed_content().unwrap(), film.bitmap.bytes());
    }
    assert_eq!(films.pages[0].ink, "Underbase white");
}

#[test]
fn write_films_lands_every_file_and_no_temporary_one() {
    let dir = tempfile::tempdir().unwrap();
    let mut o = opts(300.0);
    o.min_feature = Some(MinFeature::new(Length::Mm(0.3)));
    let mut plates = three_plates();
    plates[0].amount[150 * 240 + 200] = 255; // an isolated speck for the cleanup list
    let films = make_films(&plates, None, &o).unwrap();
    // An earlier run's file of the same name is replaced.
    std::fs::write(dir.path().join("poster.films.pdf"), b"old").unwrap();
    let written = write_films(
        dir.path(),
        "poster",
        &films,
        FilmFormats::default(),
        "Test job",
    )
    .unwrap();
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "poster.cleanup.csv",
            "poster.cleanup.png",
            "poster.film-01-warm-red.png",
            "poster.film-01-warm-red.tif",
            "poster.film-02-process-blue.png",
            "poster.film-02-process-blue.tif",
            "poster.film-03-black.png",
            "poster.film-03-black.tif",
            "poster.films.pdf",
        ]
    );
    assert_eq!(written.len(), names.len());
    assert!(std::fs::read(dir.path().join("poster.films.pdf"))
        .unwrap()
        .starts_with(b"%PDF-"));
    let csv = std::fs::read_to_string(dir.path().join("poster.cleanup.csv")).unwrap();
    assert!(csv.contains("1,Warm red,removed,200,150,1,1,1,0"), "{csv}");
    if let Ok(keep) = std::env::var("CHROMASIFT_KEEP_FILMS") {
        for n in &names {
            std::fs::copy(dir.path().join(n), std::path::Path::new(&keep).join(n)).unwrap();
        }
    }
}

// ---------------------------------------------------------------------------------------
// Marks and mirror

#[test]
fn registration_marks_sit_at_the_same_place_on_every_plate() {
    for mirror in [false, true] {
        let mut o = opts(300.0);
        o.mirror = mirror;
        let films = make_films(&three_plates(), None, &o).unwrap();
        let layout = &films.layout;
        assert_eq!(layout.registration.len(), 4);
        let r = layout.registration_radius;
        let reach = (r + 2.5 / 25.4 * 300.0).ceil() as i64;
        let first = &films.pages[0].bitmap;
        for &(cx, cy) in &layout.registration {
            let (ci, cj) = (cx.floor() as i64, cy.floor() as i64);
            // The ring and the cross are inked: at the centre and on the ring to the right.
            assert!(first.get(ci, cj), "centre of the mark at ({cx}, {cy})");
            assert!(first.get((cx + r).floor() as i64, cj));
            // Outside the artwork.
            let a = layout.art;
            let inside = |x: i64, y: i64| {
                x >= a.x as i64
                    && y >= a.y as i64
                    && x < (a.x + a.w) as i64
                    && y < (a.y + a.h) as i64
            };
            for page in &films.pages {
                assert_eq!(page.bitmap.width(), first.width());
                for y in cj - reach..=cj + reach {
                    for x in ci - reach..=ci + reach {
                        assert_eq!(
                            page.bitmap.get(x, y),
                            first.get(x, y),
                            "({x}, {y}) on {}",
                            page.ink
                        );
                    }
                }
            }
            assert!(!inside(ci, cj));
        }
    }
    // Mirrored and right-reading films register with each other too.
    let plain = make_films(&three_plates(), None, &opts(300.0)).unwrap();
    let mut o = opts(300.0);
    o.mirror = true;
    let mirrored = make_films(&three_plates(), None, &o).unwrap();
    assert_eq!(plain.layout.registration, mirrored.layout.registration);
    for &(cx, cy) in &plain.layout.registration {
        let (ci, cj) = (cx.floor() as i64, cy.floor() as i64);
        for y in cj - 30..=cj + 30 {
            for x in ci - 30..=ci + 30 {
                assert_eq!(
                    plain.pages[0].bitmap.get(x, y),
                    mirrored.pages[0].bitmap.get(x, y),
                    "({x}, {y})"
                );
            }
        }
    }
}

#[test]
fn mirror_flips_the_whole_page() {
    // One solid pixel at the artwork's top-left corner.
    let p = plate(
        "Black",
        1,
        50,
        30,
        |x, y| if x == 0 && y == 0 { 255 } else { 0 },
    );
    let mut o = opts(300.0);
    let plain = make_films(std::slice::from_ref(&p), None, &o).unwrap();
    o.mirror = true;
    let mirrored = make_films(&[p], None, &o).unwrap();
    let (a, b) = (&plain.pages[0].bitmap, &mirrored.pages[0].bitmap);
    let w = a.width() as i64;
    let art = plain.layout.art;
    assert!(a.get(art.x as i64, art.y as i64));
    // Mirrored: the pixel is at the artwork's top-right corner.
    assert!(b.get((art.x + art.w - 1) as i64, art.y as i64));
    assert!(!b.get(art.x as i64, art.y as i64));
    // Outside the label line (whose words differ), the mirrored page is the plain page
    // flipped left to right.
    let l = &plain.layout;
    let (ly, lh) = (
        l.label_at.1 as i64,
        (10 * l.label_lines * l.text_scale) as i64,
    );
    let in_label = |y: i64| y >= ly && y < ly + lh;
    for y in (0..a.height() as i64).filter(|&y| !in_label(y)) {
        for x in 0..w {
            assert_eq!(a.get(x, y), b.get(w - 1 - x, y), "({x}, {y})");
        }
    }
    // The label reads backwards: its first line (the same words on both films, "Test
    // job  /  Black ...") is the plain page's first line flipped, at the right edge.
    let lx = l.label_at.0 as i64;
    let line_h = 8 * l.text_scale as i64;
    assert!(a.count_ink(lx as u32, ly as u32, 200, line_h as u32) > 50);
    for y in ly..ly + line_h {
        for x in lx..lx + 200 {
            assert_eq!(a.get(x, y), b.get(w - 1 - x, y), "label ({x}, {y})");
        }
    }
    assert_ne!(
        (0..200).map(|x| a.get(lx + x, ly + 3)).collect::<Vec<_>>(),
        (0..200).map(|x| b.get(lx + x, ly + 3)).collect::<Vec<_>>()
    );
    assert!(mirrored.pages[0].label.ends_with("mirrored, emulsion down"));
    assert!(plain.pages[0].label.ends_with("right reading, emulsion up"));
}

#[test]
fn the_label_names_ink_plate_order_and_job_and_fits_the_page() {
    let mut plates = three_plates();
    plates[2].ink = "A very long ink name that needs more room than the artwork gives".into();
    let films = make_films(&plates, None, &opts(300.0)).unwrap();
    let page = &films.pages[2];
    assert!(page.label.starts_with("Test job  /  A very long ink name"));
    assert!(page.label.contains("plate 3 of 3") && page.label.contains("print 3"));
    // The only plate with tints takes the first angle of the sequence, 45°.
    assert!(page.label.contains("55 lpi 45° round"), "{}", page.label);
    assert!(
        films.pages[0].label.contains("solid"),
        "no tints on the red plate"
    );
    // The label is wrapped onto the lines the top margin holds (20 mm: 4 lines of 2 mm
    // text in each of two columns, left and right of the top registration mark), each
    // line inked and clear of the mark.
    let l = &films.layout;
    assert_eq!(l.label_lines, 4);
    let lines = film::wrap_label(&page.label, l.label_width, l.text_scale);
    assert!(lines.len() > 4 && lines.len() <= 8, "{lines:?}");
    // Nothing lost: the same words in the same order.
    let words = |s: &str| {
        s.split_whitespace()
            .filter(|w| *w != "/")
            .collect::<Vec<_>>()
            .join(" ")
    };
    assert_eq!(words(&lines.join(" ")), words(&page.label));
    let top = l.registration[0];
    let reach = l.registration_radius + 1.5 / 25.4 * 300.0;
    let ly = l.label_at.1;
    for (k, line) in lines.iter().enumerate() {
        let text_w = line.chars().count() as u32 * 8 * l.text_scale;
        let x = if k < 4 { l.label_at.0 } else { l.label_right_x };
        if k < 4 {
            assert!(((x + text_w) as f64) < top.0 - reach);
        } else {
            assert!((x as f64) > top.0 + reach);
            assert!(x + text_w <= page.bitmap.width());
        }
        let y = ly + (k as u32 % 4) * 10 * l.text_scale;
        assert!(
            page.bitmap.count_ink(x, y, text_w, 8 * l.text_scale) > 50,
            "line {k}"
        );
    }
    // Nothing of the label reaches the artwork.
    assert!(ly + 4 * 10 * l.text_scale < l.art.y);
}

// ---------------------------------------------------------------------------------------
// Screening

/// Ink share of `screener` over a square of `side` pixels at tint `a`.
fn share(sc: &Screener, a: u8, side: i64) -> f64 {
    let mut n = 0u64;
    for y in 0..side {
        for x in 0..side {
            n += sc.ink(x + 37, y + 11, a) as u64;
        }
    }
    n as f64 / (side * side) as f64
}

#[test]
fn dot_area_matches_the_tint_on_a_wedge() {
    // Murray–Davies: dot area = covered share; required within 2 % (absolute).
    for dpi in [300.0, 600.0] {
        for lpi in [45.0, 55.0, 65.0] {
            for shape in [DotShape::Round, DotShape::Elliptical] {
                for angle in [0.0, 15.0, 22.5, 45.0, 75.0] {
                    let ht = Halftone {
                        kind: ScreenKind::Am(shape),
                        lpi,
                        ..Halftone::default()
                    };
                    let sc = Screener::new(&ht, angle, dpi).unwrap();
                    for step in 1..=9 {
                        let t = step as f64 / 10.0;
                        let a = (t * 255.0).round() as u8;
                        let got = share(&sc, a, 240);
                        assert!(
                            (got - a as f64 / 255.0).abs() <= 0.02,
                            "{dpi} dpi {lpi} lpi {shape:?} {angle}°: tint {t} covers {got}"
                        );
                    }
                }
            }
        }
        let ht = Halftone {
            kind: ScreenKind::Stochastic,
            ..Halftone::default()
        };
        let sc = Screener::new(&ht, 0.0, dpi).unwrap();
        for step in 1..=9 {
            let a = (step as f64 / 10.0 * 255.0).round() as u8;
            let got = share(&sc, a, 256);
            assert!(
                (got - a as f64 / 255.0).abs() <= 0.02,
                "stochastic {step}0 %: {got}"
            );
        }
    }
}

#[test]
fn the_wedge_through_the_whole_film_path() {
    // Nine bands of 10 %..90 %, 120 px wide each, screened on the film page.
    for dpi in [300.0, 600.0] {
        let p = plate("Black", 1, 9 * 120, 200, |x, _| {
            ((x / 120 + 1) as f64 * 25.5).round() as u8
        });
        let films = make_films(&[p], None, &opts(dpi)).unwrap();
        let (page, art) = (&films.pages[0], films.layout.art);
        for band in 0..9u32 {
            let inked = page.bitmap.count_ink(art.x + band * 120, art.y, 120, 200);
            let got = inked as f64 / (120.0 * 200.0);
            let want = ((band + 1) as f64 * 25.5).round() / 255.0;
            assert!(
                (got - want).abs() <= 0.02,
                "{dpi} dpi band {band}: {got} vs {want}"
            );
        }
        assert_eq!(films.plates[0].angle, Some(45.0));
    }
}

#[test]
fn the_round_dot_has_the_geometry_of_its_spot_function() {
    // 600 dpi, 50 lpi, 0°: cells of exactly 12 × 12 pixels starting at the origin.
    let ht = Halftone {
        lpi: 50.0,
        ..Halftone::default()
    };
    let sc = Screener::new(&ht, 0.0, 600.0).unwrap();
    let p = 12.0;
    // Cell coordinates of a pixel centre, in -1/2..1/2.
    let cell = |x: i64, y: i64| {
        let f = |v: i64| ((v as f64 + 0.5) / p).fract() - 0.5;
        (f(x), f(y))
    };
    // At 50 % the dot is the square turned 45° (|x| + |y| <= 1/2, area 1/2): the cells
    // make a checkerboard. Count pixels whose ink disagrees with that geometry.
    let mut wrong = 0;
    let mut total = 0;
    for y in 0..240 {
        for x in 0..240 {
            let (u, v) = cell(x, y);
            let margin = (u.abs() + v.abs() - 0.5).abs();
            // Each cell samples its dot shifted by up to half a pixel along each axis (see
            // the screen's notes), and the cell table has 128 positions a side: skip pixel
            // centres within 1.1 pixels (in |x| + |y|) of the edge.
            if margin < 1.1 / p {
                continue;
            }
            total += 1;
            wrong += (sc.ink(x, y, 128) != (u.abs() + v.abs() < 0.5)) as u32;
        }
    }
    assert_eq!(wrong, 0, "{wrong} of {total} pixels off the checkerboard");
    // At 20 % the dot is a disc of area 0.2 cell: radius √(0.2 / π) cells.
    let r = (0.2f64 / std::f64::consts::PI).sqrt();
    let a20 = 51u8; // 20 % of 255
    for y in 0..120 {
        for x in 0..120 {
            let (u, v) = cell(x, y);
            let d = (u * u + v * v).sqrt();
            // Shifted by at most √2 / 2 pixel, plus the table's spacing.
            if d < r - 0.85 / p {
                assert!(sc.ink(x, y, a20), "({x}, {y}) inside the disc");
            } else if d > r + 0.85 / p {
                assert!(!sc.ink(x, y, a20), "({x}, {y}) outside the disc");
            }
        }
    }
}

#[test]
fn solid_stays_solid_and_clear_stays_clear_under_every_screen() {
    let p = plate("Black", 1, 64, 64, |x, y| {
        if (x / 8 + y / 8) % 2 == 0 {
            255
        } else {
            0
        }
    });
    for kind in [
        ScreenKind::Am(DotShape::Round),
        ScreenKind::Am(DotShape::Elliptical),
        ScreenKind::Stochastic,
    ] {
        for angle in [0.0, 15.0, 45.0, 75.0] {
            let ht = Halftone {
                kind,
                angles: vec![angle],
                ..Halftone::default()
            };
            let sc = Screener::new(&ht, angle, 300.0).unwrap();
            for y in 0..64 {
                for x in 0..64 {
                    let a = p.amount[(y * 64 + x) as usize];
                    assert_eq!(sc.ink(x, y, a), a == 255);
                }
            }
        }
    }
}

#[test]
fn tinted_plates_get_angles_thirty_degrees_apart() {
    // Common practice: 45°, 75°, 15° for three screened plates.
    assert_eq!(auto_angles(3), vec![45.0, 75.0, 15.0]);
    let (w, h) = (40, 40);
    let plates: Vec<PlateImage> = (1..=4)
        .map(|n| {
            plate(&format!("Ink {n}"), n, w, h, |x, _| {
                if n == 2 {
                    255
                } else {
                    (x * 6) as u8
                }
            })
        })
        .collect();
    let films = make_films(&plates, None, &opts(300.0)).unwrap();
    let angles: Vec<Option<f64>> = films.plates.iter().map(|p| p.angle).collect();
    // The solid plate needs no screen and takes no angle.
    assert_eq!(angles, vec![Some(45.0), None, Some(75.0), Some(15.0)]);
    assert_eq!(films.plates[1].screen, "solid");
}

#[test]
fn stochastic_screens_repeat_for_a_seed() {
    let p = plate("Black", 1, 80, 80, |x, _| (x * 3) as u8);
    let mut o = opts(300.0);
    o.halftone = Some(Halftone {
        kind: ScreenKind::Stochastic,
        seed: 7,
        ..Halftone::default()
    });
    let a = make_films(std::slice::from_ref(&p), None, &o).unwrap();
    let b = make_films(std::slice::from_ref(&p), None, &o).unwrap();
    assert_eq!(a.pages[0].bitmap, b.pages[0].bitmap);
    o.halftone = Some(Halftone {
        kind: ScreenKind::Stochastic,
        seed: 8,
        ..Halftone::default()
    });
    let c = make_films(&[p], None, &o).unwrap();
    assert_ne!(a.pages[0].bitmap, c.pages[0].bitmap);
    assert!(a.plates[0].angle.is_none());
}

// ---------------------------------------------------------------------------------------
// Underbase

#[test]
fn the_underbase_is_choked_by_the_given_distance() {
    let (w, h) = (160u32, 120u32);
    // A disc, a bar touching the image edge, a 6 px wide line and some tint.
    let shapes = plate("Yellow", 1, w, h, |x, y| {
        let d = ((x as f64 - 50.0).powi(2) + (y as f64 - 60.0).powi(2)).sqrt();
        if d < 35.0 || (x >= 120 && y < 40) || ((100..106).contains(&y) && x > 20) {
            255
        } else {
            0
        }
    });
    let tint = plate("Cyan", 2, w, h, |x, y| {
        if (100..118).contains(&x) && (50..90).contains(&y) {
            90
        } else {
            0
        }
    });
    for (choke, dpi) in [
        (Length::Mm(0.5), 300.0),
        (Length::Px(3.0), 300.0),
        (Length::Mm(0.2), 600.0),
    ] {
        let r = choke.to_px(dpi, "choke").unwrap();
        let ub = film::underbase(
            &[shapes.clone(), tint.clone()],
            &UnderbaseOptions {
                choke,
                fill: UnderbaseFill::FollowInk,
            },
            dpi,
        )
        .unwrap();
        let inked = |x: i64, y: i64| {
            x >= 0 && y >= 0 && x < w as i64 && y < h as i64 && {
                let p = (y as u32 * w + x as u32) as usize;
                shapes.amount[p] > 0 || tint.amount[p] > 0
            }
        };
        // Brute force: white stays exactly where every pixel within r (centre to centre)
        // is inked, the outside of the image counting as not inked.
        let reach = r.ceil() as i64;
        for y in 0..h as i64 {
            for x in 0..w as i64 {
                let mut all = inked(x, y);
                'scan: for dy in -reach..=reach {
                    for dx in -reach..=reach {
                        if ((dx * dx + dy * dy) as f64) <= r * r && !inked(x + dx, y + dy) {
                            all = false;
                            break 'scan;
                        }
                    }
                }
                let p = (y as u32 * w + x as u32) as usize;
                assert_eq!(ub.amount[p] > 0, all, "choke {r} px at ({x}, {y})");
                if all {
                    // FollowInk: as much white as the most ink there.
                    assert_eq!(ub.amount[p], shapes.amount[p].max(tint.amount[p]));
                }
            }
        }
        // The disc's white is the disc shrunk by r: radius 35 - r (area check, ±1 px ring).
        let disc = (0..h as i64)
            .flat_map(|y| (0..100i64).map(move |x| (x, y)))
            .filter(|&(x, y)| ub.amount[(y as u32 * w + x as u32) as usize] > 0)
            .count() as f64;
        let expect = std::f64::consts::PI * (35.0 - r).powi(2);
        let ring = 2.0 * std::f64::consts::PI * (35.0 - r);
        assert!((disc - expect).abs() < ring, "{disc} vs {expect}");
    }
}

#[test]
fn the_distance_transform_agrees_with_brute_force() {
    let (w, h) = (37usize, 23usize);
    let ink: Vec<bool> = (0..w * h).map(|p| (p * 7919) % 11 != 0).collect();
    let d = squared_distance_to_background(&ink, w, h);
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            let mut best = i64::MAX;
            for by in -1..=h as i64 {
                for bx in -1..=w as i64 {
                    let inside = bx >= 0 && by >= 0 && bx < w as i64 && by < h as i64;
                    if !inside || !ink[by as usize * w + bx as usize] {
                        best = best.min((bx - x).pow(2) + (by - y).pow(2));
                    }
                }
            }
            assert_eq!(d[y as usize * w + x as usize], best as f64);
        }
    }
}

// ---------------------------------------------------------------------------------------
// Minimum feature

#[test]
fn thin_long_lines_survive_and_small_specks_go() {
    // 0.5 mm at 300 dpi = 5.9 px, rounded to 6 px; long = at least 18 px.
    let (w, h) = (200u32, 120u32);
    let art = |x: u32, y: u32| -> u8 {
        let hline = y == 10 && (10..40).contains(&x); // 1 × 30 px
        let vline = x == 60 && (10..35).contains(&y); // 1 × 25 px
        let diag = (100..120).contains(&x) && y == x - 90; // 20 px diagonal, bbox diag 28
        let short = y == 50 && (10..20).contains(&x); // 1 × 10 px: short and thin
        let speck2 = (80..82).contains(&x) && (50..52).contains(&y);
        let speck5 = (100..105).contains(&x) && (50..55).contains(&y);
        let square6 = (140..146).contains(&x) && (50..56).contains(&y);
        // Text-like: an "i" of 25 px height, stroke 3 px, with a 3 × 3 dot above.
        let stem = (170..173).contains(&x) && (80..105).contains(&y);
        let idot = (170..173).contains(&x) && (74..77).contains(&y);
        if hline || vline || diag || short || speck2 || speck5 || square6 || stem || idot {
            255
        } else {
            0
        }
    };
    let original = plate("Black", 1, w, h, art);
    let mut plates = vec![original.clone()];
    let report = film::clean_plates(&mut plates, &MinFeature::new(Length::Mm(0.5)), 300.0).unwrap();
    assert_eq!(report.limit_px, 6);
    let at = |x: u32, y: u32| plates[0].amount[(y * w + x) as usize] > 0;
    assert!(
        at(10, 10) && at(39, 10),
        "1 px horizontal line of 5 x the limit kept"
    );
    assert!(
        at(60, 10) && at(60, 34),
        "1 px vertical line of 4 x the limit kept"
    );
    assert!(at(100, 10) && at(119, 29), "diagonal line kept");
    assert!(at(140, 50) && at(145, 55), "6 × 6 square holds the limit");
    assert!(at(171, 90), "the stem of the i is long");
    assert!(!at(10, 50), "a 10 px dash is short and thin");
    assert!(!at(80, 50) && !at(102, 52), "specks below the limit go");
    assert!(!at(171, 75), "a 3 × 3 i-dot is below a 6 px limit");
    let removed: Vec<(u32, u32, u32, u32)> = report
        .features
        .iter()
        .map(|f| {
            assert_eq!(f.action, CleanupAction::Removed);
            (f.x, f.y, f.width, f.height)
        })
        .collect();
    assert_eq!(
        removed,
        vec![
            (10, 50, 10, 1),
            (80, 50, 2, 2),
            (100, 50, 5, 5),
            (170, 74, 3, 3)
        ]
    );
    // Only those pixels changed.
    let changed = original
        .amount
        .iter()
        .zip(&plates[0].amount)
        .filter(|(a, b)| a != b)
        .count();
    assert_eq!(changed, 9 + 10 + 4 + 25);
    // The picture marks removed ink in red.
    let pic = film::cleanup_picture(&report, &plates);
    let px = |x: u32, y: u32| &pic[((y * w + x) * 4) as usize..((y * w + x) * 4 + 3) as usize];
    assert_eq!(px(81, 51), &[220, 30, 30]);
    assert_eq!(px(20, 10), &[150, 150, 150]);

    // At a 3 px limit (a smaller mesh figure) the i-dot is kept.
    let mut plates = vec![original.clone()];
    let r = film::clean_plates(&mut plates, &MinFeature::new(Length::Px(3.0)), 300.0).unwrap();
    assert!(plates[0].amount[(75 * w + 171) as usize] > 0);
    assert!(r.features.iter().all(|f| f.y != 74));

    // Grow instead of remove: the i-dot becomes the smallest square the stencil holds.
    let mut plates = vec![original];
    let rule = MinFeature {
        small: SmallFeature::Grow,
        ..MinFeature::new(Length::Mm(0.5))
    };
    film::clean_plates(&mut plates, &rule, 300.0).unwrap();
    let dot: usize = (68..80u32)
        .flat_map(|y| (160..180u32).map(move |x| (x, y)))
        .filter(|&(x, y)| plates[0].amount[(y * w + x) as usize] > 0)
        .count();
    assert_eq!(dot, 36);
}

#[test]
fn the_limit_can_be_a_multiple_of_the_thread_spacing() {
    // Thread spacing of a 230 threads-per-inch mesh: 25.4 / 230 = 0.1104 mm (common
    // practice: spacing = 1 inch / mesh count). Two spacings at 600 dpi = 5.22 px → 5.
    let rule = MinFeature::new(Length::Threads {
        mesh_count: 230.0,
        multiple: 2.0,
    });
    assert_eq!(rule.limit_px(600.0).unwrap(), 5);
    let px = Length::Threads {
        mesh_count: 230.0,
        multiple: 2.0,
    }
    .to_px(600.0, "x")
    .unwrap();
    assert!((px - 2.0 * 600.0 / 230.0).abs() < 1e-9);
}

// ---------------------------------------------------------------------------------------
// Transparency

#[test]
fn the_alpha_threshold_defaults_to_half() {
    let p = plate("Black", 1, 4, 1, |_, _| 255);
    let alpha = [0u8, 127, 128, 255];
    let mut o = opts(300.0);
    o.marks = false;
    o.margin_mm = 0.0;
    let films = make_films(std::slice::from_ref(&p), Some(&alpha), &o).unwrap();
    let b = &films.pages[0].bitmap;
    assert_eq!(
        (0..4).map(|x| b.get(x, 0)).collect::<Vec<_>>(),
        [false, false, true, true]
    );
    assert!(
        films.notes[0].contains("alpha threshold 50 %"),
        "{:?}",
        films.notes
    );
    // As tints: 127/255 of solid becomes a halftone dot pattern instead.
    o.alpha = AlphaRule::Tint;
    let films = make_films(&[p], Some(&alpha), &o).unwrap();
    assert_eq!(films.plates_in[0].amount, vec![0, 127, 128, 255]);
}

// ---------------------------------------------------------------------------------------
// Bad input

#[test]
fn bad_options_are_refused_with_a_message_naming_them() {
    let plates = three_plates();
    let cases: Vec<(FilmOptions, &str)> = vec![
        (FilmOptions::new(0.0), "dpi"),
        (FilmOptions::new(-300.0), "dpi"),
        (FilmOptions::new(f64::NAN), "dpi"),
        (FilmOptions::new(1e9), "dpi"),
        (
            FilmOptions {
                margin_mm: -1.0,
                ..FilmOptions::new(300.0)
            },
            "margin",
        ),
        (
            FilmOptions {
                margin_mm: 5.0,
                ..FilmOptions::new(300.0)
            },
            "margin",
        ),
        (
            FilmOptions {
                halftone: Some(Halftone {
                    lpi: 151.0,
                    ..Halftone::default()
                }),
                ..FilmOptions::new(300.0)
            },
            "lines per inch",
        ),
        (
            FilmOptions {
                halftone: Some(Halftone {
                    lpi: 0.0,
                    ..Halftone::default()
                }),
                ..FilmOptions::new(300.0)
            },
            "lines per inch",
        ),
        (
            FilmOptions {
                halftone: Some(Halftone {
                    angles: vec![f64::INFINITY],
                    ..Halftone::default()
                }),
                ..FilmOptions::new(300.0)
            },
            "angle",
        ),
        (
            FilmOptions {
                underbase: Some(UnderbaseOptions {
                    choke: Length::Mm(-0.1),
                    ..UnderbaseOptions::default()
                }),
                ..FilmOptions::new(300.0)
            },
            "choke",
        ),
        (
            FilmOptions {
                min_feature: Some(MinFeature::new(Length::Mm(-1.0))),
                ..FilmOptions::new(300.0)
            },
            "minimum feature",
        ),
        (
            FilmOptions {
                min_feature: Some(MinFeature::new(Length::Threads {
                    mesh_count: 0.0,
                    multiple: 1.0,
                })),
                ..FilmOptions::new(300.0)
            },
            "mesh count",
        ),
        (
            FilmOptions {
                alpha: AlphaRule::Threshold(1.5),
                ..FilmOptions::new(300.0)
            },
            "alpha",
        ),
    ];
    for (o, word) in cases {
        let e = make_films(&plates, None, &o).unwrap_err();
        assert!(is_params(&e), "{e}");
        assert!(e.is_usage());
        assert!(e.to_string().contains(word), "'{e}' should name {word}");
    }
    // Plates that do not fit together.
    let o = FilmOptions::new(300.0);
    assert!(make_films(&[], None, &o).is_err());
    let mut odd = three_plates();
    odd[1] = plate("Small", 2, 10, 10, |_, _| 255);
    assert!(make_films(&odd, None, &o)
        .unwrap_err()
        .to_string()
        .contains("same size"));
    assert!(PlateImage::new("X", 1, 1, 10, 10, vec![0; 99]).is_err());
    assert!(PlateImage::new("X", 1, 1, 0, 10, vec![]).is_err());
    assert!(make_films(&three_plates(), Some(&[255u8; 3]), &o).is_err());
    // An absurd ink name widens the page past the limit: refused, promptly.
    let mut long = three_plates();
    long[0].ink = "x".repeat(2_000_000);
    let t = std::time::Instant::now();
    assert!(make_films(&long, None, &o)
        .unwrap_err()
        .to_string()
        .contains("limit"));
    assert!(t.elapsed().as_secs() < 20);
    // A page over the size limit is refused before any allocation.
    let huge = FilmOptions {
        margin_mm: 9000.0,
        ..FilmOptions::new(2400.0)
    };
    assert!(make_films(&three_plates(), None, &huge)
        .unwrap_err()
        .to_string()
        .contains("limit"));
}
