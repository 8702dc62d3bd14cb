//! How far the means moved in one Lloyd update, and the sums of those moves since the last
//! full pass: what the bound tests of Hamerly (2010) read to skip rows whose nearest mean
//! cannot have changed.

use super::dist2;

/// How far the means moved in the last update, for the bound test of the bounded pass.
pub(super) struct Moves {
    /// Distance each mean moved.
    shift: Vec<f64>,
    /// The mean that moved most, and the largest and second-largest moves.
    most: usize,
    p1: f64,
    p2: f64,
    /// Half the distance from each mean to its nearest other mean.
    pub(super) half_gap: Vec<f64>,
    /// Since the last full pass, per cluster: the summed moves of its mean (the upper
    /// bound of a row in it grows by this) and the summed largest move of any other mean
    /// (its lower bound shrinks by this). Rows store bounds net of these sums, so a row
    /// the bounds settle is only read, never written.
    pub(super) up: Vec<f64>,
    pub(super) down: Vec<f64>,
}

impl Moves {
    pub(super) fn new(old: &[f64], means: &[f64], means32: &[f32], dim: usize) -> Moves {
        let k = means.len() / dim;
        let shift: Vec<f64> = (0..k)
            .map(|j| {
                (0..dim)
                    .map(|d| (means[j * dim + d] - old[j * dim + d]).powi(2))
                    .sum::<f64>()
                    .sqrt()
            })
            .collect();
        let (mut p1, mut most, mut p2) = (0.0f64, usize::MAX, 0.0f64);
        for (j, &p) in shift.iter().enumerate() {
            if p > p1 {
                p2 = p1;
                p1 = p;
                most = j;
            } else if p > p2 {
                p2 = p;
            }
        }
        let half_gap: Vec<f64> = (0..k)
            .map(|j| {
                let mj = &means32[j * dim..(j + 1) * dim];
                (0..k)
                    .filter(|&o| o != j)
                    .map(|o| (dist2(mj, &means32[o * dim..(o + 1) * dim]) as f64).sqrt())
                    .fold(f64::INFINITY, f64::min)
                    * 0.5
            })
            .collect();
        Moves {
            shift,
            most,
            p1,
            p2,
            half_gap,
            up: vec![0.0; k],
            down: vec![0.0; k],
        }
    }

    /// Adds this update's moves to the sums `up` and `down` carried since the last full
    /// pass, and keeps the new sums.
    pub(super) fn accumulate(&mut self, up: &mut [f64], down: &mut [f64]) {
        for j in 0..up.len() {
            up[j] += self.shift[j];
            down[j] += if j == self.most { self.p2 } else { self.p1 };
        }
        self.up = up.to_vec();
        self.down = down.to_vec();
    }
}
