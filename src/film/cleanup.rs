//! Minimum-feature cleanup in the shop's units.
//!
//! The limit L (a length at the print dpi, rounded to whole film pixels, at least 1) is the
//! smallest square of ink the stencil is trusted to hold. Every 8-connected shape of ink
//! on a plate is judged on its own:
//! - it **holds the limit** when an L × L square of its pixels fits inside it: kept;
//! - it is **long** when the diagonal of its bounding box is at least `long_factor` × L
//!   (default 3): kept, however thin (lines, hairlines, strokes of small text);
//! - otherwise it is **small** (a speck shorter than a few times the limit and too narrow
//!   to hold it): removed, or with [`SmallFeature::Grow`] grown to an L × L square around
//!   its centre (so i-dots, full stops and the dot of "!" stay, at the smallest size the
//!   stencil holds).
//!
//! Text: strokes of letters are long and stay; an i-dot or full stop is kept when it is at
//! least L × L, and below that it is removed by default (it would not hold on the screen
//! either) or grown with [`SmallFeature::Grow`]. Clear specks inside ink (holes) are not
//! touched. Every removed or grown shape is listed with its place and size, and
//! [`cleanup_picture`] draws them.

use crate::error::Result;

use super::{bad, Length, PlateImage};

/// What happens to a small shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SmallFeature {
    /// Removed (no ink).
    #[default]
    Remove,
    /// Grown to an L × L square centred on it.
    Grow,
}

/// The minimum-feature rule.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MinFeature {
    /// The limit L (mm, pixels, or a multiple of the mesh's thread spacing).
    pub size: Length,
    /// A shape whose bounding-box diagonal is at least this many times L is kept however
    /// thin. Default: 3.
    pub long_factor: f64,
    pub small: SmallFeature,
}

impl MinFeature {
    /// The rule with a limit, long factor 3 and small shapes removed.
    pub fn new(size: Length) -> Self {
        MinFeature {
            size,
            long_factor: 3.0,
            small: SmallFeature::Remove,
        }
    }

    /// The limit in whole film pixels (at least 1).
    pub fn limit_px(&self, dpi: f64) -> Result<usize> {
        let px = self.size.to_px(dpi, "minimum feature")?;
        if px > 1.0e6 {
            return Err(bad(format!(
                "minimum feature of {px:.0} film pixels is larger than any plate"
            )));
        }
        Ok((px.round() as usize).max(1))
    }

    pub fn check(&self) -> Result<()> {
        if !(self.long_factor.is_finite() && self.long_factor >= 1.0) {
            return Err(bad(format!(
                "the long-feature factor must be a number >= 1 (got {})",
                self.long_factor
            )));
        }
        Ok(())
    }
}

/// What was done to one shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CleanupAction {
    Removed,
    Grown,
}

/// One shape that cleanup removed or grew.
#[derive(Debug, Clone, PartialEq)]
pub struct CleanedFeature {
    /// Plate number and ink.
    pub plate: usize,
    pub ink: String,
    /// Bounding box in artwork pixels.
    pub x: u32,
    pub y: u32,
    pub width: u32,
    pub height: u32,
    /// Ink pixels of the shape before cleanup.
    pub pixels: u64,
    /// Pixels added when grown.
    pub added: u64,
    pub action: CleanupAction,
}

/// What cleanup did to a set of plates.
#[derive(Debug, Clone, PartialEq)]
pub struct CleanupReport {
    /// The limit in film pixels, and in millimetres at the print dpi.
    pub limit_px: usize,
    pub limit_mm: f64,
    pub long_factor: f64,
    pub width: u32,
    pub height: u32,
    pub features: Vec<CleanedFeature>,
    /// Per artwork pixel: 0 unchanged, 1 ink removed (on some plate), 2 ink added.
    pub changes: Vec<u8>,
}

impl CleanupReport {
    pub fn removed(&self) -> usize {
        self.features
            .iter()
            .filter(|f| f.action == CleanupAction::Removed)
            .count()
    }
    pub fn grown(&self) -> usize {
        self.features
            .iter()
            .filter(|f| f.action == CleanupAction::Grown)
            .count()
    }
}

