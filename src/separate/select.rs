//! Choosing K inks from a library: minimise the total CIEDE2000 between every artwork
//! pixel (weighted histogram entry) and its nearest chosen ink (or the substrate).
//!
//! Exhaustive search when the number of subsets is small; otherwise swap descent over
//! the library (k-medoids style, with the FastPAM1 trick of Schubert & Rousseeuw 2019 so
//! that one round costs O(entries × candidates)), started from k-means centres matched to
//! inks and from greedy forward selection, keeping the better.

use crate::cluster::{fit, Dataset, EngineOptions};
use crate::colour::delta_e2000;
use crate::colour::inks::Ink;
use rayon::prelude::*;

const CHUNK: usize = 4096;

/// ΔE2000 from every entry to every ink (and to the substrate, when there is one).
#[derive(Debug, Clone)]
pub struct CostTable {
    /// Entries.
    pub n: usize,
    /// Inks in the library.
    pub m: usize,
    /// `n × m`, row-major.
    pub cost: Vec<f32>,
    /// Pixels per entry.
    pub weights: Vec<f64>,
    /// ΔE2000 to the substrate per entry (none: every pixel must take an ink).
    pub substrate: Option<Vec<f32>>,
}

impl CostTable {
    /// Computes the table (in parallel, deterministic).
    pub fn new(
        entry_labs: &[[f64; 3]],
        weights: &[f64],
        inks: &[Ink],
        substrate_lab: Option<[f64; 3]>,
    ) -> Self {
        let m = inks.len();
        let mut cost = vec![0.0f32; entry_labs.len() * m];
        cost.par_chunks_mut(m * 1024)
            .enumerate()
            .for_each(|(c, block)| {
                for (o, row) in block.chunks_mut(m).enumerate() {
                    let lab = entry_labs[c * 1024 + o];
                    for (slot, ink) in row.iter_mut().zip(inks) {
                        *slot = delta_e2000(lab, ink.lab_d50) as f32;
                    }
                }
            });
        let substrate = substrate_lab.map(|s| {
            entry_labs
                .par_iter()
                .map(|&l| delta_e2000(l, s) as f32)
                .collect()
        });
        CostTable {
            n: entry_labs.len(),
            m,
            cost,
            weights: weights.to_vec(),
            substrate,
        }
    }

    #[inline]
    fn row(&self, e: usize) -> &[f32] {
        &self.cost[e * self.m..(e + 1) * self.m]
    }

    #[inline]
    fn floor(&self, e: usize) -> f32 {
        self.substrate.as_ref().map_or(f32::INFINITY, |s| s[e])
    }

    /// Pixels farther than `limit` (ΔE2000) from their nearest choice of `set` and the
    /// substrate.
    pub fn far_pixels(&self, set: &[usize], limit: f32) -> f64 {
        self.sum_nearest(set, |w, best| if best > limit { w } else { 0.0 })
    }

    /// Total weighted ΔE2000 of a set of inks (each entry to its nearest choice).
    pub fn objective(&self, set: &[usize]) -> f64 {
        self.sum_nearest(set, |w, best| w * best as f64)
    }

    /// Σ `term(weight, ΔE2000 to the nearest of set and substrate)` over the entries, in
    /// chunks summed in order (deterministic on any thread count).
    fn sum_nearest(&self, set: &[usize], term: impl Fn(f64, f32) -> f64 + Sync) -> f64 {
        let parts: Vec<f64> = (0..self.n.div_ceil(CHUNK))
            .into_par_iter()
            .map(|c| {
                let mut s = 0.0f64;
                for e in c * CHUNK..((c + 1) * CHUNK).min(self.n) {
                    let row = self.row(e);
                    let best = set.iter().map(|&i| row[i]).fold(self.floor(e), f32::min);
                    s += term(self.weights[e], best);
                }
                s
            })
            .collect();
        parts.iter().sum()
    }
}

