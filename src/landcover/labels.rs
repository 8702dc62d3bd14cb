//! Label files: class number → label name, several classes may share one label (they
//! merge), and an optional display colour per label. Plain CSV with a header:
//!
//! ```text
//! class,label,colour
//! 1,water,#2a6fb0
//! 2,woodland,#2e7d32
//! 5,woodland,
//! 3,crops
//! ```
//!
//! Labels are numbered 1, 2, … in the order their names first appear in the file.

use crate::error::{Error, Result};
use crate::limits::Limits;
use font8x8::{UnicodeFonts, BASIC_FONTS, LATIN_FONTS};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// One label of a label file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Label {
    /// Label number in the labelled raster (1, 2, …).
    pub number: u8,
    pub name: String,
    /// Display colour (`#rrggbb`).
    pub colour: String,
    /// The class numbers merged into this label.
    pub classes: Vec<u8>,
}

/// A label file, read.
#[derive(Debug, Clone, PartialEq)]
pub struct LabelSet {
    pub labels: Vec<Label>,
    /// Label number of each class number (0: not listed).
    pub of_class: Vec<u8>,
}

impl LabelSet {
    /// One label per class, named by its number, coloured as `landcover` colours classes.
    pub fn identity(k: usize) -> LabelSet {
        let colours = super::class_colours(k);
        let labels = (1..=k)
            .map(|c| Label {
                number: c as u8,
                name: c.to_string(),
                colour: crate::colour::hex(colours[c - 1]),
                classes: vec![c as u8],
            })
            .collect();
        let mut of_class = vec![0u8; 256];
        (1..=k).for_each(|c| of_class[c] = c as u8);
        LabelSet { labels, of_class }
    }

    /// Display colours, label by label.
    pub fn colours(&self) -> Vec<[u8; 3]> {
        self.labels
            .iter()
            .map(|l| crate::colour::parse_hex(&l.colour).expect("checked colour"))
            .collect()
    }
}

/// A small comma-separated table: its lower-cased header and its other non-blank lines
/// (1-based line number, trimmed fields); with `comments`, lines starting with `#` are
/// left out. Label files and reference point tables are read this way.
pub(super) struct SmallTable<'t> {
    pub cols: Vec<String>,
    pub rows: Vec<(usize, Vec<&'t str>)>,
}