/// Cleans every plate (see the module notes).
pub fn clean_plates(
    plates: &mut [PlateImage],
    rule: &MinFeature,
    dpi: f64,
) -> Result<CleanupReport> {
    super::check_dpi(dpi)?;
    rule.check()?;
    let (w, h) = super::check_plates(plates)?;
    let limit = rule.limit_px(dpi)?;
    let mut changes = vec![0u8; w as usize * h as usize];
    let mut features = Vec::new();
    for p in plates.iter_mut() {
        features.extend(clean_plate_into(p, rule, limit, &mut changes));
    }
    Ok(CleanupReport {
        limit_px: limit,
        limit_mm: limit as f64 / dpi * super::MM_PER_INCH,
        long_factor: rule.long_factor,
        width: w,
        height: h,
        features,
        changes,
    })
}

/// Cleans one plate; returns what it removed or grew.
pub fn clean_plate(
    plate: &mut PlateImage,
    rule: &MinFeature,
    dpi: f64,
) -> Result<Vec<CleanedFeature>> {
    super::check_dpi(dpi)?;
    rule.check()?;
    plate.check()?;
    let limit = rule.limit_px(dpi)?;
    let mut changes = vec![0u8; plate.amount.len()];
    Ok(clean_plate_into(plate, rule, limit, &mut changes))
}

fn clean_plate_into(
    plate: &mut PlateImage,
    rule: &MinFeature,
    limit: usize,
    changes: &mut [u8],
) -> Vec<CleanedFeature> {
    let (w, h) = (plate.width as usize, plate.height as usize);
    let ink: Vec<bool> = plate.amount.iter().map(|&a| a > 0).collect();
    // `fits[p]`: an L × L square of ink has its bottom-right corner at p (runs of ink
    // of length L along the row, then L such positions down the column).
    let mut across = vec![false; w * h];
    for y in 0..h {
        let mut run = 0;
        for x in 0..w {
            run = if ink[y * w + x] { run + 1 } else { 0 };
            across[y * w + x] = run >= limit;
        }
    }
    let mut fits = vec![false; w * h];
    for x in 0..w {
        let mut run = 0;
        for y in 0..h {
            run = if across[y * w + x] { run + 1 } else { 0 };
            fits[y * w + x] = run >= limit;
        }
    }
    drop(across);
    let mut seen = vec![false; w * h];
    let mut stack = Vec::new();
    let mut members = Vec::new();
    let mut out = Vec::new();
    for start in 0..w * h {
        if !ink[start] || seen[start] {
            continue;
        }
        seen[start] = true;
        stack.push(start);
        members.clear();
        let (mut x0, mut y0, mut x1, mut y1) = (usize::MAX, usize::MAX, 0, 0);
        let mut holds = false;
        while let Some(p) = stack.pop() {
            members.push(p);
            let (x, y) = (p % w, p / w);
            x0 = x0.min(x);
            x1 = x1.max(x);
            y0 = y0.min(y);
            y1 = y1.max(y);
            holds |= fits[p];
            for dy in -1i64..=1 {
                for dx in -1i64..=1 {
                    let (nx, ny) = (x as i64 + dx, y as i64 + dy);
                    if nx < 0 || ny < 0 || nx >= w as i64 || ny >= h as i64 {
                        continue;
                    }
                    let q = ny as usize * w + nx as usize;
                    if ink[q] && !seen[q] {
                        seen[q] = true;
                        stack.push(q);
                    }
                }
            }
        }
        if holds {
            continue;
        }
        let (bw, bh) = ((x1 - x0 + 1) as f64, (y1 - y0 + 1) as f64);
        if (bw * bw + bh * bh).sqrt() >= rule.long_factor * limit as f64 {
            continue;
        }
        let mut feature = CleanedFeature {
            plate: plate.number,
            ink: plate.ink.clone(),
            x: x0 as u32,
            y: y0 as u32,
            width: bw as u32,
            height: bh as u32,
            pixels: members.len() as u64,
            added: 0,
            action: CleanupAction::Removed,
        };
        match rule.small {
            SmallFeature::Remove => {
                for &p in &members {
                    plate.amount[p] = 0;
                    changes[p] = 1;
                }
            }
            SmallFeature::Grow => {
                let most = members
                    .iter()
                    .map(|&p| plate.amount[p])
                    .max()
                    .unwrap_or(255);
                // The square of side L centred on the bounding box, moved inside the plate.
                let l = limit.min(w).min(h);
                let cx2 = x0 + x1; // twice the centre
                let cy2 = y0 + y1;
                let sx = (cx2 + 1).saturating_sub(l) / 2;
                let sy = (cy2 + 1).saturating_sub(l) / 2;
                let sx = sx.min(w - l);
                let sy = sy.min(h - l);
                for y in sy..sy + l {
                    for x in sx..sx + l {
                        let p = y * w + x;
                        if plate.amount[p] < most {
                            if plate.amount[p] == 0 {
                                feature.added += 1;
                                changes[p] = 2;
                            }
                            plate.amount[p] = most;
                        }
                    }
                }
                feature.action = CleanupAction::Grown;
            }
        }
        out.push(feature);
    }
    out
}