/// How the set was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Every subset evaluated: the best set.
    Exhaustive,
    /// Swap descent from two starts: a local optimum.
    Swaps,
    /// Every ink in the library (`--all`).
    All,
}

/// The chosen inks (library indices, ascending) and the objective.
#[derive(Debug, Clone, PartialEq)]
pub struct Selection {
    pub chosen: Vec<usize>,
    pub total_delta_e: f64,
    pub method: Method,
}

fn binomial(n: usize, k: usize) -> f64 {
    (0..k).fold(1.0, |acc, i| acc * (n - i) as f64 / (i + 1) as f64)
}

/// Evaluations (subsets × entries) up to which the exhaustive search is used.
pub const EXHAUSTIVE_BUDGET: f64 = 2e8;

/// All r-subsets of 0..n in lexicographic order.
fn combinations(n: usize, r: usize) -> Vec<Vec<usize>> {
    let mut out = Vec::new();
    if r > n {
        return out;
    }
    let mut idx: Vec<usize> = (0..r).collect();
    loop {
        out.push(idx.clone());
        let mut i = r;
        while i > 0 && idx[i - 1] == i - 1 + n - r {
            i -= 1;
        }
        if i == 0 {
            break;
        }
        idx[i - 1] += 1;
        for j in i..r {
            idx[j] = idx[j - 1] + 1;
        }
    }
    out
}

/// Best subset by trying all of them (forced inks always in).
pub fn choose_exhaustive(t: &CostTable, k: usize, forced: &[usize]) -> Selection {
    let free: Vec<usize> = (0..t.m).filter(|i| !forced.contains(i)).collect();
    let r = k - forced.len();
    let combos: Vec<Vec<usize>> = combinations(free.len(), r)
        .into_iter()
        .map(|c| c.iter().map(|&i| free[i]).collect())
        .collect();
    let best = combos
        .par_iter()
        .enumerate()
        .map(|(ci, c)| {
            let mut set = forced.to_vec();
            set.extend_from_slice(c);
            // Sequential sum per subset: independent of the thread count.
            let mut s = 0.0f64;
            for e in 0..t.n {
                let row = t.row(e);
                let b = set.iter().map(|&i| row[i]).fold(t.floor(e), f32::min);
                s += t.weights[e] * b as f64;
            }
            (s, ci)
        })
        .reduce(
            || (f64::INFINITY, usize::MAX),
            |a, b| {
                if b.0 < a.0 || (b.0 == a.0 && b.1 < a.1) {
                    b
                } else {
                    a
                }
            },
        );
    let mut chosen = forced.to_vec();
    chosen.extend_from_slice(&combos[best.1]);
    chosen.sort_unstable();
    Selection {
        chosen,
        total_delta_e: best.0,
        method: Method::Exhaustive,
    }
}

/// Nearest and second-nearest cost per entry (the substrate counts as a permanent member
/// with index `usize::MAX`).
fn nearest_two(t: &CostTable, set: &[usize]) -> (Vec<f32>, Vec<usize>, Vec<f32>) {
    let mut d1 = vec![0.0f32; t.n];
    let mut n1 = vec![0usize; t.n];
    let mut d2 = vec![0.0f32; t.n];
    d1.par_chunks_mut(CHUNK)
        .zip(n1.par_chunks_mut(CHUNK))
        .zip(d2.par_chunks_mut(CHUNK))
        .enumerate()
        .for_each(|(c, ((a, b), d))| {
            for o in 0..a.len() {
                let e = c * CHUNK + o;
                let row = t.row(e);
                // The two-smallest scan of the engine's nearest-mean kernel (deliberate
                // twin, `cluster::nearest`), here over a subset of one entry's ink costs
                // with the substrate as the floor.
                let (mut best, mut bi, mut second) = (t.floor(e), usize::MAX, f32::INFINITY);
                for &i in set {
                    let v = row[i];
                    if v < best {
                        second = best;
                        best = v;
                        bi = i;
                    } else if v < second {
                        second = v;
                    }
                }
                a[o] = best;
                b[o] = bi;
                d[o] = second;
            }
        });
    (d1, n1, d2)
}

