//! Screening: a tint (0..=255) becomes ink or no ink per film pixel by comparison with a
//! threshold that varies over the page.
//!
//! - **AM halftone**: a square grid of cells, `dpi / lpi` pixels apart, turned by the plate's
//!   angle. Within a cell a *spot function* orders the positions (the centre inks first);
//!   the threshold of a position is the share of the cell whose spot value is lower, so a
//!   tint of t covers exactly the share t of every cell (up to the sampling of the cell
//!   into [`CELL_SAMPLES`]² positions and the film's pixels). Film pixels sample the cell
//!   at their centres; where a cell is only a few pixels wide, or the grid lines up with
//!   the pixels (0°, 45°), the centres fall on the same few positions of every cell and
//!   whole rows of them flip together, so a tint could be off by several per cent. Each
//!   cell's sampling is therefore shifted by a fixed pseudo-random fraction of a pixel
//!   (at most ½ pixel along each axis, the same on every run for a seed): the dots stay
//!   whole and in place within a pixel, and the covered share is right on average.
//!   - Round: inside the diamond |x| + |y| ≤ ½ (cell coordinates in −½..½) the spot is the
//!     squared distance to the cell centre, outside it 1 − the squared distance to the
//!     nearest cell corner. Up to π/8 ≈ 39.3 % the dot is a disc, at 50 % exactly the
//!     diamond (the cells make a checkerboard), from 1 − π/8 ≈ 60.7 % on the clear parts
//!     are discs at the corners.
//!   - Elliptical: the spot is x² + (y / [`ELLIPSE_RATIO`])²; dots are ellipses that
//!     join along their long axis first (chain dots).
//! - **Stochastic (FM)**: a 64 × 64 threshold matrix made by the void-and-cluster method
//!   (R. Ulichney, 1993, Gaussian filter σ = 1.5 cells, as in that paper — recalled from
//!   memory), seeded and deterministic, tiled over the page; each matrix cell is a square
//!   dot of the given size in film pixels.
//!
//! A pixel gets ink when amount / 255 > threshold, with thresholds strictly between 0 and
//! 1: 0 never inks, 255 always does.

use crate::error::Result;
use crate::rng::Rng;

use super::{bad, Length};

/// Samples per side of the AM cell's threshold table.
pub const CELL_SAMPLES: usize = 128;
/// Side of the stochastic threshold matrix.
pub const FM_SIZE: usize = 64;
/// Minor-to-major axis ratio of the elliptical dot (our choice).
pub const ELLIPSE_RATIO: f64 = 0.7;
/// Default ruling in lines per inch: 55 lpi, within the 45–65 lpi common practice for
/// screen printing on fine meshes.
pub const DEFAULT_LPI: f64 = 55.0;

/// Dot shape of an AM halftone.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DotShape {
    #[default]
    Round,
    Elliptical,
}

/// Kind of screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScreenKind {
    /// Amplitude-modulated dots on a rotated grid.
    Am(DotShape),
    /// Frequency-modulated (stochastic) dots of one size.
    Stochastic,
}

impl Default for ScreenKind {
    fn default() -> Self {
        ScreenKind::Am(DotShape::Round)
    }
}

/// Halftone settings for the plates that carry tints.
#[derive(Debug, Clone, PartialEq)]
pub struct Halftone {
    pub kind: ScreenKind,
    /// Lines per inch of the AM grid. Default: [`DEFAULT_LPI`]. At most dpi / 2 (a cell
    /// needs at least 2 × 2 film pixels).
    pub lpi: f64,
    /// Angles in degrees (counter-clockwise from the horizontal, as the right-reading film
    /// is seen), one per screened plate in plate order, used in turn when fewer are given;
    /// empty: chosen by [`auto_angles`].
    pub angles: Vec<f64>,
    /// Size of one stochastic dot. Default: 2 film pixels.
    pub fm_dot: Length,
    /// Seed of the stochastic matrix.
    pub seed: u64,
}

impl Default for Halftone {
    fn default() -> Self {
        Halftone {
            kind: ScreenKind::default(),
            lpi: DEFAULT_LPI,
            angles: Vec::new(),
            fm_dot: Length::Px(2.0),
            seed: crate::rng::DEFAULT_SEED,
        }
    }
}

