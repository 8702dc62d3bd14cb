//! Tables of named colours, read one way for a shop's ink library and for a palette given
//! in advance: CSV with a header (`name`, and `hex` and/or `L`,`a`,`b`; other columns are
//! ignored), a JSON array of objects with the same fields, or (palettes only) a plain list
//! of hex colours, one per line. What the CIELAB columns mean (D50 for inks, D65 for
//! palettes) and what to do when a row gives both is the caller's.

use crate::colour;
use crate::error::{Error, Result};
use std::path::Path;

/// One row of a colour table, as given.
#[derive(Debug, Clone, PartialEq)]
pub struct ColourRow {
    /// The `name` field (trimmed), when the table has one.
    pub name: Option<String>,
    /// The `hex` field, when given.
    pub hex: Option<[u8; 3]>,
    /// The `L`, `a`, `b` fields, when given (checked: L in 0..100, a and b in -200..200).
    pub lab: Option<[f64; 3]>,
    /// Line of the text file (or 1-based entry number in a JSON array) it came from.
    pub line: usize,
}

/// What a table must hold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TableRules {
    /// Every row needs a non-empty `name` (ink libraries: names go into file names).
    pub name_required: bool,
    /// A plain list of hex colours is accepted.
    pub hex_list: bool,
    /// What the file is, for messages ("ink library", "palette").
    pub what: &'static str,
}

/// Longest name accepted, in characters (ink names go into plate file names).
pub const MAX_NAME_CHARS: usize = 100;

pub(crate) fn table_error(path: &Path, line: Option<usize>, message: impl Into<String>) -> Error {
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

fn lab_range(lab: [f64; 3]) -> std::result::Result<[f64; 3], String> {
    if !(0.0..=100.0).contains(&lab[0]) {
        return Err(format!("field 'L': {} is outside 0..100", lab[0]));
    }
    for (v, f) in [(lab[1], "a"), (lab[2], "b")] {
        if v.abs() > 200.0 {
            return Err(format!("field '{f}': {v} is outside -200..200"));
        }
    }
    Ok(lab)
}

fn name_rule(name: &str, what: &str) -> std::result::Result<(), String> {
    let chars = name.chars().count();
    if chars > MAX_NAME_CHARS {
        return Err(format!(
            "the {what} name starting '{}…' is {chars} characters long; at most \
             {MAX_NAME_CHARS} are accepted",
            name.chars().take(24).collect::<String>()
        ));
    }
    Ok(())
}

/// Parses a colour table from text; `path` is used in messages only. A JSON object is not
/// a table (a palette document is read by its own reader): the caller checks for it first.
pub fn parse_table(text: &str, path: &Path, rules: TableRules) -> Result<Vec<ColourRow>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim_start().starts_with('[') {
        return parse_json(text, path, rules);
    }
    let first = text
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !is_list_comment(l));
    match first {
        // A table saved with another separator (spreadsheets set to a comma decimal mark
        // write `;`): say what is expected instead of failing on the first colour.
        Some(l)
            if !l.contains(',')
                && l.split(char::is_whitespace)
                    .next()
                    .is_some_and(|t| t.contains(';')) =>
        {
            let line = text.lines().position(|x| x.trim() == l).map(|i| i + 1);
            Err(table_error(
                path,
                line,
                "columns must be separated by commas, but this line uses semicolons (save the \
                 table as comma-separated CSV)",
            ))
        }
        Some(l) if rules.hex_list && !l.contains(',') => parse_hex_list(text, path),
        _ => parse_csv(text, path, rules),
    }
}

/// A comment line of a hex list: `//`, or `#` followed by a space or nothing (a colour's
/// `#` is followed by its digits).
fn is_list_comment(l: &str) -> bool {
    l.starts_with("//") || l == "#" || l.starts_with("# ") || l.starts_with("#\t")
}

/// A plain list: one colour per line, `#rrggbb` or `rrggbb`, optionally followed by white
/// space and a name.
fn parse_hex_list(text: &str, path: &Path) -> Result<Vec<ColourRow>> {
    let mut rows = Vec::new();
    for (i, raw) in text.lines().enumerate() {
        let l = raw.trim();
        if l.is_empty() || is_list_comment(l) {
            continue;
        }
        let (code, name) = match l.split_once(char::is_whitespace) {
            Some((c, n)) => (c, Some(n.trim().to_string())),
            None => (l, None),
        };
        let hex = colour::parse_hex(code).map_err(|m| {
            table_error(
                path,
                Some(i + 1),
                format!("{m} (a list holds one colour per line; comments start with '# ' or '//')"),
            )
        })?;
        if let Some(n) = &name {
            name_rule(n, "colour").map_err(|m| table_error(path, Some(i + 1), m))?;
        }
        rows.push(ColourRow {
            name,
            hex: Some(hex),
            lab: None,
            line: i + 1,
        });
    }
    Ok(rows)
}

