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

fn table_error(path: &Path, line: Option<usize>, message: impl Into<String>) -> Error {
    Error::Table {
        path: path.into(),
        line,
        message: message.into(),
    }
}

/// Splits one CSV line, honouring double quotes (`""` inside quotes is a quote).
fn split_csv(line: &str) -> std::result::Result<Vec<String>, String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            ('"', true) => quoted = false,
            ('"', false) if cur.trim().is_empty() => {
                cur.clear();
                quoted = true;
            }
            (',', false) => out.push(std::mem::take(&mut cur)),
            (c, _) => cur.push(c),
        }
    }
    if quoted {
        return Err("a quoted field is not closed".into());
    }
    out.push(cur);
    Ok(out.into_iter().map(|s| s.trim().to_string()).collect())
}

fn number(path: &Path, line: usize, field: &str, text: &str) -> Result<f64> {
    let v: f64 = text.parse().map_err(|_| {
        table_error(
            path,
            Some(line),
            format!("field '{field}': '{text}' is not a number"),
        )
    })?;
    if !v.is_finite() {
        return Err(table_error(
            path,
            Some(line),
            format!("field '{field}': '{text}' is not a finite number"),
        ));
    }
    Ok(v)
}

fn checked_lab(path: &Path, line: usize, lab: [f64; 3]) -> Result<[f64; 3]> {
    if !(0.0..=100.0).contains(&lab[0]) {
        return Err(table_error(
            path,
            Some(line),
            format!("field 'L': {} is outside 0..100", lab[0]),
        ));
    }
    for (v, f) in [(lab[1], "a"), (lab[2], "b")] {
        if v.abs() > 200.0 {
            return Err(table_error(
                path,
                Some(line),
                format!("field '{f}': {v} is outside -200..200"),
            ));
        }
    }
    Ok(lab)
}

/// Longest ink name accepted, in characters (names go into plate file names).
pub const MAX_NAME_CHARS: usize = 100;

fn check_name(path: &Path, line: usize, name: &str) -> Result<()> {
    if name.is_empty() {
        return Err(table_error(path, Some(line), "field 'name' is empty"));
    }
    let chars = name.chars().count();
    if chars > MAX_NAME_CHARS {
        return Err(table_error(
            path,
            Some(line),
            format!(
                "the ink name starting '{}…' is {chars} characters long; at most \
                 {MAX_NAME_CHARS} are accepted",
                name.chars().take(24).collect::<String>()
            ),
        ));
    }
    Ok(())
}

/// Parses a library from text; `path` is used in messages only.
pub fn parse_library(text: &str, path: &Path) -> Result<Vec<Ink>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let inks = if text.trim_start().starts_with('[') {
        parse_json(text, path)?
    } else if text.trim_start().starts_with('{') {
        return Err(table_error(
            path,
            None,
            "a JSON ink library is an array of inks, [{\"name\": …, \"L\": …, \"a\": …, \"b\": …}, …] \
             or with \"hex\", not an object",
        ));
    } else {
        parse_csv(text, path)?
    };
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

fn parse_csv(text: &str, path: &Path) -> Result<Vec<Ink>> {
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'));
    let Some((hline, header)) = lines.next() else {
        return Ok(Vec::new());
    };
    let cols: Vec<String> = split_csv(header)
        .map_err(|m| table_error(path, Some(hline + 1), m))?
        .iter()
        .map(|c| c.to_lowercase())
        .collect();
    let col = |n: &str| cols.iter().position(|c| c == n);
    let name_c = col("name").ok_or_else(|| {
        let hint = if header.contains(';') && !header.contains(',') {
            "; fields must be separated by commas, and this header uses semicolons"
        } else {
            ""
        };
        table_error(
            path,
            Some(hline + 1),
            format!("the header has no 'name' column{hint}"),
        )
    })?;
    let lab_c = match (col("l"), col("a"), col("b")) {
        (Some(l), Some(a), Some(b)) => Some([l, a, b]),
        _ => None,
    };
    let hex_c = col("hex");
    if lab_c.is_none() && hex_c.is_none() {
        return Err(table_error(
            path,
            Some(hline + 1),
            "the header needs either L,a,b or hex columns",
        ));
    }
    let mut inks = Vec::new();
    for (i, line) in lines {
        let n = i + 1;
        let f = split_csv(line).map_err(|m| table_error(path, Some(n), m))?;
        if f.len() != cols.len() {
            return Err(table_error(
                path,
                Some(n),
                format!("expected {} fields, found {}", cols.len(), f.len()),
            ));
        }
        let name = f[name_c].clone();
        check_name(path, n, &name)?;
        let mut ink = if let Some([l, a, b]) = lab_c {
            let lab = [
                number(path, n, "L", &f[l])?,
                number(path, n, "a", &f[a])?,
                number(path, n, "b", &f[b])?,
            ];
            Ink::from_lab(&name, checked_lab(path, n, lab)?)
        } else {
            let h = hex_c.unwrap();
            let c = colour::parse_hex(&f[h])
                .map_err(|m| table_error(path, Some(n), format!("field 'hex': {m}")))?;
            Ink::from_srgb(&name, c)
        };
        ink.line = n;
        inks.push(ink);
    }
    Ok(inks)
}

fn parse_json(text: &str, path: &Path) -> Result<Vec<Ink>> {
    let v: serde_json::Value = serde_json::from_str(text)
        .map_err(|e| table_error(path, Some(e.line()), format!("not valid JSON: {e}")))?;
    let arr = v
        .as_array()
        .ok_or_else(|| table_error(path, None, "expected a JSON array of inks"))?;
    let mut inks = Vec::new();
    for (i, item) in arr.iter().enumerate() {
        let n = i + 1;
        let entry = |m: String| table_error(path, None, format!("entry {n}: {m}"));
        let obj = item
            .as_object()
            .ok_or_else(|| entry("is not an object".into()))?;
        let get = |k: &str| {
            obj.iter()
                .find(|(key, _)| key.eq_ignore_ascii_case(k))
                .map(|(_, v)| v)
        };
        let name = get("name")
            .and_then(|v| v.as_str())
            .ok_or_else(|| entry("field 'name' is missing or not text".into()))?;
        if name.trim().is_empty() {
            return Err(entry("field 'name' is empty".into()));
        }
        let chars = name.trim().chars().count();
        if chars > MAX_NAME_CHARS {
            return Err(entry(format!(
                "the ink name starting '{}…' is {chars} characters long; at most \
                 {MAX_NAME_CHARS} are accepted",
                name.trim().chars().take(24).collect::<String>()
            )));
        }
        let mut ink = match (get("l"), get("a"), get("b"), get("hex")) {
            (Some(l), Some(a), Some(b), _) => {
                let num = |v: &serde_json::Value, f: &str| {
                    v.as_f64()
                        .filter(|x| x.is_finite())
                        .ok_or_else(|| entry(format!("field '{f}' is not a number")))
                };
                let lab = [num(l, "L")?, num(a, "a")?, num(b, "b")?];
                checked_lab(path, n, lab).map_err(|e| match e {
                    Error::Table { message, .. } => entry(message),
                    other => other,
                })?;
                Ink::from_lab(name, lab)
            }
            (_, _, _, Some(h)) => {
                let s = h
                    .as_str()
                    .ok_or_else(|| entry("field 'hex' is not text".into()))?;
                Ink::from_srgb(
                    name,
                    colour::parse_hex(s).map_err(|m| entry(format!("field 'hex': {m}")))?,
                )
            }
            _ => return Err(entry("needs L, a, b or hex".into())),
        };
        ink.line = n;
        inks.push(ink);
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