impl Halftone {
    /// Checks the settings at a print resolution.
    pub fn check(&self, dpi: f64) -> Result<()> {
        if !(self.lpi.is_finite() && self.lpi > 0.0) {
            return Err(bad(format!(
                "lines per inch must be a positive number (got {})",
                self.lpi
            )));
        }
        // Stochastic dots have no grid: their size is checked below.
        if self.kind != ScreenKind::Stochastic && self.lpi > dpi / 2.0 {
            return Err(bad(format!(
                "{} lines per inch is more than half the print resolution ({dpi} dpi): a \
                 halftone cell needs at least 2 × 2 film pixels; use at most {} lpi or a \
                 higher dpi",
                self.lpi,
                dpi / 2.0
            )));
        }
        for &a in &self.angles {
            if !(a.is_finite() && (0.0..180.0).contains(&a)) {
                return Err(bad(format!(
                    "screen angles must be at least 0 and below 180 degrees (a screen repeats \
                     every 180°; got {a})"
                )));
            }
        }
        let dot = self.fm_dot.to_px(dpi, "stochastic dot size")?;
        if self.kind == ScreenKind::Stochastic && dot.round() < 1.0 {
            return Err(bad(format!(
                "the stochastic dot is {dot:.2} film pixels at {dpi} dpi; it must be at least 1"
            )));
        }
        Ok(())
    }

    /// Angles for `n` screened plates: the given ones (used in turn when fewer are given),
    /// or [`auto_angles`].
    pub fn angles_for(&self, n: usize) -> Vec<f64> {
        if self.angles.is_empty() {
            auto_angles(n)
        } else {
            (0..n).map(|i| self.angles[i % self.angles.len()]).collect()
        }
    }
}

/// Screen angles for `n` plates, as is common practice: 45° for the first (the least
/// visible angle), then 75° and 15° (30° apart, to keep moiré between plates fine), then
/// 0° (15° from its neighbours, usually for the lightest ink); beyond 4 plates the
/// sequence repeats (dots with 90° symmetry have no more angles 15° apart).
pub fn auto_angles(n: usize) -> Vec<f64> {
    const SEQ: [f64; 4] = [45.0, 75.0, 15.0, 0.0];
    (0..n).map(|i| SEQ[i % 4]).collect()
}

/// The threshold function of one plate's screen, in film-page pixel coordinates.
#[derive(Debug, Clone)]
pub struct Screener {
    kind: ScreenKind,
    lpi: f64,
    angle: f64,
    /// AM: cell period in pixels and the rotation.
    period: f64,
    cos: f64,
    sin: f64,
    /// AM: CELL_SAMPLES² thresholds; FM: FM_SIZE² thresholds.
    table: Vec<f32>,
    /// FM: film pixels per matrix cell.
    dot: usize,
    /// AM: seed of the cells' sampling shifts.
    seed: u64,
}

impl Screener {
    /// A screen for one plate at `angle` degrees.
    pub fn new(ht: &Halftone, angle: f64, dpi: f64) -> Result<Self> {
        ht.check(dpi)?;
        if !angle.is_finite() {
            return Err(bad(format!("screen angles must be finite (got {angle})")));
        }
        let (table, dot) = match ht.kind {
            ScreenKind::Am(shape) => (am_table(shape), 1),
            ScreenKind::Stochastic => (
                void_and_cluster(FM_SIZE, ht.seed),
                ht.fm_dot.to_px(dpi, "stochastic dot size")?.round() as usize,
            ),
        };
        let rad = angle.to_radians();
        Ok(Screener {
            kind: ht.kind,
            lpi: ht.lpi,
            angle,
            period: dpi / ht.lpi,
            cos: rad.cos(),
            sin: rad.sin(),
            table,
            dot,
            seed: ht.seed,
        })
    }

    /// The threshold (strictly between 0 and 1) at film pixel (x, y).
    pub fn threshold(&self, x: i64, y: i64) -> f32 {
        match self.kind {
            ScreenKind::Am(_) => {
                // Pixel centre; y grows downwards on the film, so the grid is turned with
                // -sin to appear counter-clockwise.
                let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
                let u = (px * self.cos - py * self.sin) / self.period;
                let v = (px * self.sin + py * self.cos) / self.period;
                let (cu, cv) = (u.floor(), v.floor());
                let (du, dv) = cell_shift(cu as i64, cv as i64, self.seed);
                let fu = (u - cu + du / self.period).rem_euclid(1.0);
                let fv = (v - cv + dv / self.period).rem_euclid(1.0);
                let n = CELL_SAMPLES as f64;
                let i = ((fu * n) as usize).min(CELL_SAMPLES - 1);
                let j = ((fv * n) as usize).min(CELL_SAMPLES - 1);
                self.table[j * CELL_SAMPLES + i]
            }
            ScreenKind::Stochastic => {
                let m = FM_SIZE as i64;
                let d = self.dot as i64;
                let i = (x.div_euclid(d)).rem_euclid(m) as usize;
                let j = (y.div_euclid(d)).rem_euclid(m) as usize;
                self.table[j * FM_SIZE + i]
            }
        }
    }