impl<'t> SmallTable<'t> {
    /// `None` when the text has no header line.
    pub(super) fn parse(text: &'t str, comments: bool) -> Option<SmallTable<'t>> {
        let mut lines = text.lines().enumerate().filter(|(_, l)| {
            let blank = l.trim().is_empty();
            let comment = comments && l.trim_start().starts_with('#');
            !(blank || comment)
        });
        let (_, head) = lines.next()?;
        Some(SmallTable {
            cols: head
                .split(',')
                .map(|c| c.trim().to_ascii_lowercase())
                .collect(),
            rows: lines
                .map(|(i, l)| (i + 1, l.split(',').map(str::trim).collect()))
                .collect(),
        })
    }

    /// Position of the column named `n` (lower case).
    pub(super) fn col(&self, n: &str) -> Option<usize> {
        self.cols.iter().position(|c| c == n)
    }
}

/// Reads a label file (see the module documentation).
pub fn read_labels(path: &Path, limits: &Limits) -> Result<LabelSet> {
    let text = limits.read_text(path, "label file")?;
    let err = |line: usize, message: String| Error::Table {
        path: path.into(),
        line: Some(line),
        message,
    };
    let table = SmallTable::parse(&text, true).ok_or_else(|| err(1, "the file is empty".into()))?;
    let col = |n: &str| table.col(n);
    let (ic, il) = match (col("class"), col("label")) {
        (Some(c), Some(l)) => (c, l),
        _ => {
            return Err(err(
                1,
                "the header needs \"class\" and \"label\" columns".into(),
            ))
        }
    };
    let icol = col("colour").or_else(|| col("color"));
    let mut labels: Vec<Label> = Vec::new();
    let mut given: Vec<Option<[u8; 3]>> = Vec::new();
    let mut of_class = vec![0u8; 256];
    for (n, f) in &table.rows {
        let n = *n;
        let get = |k: usize| f.get(k).copied().unwrap_or("");
        let class: u8 = get(ic)
            .parse()
            .ok()
            .filter(|&c| c >= 1)
            .ok_or_else(|| err(n, format!("'{}' is not a class number 1 to 255", get(ic))))?;
        let name = get(il);
        if name.is_empty() {
            return Err(err(n, format!("class {class} has an empty label")));
        }
        if name.chars().count() > 100 {
            return Err(err(n, "a label is longer than 100 characters".into()));
        }
        if of_class[class as usize] != 0 {
            return Err(err(n, format!("class {class} is listed twice")));
        }
        let colour = match icol.map(get).filter(|c| !c.is_empty()) {
            Some(c) => Some(crate::colour::parse_hex(c).map_err(|m| err(n, m))?),
            None => None,
        };
        let j = match labels.iter().position(|l| l.name == name) {
            Some(j) => j,
            None => {
                if labels.len() == 255 {
                    return Err(err(n, "more than 255 labels".into()));
                }
                labels.push(Label {
                    number: labels.len() as u8 + 1,
                    name: name.to_string(),
                    colour: String::new(),
                    classes: Vec::new(),
                });
                given.push(None);
                labels.len() - 1
            }
        };
        if let Some(c) = colour {
            if given[j].is_some_and(|g| g != c) {
                return Err(err(n, format!("label '{name}' is given two colours")));
            }
            given[j] = Some(c);
        }
        labels[j].classes.push(class);
        of_class[class as usize] = labels[j].number;
    }
    if labels.is_empty() {
        return Err(err(1, "the file lists no class".into()));
    }
    let fallback = super::class_colours(labels.len());
    for (j, l) in labels.iter_mut().enumerate() {
        l.colour = crate::colour::hex(given[j].unwrap_or(fallback[j]));
    }
    Ok(LabelSet { labels, of_class })
}

/// Glyph rows of `c` (font8x8; '?' for characters it lacks), bit 0 leftmost.
fn glyph(c: char) -> [u8; 8] {
    BASIC_FONTS
        .get(c)
        .or_else(|| LATIN_FONTS.get(c))
        .or_else(|| BASIC_FONTS.get('?'))
        .unwrap_or([0; 8])
}

/// Height of one legend line, in pixels.
const LINE: usize = 16;

/// A preview (`labels` per pixel, 0 black) of `w × h` with a legend below: one line per
/// label, a swatch and the label's number and name. RGB, at least 240 pixels wide.
pub fn labelled_preview(
    labels: &[u8],
    w: usize,
    h: usize,
    set: &LabelSet,
) -> (usize, usize, Vec<u8>) {
    let colours = set.colours();
    let width = w.max(240);
    let height = h + 6 + set.labels.len() * LINE;
    let mut rgb = vec![255u8; width * height * 3];
    let put = |rgb: &mut [u8], x: usize, y: usize, c: [u8; 3]| {
        if x < width && y < height {
            rgb[(y * width + x) * 3..(y * width + x) * 3 + 3].copy_from_slice(&c);
        }
    };
    for y in 0..h {
        for x in 0..w {
            let l = labels[y * w + x] as usize;
            let c = if l == 0 { [0, 0, 0] } else { colours[l - 1] };
            put(&mut rgb, x, y, c);
        }
    }
    for (i, (label, col)) in set.labels.iter().zip(&colours).enumerate() {
        let y0 = h + 6 + i * LINE;
        for y in 0..12 {
            for x in 0..12 {
                put(&mut rgb, 4 + x, y0 + y, *col);
            }
        }
        let text = format!("{} {}", label.number, label.name);
        for (k, ch) in text.chars().enumerate() {
            for (row, bits) in glyph(ch).iter().enumerate() {
                for bit in 0..8 {
                    if bits & (1 << bit) != 0 {
                        put(&mut rgb, 22 + k * 8 + bit, y0 + 2 + row, [0, 0, 0]);
                    }
                }
            }
        }
    }
    (width, height, rgb)
}
