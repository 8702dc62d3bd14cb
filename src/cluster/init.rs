//! Weighted, seeded k-means++ seeding (Arthur & Vassilvitskii 2007), greedy variant
//! with 2 + ⌊ln k⌋ candidate draws per centre (as in scikit-learn).

use super::{dist2, Dataset, CHUNK};
use crate::rng::Rng;
use rayon::prelude::*;

/// Draws a row with probability proportional to its mass `w_i · d_i` (`d` = `None`
/// means 1), given the per-chunk sums of that mass. The chunk is found on the running
/// sum of chunk sums, then the row by the same running sum inside the chunk, so only one
/// chunk is scanned and the result does not depend on the thread count.
pub(super) fn draw(data: &Dataset, d: Option<&[f32]>, chunk_sums: &[f64], rng: &mut Rng) -> usize {
    let total: f64 = chunk_sums.iter().sum();
    let mut u = rng.uniform() * total;
    let mut c = 0;
    // Chunk whose cumulative mass passes u (the last one with mass, on rounding).
    let last_with_mass = chunk_sums.iter().rposition(|&m| m > 0.0).unwrap_or(0);
    while c < last_with_mass && u >= chunk_sums[c] {
        u -= chunk_sums[c];
        c += 1;
    }
    let lo = c * CHUNK;
    let hi = ((c + 1) * CHUNK).min(data.len());
    let mass = |i: usize| data.weight(i) * d.map_or(1.0, |d| d[i] as f64);
    let mut s = 0.0f64;
    let mut last = None;
    for i in lo..hi {
        let m = mass(i);
        if m > 0.0 {
            s += m;
            last = Some(i);
            if s > u {
                return i;
            }
        }
    }
    last.unwrap_or(lo)
}

/// For each candidate `t`: `out[t][i] = min(closest[i], ‖x_i − c_t‖²)`; returns, per
/// candidate, the per-chunk sums of `w_i · out[t][i]` (fixed-size loops for dimension D).
fn evaluate_fixed<const D: usize>(
    data: &Dataset,
    closest: &[f32],
    cands: &[f32],
    out: &mut [Vec<f32>],
) -> Vec<Vec<f64>> {
    let n = data.len();
    let t_n = out.len();
    let rows = data.rows();
    let chunks = n.div_ceil(CHUNK);
    let mut sums = vec![vec![0.0f64; chunks]; t_n];
    // Split every candidate's output into chunks and walk them together.
    let mut outs: Vec<std::slice::ChunksMut<f32>> =
        out.iter_mut().map(|o| o.chunks_mut(CHUNK)).collect();
    let mut work: Vec<(usize, Vec<&mut [f32]>)> = (0..chunks)
        .map(|c| (c, outs.iter_mut().map(|o| o.next().unwrap()).collect()))
        .collect();
    let partial: Vec<(usize, Vec<f64>)> = work
        .par_iter_mut()
        .map(|(c, outs)| {
            let c = *c;
            let mut s = vec![0.0f64; t_n];
            let base = c * CHUNK;
            for o in 0..outs[0].len() {
                let i = base + o;
                let x: &[f32; D] = rows[i * D..(i + 1) * D].try_into().unwrap();
                let d_old = closest[i];
                let w = data.weight(i);
                for (t, cand) in cands.chunks_exact(D).enumerate() {
                    let mut d = 0.0f32;
                    for k in 0..D {
                        let v = x[k] - cand[k];
                        d += v * v;
                    }
                    let d = d.min(d_old);
                    outs[t][o] = d;
                    s[t] += w * d as f64;
                }
            }
            (c, s)
        })
        .collect();
    for (c, s) in partial {
        for t in 0..t_n {
            sums[t][c] = s[t];
        }
    }
    sums
}

// Kernel twin of `evaluate_fixed` (deliberate): the same arithmetic for any dimension;
// the fixed-dimension copy lets the compiler unroll the distance loop for d ≤ 8.
fn evaluate_any(
    data: &Dataset,
    closest: &[f32],
    cands: &[f32],
    out: &mut [Vec<f32>],
) -> Vec<Vec<f64>> {
    let n = data.len();
    let dim = data.dim();
    let chunks = n.div_ceil(CHUNK);
    let mut sums = vec![vec![0.0f64; chunks]; out.len()];
    for (t, o) in out.iter_mut().enumerate() {
        let cand = &cands[t * dim..(t + 1) * dim];
        let s: Vec<f64> = o
            .par_chunks_mut(CHUNK)
            .enumerate()
            .map(|(c, oc)| {
                let mut s = 0.0f64;
                for (k, slot) in oc.iter_mut().enumerate() {
                    let i = c * CHUNK + k;
                    let d = dist2(data.row(i), cand).min(closest[i]);
                    *slot = d;
                    s += data.weight(i) * d as f64;
                }
                s
            })
            .collect();
        sums[t] = s;
    }
    sums
}

