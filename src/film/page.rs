//! The film page: the screened plate on a clear margin with registration marks (a ring
//! and cross at the middle of each side, the same on every plate), crop marks at the
//! artwork's corners, a label (ink, plate, print order, job, screen; wrapped onto as many
//! lines as the top margin holds, left and right of the top registration mark) and a step strip (0–100 % in 10 %
//! steps, screened like the plate, in a frame) at the bottom right.
//!
//! Every mark is drawn about centres that are symmetric about the page's vertical centre
//! line, and the artwork is centred, so a mirrored page has its marks and artwork box in
//! the same places. Sizes are in millimetres (our choices), at least one film pixel.

use crate::error::Result;

use super::font::{draw_text, text_width};
use super::{Bitmap, FilmOptions, PlateImage, Screener, MM_PER_INCH};

/// Registration ring radius and line width, crop mark length and gap, label height.
const REG_RADIUS_MM: f64 = 3.0;
const REG_OVERRUN_MM: f64 = 1.5;
const LINE_MM: f64 = 0.25;
const CROP_GAP_MM: f64 = 1.5;
const CROP_LENGTH_MM: f64 = 5.0;
const EDGE_MM: f64 = 2.0;
const TEXT_MM: f64 = 2.0;
const PATCH_W_MM: f64 = 4.0;
const PATCH_H_MM: f64 = 3.0;
/// The last words of the label. The layout leaves room for the longer of the two, so a
/// mirrored set and a right-reading set of one job have the same page.
const MIRRORED: &str = "mirrored, emulsion down";
const RIGHT_READING: &str = "right reading, emulsion up";
/// Steps of the strip, in per cent.
pub const STRIP_STEPS: [u8; 11] = [0, 10, 20, 30, 40, 50, 60, 70, 80, 90, 100];

/// A rectangle in film pixels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rect {
    pub x: u32,
    pub y: u32,
    pub w: u32,
    pub h: u32,
}

/// The layout shared by every page of a job.
#[derive(Debug, Clone, PartialEq)]
pub struct FilmLayout {
    pub dpi: f64,
    /// Page size in film pixels.
    pub width: u32,
    pub height: u32,
    /// Where the artwork lies (the same on a mirrored page).
    pub art: Rect,
    /// Centres of the registration marks, in film pixels (continuous coordinates: the
    /// pixel (i, j) covers i..i+1 × j..j+1); empty without marks.
    pub registration: Vec<(f64, f64)>,
    /// Radius of the registration ring in film pixels (0 without marks).
    pub registration_radius: f64,
    /// The step strip's patches, left to right (empty without marks).
    pub strip: Vec<Rect>,
    /// The label is set in two columns of the top margin, left and right of the top
    /// registration mark: their left edges and top, the width a line may take, how many
    /// lines a column holds, and the scale (film pixels per glyph pixel; a line is 10 glyph
    /// pixels high). Lines fill the left column first.
    pub label_at: (u32, u32),
    pub label_right_x: u32,
    pub label_width: u64,
    pub label_lines: u32,
    pub text_scale: u32,
    pub line_px: f64,
}

fn mm(v: f64, dpi: f64) -> f64 {
    v / MM_PER_INCH * dpi
}

/// Where crop marks start and end, measured from the artwork's edge, for a margin of `m`
/// film pixels: 1.5 mm off the artwork, 5 mm long or shorter to stay 1 mm inside the page.
fn crop_reach(m: f64, dpi: f64) -> (f64, f64) {
    let gap = mm(CROP_GAP_MM, dpi).max(1.0);
    let len = mm(CROP_LENGTH_MM, dpi).min(m - gap - mm(1.0, dpi)).max(1.0);
    (gap, gap + len)
}

/// Separator of the label's fields.
pub const LABEL_SEPARATOR: &str = "  /  ";