/// The list as CSV: a header, then one row per shape (the limit itself is in the
/// separation document, so every row has one shape).
pub fn cleanup_csv(report: &CleanupReport) -> String {
    let mut s = String::from("plate,ink,action,x,y,width,height,pixels,added\n");
    for f in &report.features {
        let ink = if f.ink.contains([',', '"', '\n']) {
            format!("\"{}\"", f.ink.replace('"', "\"\""))
        } else {
            f.ink.clone()
        };
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{},{}\n",
            f.plate,
            ink,
            match f.action {
                CleanupAction::Removed => "removed",
                CleanupAction::Grown => "grown",
            },
            f.x,
            f.y,
            f.width,
            f.height,
            f.pixels,
            f.added
        ));
    }
    s
}

/// A picture of the cleanup (RGBA, artwork size): ink of any plate after cleanup in grey,
/// removed ink in red, added ink in blue, each changed shape framed in red or blue so that
/// one-pixel specks can be found; clear in white.
pub fn cleanup_picture(report: &CleanupReport, plates: &[PlateImage]) -> Vec<u8> {
    let (w, h) = (report.width as usize, report.height as usize);
    let mut rgba = vec![255u8; w * h * 4];
    for p in 0..w * h {
        let inked = plates
            .iter()
            .any(|pl| pl.amount.get(p).is_some_and(|&a| a > 0));
        let c: [u8; 3] = match report.changes.get(p) {
            Some(1) => [220, 30, 30],
            Some(2) => [30, 60, 220],
            _ if inked => [150, 150, 150],
            _ => [255, 255, 255],
        };
        rgba[p * 4..p * 4 + 3].copy_from_slice(&c);
    }
    for f in &report.features {
        let c: [u8; 3] = match f.action {
            CleanupAction::Removed => [220, 30, 30],
            CleanupAction::Grown => [30, 60, 220],
        };
        // A frame 2 px outside the shape's box.
        let (x0, y0) = (f.x as i64 - 2, f.y as i64 - 2);
        let (x1, y1) = ((f.x + f.width) as i64 + 1, (f.y + f.height) as i64 + 1);
        let mut put = |x: i64, y: i64| {
            if x >= 0 && y >= 0 && (x as usize) < w && (y as usize) < h {
                let p = y as usize * w + x as usize;
                rgba[p * 4..p * 4 + 3].copy_from_slice(&c);
            }
        };
        for x in x0..=x1 {
            put(x, y0);
            put(x, y1);
        }
        for y in y0..=y1 {
            put(x0, y);
            put(x1, y);
        }
    }
    rgba
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grown_specks_become_limit_squares() {
        let (w, h) = (20u32, 20u32);
        let mut amount = vec![0u8; 400];
        amount[10 * 20 + 10] = 200;
        let mut plate = PlateImage::new("K", 1, 1, w, h, amount).unwrap();
        let rule = MinFeature {
            small: SmallFeature::Grow,
            ..MinFeature::new(Length::Px(4.0))
        };
        let f = clean_plate(&mut plate, &rule, 300.0).unwrap();
        assert_eq!(f.len(), 1);
        assert_eq!(f[0].action, CleanupAction::Grown);
        assert_eq!(f[0].added, 15);
        assert_eq!(plate.amount.iter().filter(|&&a| a == 200).count(), 16);
        // Grown once, the square holds the limit: a second pass changes nothing.
        assert!(clean_plate(&mut plate, &rule, 300.0).unwrap().is_empty());
    }
}