/// One pass over the data for all candidates of a round.
fn evaluate(data: &Dataset, closest: &[f32], cands: &[f32], out: &mut [Vec<f32>]) -> Vec<Vec<f64>> {
    match data.dim() {
        1 => evaluate_fixed::<1>(data, closest, cands, out),
        2 => evaluate_fixed::<2>(data, closest, cands, out),
        3 => evaluate_fixed::<3>(data, closest, cands, out),
        4 => evaluate_fixed::<4>(data, closest, cands, out),
        5 => evaluate_fixed::<5>(data, closest, cands, out),
        6 => evaluate_fixed::<6>(data, closest, cands, out),
        _ => evaluate_any(data, closest, cands, out),
    }
}

/// Chooses up to `k` initial means (flat, `k × dim`). Returns fewer when the data
/// has fewer than `k` distinct rows with positive weight.
///
/// Each round draws 2 + ⌊ln k⌋ candidates with probability ∝ w·D² and keeps the one
/// that lowers the potential Σ w·D² most (earliest on ties). All candidates of a round
/// are scored in one pass over the data, and the kept candidate's distances become the
/// next round's D², so a round costs one pass.
pub fn kmeans_plus_plus(data: &Dataset, k: usize, rng: &mut Rng) -> Vec<f32> {
    kmeans_plus_plus_from(data, &[], k, rng)
}

/// As [`kmeans_plus_plus`], keeping the given means (`j × dim`, j ≤ k) and adding the
/// rest by the same greedy D² rounds: the warm start of a sweep over K.
pub fn kmeans_plus_plus_from(data: &Dataset, start: &[f32], k: usize, rng: &mut Rng) -> Vec<f32> {
    let n = data.len();
    let dim = data.dim();
    let mut means: Vec<f32> = Vec::with_capacity(k * dim);
    if n == 0 || k == 0 {
        return means;
    }
    let weight_sums: Vec<f64> = (0..n.div_ceil(CHUNK))
        .map(|c| {
            (c * CHUNK..((c + 1) * CHUNK).min(n))
                .map(|i| data.weight(i))
                .sum()
        })
        .collect();
    if weight_sums.iter().sum::<f64>() <= 0.0 {
        return means;
    }
    let start = &start[..(start.len() / dim).min(k) * dim];
    if start.is_empty() {
        let first = draw(data, None, &weight_sums, rng);
        means.extend_from_slice(data.row(first));
    } else {
        means.extend_from_slice(start);
    }
    // Squared distance of every row to its nearest mean so far, and per-chunk sums of
    // w·D² (one pass).
    let mut closest = vec![0.0f32; n];
    let chunk_sums: Vec<f64> = closest
        .par_chunks_mut(CHUNK)
        .enumerate()
        .map(|(c, out)| {
            let mut s = 0.0f64;
            for (o, slot) in out.iter_mut().enumerate() {
                let i = c * CHUNK + o;
                *slot = super::nearest_two(data.row(i), &means, dim).1;
                s += data.weight(i) * *slot as f64;
            }
            s
        })
        .collect();
    let mut chunk_sums = chunk_sums;
    let trials = 2 + (k as f64).ln().floor() as usize;
    let mut scratch: Vec<Vec<f32>> = vec![vec![0.0f32; n]; trials];
    while means.len() < k * dim {
        if chunk_sums.iter().sum::<f64>() <= 0.0 {
            break; // every remaining row sits on a chosen mean
        }
        let cands: Vec<f32> = (0..trials)
            .flat_map(|_| {
                data.row(draw(data, Some(&closest), &chunk_sums, rng))
                    .to_vec()
            })
            .collect();
        let sums = evaluate(data, &closest, &cands, &mut scratch);
        let pots: Vec<f64> = sums.iter().map(|s| s.iter().sum()).collect();
        let mut best = 0;
        for t in 1..trials {
            if pots[t] < pots[best] {
                best = t;
            }
        }
        means.extend_from_slice(&cands[best * dim..(best + 1) * dim]);
        std::mem::swap(&mut closest, &mut scratch[best]);
        chunk_sums = sums.into_iter().nth(best).unwrap();
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
    fn extending_keeps_the_given_means() {
        let rows: Vec<f32> = (0..400).map(|i| ((i * 53) % 97) as f32).collect();
        let data = Dataset::new(&rows, 2, None).unwrap();
        let three = kmeans_plus_plus(&data, 3, &mut Rng::new(4, 0));
        let five = kmeans_plus_plus_from(&data, &three, 5, &mut Rng::new(4, 1));
        assert_eq!(five.len(), 10);
        assert_eq!(&five[..6], &three[..]);
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
