//! A shop's ink library: named inks with measured CIELAB (D50, ISO 13655) or sRGB hex
//! values, read from CSV (`name,L,a,b` or `name,hex`) or JSON (an array of objects with
//! the same fields).

use crate::colour::{self, adapt};
use crate::error::{Error, Result};
use std::path::Path;

/// One ink.
#[derive(Debug, Clone, PartialEq)]
pub struct Ink {
    /// Name as written in the library (trimmed).
    pub name: String,
    /// CIELAB under D50 (ICC white), L* in 0..100.
    pub lab_d50: [f64; 3],
    /// sRGB colour for display (given, or converted from the Lab value with clipping).
    pub hex: String,
    /// Line of the CSV file (or 1-based entry number in JSON) it came from.
    pub line: usize,
}

impl Ink {
    /// An ink from measured CIELAB D50.
    pub fn from_lab(name: &str, lab_d50: [f64; 3]) -> Ink {
        Ink {
            name: name.trim().to_string(),
            lab_d50,
            hex: colour::hex(adapt::lab_d50_to_srgb8(lab_d50)),
            line: 0,
        }
    }
    /// An ink from an sRGB colour (D65), adapted to D50 with Bradford.
    pub fn from_srgb(name: &str, c: [u8; 3]) -> Ink {
        Ink {
            name: name.trim().to_string(),
            lab_d50: adapt::srgb8_to_lab_d50(c),
            hex: colour::hex(c),
            line: 0,
        }
    }
}

pub use super::table::MAX_NAME_CHARS;
use super::table::{parse_table, table_error, TableRules};

/// An ink library is a colour table whose rows all have names; the CIELAB columns are D50.
const INK_TABLE: TableRules = TableRules {
    name_required: true,
    hex_list: false,
    what: "ink library",
};

/// Parses a library from text; `path` is used in messages only.
pub fn parse_library(text: &str, path: &Path) -> Result<Vec<Ink>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim_start().starts_with('{') {
        return Err(table_error(
            path,
            None,
            "a JSON ink library is an array of inks, [{\"name\": …, \"L\": …, \"a\": …, \"b\": …}, …] \
             or with \"hex\", not an object",
        ));
    }
    // A row with both: the measured CIELAB is the ink; the hex is shown for it.
    let inks: Vec<Ink> = parse_table(text, path, INK_TABLE)?
        .into_iter()
        .map(|r| {
            let name = r.name.unwrap_or_default();
            let mut ink = match (r.lab, r.hex) {
                (Some(lab), _) => Ink::from_lab(&name, lab),
                (None, Some(hex)) => Ink::from_srgb(&name, hex),
                (None, None) => unreachable!("the table reader refuses rows without a colour"),
            };
            ink.line = r.line;
            ink
        })
        .collect();
    if inks.is_empty() {
        return Err(table_error(path, None, "the ink library has no inks"));
    }
    let mut seen: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    for ink in &inks {
        if let Some(first) = seen.insert(ink.name.to_lowercase(), ink.line) {
            return Err(table_error(
                path,
                Some(ink.line),
                format!("duplicate ink name '{}' (first at line {first})", ink.name),
            ));
        }
    }
    Ok(inks)
}

/// Reads a library file under the default limits.
pub fn read_library(path: &Path) -> Result<Vec<Ink>> {
    read_library_with(path, &crate::Limits::default())
}

/// Reads a library file of at most `limits.max_text_bytes` bytes and `limits.max_entries`
/// inks.
pub fn read_library_with(path: &Path, limits: &crate::Limits) -> Result<Vec<Ink>> {
    let text = limits.read_text(path, "ink library")?;
    let inks = parse_library(&text, path)?;
    if inks.len() > limits.max_entries {
        return Err(Error::LimitExceeded {
            path: path.into(),
            message: format!(
                "the ink library has {} inks; at most {} are accepted",
                inks.len(),
                limits.max_entries
            ),
        });
    }
    Ok(inks)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p() -> &'static Path {
        Path::new("inks.csv")
    }

    #[test]
    fn csv_with_lab_and_quotes() {
        let t = "name,L,a,b\n\"Black, Night\",12.5,0.5,-1\nHarbour Blue,40,-5,-45\n";
        let inks = parse_library(t, p()).unwrap();
        assert_eq!(inks.len(), 2);
        assert_eq!(inks[0].name, "Black, Night");
        assert_eq!(inks[0].lab_d50, [12.5, 0.5, -1.0]);
        assert_eq!(inks[1].line, 3);
    }

    #[test]
    fn csv_with_hex_and_json() {
        let inks = parse_library("name,hex\nPaper White,#ffffff\n", p()).unwrap();
        assert!((inks[0].lab_d50[0] - 100.0).abs() < 1e-9);
        let j =
            r##"[{"name": "Red", "L": 50, "a": 60, "b": 40}, {"name": "Sky", "hex": "#88ccff"}]"##;
        let inks = parse_library(j, Path::new("inks.json")).unwrap();
        assert_eq!(inks.len(), 2);
        assert_eq!(inks[1].hex, "#88ccff");
    }

    #[test]
    fn errors_name_line_and_field() {
        let e = parse_library("name,L,a,b\nA,50,0,0\nB,1O5,0,0\n", p())
            .unwrap_err()
            .to_string();
        assert_eq!(e, "inks.csv: line 3: field 'L': '1O5' is not a number");
        let e = parse_library("name,L,a,b\nA,150,0,0\n", p())
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 2") && e.contains("outside 0..100"), "{e}");
        let e = parse_library("name,L,a,b\nA,50,0,0\na,40,0,0\n", p())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 3") && e.contains("duplicate ink name"),
            "{e}"
        );
        let e = parse_library("name,L,a,b\n", p()).unwrap_err().to_string();
        assert!(e.contains("no inks"), "{e}");
        let e = parse_library("name,L,a,b\nA,50,0\n", p())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 2") && e.contains("expected 4 fields"),
            "{e}"
        );
        let e = parse_library("colour,L\n", p()).unwrap_err().to_string();
        assert!(e.contains("'name'"), "{e}");
        let e = parse_library("[{\"name\": \"A\"}]", p())
            .unwrap_err()
            .to_string();
        assert!(e.contains("entry 1"), "{e}");
        let e = parse_library("[{\"name\": \"A\", ", p())
            .unwrap_err()
            .to_string();
        assert!(e.contains("not valid JSON"), "{e}");
    }
}
