//! Weighted, seeded k-means++ seeding (Arthur & Vassilvitskii 2007), greedy variant
//! with 2 + ⌊ln k⌋ candidate draws per centre.

use super::{dist2, Dataset, CHUNK};
use crate::rng::Rng;
use rayon::prelude::*;

/// Draws an index with probability proportional to `mass[i]` (total `total` > 0).
fn draw(mass_cumsum: &[f64], rng: &mut Rng) -> usize {
    let total = *mass_cumsum.last().unwrap();
    let u = rng.uniform() * total;
    // First index whose cumulative mass exceeds u: it has positive mass.
    let i = mass_cumsum.partition_point(|&c| c <= u);
    i.min(mass_cumsum.len() - 1)
}

fn cumsum(values: impl Iterator<Item = f64>, out: &mut Vec<f64>) {
    out.clear();
    let mut s = 0.0;
    for v in values {
        s += v;
        out.push(s);
    }
}

/// Chooses up to `k` initial means (flat, `k × dim`). Returns fewer when the data
/// has fewer than `k` distinct rows with positive weight.
pub fn kmeans_plus_plus(data: &Dataset, k: usize, rng: &mut Rng) -> Vec<f32> {
    let n = data.len();
    let dim = data.dim();
    let mut means: Vec<f32> = Vec::with_capacity(k * dim);
    if n == 0 || k == 0 {
        return means;
    }
    let mut cum = Vec::with_capacity(n);
    cumsum((0..n).map(|i| data.weight(i)), &mut cum);
    if *cum.last().unwrap() <= 0.0 {
        return means;
    }
    let first = draw(&cum, rng);
    means.extend_from_slice(data.row(first));
    let mut closest: Vec<f32> = vec![0.0; n];
    closest
        .par_chunks_mut(CHUNK)
        .enumerate()
        .for_each(|(c, out)| {
            for (o, slot) in out.iter_mut().enumerate() {
                *slot = dist2(data.row(c * CHUNK + o), &means[..dim]);
            }
        });
    let trials = 2 + (k as f64).ln().floor() as usize;
    while means.len() < k * dim {
        cumsum((0..n).map(|i| data.weight(i) * closest[i] as f64), &mut cum);
        if *cum.last().unwrap() <= 0.0 {
            break; // every remaining row sits on a chosen mean
        }
        let candidates: Vec<usize> = (0..trials).map(|_| draw(&cum, rng)).collect();
        // Potential of each candidate: weighted sum of min(current, distance to candidate).
        let mut best: Option<(f64, usize)> = None;
        for &cand in &candidates {
            let c = data.row(cand);
            let partial: Vec<f64> = closest
                .par_chunks(CHUNK)
                .enumerate()
                .map(|(ci, cl)| {
                    let mut s = 0.0f64;
                    for (o, &d_old) in cl.iter().enumerate() {
                        let i = ci * CHUNK + o;
                        let d = dist2(data.row(i), c).min(d_old);
                        s += data.weight(i) * d as f64;
                    }
                    s
                })
                .collect();
            let pot: f64 = partial.iter().sum();
            if best.is_none_or(|(bp, _)| pot < bp) {
                best = Some((pot, cand));
            }
        }
        let (_, chosen) = best.unwrap();
        let c = data.row(chosen).to_vec();
        closest
            .par_chunks_mut(CHUNK)
            .enumerate()
            .for_each(|(ci, cl)| {
                for (o, slot) in cl.iter_mut().enumerate() {
                    let d = dist2(data.row(ci * CHUNK + o), &c);
                    if d < *slot {
                        *slot = d;
                    }
                }
            });
        means.extend_from_slice(&c);
    }
    means
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn picks_distinct_points_and_stops_when_exhausted() {
        // Three distinct rows, one of them with zero weight: at most two means.
        let rows = [0.0f32, 0.0, 10.0, 10.0, 5.0, 5.0];
        let w = [3.0, 1.0, 0.0];
        let data = Dataset::new(&rows, 2, Some(&w)).unwrap();
        let m = kmeans_plus_plus(&data, 5, &mut Rng::new(1, 0));
        assert_eq!(m.len(), 4);
        assert_ne!(m[0..2], m[2..4]);
        assert!(!m.chunks(2).any(|c| c == [5.0, 5.0]));
    }

    #[test]
    fn same_seed_same_centres() {
        let rows: Vec<f32> = (0..500).map(|i| ((i * 37) % 101) as f32).collect();
        let data = Dataset::new(&rows, 2, None).unwrap();
        let a = kmeans_plus_plus(&data, 6, &mut Rng::new(9, 0));
        let b = kmeans_plus_plus(&data, 6, &mut Rng::new(9, 0));
        assert_eq!(a, b);
    }
}
