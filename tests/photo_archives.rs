//! Photo archives: palettes from any table, colour-managed input, metadata carried, the
//! loss map and the review page, checked against values computed outside the project.

#[allow(dead_code)]
#[path = "common/artwork.rs"]
mod artwork;
mod common;

use chromasift::learn::read_palette;
use common::{fixture, read_csv, run, stderr};

/// sRGB8 colours with their CIELAB (D65) from colour-science 0.4.7
/// (`fixtures/reference/srgb_to_lab_derived_matrix.csv`, made by
/// `tests/reference/make_fixtures.py`).
fn reference_colours() -> Vec<([u8; 3], [f64; 3])> {
    let (header, rows) = read_csv("reference/srgb_to_lab_derived_matrix.csv");
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    let (r, g, b, l, a, bb) = (at("r"), at("g"), at("b"), at("L"), at("a"), at("b_"));
    rows.iter()
        .map(|row| {
            let c = [r, g, b].map(|i| row[i].parse::<u8>().unwrap());
            let lab = [l, a, bb].map(|i| row[i].parse::<f64>().unwrap());
            (c, lab)
        })
        .collect()
}

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Distinct colours of the reference set (a palette holds each colour once).
fn distinct_reference() -> Vec<([u8; 3], [f64; 3])> {
    let mut seen = std::collections::HashSet::new();
    reference_colours()
        .into_iter()
        .filter(|(c, _)| seen.insert(*c))
        .collect()
}

#[test]
fn palettes_are_read_from_tables_lists_and_json_arrays() {
    let dir = tempfile::tempdir().unwrap();
    let refs = distinct_reference();
    let want: Vec<[u8; 3]> = refs.iter().map(|(c, _)| *c).collect();
    // A CSV with both columns, the CIELAB from colour-science: every row agrees.
    let mut both = String::from("name,hex,L,a,b\n");
    // Only CIELAB: each row is read as its nearest sRGB colour, which must be the colour
    // colour-science computed the value from.
    let mut lab_only = String::from("L,a,b\n");
    // A plain list with comments, and a JSON array.
    let mut list = String::from("# brand colours\n\n// from the reference set\n");
    let mut json = Vec::new();
    for (i, (c, lab)) in refs.iter().enumerate() {
        both.push_str(&format!(
            "colour {i},{},{},{},{}\n",
            hex(*c),
            lab[0],
            lab[1],
            lab[2]
        ));
        lab_only.push_str(&format!("{},{},{}\n", lab[0], lab[1], lab[2]));
        list.push_str(&format!("{} colour {i}\n", hex(*c)));
        json.push(serde_json::json!({"hex": hex(*c), "L": lab[0], "a": lab[1], "b": lab[2]}));
    }
    for (name, text) in [
        ("both.csv", both),
        ("lab.csv", lab_only),
        ("list.txt", list),
        ("array.json", serde_json::to_string(&json).unwrap()),
    ] {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        let pal = read_palette(&p).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(pal.colours, want, "{name}");
    }
}

#[test]
fn a_row_whose_hex_and_lab_disagree_is_refused_with_both_values() {
    let dir = tempfile::tempdir().unwrap();
    let refs = distinct_reference();
    let mut text = String::from("name,hex,L,a,b\n");
    for (i, (c, lab)) in refs.iter().take(5).enumerate() {
        // Row 4 (line 5) has its L raised by 3: ΔE2000 about 2 or more, over the 1.0 allowed.
        let l = if i == 3 { lab[0] + 3.0 } else { lab[0] };
        text.push_str(&format!("c{i},{},{l},{},{}\n", hex(*c), lab[1], lab[2]));
    }
    let p = dir.path().join("edited.csv");
    std::fs::write(&p, &text).unwrap();
    let e = read_palette(&p).unwrap_err().to_string();
    let (c, lab) = refs[3];
    assert!(e.contains("edited.csv") && e.contains("line 5"), "{e}");
    assert!(e.contains(&hex(c)), "{e}");
    assert!(e.contains(&format!("{:.2}", lab[0] + 3.0)), "{e}");

    // The same through the command line: one line, exit status 2, nothing written.
    let out = dir.path().join("out");
    let img = fixture("demo/harbour-poster.png");
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            p.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert_eq!(stderr(&o).trim().lines().count(), 1, "{}", stderr(&o));
    assert!(stderr(&o).contains("edited.csv"));
    assert!(!out.join("harbour-poster.reduced.png").exists());
}

