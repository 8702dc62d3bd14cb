//! Writes the synthetic poster set of `tests/common/artwork.rs` to `fixtures/families/`:
//! for every poster NAME.png and NAME.jpg (baseline JPEG, quality 85), `families.json`
//! (the colour families of every poster) and `sky-inks.csv` (an ink library for the
//! `sky-shapes` poster, in the `name,hex` form that `separate --inks` reads).
//!
//!     cargo run --example make_artwork
//!
//! The output is the same bytes on every run.

#[path = "../tests/common/artwork.rs"]
mod artwork;

use serde_json::{json, Value};
use std::path::Path;

/// JPEG quality of the committed `.jpg` files.
const JPEG_QUALITY: u8 = 85;

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

fn round4(v: f64) -> f64 {
    (v * 1e4).round() / 1e4
}

/// A JSON object on one line, keys in the order given.
fn object(fields: &[(&str, Value)]) -> String {
    let body: Vec<String> = fields
        .iter()
        .map(|(k, v)| format!("{}: {v}", json!(k)))
        .collect();
    format!("{{{}}}", body.join(", "))
}

fn main() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/families");
    std::fs::create_dir_all(&dir).expect("create fixtures/families");
    let set = artwork::artwork_set();

    // families.json, written by hand so that each family is one line (a table to read,
    // small diffs) and keys keep a reading order.
    let definitions = [
        ("srgb", "nominal colour of the family (for the gradient area, the colour at the middle of the gradient)"),
        ("lab", "CIELAB D65 (2 degree) mean of the family's pixels in the PNG (before JPEG); sRGB per IEC 61966-2-1, CIELAB per CIE 15:2004"),
        ("pixels", "pixels whose largest coverage (4x4 sub-samples) is the family; a tie goes to the layer underneath"),
        ("small", "true for the small shapes, each 0.1-1 % of the picture"),
        ("distance", "every two families are at least 15 CIEDE2000 apart (Sharma, Wu & Dalal 2005), gradient ends included"),
    ];
    let mut text = String::from("{\n");
    text.push_str("  \"source\": \"invented posters drawn by tests/common/artwork.rs (scenes of our own, not measured data)\",\n");
    text.push_str("  \"regenerate\": \"cargo run --example make_artwork\",\n");
    text.push_str(&format!("  \"jpeg_quality\": {JPEG_QUALITY},\n"));
    text.push_str("  \"definitions\": {\n");
    let defs: Vec<String> = definitions
        .iter()
        .map(|(k, v)| format!("    {}: {}", json!(k), json!(v)))
        .collect();
    text.push_str(&defs.join(",\n"));
    text.push_str("\n  },\n  \"artworks\": [\n");
    for (i, a) in set.iter().enumerate() {
        let png = format!("{}.png", a.name);
        let jpg = format!("{}.jpg", a.name);
        std::fs::write(dir.join(&png), artwork::encode_png(a)).expect("write PNG");
        std::fs::write(dir.join(&jpg), artwork::encode_jpeg(a, JPEG_QUALITY)).expect("write JPEG");
        let head = object(&[
            ("name", json!(a.name)),
            ("k", json!(a.k)),
            ("width", json!(a.width)),
            ("height", json!(a.height)),
            ("png", json!(png)),
            ("jpg", json!(jpg)),
        ]);
        text.push_str(&format!(
            "    {}, \"families\": [\n",
            &head[..head.len() - 1]
        ));
        let rows: Vec<String> = a
            .families
            .iter()
            .map(|f| {
                let row = object(&[
                    ("name", json!(f.name)),
                    ("srgb", json!(hex(f.srgb))),
                    ("lab", json!(f.lab.map(round4))),
                    ("pixels", json!(f.pixels)),
                    ("small", json!(f.small)),
                ]);
                format!("      {row}")
            })
            .collect();
        text.push_str(&rows.join(",\n"));
        let sep = if i + 1 < set.len() { "," } else { "" };
        text.push_str(&format!("\n    ]}}{sep}\n"));

        let total = (a.width * a.height) as f64;
        let smallest = a
            .families
            .iter()
            .filter(|f| f.small)
            .map(|f| 100.0 * f.pixels as f64 / total)
            .fold(f64::INFINITY, f64::min);
        println!(
            "{:<16} {}x{} k={} smallest shape {:.2} %",
            a.name, a.width, a.height, a.k, smallest
        );
    }
    text.push_str("  ]\n}\n");
    let _: Value = serde_json::from_str(&text).expect("families.json is valid JSON");
    std::fs::write(dir.join("families.json"), text).expect("write families.json");

    // The ink library for sky-shapes: an exact ink for every shape, four sky blues along
    // the gradient, and one ink that matches nothing in the picture.
    let sky = set
        .iter()
        .find(|a| a.name == "sky-shapes")
        .expect("sky-shapes is in the set");
    let shape_ink = |family: &str| {
        sky.families
            .iter()
            .find(|f| f.name == family)
            .unwrap_or_else(|| panic!("sky-shapes has no family {family}"))
            .srgb
    };
    let inks: Vec<(&str, [u8; 3])> = vec![
        ("Signal Red", shape_ink("red-disc")),
        ("Sun Yellow", shape_ink("yellow-star")),
        ("Card White", shape_ink("white-card")),
        ("Rule Black", shape_ink("black-rule")),
        ("Blossom Pink", shape_ink("pink-text")),
        ("Leaf Green", shape_ink("green-disc")),
        ("Tangerine", shape_ink("orange-star")),
        ("Pale Sky", [162, 201, 238]),
        ("Haze Sky", [146, 188, 233]),
        ("Noon Sky", [130, 175, 228]),
        ("Deep Sky", [98, 149, 218]),
        ("Violet", [120, 60, 170]),
    ];
    let mut csv = String::from(
        "# Invented ink library for fixtures/families/sky-shapes.png (written by\n\
         # examples/make_artwork.rs): an ink with the exact sRGB of each of the seven shapes,\n\
         # four blues along the sky gradient (top, upper middle, middle, bottom) and one ink\n\
         # that is in no part of the picture.\n\
         name,hex\n",
    );
    for (name, c) in inks {
        csv.push_str(&format!("{name},{}\n", hex(c)));
    }
    std::fs::write(dir.join("sky-inks.csv"), csv).expect("write sky-inks.csv");
    println!("wrote {} posters to {}", set.len(), dir.display());
}
