//! Per-class statistics gathered in pass 2: feature moments, pixels, uncertainty and SSE.

use super::fit::{Assigned, FittedClasses};
use crate::features::scene::Moments;
use rayon::prelude::*;

/// The running totals of one class.
#[derive(Debug, Clone)]
pub(super) struct ClassTally {
    /// Mean and variance of each feature, in its own (unscaled) units.
    pub(super) moments: Vec<Moments>,
    pub(super) pixels: u64,
    /// Σ of the pixels' uncertainty.
    pub(super) uncertainty: f64,
    /// Σ of the pixels' ground areas, m² (0 when areas are unknown).
    pub(super) area_m2: f64,
}

/// Statistics of classes 1..=k (index `class − 1`) and the SSE over all of them.
#[derive(Debug, Clone)]
pub(super) struct ClassStats {
    pub(super) classes: Vec<ClassTally>,
    /// Σ over valid pixels of the squared distance (scaled features) to the class mean.
    pub(super) sse: f64,
}

impl ClassStats {
    /// Empty statistics for `k` classes of `dim` features.
    pub(super) fn new(k: usize, dim: usize) -> Self {
        let tally = ClassTally {
            moments: vec![Moments::default(); dim],
            pixels: 0,
            uncertainty: 0.0,
            area_m2: 0.0,
        };
        ClassStats {
            classes: vec![tally; k],
            sse: 0.0,
        }
    }

    /// Adds rows of `width` pixels: `raw` as read, `assigned` as the classes gave them,
    /// `areas` each pixel's ground area (empty when unknown).
    /// Each row is counted in parallel and the rows are merged in order, so the result
    /// does not depend on the thread count.
    pub(super) fn add_rows(
        &mut self,
        fitted: &FittedClasses,
        raw: &[f32],
        assigned: &Assigned,
        areas: &[f64],
        width: usize,
    ) {
        let rows = assigned.classes.len().checked_div(width).unwrap_or(0);
        let per_row: Vec<ClassStats> = (0..rows)
            .into_par_iter()
            .map(|r| {
                let mut row = ClassStats::new(fitted.k, fitted.dim);
                row.add_row(fitted, raw, assigned, areas, r * width..(r + 1) * width);
                row
            })
            .collect();
        for row in &per_row {
            self.merge(row);
        }
    }

    /// Adds the pixels `range` (nodata, class 0, skipped).
    fn add_row(
        &mut self,
        fitted: &FittedClasses,
        raw: &[f32],
        assigned: &Assigned,
        areas: &[f64],
        range: std::ops::Range<usize>,
    ) {
        let dim = fitted.dim;
        let mut f = vec![0.0f32; dim];
        for p in range {
            let c = assigned.classes[p] as usize;
            if c == 0 {
                continue;
            }
            let tally = &mut self.classes[c - 1];
            tally.pixels += 1;
            tally.uncertainty += assigned.uncertainty[p] as f64;
            tally.area_m2 += areas.get(p).copied().unwrap_or(0.0);
            fitted.unscaled_features(raw, p, &mut f);
            for (m, &v) in tally.moments.iter_mut().zip(&f) {
                m.push(v as f64);
            }
            self.sse += fitted.squared_distance(c, &assigned.features[p * dim..(p + 1) * dim]);
        }
    }

    /// Adds the statistics of other pixels (same classes and features).
    pub(super) fn merge(&mut self, other: &ClassStats) {
        for (a, b) in self.classes.iter_mut().zip(&other.classes) {
            a.pixels += b.pixels;
            a.uncertainty += b.uncertainty;
            a.area_m2 += b.area_m2;
            for (ma, mb) in a.moments.iter_mut().zip(&b.moments) {
                ma.merge(mb);
            }
        }
        self.sse += other.sse;
    }
}
