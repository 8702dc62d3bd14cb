//! Which inks `separate` chooses, as a print shop judges it: the paper is free (it takes no
//! screen and is never given an ink), and keeping a small colour family never costs a large
//! area its colour.
//!
//! Outside references: the artwork of the first test is drawn in exactly the shop's ink
//! colours (sRGB values of the library), so the right four plates are known by
//! construction; CIEDE2000 (checked against Sharma, Wu & Dalal 2005 in `colour_reference.rs`)
//! and the Bradford adaptation to D50 (checked against colour-science in
//! `separate_cli.rs`) measure the rest.

mod common;

use chromasift::colour::{adapt, delta_e2000};
use chromasift::families::{Objective, REPORT_DELTA_E};
use chromasift::inks::{parse_library, Ink};
use chromasift::raster::{decode_bytes, Decoded};
use chromasift::separate::{separate_image, SeparateOptions, Separation};
use chromasift::Limits;
use common::fixture;
use std::path::Path;

/// An invented shop's inks, as sRGB.
const SHOP_INKS: &str = "name,hex
Process Black,#000000
Fire Red,#d62828
Royal Blue,#1d3f8f
Lemon Yellow,#ffd400
Opaque White,#ffffff
Kelly Green,#1a8a3a
Orange,#f57c00
";

fn png(w: u32, h: u32, rgb: &[u8]) -> Decoded {
    let mut bytes = Vec::new();
    image::write_buffer_with_format(
        &mut std::io::Cursor::new(&mut bytes),
        rgb,
        w,
        h,
        image::ExtendedColorType::Rgb8,
        image::ImageFormat::Png,
    )
    .unwrap();
    decode_bytes(&bytes, Path::new("logo.png"), &Limits::default()).unwrap()
}

/// A four-ink logo on white paper: a yellow panel in a blue frame, a red disc, and black
/// hairlines; white paper covers most of the sheet.
fn logo() -> (u32, u32, Vec<u8>) {
    let (w, h) = (300u32, 200u32);
    let mut rgb = vec![255u8; (w * h * 3) as usize];
    let mut put = |x: u32, y: u32, c: [u8; 3]| {
        let i = ((y * w + x) * 3) as usize;
        rgb[i..i + 3].copy_from_slice(&c);
    };
    for y in 20..120 {
        for x in 20..140 {
            let frame = !(26..114).contains(&y) || !(26..134).contains(&x);
            put(
                x,
                y,
                if frame {
                    [0x1d, 0x3f, 0x8f]
                } else {
                    [0xff, 0xd4, 0x00]
                },
            );
        }
    }
    for y in 30..110 {
        for x in 170..250 {
            let (dx, dy) = (x as f64 - 209.5, y as f64 - 69.5);
            if dx * dx + dy * dy <= 40.0 * 40.0 {
                put(x, y, [0xd6, 0x28, 0x28]);
            }
        }
    }
    // Black hairlines (rules under the type), one pixel wide: no colour family of their
    // own, but plain black on the sheet.
    for y in [140, 150, 160, 170, 180] {
        for x in 20..280 {
            put(x, y, [0, 0, 0]);
        }
    }
    (w, h, rgb)
}

fn names(s: &Separation) -> Vec<String> {
    let mut v: Vec<String> = s.inks.iter().map(|i| i.name.clone()).collect();
    v.sort();
    v
}

#[test]
fn the_paper_takes_no_ink_and_no_screen() {
    let lib_path = Path::new("shop-inks.csv");
    let library = parse_library(SHOP_INKS, lib_path).unwrap();
    let (w, h, rgb) = logo();
    let img = png(w, h, &rgb);
    let paper_pixels = rgb.chunks(3).filter(|c| c == &[255, 255, 255]).count();
    for objective in [Objective::Families, Objective::Plain] {
        let opts = SeparateOptions {
            k: 4,
            substrate: Some([255, 255, 255]),
            objective,
            ..Default::default()
        };
        let s = separate_image(&img, &library, &opts, lib_path, "logo").unwrap();
        assert_eq!(
            names(&s),
            ["Fire Red", "Lemon Yellow", "Process Black", "Royal Blue"],
            "{objective:?}: {:?}",
            s.document.notes
        );
        let bare = s
            .labels
            .iter()
            .filter(|&&l| l as usize == s.inks.len())
            .count();
        assert_eq!(bare, paper_pixels, "{objective:?}");
    }
    // An ink the colour of the paper, forced into the set, still prints none of it: the
    // paper wins the tie.
    let opts = SeparateOptions {
        k: 5,
        substrate: Some([255, 255, 255]),
        use_inks: vec!["Opaque White".into()],
        ..Default::default()
    };
    let s = separate_image(&img, &library, &opts, lib_path, "logo").unwrap();
    let white = s
        .inks
        .iter()
        .position(|i| i.name == "Opaque White")
        .unwrap();
    assert_eq!(s.labels.iter().filter(|&&l| l as usize == white).count(), 0);
}