/// Swap descent: repeatedly applies the best improving (remove one free chosen ink, add
/// one unchosen ink) exchange until none improves.
pub fn swap_descent(t: &CostTable, start: &[usize], forced: &[usize]) -> Selection {
    let mut set = start.to_vec();
    let mut total = t.objective(&set);
    loop {
        let (d1, n1, d2) = nearest_two(t, &set);
        let cands: Vec<usize> = (0..t.m).filter(|j| !set.contains(j)).collect();
        let removable: Vec<usize> = set
            .iter()
            .copied()
            .filter(|i| !forced.contains(i))
            .collect();
        if cands.is_empty() || removable.is_empty() {
            break;
        }
        let nc = cands.len();
        // base[j]: change for entries whose nearest is not removed;
        // corr[i][j]: correction for entries whose nearest is i (FastPAM1).
        let pos = |i: usize| removable.iter().position(|&r| r == i);
        let parts: Vec<Vec<f64>> = (0..t.n.div_ceil(CHUNK))
            .into_par_iter()
            .map(|c| {
                let mut acc = vec![0.0f64; nc * (1 + removable.len())];
                for e in c * CHUNK..((c + 1) * CHUNK).min(t.n) {
                    let w = t.weights[e];
                    let row = t.row(e);
                    let slot = if n1[e] == usize::MAX {
                        None
                    } else {
                        pos(n1[e])
                    };
                    for (jj, &j) in cands.iter().enumerate() {
                        let cj = row[j];
                        let shared = (cj - d1[e]).min(0.0) as f64;
                        acc[jj] += w * shared;
                        if let Some(s) = slot {
                            let own = (cj.min(d2[e]) - d1[e]) as f64;
                            acc[nc * (1 + s) + jj] += w * (own - shared);
                        }
                    }
                }
                acc
            })
            .collect();
        let mut acc = vec![0.0f64; nc * (1 + removable.len())];
        for p in parts {
            for (a, b) in acc.iter_mut().zip(p) {
                *a += b;
            }
        }
        let mut best = (0.0f64, usize::MAX, usize::MAX);
        for (s, &i) in removable.iter().enumerate() {
            for (jj, &j) in cands.iter().enumerate() {
                let delta = acc[jj] + acc[nc * (1 + s) + jj];
                if delta < best.0 {
                    best = (delta, i, j);
                }
            }
        }
        if best.1 == usize::MAX || best.0 > -1e-9 * total.max(1.0) {
            break;
        }
        let p = set.iter().position(|&x| x == best.1).unwrap();
        set[p] = best.2;
        let new_total = t.objective(&set);
        if new_total >= total {
            // Rounding made the predicted gain vanish: undo and stop.
            set[p] = best.1;
            break;
        }
        total = new_total;
    }
    set.sort_unstable();
    Selection {
        chosen: set,
        total_delta_e: total,
        method: Method::Swaps,
    }
}

