//! Seeded 2-D sets of Gaussian clusters with known centres, and the Centroid Index
//! (Fränti, Rezaei & Zhao 2014, "Centroid index: cluster level similarity measure",
//! Pattern Recognition 47(9):3034–3045). Shared by `tests/engine_quality.rs` and the
//! benchmark `benches/refine_study.rs` (included by path).
//!
//! The sets vary what the engine's quality issue names: the cluster count (15 to 100),
//! the overlap (distance between nearest centres in units of the cluster spread), and the
//! size balance (cluster sizes spanning up to 1:20).

#![allow(dead_code)]

use chromasift::rng::Rng;

/// How one set is drawn.
#[derive(Debug, Clone, Copy)]
pub struct Spec {
    /// Short name, for messages and tables.
    pub name: &'static str,
    /// Number of clusters.
    pub k: usize,
    /// Points per cluster on average.
    pub per_cluster: usize,
    /// Smallest distance between two centres, in units of the standard deviation (per
    /// axis) of the wider of the two clusters: 8 well apart, 4 touching, 3 overlapping.
    pub separation: f64,
    /// Largest cluster size over smallest (1: all equal); sizes are spread geometrically.
    pub balance: f64,
    /// Largest per-cluster standard deviation over smallest (1: all equal).
    pub spread_ratio: f64,
}

/// The twelve sets of the quality tests and the benchmark.
pub const SPECS: [Spec; 12] = [
    spec("k15-apart", 15, 200, 8.0, 1.0, 1.0),
    spec("k15-touching", 15, 200, 4.5, 1.0, 1.0),
    spec("k15-overlap", 15, 200, 3.5, 1.0, 1.0),
    spec("k20-apart", 20, 150, 7.0, 1.0, 1.0),
    spec("k35-touching", 35, 120, 5.0, 1.0, 1.0),
    spec("k50-apart", 50, 100, 7.0, 1.0, 1.0),
    spec("k25-unbalanced", 25, 150, 7.0, 20.0, 1.0),
    spec("k50-unbalanced", 50, 100, 6.0, 20.0, 1.0),
    spec("k30-spreads", 30, 120, 6.0, 1.0, 3.0),
    spec("k100-apart", 100, 80, 7.0, 1.0, 1.0),
    spec("k100-touching", 100, 80, 5.0, 1.0, 1.0),
    spec("k100-unbalanced", 100, 80, 7.0, 20.0, 1.0),
];

const fn spec(
    name: &'static str,
    k: usize,
    per_cluster: usize,
    separation: f64,
    balance: f64,
    spread_ratio: f64,
) -> Spec {
    Spec {
        name,
        k,
        per_cluster,
        separation,
        balance,
        spread_ratio,
    }
}

/// One drawn set: `n × 2` points and the `k × 2` true centres.
#[derive(Debug, Clone)]
pub struct Set {
    pub spec: Spec,
    pub points: Vec<f32>,
    pub centres: Vec<f64>,
    /// True cluster of each point.
    pub truth: Vec<u32>,
}