/// Pixels whose ink (or bare substrate) is more than ΔE2000 `REPORT_DELTA_E` from their
/// colour, both in CIELAB D50.
fn far_pixels(art: &Path, s: &Separation, substrate: Option<[u8; 3]>) -> usize {
    let rgba = image::open(art).unwrap().to_rgba8();
    let mut far = 0;
    for (p, &l) in rgba.pixels().zip(&s.labels) {
        if p[3] == 0 {
            continue;
        }
        let lab = adapt::srgb8_to_lab_d50([p[0], p[1], p[2]]);
        let ink = match s.inks.get(l as usize) {
            Some(ink) => ink.lab_d50,
            None => adapt::srgb8_to_lab_d50(substrate.unwrap_or([255, 255, 255])),
        };
        if delta_e2000(lab, ink) > REPORT_DELTA_E {
            far += 1;
        }
    }
    far
}

/// On the demo poster and the colour-family posters, the default choice never leaves more
/// pixels far from their colour than the lowest-total choice: a family's ink is not bought
/// with a gradient or a large area (the harbour's sky and sun once went to white for a sail
/// and a boat).
#[test]
fn keeping_a_family_never_gives_up_a_larger_area() {
    let cases: Vec<(&str, &str, Option<[u8; 3]>)> = vec![
        ("demo/harbour-poster.png", "demo/quayside-inks.csv", None),
        ("families/sky-shapes.png", "families/sky-inks.csv", None),
        (
            "families/orchard-label.png",
            "families/sky-inks.csv",
            Some([255; 3]),
        ),
        ("families/jazz-flyer.png", "families/sky-inks.csv", None),
        ("families/tide-chart.png", "demo/quayside-inks.csv", None),
    ];
    for (art, inks, substrate) in cases {
        let lib_path = fixture(inks);
        let library: Vec<Ink> = chromasift::inks::read_library(&lib_path).unwrap();
        let path = fixture(art);
        let bytes = std::fs::read(&path).unwrap();
        let img = decode_bytes(&bytes, Path::new(art), &Limits::default()).unwrap();
        for k in 3..=6 {
            let run = |objective| {
                let opts = SeparateOptions {
                    k,
                    substrate,
                    objective,
                    min_area: 1,
                    ..Default::default()
                };
                separate_image(&img, &library, &opts, &lib_path, "art").unwrap()
            };
            let (kept, plain) = (run(Objective::Families), run(Objective::Plain));
            let (a, b) = (
                far_pixels(&path, &kept, substrate),
                far_pixels(&path, &plain, substrate),
            );
            assert!(
                a <= b,
                "{art} k {k}: {a} pixels far with families ({:?}), {b} plain ({:?})",
                names(&kept),
                names(&plain)
            );
        }
    }
}

/// No screen for nothing: an ink the choice would take although no colour is nearer to it
/// is left out with a note; a plate emptied by the `min_area` clean-up is named in a note.
#[test]
fn no_blank_plate_goes_unsaid() {
    let lib_path = Path::new("shop-inks.csv");
    let library = parse_library(SHOP_INKS, lib_path).unwrap();
    // A photo of warm browns: of the shop's inks only four are ever nearest.
    let path = fixture("photos/coffee.png");
    let bytes = std::fs::read(&path).unwrap();
    let img = decode_bytes(&bytes, &path, &Limits::default()).unwrap();
    let opts = SeparateOptions {
        k: 5,
        substrate: Some([255, 255, 255]),
        min_area: 1,
        ..Default::default()
    };
    let s = separate_image(&img, &library, &opts, lib_path, "coffee").unwrap();
    assert_eq!(s.inks.len(), 4, "{:?}", names(&s));
    assert!(
        s.document.notes.iter().any(|n| n.contains("left out")),
        "{:?}",
        s.document.notes
    );
    for (p, ink) in s.inks.iter().enumerate() {
        assert!(
            s.labels.iter().any(|&l| l as usize == p),
            "{} prints nothing",
            ink.name
        );
    }
    // The black of the label's dotted type is chosen, then its dots are merged away.
    let path = fixture("families/orchard-label.png");
    let lib_path = fixture("families/sky-inks.csv");
    let library = chromasift::inks::read_library(&lib_path).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    let img = decode_bytes(&bytes, &path, &Limits::default()).unwrap();
    let opts = SeparateOptions {
        k: 4,
        substrate: Some([255, 255, 255]),
        ..Default::default()
    };
    let s = separate_image(&img, &library, &opts, &lib_path, "orchard").unwrap();
    assert!(s.document.inks.iter().any(|r| r.pixels == 0));
    for (ink, report) in s.inks.iter().zip(&s.document.inks) {
        if report.pixels == 0 {
            assert!(
                s.document
                    .notes
                    .iter()
                    .any(|n| n.starts_with("blank plate") && n.contains(&ink.name)),
                "{} is blank without a note: {:?}",
                ink.name,
                s.document.notes
            );
        }
    }
}