/// Greedy forward selection from the forced inks: each step adds the ink that lowers the
/// objective most (one pass over the entries per candidate).
pub fn greedy_start(t: &CostTable, k: usize, forced: &[usize]) -> Vec<usize> {
    let mut set = forced.to_vec();
    // Current cost of each entry: nearest chosen ink or the substrate.
    let mut current: Vec<f32> = (0..t.n)
        .map(|e| {
            let row = t.row(e);
            set.iter().map(|&i| row[i]).fold(t.floor(e), f32::min)
        })
        .collect();
    while set.len() < k {
        let cands: Vec<usize> = (0..t.m).filter(|j| !set.contains(j)).collect();
        let parts: Vec<Vec<f64>> = (0..t.n.div_ceil(CHUNK))
            .into_par_iter()
            .map(|c| {
                let mut acc = vec![0.0f64; cands.len()];
                let (lo, hi) = (c * CHUNK, ((c + 1) * CHUNK).min(t.n));
                for (e, &cur) in (lo..hi).zip(&current[lo..hi]) {
                    let row = t.row(e);
                    let w = t.weights[e];
                    for (a, &j) in acc.iter_mut().zip(&cands) {
                        *a += w * cur.min(row[j]) as f64;
                    }
                }
                acc
            })
            .collect();
        let mut totals = vec![0.0f64; cands.len()];
        for p in parts {
            for (a, b) in totals.iter_mut().zip(p) {
                *a += b;
            }
        }
        let (best, _) =
            totals
                .iter()
                .enumerate()
                .fold((usize::MAX, f64::INFINITY), |a, (i, &v)| {
                    if v < a.1 {
                        (i, v)
                    } else {
                        a
                    }
                });
        let j = cands[best];
        set.push(j);
        current
            .par_iter_mut()
            .enumerate()
            .for_each(|(e, c)| *c = c.min(t.cost[e * t.m + j]));
    }
    set
}

/// k-means centres (weighted, CIELAB D50) matched to their nearest unchosen inks, heaviest
/// cluster first, after the forced inks.
pub fn kmeans_start(
    entry_labs: &[[f64; 3]],
    weights: &[f64],
    inks: &[Ink],
    k: usize,
    forced: &[usize],
    engine: &EngineOptions,
) -> Vec<usize> {
    let mut set = forced.to_vec();
    let rows: Vec<f32> = entry_labs
        .iter()
        .flat_map(|l| l.map(|v| v as f32))
        .collect();
    if let Ok(data) = Dataset::new(&rows, 3, Some(weights)) {
        if let Ok(params) = engine.params(k).check() {
            if let Ok(model) = fit(&data, &params) {
                let labels = model.predict(&data);
                let mut mass = vec![0.0f64; model.k()];
                for (l, w) in labels.iter().zip(weights) {
                    mass[*l as usize] += w;
                }
                let mut order: Vec<usize> = (0..model.k()).collect();
                order.sort_by(|&a, &b| mass[b].total_cmp(&mass[a]).then(a.cmp(&b)));
                for c in order {
                    if set.len() >= k {
                        break;
                    }
                    let centre = [
                        model.means[c * 3],
                        model.means[c * 3 + 1],
                        model.means[c * 3 + 2],
                    ];
                    let pick = (0..inks.len())
                        .filter(|j| !set.contains(j))
                        .map(|j| (delta_e2000(centre, inks[j].lab_d50), j))
                        .fold(
                            (f64::INFINITY, usize::MAX),
                            |a, b| if b.0 < a.0 { b } else { a },
                        );
                    if pick.1 != usize::MAX {
                        set.push(pick.1);
                    }
                }
            }
        }
    }
    // Fill up (fewer clusters than K) with the inks that help most.
    for j in 0..inks.len() {
        if set.len() >= k {
            break;
        }
        if !set.contains(&j) {
            set.push(j);
        }
    }
    set
}

/// What an ink search works on: the cost table, each entry's CIELAB (D50), the library,
/// how many inks, the inks that must be in, and the engine for the k-means start.
#[derive(Clone, Copy)]
pub struct InkSearch<'a> {
    pub t: &'a CostTable,
    pub entry_labs: &'a [[f64; 3]],
    pub inks: &'a [Ink],
    pub k: usize,
    pub forced: &'a [usize],
    pub engine: &'a EngineOptions,
}

/// Chooses `k` inks (forced ones included): exhaustive when affordable, else swaps from
/// two starts.
pub fn choose(s: &InkSearch<'_>) -> Selection {
    let subsets = binomial(s.t.m - s.forced.len(), s.k - s.forced.len());
    if subsets * s.t.n as f64 <= EXHAUSTIVE_BUDGET {
        return choose_exhaustive(s.t, s.k, s.forced);
    }
    choose_by_swaps(s)
}