#[test]
fn apply_batch_and_pins_take_a_list_of_hex_colours() {
    let dir = tempfile::tempdir().unwrap();
    let list = dir.path().join("brand.txt");
    // Five sRGB colours; which ones does not matter to the checks below.
    std::fs::write(&list, "#1d3557\n#e63946\n#f1faee\n#a8dadc\n#457b9d\n").unwrap();
    let img = fixture("demo/harbour-poster.png");
    let out = dir.path().join("a");
    let o = run(
        &[
            "apply",
            img.to_str().unwrap(),
            "--palette",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.palette.json")).unwrap())
            .unwrap();
    let listed = std::fs::read_to_string(&list).unwrap();
    for c in doc["colors"].as_array().unwrap() {
        assert!(listed.contains(c["hex"].as_str().unwrap()), "{c}");
    }
    // Pinned from the same list: every listed colour is in the fitted palette exactly.
    let out = dir.path().join("p");
    let o = run(
        &[
            "reduce",
            img.to_str().unwrap(),
            "-k",
            "8",
            "--pin-file",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.palette.json")).unwrap())
            .unwrap();
    let pinned: Vec<&str> = doc["settings"]["pinned"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(pinned.len(), 5);
    for line in listed.lines() {
        assert!(pinned.contains(&line), "{line} not pinned: {pinned:?}");
    }
    // A bad list is one clear error naming the file and the line.
    std::fs::write(&list, "#1d3557\nnavy\n").unwrap();
    let o = run(
        &[
            "reduce",
            img.to_str().unwrap(),
            "--pin-file",
            list.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    let e = stderr(&o);
    assert!(e.contains("brand.txt") && e.contains("line 2"), "{e}");
}

/// Reference CIELAB of the profile fixtures' patches, by colour-science 0.4.7
/// (`fixtures/profiles/lab_reference.csv`, made by
/// `tests/reference/make_profile_fixtures.py`): (space, RGB numbers, CIELAB D65).
fn profile_reference() -> Vec<(String, [u8; 3], [f64; 3])> {
    let (header, rows) = read_csv("profiles/lab_reference.csv");
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    rows.iter()
        .map(|r| {
            (
                r[at("space")].clone(),
                [at("r"), at("g"), at("b")].map(|i| r[i].parse().unwrap()),
                [at("L"), at("a"), at("b_")].map(|i| r[i].parse().unwrap()),
            )
        })
        .collect()
}

/// CIELAB of each distinct colour of a decoded image, read through its embedded profile.
fn labs_through_profile(file: &str) -> (String, Vec<([u16; 3], [f64; 3])>) {
    use chromasift::colour::profile::{read_profile, ProfileUse};
    let img = chromasift::raster::decode(&fixture(file), &chromasift::Limits::default()).unwrap();
    let icc = img
        .icc_profile
        .as_deref()
        .unwrap_or_else(|| panic!("{file}: no profile read"));
    let ProfileUse::Convert(p) = read_profile(icc) else {
        panic!("{file}: the profile is not applied");
    };
    let chromasift::raster::Pixels::Rgba8(px) = &img.pixels else {
        panic!("8-bit fixture");
    };
    let h = chromasift::histogram::from_rgba8(px).histogram;
    let (_, labs) = chromasift::features::rows::entry_features_in(
        &h,
        chromasift::colour::Space::Cielab,
        Some(&p),
    );
    (
        p.description.clone(),
        h.colours.iter().copied().zip(labs).collect(),
    )
}

#[test]
fn tagged_images_are_read_through_their_profiles_as_colour_science_computes() {
    let refs = profile_reference();
    // Lossless files hold the patch numbers exactly: CIELAB within 0.05 ΔE2000 (the
    // profile stores its colorants in s15Fixed16 and the curves are evaluated in single
    // precision). The JPEG (quality 95) decodes within a step or two of them: 1.0.
    for (file, space, tolerance) in [
        ("profiles/p3.png", "display-p3", 0.05),
        ("profiles/p3.tif", "display-p3", 0.05),
        ("profiles/p3.webp", "display-p3", 0.05),
        ("profiles/wide.png", "wide-gamut", 0.05),
        ("profiles/p3.jpg", "display-p3", 1.0),
    ] {
        let (description, labs) = labs_through_profile(file);
        assert!(description.starts_with("chromasift test"), "{description}");
        for (_, rgb, want) in refs.iter().filter(|r| r.0 == space) {
            // The decoded colour nearest to the patch's numbers (exact for lossless files).
            let (_, got) = labs
                .iter()
                .min_by_key(|(c, _)| {
                    (0..3)
                        .map(|k| (c[k] as i32 - rgb[k] as i32).pow(2))
                        .sum::<i32>()
                })
                .unwrap();
            let de = artwork::ciede2000(*got, *want);
            assert!(
                de <= tolerance,
                "{file} {rgb:?}: ours {got:?}, colour-science {want:?}, ΔE2000 {de:.3}"
            );
        }
    }
}
