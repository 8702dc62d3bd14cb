//! The synthetic posters of `tests/common/artwork.rs`: the generator's own colour formulas
//! against outside references, and the committed set in `fixtures/families/` against a
//! fresh drawing (regenerate with `cargo run --example make_artwork`).

mod common;

#[path = "common/artwork.rs"]
mod artwork;

use common::{fixture, read_csv};
use serde_json::Value;

fn f(s: &str) -> f64 {
    s.trim().parse().unwrap()
}

/// The generator's CIEDE2000 (it checks that families are 15 apart) on all 34 pairs of
/// Sharma, Wu & Dalal (2005), Color Research & Application 30(1), Table 1, to 1e-4.
/// Fixture: fixtures/reference/sharma2005_ciede2000.csv.
#[test]
fn generator_ciede2000_matches_sharma_pairs() {
    let (header, rows) = read_csv("reference/sharma2005_ciede2000.csv");
    assert_eq!(header[7], "delta_e2000");
    assert_eq!(rows.len(), 34);
    for r in &rows {
        let a = [f(&r[1]), f(&r[2]), f(&r[3])];
        let b = [f(&r[4]), f(&r[5]), f(&r[6])];
        let want = f(&r[7]);
        for got in [artwork::ciede2000(a, b), artwork::ciede2000(b, a)] {
            assert!(
                (got - want).abs() <= 1e-4 + 1e-12,
                "pair {}: got {got:.6}, paper {want}",
                r[0]
            );
        }
    }
}

/// The generator's sRGB8 -> CIELAB (IEC 61966-2-1 matrix, D65 white of CIE 15:2004) on the
/// 209 colours of colour-science 0.4.7 with the same 4-decimal matrix (fixture:
/// fixtures/reference/srgb_to_lab.csv). colour-science takes the white from the D65
/// chromaticity (0.3127, 0.3290), the generator from the CIE 15 table, so the two may differ
/// by about 0.01 in a and b.
#[test]
fn generator_lab_matches_colour_science() {
    let (header, rows) = read_csv("reference/srgb_to_lab.csv");
    assert_eq!(&header[1..7], ["r", "g", "b", "L", "a", "b_"]);
    assert!(rows.len() >= 200);
    for r in &rows {
        let c = [f(&r[1]) as u8, f(&r[2]) as u8, f(&r[3]) as u8];
        let want = [f(&r[4]), f(&r[5]), f(&r[6])];
        let got = artwork::srgb8_to_lab(c);
        for i in 0..3 {
            assert!(
                (got[i] - want[i]).abs() < 0.03,
                "{} {c:?}: got {got:?}, colour-science {want:?}",
                r[0]
            );
        }
    }
}

/// The committed PNG and JPEG files and families.json are what the generator draws now,
/// byte for byte (PNG, JPEG) and to the written 4 decimals (lab). Self-consistency of the
/// committed set, not an outside reference.
#[test]
fn committed_families_match_a_fresh_drawing() {
    let doc: Value =
        serde_json::from_slice(&std::fs::read(fixture("families/families.json")).unwrap()).unwrap();
    let listed = doc["artworks"].as_array().unwrap();
    let set = artwork::artwork_set();
    assert_eq!(listed.len(), set.len());
    let again = artwork::artwork_set();
    for (a, b) in set.iter().zip(&again) {
        assert!(a.rgb == b.rgb, "{}: two drawings differ", a.name);
    }
    for (a, j) in set.iter().zip(listed) {
        let stale = "regenerate with `cargo run --example make_artwork`";
        assert_eq!(j["name"], a.name.as_str());
        assert_eq!(j["k"].as_u64().unwrap() as usize, a.k);
        assert_eq!(a.k, a.families.len());
        assert_eq!(j["width"].as_u64().unwrap() as u32, a.width);
        assert_eq!(j["height"].as_u64().unwrap() as u32, a.height);
        assert_eq!(a.rgb.len(), (a.width * a.height * 3) as usize);
        let png = std::fs::read(fixture(&format!("families/{}.png", a.name))).unwrap();
        assert!(
            png == artwork::encode_png(a),
            "{}.png is stale: {stale}",
            a.name
        );
        let jpg = std::fs::read(fixture(&format!("families/{}.jpg", a.name))).unwrap();
        assert!(
            jpg == artwork::encode_jpeg(a, 85),
            "{}.jpg is stale: {stale}",
            a.name
        );
        let fams = j["families"].as_array().unwrap();
        assert_eq!(fams.len(), a.families.len());
        let total: u64 = a.families.iter().map(|f| f.pixels).sum();
        assert_eq!(total, (a.width * a.height) as u64, "{}", a.name);
        for (fam, fj) in a.families.iter().zip(fams) {
            assert_eq!(fj["name"], fam.name.as_str());
            let hex = format!("#{:02x}{:02x}{:02x}", fam.srgb[0], fam.srgb[1], fam.srgb[2]);
            assert_eq!(fj["srgb"], hex.as_str(), "{} {}", a.name, fam.name);
            assert_eq!(fj["pixels"].as_u64().unwrap(), fam.pixels);
            assert_eq!(fj["small"].as_bool().unwrap(), fam.small);
            for i in 0..3 {
                let want = fj["lab"][i].as_f64().unwrap();
                assert!(
                    (fam.lab[i] - want).abs() <= 1e-4,
                    "{} {}: lab {:?}: {stale}",
                    a.name,
                    fam.name,
                    fam.lab
                );
            }
            if fam.small {
                let share = fam.pixels as f64 / total as f64;
                assert!((0.001..=0.01).contains(&share), "{} {}", a.name, fam.name);
            }
        }
        for (i, p) in a.families.iter().enumerate() {
            for q in &a.families[i + 1..] {
                let d = artwork::ciede2000(p.lab, q.lab);
                assert!(
                    d >= artwork::MIN_FAMILY_DE00,
                    "{} {} {}",
                    a.name,
                    p.name,
                    q.name
                );
            }
        }
    }
}

/// The sky-shapes ink library reads with the project's ink reader (the `separate` command's
/// library format) and holds an ink with the exact sRGB of every small shape.
#[test]
fn sky_inks_hold_every_shape_colour() {
    let path = fixture("families/sky-inks.csv");
    let inks = chromasift::inks::read_library(&path).unwrap();
    assert_eq!(inks.len(), 12);
    let set = artwork::artwork_set();
    let sky = set.iter().find(|a| a.name == "sky-shapes").unwrap();
    assert_eq!(sky.k, 8);
    for fam in sky.families.iter().filter(|f| f.small) {
        let hex = format!("#{:02x}{:02x}{:02x}", fam.srgb[0], fam.srgb[1], fam.srgb[2]);
        assert!(
            inks.iter().any(|i| i.hex.eq_ignore_ascii_case(&hex)),
            "no ink {hex} for {}",
            fam.name
        );
    }
}