/// A standard normal draw (Box–Muller).
fn normal(r: &mut Rng) -> f64 {
    let u1 = 1.0 - r.uniform(); // (0, 1]
    let u2 = r.uniform();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// Draws the set of `spec` for `seed`. Centres are placed one by one uniformly in a
/// square of side 1000 · √(k/15), each redrawn until it keeps the required distance to
/// every centre already placed (the spread of each cluster is then set from that distance).
pub fn draw(spec: Spec, seed: u64) -> Set {
    let mut r = Rng::new(seed, spec.k as u64);
    let k = spec.k;
    let side = 1000.0 * (k as f64 / 15.0).sqrt();
    // Spreads: geometric from 1 to spread_ratio, in a random order.
    let mut spreads: Vec<f64> = (0..k)
        .map(|j| spec.spread_ratio.powf(j as f64 / (k - 1).max(1) as f64))
        .collect();
    shuffle(&mut spreads, &mut r);
    // Unit spread σ0 chosen so the centres fit: the densest packing the rejection loop
    // reaches comfortably puts k centres at distance ≈ 0.6 · side/√k.
    let gap = 0.6 * side / (k as f64).sqrt();
    let sigma0 = gap / (spec.separation * spec.spread_ratio);
    let mut centres: Vec<f64> = Vec::with_capacity(2 * k);
    for j in 0..k {
        let s = spreads[j] * sigma0;
        let mut tries = 0;
        loop {
            tries += 1;
            assert!(tries < 100_000, "cannot place {} centres", k);
            let c = [
                (0.05 + 0.9 * r.uniform()) * side,
                (0.05 + 0.9 * r.uniform()) * side,
            ];
            let ok = (0..j).all(|o| {
                let need = spec.separation * (spreads[o] * sigma0).max(s);
                let dx = c[0] - centres[2 * o];
                let dy = c[1] - centres[2 * o + 1];
                dx * dx + dy * dy >= need * need
            });
            if ok {
                centres.extend(c);
                break;
            }
        }
    }
    // Sizes: geometric from 1 to balance, in a random order, scaled to k · per_cluster.
    let mut sizes: Vec<f64> = (0..k)
        .map(|j| spec.balance.powf(j as f64 / (k - 1).max(1) as f64))
        .collect();
    shuffle(&mut sizes, &mut r);
    let total: f64 = sizes.iter().sum();
    let counts: Vec<usize> = sizes
        .iter()
        .map(|s| ((s / total * (k * spec.per_cluster) as f64).round() as usize).max(10))
        .collect();
    let mut points = Vec::new();
    let mut truth = Vec::new();
    for j in 0..k {
        let s = spreads[j] * sigma0;
        for _ in 0..counts[j] {
            points.push((centres[2 * j] + s * normal(&mut r)) as f32);
            points.push((centres[2 * j + 1] + s * normal(&mut r)) as f32);
            truth.push(j as u32);
        }
    }
    // Points in a random order, as a file would hold them.
    let n = truth.len();
    let mut order: Vec<usize> = (0..n).collect();
    shuffle(&mut order, &mut r);
    let points = order
        .iter()
        .flat_map(|&i| [points[2 * i], points[2 * i + 1]])
        .collect();
    let truth = order.iter().map(|&i| truth[i]).collect();
    Set {
        spec,
        points,
        centres,
        truth,
    }
}

fn shuffle<T>(v: &mut [T], r: &mut Rng) {
    for i in (1..v.len()).rev() {
        let j = r.below(i + 1);
        v.swap(i, j);
    }
}

/// Orphans when every centre of `from` is mapped to its nearest centre of `to`: the
/// centres of `to` that nothing maps to.
fn orphans(from: &[f64], to: &[f64], dim: usize) -> usize {
    let nt = to.len() / dim;
    let mut hit = vec![false; nt];
    for a in from.chunks_exact(dim) {
        let mut best = (f64::INFINITY, 0);
        for (j, b) in to.chunks_exact(dim).enumerate() {
            let d: f64 = a.iter().zip(b).map(|(x, y)| (x - y).powi(2)).sum();
            if d < best.0 {
                best = (d, j);
            }
        }
        hit[best.1] = true;
    }
    hit.iter().filter(|h| !**h).count()
}

/// Centroid Index (Fränti, Rezaei & Zhao 2014): the larger of the two directed orphan
/// counts. 0 when each set of centres has one partner per centre in the other.
pub fn centroid_index(a: &[f64], b: &[f64], dim: usize) -> usize {
    orphans(a, b, dim).max(orphans(b, a, dim))
}

/// Weighted SSE of `means` on `points` (each point to its nearest mean), in f64.
pub fn sse(points: &[f32], means: &[f64], dim: usize) -> f64 {
    points
        .chunks_exact(dim)
        .map(|x| {
            means
                .chunks_exact(dim)
                .map(|m| {
                    x.iter()
                        .zip(m)
                        .map(|(&v, &c)| (v as f64 - c).powi(2))
                        .sum::<f64>()
                })
                .fold(f64::INFINITY, f64::min)
        })
        .sum()
}