/// Breaks a label into lines of at most `width` film pixels at `scale`: between fields
/// where possible, a field longer than a line between its words, a word longer than a
/// line cut.
pub fn wrap_label(label: &str, width: u64, scale: u32) -> Vec<String> {
    let per_line = (width / (8 * scale as u64)).max(1) as usize;
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for field in label.split(LABEL_SEPARATOR) {
        let joined = if cur.is_empty() {
            field.to_string()
        } else {
            format!("{cur}{LABEL_SEPARATOR}{field}")
        };
        if joined.chars().count() <= per_line {
            cur = joined;
            continue;
        }
        if !cur.is_empty() {
            lines.push(std::mem::take(&mut cur));
        }
        // The field alone on lines: broken between words, a word longer than a line cut.
        for word in field.split(' ') {
            let joined = if cur.is_empty() {
                word.to_string()
            } else {
                format!("{cur} {word}")
            };
            if joined.chars().count() <= per_line {
                cur = joined;
                continue;
            }
            if !cur.is_empty() {
                lines.push(std::mem::take(&mut cur));
            }
            let chars: Vec<char> = word.chars().collect();
            let mut chunks = chars.chunks(per_line).peekable();
            while let Some(c) = chunks.next() {
                let c: String = c.iter().collect();
                if chunks.peek().is_some() {
                    lines.push(c);
                } else {
                    cur = c;
                }
            }
        }
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

impl FilmLayout {
    /// The layout for artwork of `art_w × art_h` pixels with these labels (the page is
    /// widened, keeping the artwork centred, when the longest label or the strip needs it).
    pub fn new(art_w: u32, art_h: u32, labels: &[String], opts: &FilmOptions) -> Result<Self> {
        opts.check()?;
        let dpi = opts.dpi;
        let m = mm(opts.margin_mm, dpi).round() as u64;
        let line_px = mm(LINE_MM, dpi).max(1.0);
        let mut width = art_w as u64 + 2 * m;
        let height = art_h as u64 + 2 * m;
        let text_scale = ((mm(TEXT_MM, dpi) / 8.0).round() as u32).max(1);
        let reg_r = mm(REG_RADIUS_MM, dpi).max(3.0);
        let reg_reach = reg_r + mm(REG_OVERRUN_MM, dpi) + line_px;
        let edge = mm(EDGE_MM, dpi).max(2.0);
        let (patch_w, patch_h) = (mm(PATCH_W_MM, dpi).max(4.0), mm(PATCH_H_MM, dpi).max(3.0));
        let mut label_lines = 1u32;
        let mut label_width = 0u64;
        if opts.marks {
            // Strip: right of the bottom registration mark.
            let strip_w = patch_w * STRIP_STEPS.len() as f64 + 2.0 * line_px;
            let need_strip = 2.0 * (reg_reach + edge + strip_w + edge);
            width = width.max(need_strip.ceil() as u64);
            // Label: lines from `edge` down to above the top crop marks, from `edge` to the
            // left of the top registration mark. Measured as if every label ended with the
            // longer of the two last phrases. The page widens until every label fits.
            let line_h = 10 * text_scale as u64;
            let (_, crop_end) = crop_reach(m as f64, dpi);
            let room = (m as f64 - crop_end - mm(1.0, dpi) - edge).max(0.0) as u64;
            label_lines = (((room + 2 * text_scale as u64) / line_h) as u32).max(1);
            let (long, short) = if MIRRORED.len() > RIGHT_READING.len() {
                (MIRRORED, RIGHT_READING)
            } else {
                (RIGHT_READING, MIRRORED)
            };
            let measured: Vec<String> = labels
                .iter()
                .map(|l| match l.strip_suffix(short) {
                    Some(head) => format!("{head}{long}"),
                    None => l.clone(),
                })
                .collect();
            let avail = |width: u64| (width as f64 / 2.0 - reg_reach - 2.0 * edge).max(0.0) as u64;
            let fits = |width: u64| {
                measured.iter().all(|l| {
                    wrap_label(l, avail(width), text_scale).len() as u32 <= 2 * label_lines
                })
            };
            // Every label fits on one line at `hi`; lines only get fewer as the page widens,
            // so the narrowest page that fits is found by bisection.
            let longest = measured
                .iter()
                .map(|l| text_width(l, text_scale))
                .max()
                .unwrap_or(0);
            let hi = (2.0 * (2.0 * edge + longest as f64 + reg_reach + 1.0)).ceil() as u64;
            if !fits(width) {
                let (mut lo, mut hi) = (width, hi.max(width));
                while hi - lo > 1 {
                    let mid = lo + (hi - lo) / 2;
                    if fits(mid) {
                        hi = mid;
                    } else {
                        lo = mid;
                    }
                }
                width = hi;
            }
            label_width = avail(width);
        }
        // Equal margins left and right.
        if (width - art_w as u64) % 2 == 1 {
            width += 1;
        }
        if width > u32::MAX as u64 || height > u32::MAX as u64 {
            return Err(super::bad(format!(
                "a film page of {width} × {height} pixels is too large; lower the dpi or the margin"
            )));
        }
        if width * height > super::MAX_PAGE_PIXELS {
            return Err(super::bad(format!(
                "a film page of {width} × {height} pixels is over the limit of {} pixels; \
                 lower the dpi or the margin",
                super::MAX_PAGE_PIXELS
            )));
        }
        let (width, height) = (width as u32, height as u32);
        let art = Rect {
            x: (width - art_w) / 2,
            y: m as u32,
            w: art_w,
            h: art_h,
        };
        let mut layout = FilmLayout {
            dpi,
            width,
            height,
            art,
            registration: Vec::new(),
            registration_radius: 0.0,
            strip: Vec::new(),
            label_at: (edge.round() as u32, edge.round() as u32),
            label_right_x: (width as f64 / 2.0 + reg_reach + edge).round() as u32,
            label_width,
            label_lines,
            text_scale,
            line_px,
        };
        if opts.marks {
            let (w, h) = (width as f64, height as f64);
            let half = m as f64 / 2.0;
            let cy = art.y as f64 + art_h as f64 / 2.0;
            layout.registration = vec![
                (w / 2.0, half),
                (w / 2.0, h - half),
                (art.x as f64 - half, cy),
                (w - (art.x as f64 - half), cy),
            ];
            layout.registration_radius = reg_r;
            let x0 = (w / 2.0 + reg_reach + edge + line_px).round() as u32;
            let y0 = (h - edge - line_px - patch_h).round() as u32;
            // Patches with a clear line between them.
            let pw = patch_w.round() as u32;
            let gap = (line_px.round() as u32).min(pw / 2);
            layout.strip = (0..STRIP_STEPS.len() as u32)
                .map(|k| Rect {
                    x: x0 + k * pw + gap.div_ceil(2),
                    y: y0,
                    w: pw - gap,
                    h: patch_h.round() as u32,
                })
                .collect();
        }
        Ok(layout)
    }

    /// Crop marks: (x0, y0, x1, y1) segments in continuous film coordinates.
    fn crop_marks(&self) -> Vec<(f64, f64, f64, f64)> {
        let (gap, end) = crop_reach(self.art.y as f64, self.dpi);
        let len = end - gap;
        let (l, t) = (self.art.x as f64, self.art.y as f64);
        let (r, b) = (l + self.art.w as f64, t + self.art.h as f64);
        let mut v = Vec::new();
        for &(x, sx) in &[(l, -1.0), (r, 1.0)] {
            for &(y, sy) in &[(t, -1.0), (b, 1.0)] {
                // Horizontal, along the top or bottom edge, outside the artwork.
                v.push((x + sx * gap, y, x + sx * (gap + len), y));
                // Vertical, along the left or right edge.
                v.push((x, y + sy * gap, x, y + sy * (gap + len)));
            }
        }
        v
    }
}

/// One film.
#[derive(Debug, Clone)]
pub struct FilmPage {
    /// The page as exposed (mirrored when asked).
    pub bitmap: Bitmap,
    pub dpi: f64,
    pub ink: String,
    pub number: usize,
    pub count: usize,
    pub print_order: usize,
    pub label: String,
    pub mirrored: bool,
    /// The artwork's box on the page.
    pub art: Rect,
}

/// The label line of a plate.
pub fn label_text(
    plate: &PlateImage,
    count: usize,
    screen: Option<&Screener>,
    opts: &FilmOptions,
) -> String {
    let mut parts = Vec::new();
    if !opts.job.trim().is_empty() {
        parts.push(opts.job.trim().to_string());
    }
    parts.push(plate.ink.clone());
    parts.push(format!("plate {} of {count}", plate.number));
    parts.push(format!("print {}", plate.print_order));
    parts.push(match screen {
        Some(s) => s.describe(),
        None => "solid".into(),
    });
    parts.push(format!("{} dpi", super::screen::trim_number(opts.dpi)));
    parts.push(if opts.mirror { MIRRORED } else { RIGHT_READING }.into());
    parts.join(LABEL_SEPARATOR)
}

/// Pixels whose centres lie in a segment of width `lw` (axis-aligned) or a ring.
fn stroke_segment(b: &mut Bitmap, seg: (f64, f64, f64, f64), lw: f64) {
    let (x0, y0, x1, y1) = seg;
    let (xa, xb) = (x0.min(x1) - lw / 2.0, x0.max(x1) + lw / 2.0);
    let (ya, yb) = (y0.min(y1) - lw / 2.0, y0.max(y1) + lw / 2.0);
    fill_box(b, xa, ya, xb, yb);
}

/// Inks the pixels whose centres lie in [xa, xb] × [ya, yb] (closed, so that a box and
/// its mirror image cover mirrored pixels).
fn fill_box(b: &mut Bitmap, xa: f64, ya: f64, xb: f64, yb: f64) {
    let i0 = (xa - 0.5).ceil() as i64;
    let i1 = (xb - 0.5).floor() as i64 + 1;
    let j0 = (ya - 0.5).ceil() as i64;
    let j1 = (yb - 0.5).floor() as i64 + 1;
    b.fill_rect(i0, j0, i1, j1, true);
}

fn ring(b: &mut Bitmap, cx: f64, cy: f64, r: f64, lw: f64) {
    let reach = r + lw;
    let (i0, i1) = ((cx - reach).floor() as i64, (cx + reach).ceil() as i64);
    let (j0, j1) = ((cy - reach).floor() as i64, (cy + reach).ceil() as i64);
    for j in j0..=j1 {
        for i in i0..=i1 {
            let d = ((i as f64 + 0.5 - cx).powi(2) + (j as f64 + 0.5 - cy).powi(2)).sqrt();
            if (d - r).abs() <= lw / 2.0 {
                b.set(i, j, true);
            }
        }
    }
}

impl FilmPage {
    /// Lays one plate on a page: the artwork screened with `screen` (or, without one, ink
    /// where the amount is at least 128), then the marks, label and step strip (screened
    /// with `strip_screen` when the plate has no screen), then the mirror.
    pub fn compose(
        plate: &PlateImage,
        count: usize,
        screen: Option<&Screener>,
        strip_screen: &Screener,
        layout: &FilmLayout,
        opts: &FilmOptions,
    ) -> Result<FilmPage> {
        plate.check()?;
        if (plate.width, plate.height) != (layout.art.w, layout.art.h) {
            return Err(super::bad(format!(
                "plate '{}' is {} × {} pixels but the layout is for {} × {}",
                plate.ink, plate.width, plate.height, layout.art.w, layout.art.h
            )));
        }
        let mut b = Bitmap::new(layout.width, layout.height)?;
        let (ax, ay) = (layout.art.x as i64, layout.art.y as i64);
        let w = plate.width as usize;
        for (p, &a) in plate.amount.iter().enumerate() {
            if a == 0 {
                continue;
            }
            let (x, y) = (ax + (p % w) as i64, ay + (p / w) as i64);
            let ink = match screen {
                Some(s) => s.ink(x, y, a),
                None => a >= 128,
            };
            if ink {
                b.set(x, y, true);
            }
        }
        let label = label_text(plate, count, screen, opts);
        if opts.marks {
            let lw = layout.line_px;
            let r = layout.registration_radius;
            let over = mm(REG_OVERRUN_MM, layout.dpi);
            for &(cx, cy) in &layout.registration {
                ring(&mut b, cx, cy, r, lw);
                stroke_segment(&mut b, (cx - r - over, cy, cx + r + over, cy), lw);
                stroke_segment(&mut b, (cx, cy - r - over, cx, cy + r + over), lw);
            }
            for seg in layout.crop_marks() {
                stroke_segment(&mut b, seg, lw);
            }
            let lines = wrap_label(&label, layout.label_width, layout.text_scale);
            let per_column = layout.label_lines as usize;
            for (k, line) in lines.iter().take(2 * per_column).enumerate() {
                let x = if k < per_column {
                    layout.label_at.0
                } else {
                    layout.label_right_x
                };
                let row = (k % per_column) as i64;
                draw_text(
                    &mut b,
                    x as i64,
                    layout.label_at.1 as i64 + row * 10 * layout.text_scale as i64,
                    layout.text_scale,
                    line,
                );
            }
            let sc = screen.unwrap_or(strip_screen);
            for (patch, &step) in layout.strip.iter().zip(STRIP_STEPS.iter()) {
                let a = (step as f64 / 100.0 * 255.0).round() as u8;
                for y in patch.y..patch.y + patch.h {
                    for x in patch.x..patch.x + patch.w {
                        if sc.ink(x as i64, y as i64, a) {
                            b.set(x as i64, y as i64, true);
                        }
                    }
                }
            }
            // A frame around the strip, outside the patches.
            if let (Some(first), Some(last)) = (layout.strip.first(), layout.strip.last()) {
                let gap = ((layout.line_px.round() as u32).min(first.w) as f64 / 2.0).ceil();
                let (x0, y0) = (first.x as f64 - gap, first.y as f64);
                let (x1, y1) = ((last.x + last.w) as f64 + gap, (last.y + last.h) as f64);
                fill_box(&mut b, x0 - lw, y0 - lw, x1 + lw, y0);
                fill_box(&mut b, x0 - lw, y1, x1 + lw, y1 + lw);
                fill_box(&mut b, x0 - lw, y0, x0, y1);
                fill_box(&mut b, x1, y0, x1 + lw, y1);
            }
        }
        if opts.mirror {
            b = b.mirrored();
        }
        Ok(FilmPage {
            bitmap: b,
            dpi: layout.dpi,
            ink: plate.ink.clone(),
            number: plate.number,
            count,
            print_order: plate.print_order,
            label,
            mirrored: opts.mirror,
            art: layout.art,
        })
    }

    /// Width and height in millimetres.
    pub fn size_mm(&self) -> (f64, f64) {
        (
            self.bitmap.width() as f64 / self.dpi * MM_PER_INCH,
            self.bitmap.height() as f64 / self.dpi * MM_PER_INCH,
        )
    }
}