    /// Ink at film pixel (x, y) for an amount 0..=255.
    pub fn ink(&self, x: i64, y: i64, amount: u8) -> bool {
        match amount {
            0 => false,
            255 => true,
            a => a as f32 / 255.0 > self.threshold(x, y),
        }
    }

    /// The angle in degrees (AM only).
    pub fn angle(&self) -> Option<f64> {
        matches!(self.kind, ScreenKind::Am(_)).then_some(self.angle)
    }

    /// As written on the label: "55 lpi 45° round", "stochastic 2 px".
    pub fn describe(&self) -> String {
        match self.kind {
            ScreenKind::Am(shape) => format!(
                "{} lpi {}° {}",
                trim_number(self.lpi),
                trim_number(self.angle),
                match shape {
                    DotShape::Round => "round",
                    DotShape::Elliptical => "elliptical",
                }
            ),
            ScreenKind::Stochastic => format!("stochastic {} px dot", self.dot),
        }
    }
}

/// The sampling shift of AM cell (cu, cv), in film pixels along the cell's axes, each in
/// −½..½: a fixed pseudo-random value (SplitMix64 of the cell and the seed).
fn cell_shift(cu: i64, cv: i64, seed: u64) -> (f64, f64) {
    let mix = |mut z: u64| {
        z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    };
    let h = mix(mix(mix(seed) ^ cu as u64) ^ (cv as u64).rotate_left(32));
    let a = (h >> 40) as f64 / (1u64 << 24) as f64 - 0.5;
    let b = ((h >> 16) & 0xFF_FFFF) as f64 / (1u64 << 24) as f64 - 0.5;
    (a, b)
}