/// Swap descent from the k-means start and from the greedy start; the better is kept.
pub fn choose_by_swaps(s: &InkSearch<'_>) -> Selection {
    let InkSearch {
        t,
        entry_labs,
        inks,
        k,
        forced,
        engine,
    } = *s;
    let a = swap_descent(
        t,
        &kmeans_start(entry_labs, &t.weights, inks, k, forced, engine),
        forced,
    );
    let b = swap_descent(t, &greedy_start(t, k, forced), forced);
    if b.total_delta_e < a.total_delta_e {
        b
    } else {
        a
    }
}

/// What [`keep_families`] did.
#[derive(Debug, Clone, PartialEq)]
pub struct KeptInks {
    /// The inks after the swaps (library indices, ascending).
    pub chosen: Vec<usize>,
    /// Swaps made.
    pub swaps: usize,
    /// Families the library can keep (an ink within ΔE2000 6) that the choice lost, before
    /// and after.
    pub lost_before: usize,
    pub lost_after: usize,
}

/// Brings back colour families that the ink choice lost: a family (see
/// [`crate::families`]; CIELAB D50 here, like the inks) is lost when neither a chosen ink
/// nor the substrate (`substrate_lab`, which costs no screen) is within ΔE2000 6 of it
/// although a library ink is. A swap gives up chosen inks that no family needs (none is
/// the only chosen ink within 6 of a family), cheapest first by
/// Σ w·(second-nearest − nearest ΔE2000) of their pixels, and takes each lost family's
/// nearest library ink instead: first all lost families at once, then the worst alone.
/// A swap is kept only if the lost families weigh less: 3 for each clearly lost (2 past
/// the limit), 1 for each just lost; and if it leaves no more pixels rendered farther than
/// [`crate::families::REPORT_DELTA_E`] from their colour than before (a gradient or a
/// large area that is no family of its own is not given up for a small one). Forced inks
/// are never given up, and the number of inks never changes.
/// Returns `None` when nothing was lost or no swap helped.
pub fn keep_families(
    t: &CostTable,
    inks: &[Ink],
    substrate_lab: Option<[f64; 3]>,
    families: &[crate::families::Family],
    chosen: &[usize],
    forced: &[usize],
) -> Option<KeptInks> {
    const LOST: f64 = crate::families::LOST_DELTA_E;
    let paper = |f: usize| substrate_lab.map_or(f64::INFINITY, |s| delta_e2000(families[f].lab, s));
    // Each family's nearest library ink and how close it is (the substrate counts as
    // reaching it, with no ink).
    let best: Vec<(usize, f64)> = (0..families.len())
        .map(|f| {
            let fam = &families[f];
            let ink = inks
                .iter()
                .enumerate()
                .map(|(i, ink)| (i, delta_e2000(fam.lab, ink.lab_d50)))
                .fold(
                    (usize::MAX, f64::INFINITY),
                    |a, b| if b.1 < a.1 { b } else { a },
                );
            (ink.0, ink.1.min(paper(f)))
        })
        .collect();
    let error = |f: usize, set: &[usize]| {
        set.iter()
            .map(|&i| delta_e2000(families[f].lab, inks[i].lab_d50))
            .fold(paper(f), f64::min)
    };
    // A family is lost when its nearest chosen ink is more than ΔE2000 6 away and more
    // than 1 farther than the library's nearest; clearly lost 2 farther still. Lost
    // families (family, its nearest library ink, clearly lost), most pixels first.
    let lost_of = |set: &[usize]| -> Vec<(usize, usize, bool)> {
        let mut v: Vec<(usize, usize, bool)> = (0..families.len())
            .filter_map(|f| {
                let e = error(f, set);
                let (ink, a) = best[f];
                (e > LOST && e > a + 1.0).then_some((f, ink, e > LOST.max(a) + 2.0))
            })
            .collect();
        v.sort_by(|x, y| {
            families[y.0]
                .pixels
                .total_cmp(&families[x.0].pixels)
                .then(x.0.cmp(&y.0))
        });
        v
    };
    let score = |lost: &[(usize, usize, bool)]| -> usize {
        lost.iter()
            .map(|&(_, _, clear)| if clear { 3 } else { 1 })
            .sum()
    };
    let mut set = chosen.to_vec();
    let mut lost = lost_of(&set);
    let mut far = t.far_pixels(&set, crate::families::REPORT_DELTA_E as f32);
    let lost_before = lost.len();
    'rounds: for _ in 0..set.len() {
        if lost.is_empty() {
            break;
        }
        // Give-up order: free inks no family needs, cheapest first; then the other free inks.
        let (d1, nearest, second) = nearest_two(t, &set);
        let mut cost = vec![0.0f64; t.m];
        for e in 0..t.n {
            if nearest[e] != usize::MAX {
                let gap = if second[e].is_finite() {
                    second[e] - d1[e]
                } else {
                    1e3
                };
                cost[nearest[e]] += t.weights[e] * gap as f64;
            }
        }
        // An ink is needed when some family would be more than ΔE2000 6 from the other
        // chosen inks.
        let needed = |i: usize| {
            let others: Vec<usize> = set.iter().copied().filter(|&j| j != i).collect();
            (0..families.len())
                .any(|f| error(f, &others) > LOST && error(f, &others) > error(f, &set))
        };
        let mut free: Vec<usize> = set
            .iter()
            .copied()
            .filter(|i| !forced.contains(i))
            .collect();
        free.sort_by(|&a, &b| {
            needed(a)
                .cmp(&needed(b))
                .then(cost[a].total_cmp(&cost[b]))
                .then(a.cmp(&b))
        });
        let mut trials: Vec<Vec<(usize, usize)>> = Vec::new();
        let together = lost.len().min(free.len());
        if together > 1 {
            trials.push((0..together).map(|i| (free[i], lost[i].1)).collect());
        }
        for &(_, ink, _) in lost.iter().take(2) {
            for &g in free.iter().take(3) {
                trials.push(vec![(g, ink)]);
            }
        }
        for trial in trials {
            let mut next: Vec<usize> = set
                .iter()
                .copied()
                .filter(|i| trial.iter().all(|&(g, _)| g != *i))
                .collect();
            for &(_, ink) in &trial {
                if !next.contains(&ink) {
                    next.push(ink);
                }
            }
            next.sort_unstable();
            // Two lost families can share their nearest ink: never end with fewer inks.
            if next.len() != set.len() {
                continue;
            }
            let lf = lost_of(&next);
            if score(&lf) >= score(&lost) {
                continue;
            }
            let next_far = t.far_pixels(&next, crate::families::REPORT_DELTA_E as f32);
            if next_far <= far {
                set = next;
                lost = lf;
                far = next_far;
                continue 'rounds;
            }
        }
        break;
    }
    // Inks given up for others (an ink taken in one round may be given up in the next).
    let swaps = set.iter().filter(|i| !chosen.contains(i)).count();
    (swaps > 0).then_some(KeptInks {
        chosen: set,
        swaps,
        lost_before,
        lost_after: lost.len(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn combinations_in_order() {
        assert_eq!(
            combinations(4, 2),
            vec![
                vec![0, 1],
                vec![0, 2],
                vec![0, 3],
                vec![1, 2],
                vec![1, 3],
                vec![2, 3]
            ]
        );
        assert_eq!(combinations(3, 0), vec![Vec::<usize>::new()]);
        assert_eq!(combinations(3, 3), vec![vec![0, 1, 2]]);
        assert!(combinations(2, 3).is_empty());
        assert_eq!(combinations(10, 4).len(), 210);
    }
}