fn parse_csv(text: &str, path: &Path, rules: TableRules) -> Result<Vec<ColourRow>> {
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
    let semicolons = if header.contains(';') && !header.contains(',') {
        "; fields must be separated by commas, and this header uses semicolons"
    } else {
        ""
    };
    let name_c = col("name");
    if rules.name_required && name_c.is_none() {
        return Err(table_error(
            path,
            Some(hline + 1),
            format!("the header has no 'name' column{semicolons}"),
        ));
    }
    let lab_c = match (col("l"), col("a"), col("b")) {
        (Some(l), Some(a), Some(b)) => Some([l, a, b]),
        _ => None,
    };
    let hex_c = col("hex");
    if lab_c.is_none() && hex_c.is_none() {
        return Err(table_error(
            path,
            Some(hline + 1),
            format!("the header needs either L,a,b or hex columns{semicolons}"),
        ));
    }
    let mut rows = Vec::new();
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
        let name = name_c.map(|c| f[c].clone());
        if let Some(name) = &name {
            if name.is_empty() && rules.name_required {
                return Err(table_error(path, Some(n), "field 'name' is empty"));
            }
            name_rule(name, rules.what.split(' ').next().unwrap_or("colour"))
                .map_err(|m| table_error(path, Some(n), m))?;
        }
        let lab = match lab_c {
            Some([l, a, b]) if !(f[l].is_empty() && f[a].is_empty() && f[b].is_empty()) => {
                let lab = [
                    number(path, n, "L", &f[l])?,
                    number(path, n, "a", &f[a])?,
                    number(path, n, "b", &f[b])?,
                ];
                Some(lab_range(lab).map_err(|m| table_error(path, Some(n), m))?)
            }
            _ => None,
        };
        let hex = match hex_c {
            Some(h) if !f[h].is_empty() => Some(
                colour::parse_hex(&f[h])
                    .map_err(|m| table_error(path, Some(n), format!("field 'hex': {m}")))?,
            ),
            _ => None,
        };
        if hex.is_none() && lab.is_none() {
            return Err(table_error(path, Some(n), "needs L, a, b or hex"));
        }
        rows.push(ColourRow {
            name: name.filter(|n| !n.is_empty()),
            hex,
            lab,
            line: n,
        });
    }
    Ok(rows)
}

fn parse_json(text: &str, path: &Path, rules: TableRules) -> Result<Vec<ColourRow>> {
    let v: serde_json::Value = serde_json::from_str(text)
        .map_err(|e| table_error(path, Some(e.line()), format!("not valid JSON: {e}")))?;
    let arr = v.as_array().ok_or_else(|| {
        table_error(
            path,
            None,
            format!("expected a JSON array of {} entries", rules.what),
        )
    })?;
    let mut rows = Vec::new();
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
        let name = match get("name") {
            Some(v) => Some(
                v.as_str()
                    .ok_or_else(|| entry("field 'name' is not text".into()))?
                    .trim()
                    .to_string(),
            ),
            None if rules.name_required => {
                return Err(entry("field 'name' is missing or not text".into()))
            }
            None => None,
        };
        if let Some(name) = &name {
            if name.is_empty() && rules.name_required {
                return Err(entry("field 'name' is empty".into()));
            }
            name_rule(name, rules.what.split(' ').next().unwrap_or("colour")).map_err(entry)?;
        }
        let lab = match (get("l"), get("a"), get("b")) {
            (Some(l), Some(a), Some(b)) => {
                let num = |v: &serde_json::Value, f: &str| {
                    v.as_f64()
                        .filter(|x| x.is_finite())
                        .ok_or_else(|| entry(format!("field '{f}' is not a number")))
                };
                let lab = [num(l, "L")?, num(a, "a")?, num(b, "b")?];
                Some(lab_range(lab).map_err(entry)?)
            }
            _ => None,
        };
        let hex = match get("hex") {
            Some(h) => {
                let s = h
                    .as_str()
                    .ok_or_else(|| entry("field 'hex' is not text".into()))?;
                Some(colour::parse_hex(s).map_err(|m| entry(format!("field 'hex': {m}")))?)
            }
            None => None,
        };
        if hex.is_none() && lab.is_none() {
            return Err(entry("needs L, a, b or hex".into()));
        }
        rows.push(ColourRow {
            name: name.filter(|n| !n.is_empty()),
            hex,
            lab,
            line: n,
        });
    }
    Ok(rows)
}