/// A number with at most two decimals and no trailing zeros.
pub(crate) fn trim_number(v: f64) -> String {
    let s = format!("{v:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

/// The spot value at cell position (x, y), both in −½..½ (lower inks first).
pub(crate) fn spot(shape: DotShape, x: f64, y: f64) -> f64 {
    match shape {
        DotShape::Round => {
            if x.abs() + y.abs() <= 0.5 {
                x * x + y * y
            } else {
                let (cx, cy) = (0.5 - x.abs(), 0.5 - y.abs());
                1.0 - (cx * cx + cy * cy)
            }
        }
        DotShape::Elliptical => {
            let yr = y / ELLIPSE_RATIO;
            x * x + yr * yr
        }
    }
}

/// Thresholds of a cell: the rank of each sample's spot value, as a share of the cell.
fn am_table(shape: DotShape) -> Vec<f32> {
    let n = CELL_SAMPLES;
    let mut order: Vec<(f64, usize)> = (0..n * n)
        .map(|k| {
            let (i, j) = (k % n, k / n);
            let x = (i as f64 + 0.5) / n as f64 - 0.5;
            let y = (j as f64 + 0.5) / n as f64 - 0.5;
            (spot(shape, x, y), k)
        })
        .collect();
    order.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let mut table = vec![0f32; n * n];
    let total = (n * n) as f64;
    for (rank, &(_, k)) in order.iter().enumerate() {
        table[k] = ((rank as f64 + 0.5) / total) as f32;
    }
    table
}

/// A void-and-cluster threshold matrix of side `m` (toroidal Gaussian filter σ = 1.5).
fn void_and_cluster(m: usize, seed: u64) -> Vec<f32> {
    let n = m * m;
    // Toroidal Gaussian kernel by offset.
    let sigma = 1.5f64;
    let mut kernel = vec![0f64; n];
    for dy in 0..m {
        for dx in 0..m {
            let ddx = dx.min(m - dx) as f64;
            let ddy = dy.min(m - dy) as f64;
            kernel[dy * m + dx] = (-(ddx * ddx + ddy * ddy) / (2.0 * sigma * sigma)).exp();
        }
    }
    let update = |energy: &mut [f64], p: usize, sign: f64| {
        let (px, py) = (p % m, p / m);
        for y in 0..m {
            let dy = (y + m - py) % m;
            for x in 0..m {
                let dx = (x + m - px) % m;
                energy[y * m + x] += sign * kernel[dy * m + dx];
            }
        }
    };
    // Tightest cluster: the ink position of highest energy; largest void: the clear
    // position of lowest energy (first index on ties).
    let tightest = |energy: &[f64], ink: &[bool]| -> usize {
        let mut best = (f64::NEG_INFINITY, 0);
        for p in 0..n {
            if ink[p] && energy[p] > best.0 {
                best = (energy[p], p);
            }
        }
        best.1
    };
    let largest_void = |energy: &[f64], ink: &[bool]| -> usize {
        let mut best = (f64::INFINITY, 0);
        for p in 0..n {
            if !ink[p] && energy[p] < best.0 {
                best = (energy[p], p);
            }
        }
        best.1
    };

    // Initial pattern: about a tenth of the positions, drawn with the seed.
    let mut rng = Rng::new(seed, 0xF11A);
    let ones = (n / 10).max(1);
    let mut ink = vec![false; n];
    let mut placed = 0;
    while placed < ones {
        let p = rng.below(n);
        if !ink[p] {
            ink[p] = true;
            placed += 1;
        }
    }
    let mut energy = vec![0f64; n];
    for (p, _) in ink.iter().enumerate().filter(|(_, &i)| i) {
        update(&mut energy, p, 1.0);
    }
    // Spread the initial pattern: move the tightest cluster into the largest void until
    // they coincide (bounded, in case of a cycle).
    for _ in 0..n {
        let c = tightest(&energy, &ink);
        ink[c] = false;
        update(&mut energy, c, -1.0);
        let v = largest_void(&energy, &ink);
        ink[v] = true;
        update(&mut energy, v, 1.0);
        if v == c {
            break;
        }
    }
    let mut rank = vec![0usize; n];
    // Phase 1: remove the tightest clusters from a copy, ranks below `ones`.
    {
        let mut ink1 = ink.clone();
        let mut e1 = energy.clone();
        for r in (0..ones).rev() {
            let c = tightest(&e1, &ink1);
            ink1[c] = false;
            update(&mut e1, c, -1.0);
            rank[c] = r;
        }
    }
    // Phases 2 and 3: fill the largest voids (with a Gaussian filter, the tightest cluster
    // of clear positions is the largest void of the ink positions).
    for r in ones..n {
        let v = largest_void(&energy, &ink);
        ink[v] = true;
        update(&mut energy, v, 1.0);
        rank[v] = r;
    }
    rank.iter()
        .map(|&r| ((r as f64 + 0.5) / n as f64) as f32)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn share(table: &[f32], t: f32) -> f64 {
        table.iter().filter(|&&v| t > v).count() as f64 / table.len() as f64
    }

    #[test]
    fn thresholds_are_a_permutation_of_equal_steps() {
        for table in [
            am_table(DotShape::Round),
            am_table(DotShape::Elliptical),
            void_and_cluster(16, 3),
        ] {
            let mut sorted = table.clone();
            sorted.sort_by(f32::total_cmp);
            let n = sorted.len() as f32;
            for (r, v) in sorted.iter().enumerate() {
                assert!((v - (r as f32 + 0.5) / n).abs() < 1e-6);
            }
            for t in [0.1f32, 0.5, 0.9] {
                assert!((share(&table, t) - t as f64).abs() < 1.0 / 256.0);
            }
        }
    }

    #[test]
    fn the_round_dot_is_a_disc_up_to_39_per_cent() {
        // Geometry of the spot: a disc of area a has radius √(a/π); it fits inside the
        // diamond |x| + |y| ≤ ½ while a ≤ π/8.
        let table = am_table(DotShape::Round);
        let n = CELL_SAMPLES;
        for a in [0.05f64, 0.2, 0.35] {
            let r = (a / std::f64::consts::PI).sqrt();
            for j in 0..n {
                for i in 0..n {
                    let x = (i as f64 + 0.5) / n as f64 - 0.5;
                    let y = (j as f64 + 0.5) / n as f64 - 0.5;
                    let d = (x * x + y * y).sqrt();
                    let inked = (a as f32) > table[j * n + i];
                    if d < r - 1.5 / n as f64 {
                        assert!(inked, "a = {a}: ({x}, {y}) inside the disc");
                    }
                    if d > r + 1.5 / n as f64 {
                        assert!(!inked, "a = {a}: ({x}, {y}) outside the disc");
                    }
                }
            }
        }
    }

    #[test]
    fn stochastic_matrices_repeat_for_a_seed() {
        assert_eq!(void_and_cluster(16, 9), void_and_cluster(16, 9));
        assert_ne!(void_and_cluster(16, 9), void_and_cluster(16, 10));
    }

    #[test]
    fn angles_follow_the_common_sequence() {
        assert_eq!(auto_angles(3), vec![45.0, 75.0, 15.0]);
        assert_eq!(auto_angles(5)[4], 45.0);
        let ht = Halftone {
            angles: vec![22.5],
            ..Halftone::default()
        };
        assert_eq!(ht.angles_for(2), vec![22.5, 22.5]);
        assert_eq!(trim_number(22.5), "22.5");
        assert_eq!(trim_number(45.0), "45");
    }
}
