//! Accuracy figures of a map against reference data: the confusion matrix (rows: map
//! labels, columns: reference labels), overall accuracy, Cohen's kappa (Cohen 1960),
//! producer's and user's accuracy, and the error-adjusted area estimates of Olofsson et al.
//! (2014, Remote Sensing of Environment 148:42, "Good practices for estimating area and
//! assessing accuracy of land change"): the stratified estimator with the map labels as
//! strata, weights W_i = map area share, and 95 % confidence intervals (±1.96 standard
//! errors, their equations 9–11 and 5–7 as numbered in the paper's section 4).

use serde::{Deserialize, Serialize};

/// A confusion matrix over one set of labels: `counts[i][j]` = units mapped as label `i`
/// whose reference label is `j`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Confusion {
    pub labels: Vec<String>,
    pub counts: Vec<Vec<u64>>,
}

/// Per-label figures from the counts alone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabelAccuracy {
    pub label: String,
    /// Units mapped as this label (row total).
    pub mapped: u64,
    /// Units whose reference is this label (column total).
    pub reference: u64,
    /// Producer's accuracy: correct / reference total (`null` when no reference unit).
    pub producers_accuracy: Option<f64>,
    /// User's accuracy: correct / mapped total (`null` when nothing mapped).
    pub users_accuracy: Option<f64>,
}

/// Error-adjusted figures of one label (Olofsson et al. 2014).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AreaEstimate {
    pub label: String,
    /// Area mapped as this label, in the unit of the map areas given.
    pub mapped_area: f64,
    /// Estimated proportion of the whole area that truly is this label.
    pub proportion: f64,
    /// Estimated area (proportion × total area).
    pub area: f64,
    /// Standard error of the area.
    pub area_std_error: f64,
    /// Half width of the 95 % confidence interval of the area (1.96 standard errors).
    pub area_ci95: f64,
    /// User's accuracy (the sample estimate) and the half width of its 95 % interval.
    pub users_accuracy: Option<f64>,
    pub users_accuracy_ci95: Option<f64>,
    /// Producer's accuracy, area-weighted, and the half width of its 95 % interval.
    pub producers_accuracy: Option<f64>,
    pub producers_accuracy_ci95: Option<f64>,
}

/// The error-adjusted overall figures and one [`AreaEstimate`] per label.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AreaEstimates {
    /// Total mapped area (Σ of the map areas).
    pub total_area: f64,
    /// Overall accuracy, area-weighted, and the half width of its 95 % interval.
    pub overall_accuracy: f64,
    pub overall_accuracy_ci95: f64,
    pub labels: Vec<AreaEstimate>,
}

/// z of a two-sided 95 % interval.
const Z95: f64 = 1.96;

impl Confusion {
    /// Units counted.
    pub fn total(&self) -> u64 {
        self.counts.iter().flatten().sum()
    }

    fn row(&self, i: usize) -> u64 {
        self.counts[i].iter().sum()
    }

    fn col(&self, j: usize) -> u64 {
        self.counts.iter().map(|r| r[j]).sum()
    }

    /// Share of units on the diagonal (`None` with no unit).
    pub fn overall_accuracy(&self) -> Option<f64> {
        let n = self.total();
        let diag: u64 = (0..self.labels.len()).map(|i| self.counts[i][i]).sum();
        (n > 0).then(|| diag as f64 / n as f64)
    }

    /// Cohen's kappa: (p_o − p_e)/(1 − p_e), p_e = Σ row_i col_i / n² (`None` when
    /// p_e = 1, where kappa is undefined, or with no unit).
    pub fn kappa(&self) -> Option<f64> {
        let n = self.total() as f64;
        let po = self.overall_accuracy()?;
        let pe: f64 = (0..self.labels.len())
            .map(|i| self.row(i) as f64 * self.col(i) as f64)
            .sum::<f64>()
            / (n * n);
        (pe < 1.0).then(|| (po - pe) / (1.0 - pe))
    }

    /// Producer's and user's accuracy of every label.
    pub fn per_label(&self) -> Vec<LabelAccuracy> {
        (0..self.labels.len())
            .map(|i| {
                let (mapped, reference, hit) = (self.row(i), self.col(i), self.counts[i][i]);
                let ratio = |d: u64| (d > 0).then(|| hit as f64 / d as f64);
                LabelAccuracy {
                    label: self.labels[i].clone(),
                    mapped,
                    reference,
                    producers_accuracy: ratio(reference),
                    users_accuracy: ratio(mapped),
                }
            })
            .collect()
    }

    /// Error-adjusted areas (Olofsson et al. 2014) with the map as strata: `mapped_area[i]`
    /// is the area mapped as label `i` (all of it, not only the reference units). `None`
    /// when the total mapped area is not positive.
    pub fn area_estimates(&self, mapped_area: &[f64]) -> Option<AreaEstimates> {
        let q = self.labels.len();
        let total: f64 = mapped_area.iter().sum();
        if total.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return None;
        }
        let w: Vec<f64> = mapped_area.iter().map(|a| a / total).collect();
        let n_row: Vec<f64> = (0..q).map(|i| self.row(i) as f64).collect();
        // p_ij = W_i n_ij / n_i. (a stratum with no reference unit adds nothing).
        let p = |i: usize, j: usize| {
            if n_row[i] > 0.0 {
                w[i] * self.counts[i][j] as f64 / n_row[i]
            } else {
                0.0
            }
        };
        // Within-stratum variance term of a proportion: x(1 − x)/(n_i. − 1).
        let var_term = |x: f64, n: f64| {
            if n > 1.0 {
                x * (1.0 - x) / (n - 1.0)
            } else {
                0.0
            }
        };
        let share = |i: usize, j: usize| {
            if n_row[i] > 0.0 {
                self.counts[i][j] as f64 / n_row[i]
            } else {
                0.0
            }
        };
        let overall: f64 = (0..q).map(|i| p(i, i)).sum();
        let overall_var: f64 = (0..q)
            .map(|i| w[i] * w[i] * var_term(share(i, i), n_row[i]))
            .sum();
        // Estimated map-class totals in area units: N_i. = mapped_area[i].
        let labels = (0..q)
            .map(|j| {
                let pj: f64 = (0..q).map(|i| p(i, j)).sum();
                let var_pj: f64 = (0..q)
                    .map(|i| w[i] * w[i] * var_term(share(i, j), n_row[i]))
                    .sum();
                let se = total * var_pj.sqrt();
                let users = (n_row[j] > 0.0).then(|| share(j, j));
                let users_ci = users.map(|u| Z95 * var_term(u, n_row[j]).sqrt());
                // Producer's accuracy P_j = p_jj / p_.j, its variance after eq. 7.
                let producers = (pj > 0.0).then(|| p(j, j) / pj);
                let producers_ci = producers.map(|pa| {
                    let nj_hat = pj * total; // N̂_.j
                    let a = mapped_area[j].powi(2)
                        * (1.0 - pa).powi(2)
                        * var_term(share(j, j), n_row[j]);
                    let b: f64 = (0..q)
                        .filter(|&i| i != j)
                        .map(|i| mapped_area[i].powi(2) * var_term(share(i, j), n_row[i]))
                        .sum::<f64>()
                        * pa
                        * pa;
                    Z95 * ((a + b) / (nj_hat * nj_hat)).sqrt()
                });
                AreaEstimate {
                    label: self.labels[j].clone(),
                    mapped_area: mapped_area[j],
                    proportion: pj,
                    area: pj * total,
                    area_std_error: se,
                    area_ci95: Z95 * se,
                    users_accuracy: users,
                    users_accuracy_ci95: users_ci,
                    producers_accuracy: producers,
                    producers_accuracy_ci95: producers_ci,
                }
            })
            .collect();
        Some(AreaEstimates {
            total_area: total,
            overall_accuracy: overall,
            overall_accuracy_ci95: Z95 * overall_var.sqrt(),
            labels,
        })
    }
}

/// Adjusted Rand index (Hubert & Arabie 1985) of a contingency table of two labelings
/// (any shape); 1 for identical partitions, about 0 for chance.
pub fn adjusted_rand_index(table: &[Vec<u64>]) -> Option<f64> {
    let c2 = |n: f64| n * (n - 1.0) / 2.0;
    let n: u64 = table.iter().flatten().sum();
    let index: f64 = table.iter().flatten().map(|&v| c2(v as f64)).sum();
    let rows: f64 = table.iter().map(|r| c2(r.iter().sum::<u64>() as f64)).sum();
    let cols_n = table.first().map_or(0, Vec::len);
    let cols: f64 = (0..cols_n)
        .map(|j| c2(table.iter().map(|r| r[j]).sum::<u64>() as f64))
        .sum();
    let expected = rows * cols / c2(n as f64);
    let max = 0.5 * (rows + cols);
    (max != expected).then(|| (index - expected) / (max - expected))
}

/// The assignment of rows to columns that maximises the sum of `table[row][col]`, one
/// column per row at most (Hungarian method, Kuhn 1955 / Munkres 1957, in the O(n³) form
/// with potentials). Rows left without a column (more rows than columns) get `None`.
pub fn hungarian_max(table: &[Vec<u64>]) -> Vec<Option<usize>> {
    let rows = table.len();
    let cols = table.first().map_or(0, Vec::len);
    let n = rows.max(cols);
    if n == 0 {
        return Vec::new();
    }
    let big = table.iter().flatten().copied().max().unwrap_or(0) as i128;
    // Cost of the square problem, 1-based with a dummy row/column 0.
    let cost = |i: usize, j: usize| -> i128 {
        let v = if i < rows && j < cols {
            table[i][j] as i128
        } else {
            0
        };
        big - v
    };
    let inf = i128::MAX / 4;
    let (mut u, mut v) = (vec![0i128; n + 1], vec![0i128; n + 1]);
    let mut p = vec![0usize; n + 1]; // p[j]: row matched to column j (1-based)
    let mut way = vec![0usize; n + 1];
    for i in 1..=n {
        p[0] = i;
        let mut j0 = 0usize;
        let mut minv = vec![inf; n + 1];
        let mut used = vec![false; n + 1];
        loop {
            used[j0] = true;
            let i0 = p[j0];
            let mut delta = inf;
            let mut j1 = 0usize;
            for j in 1..=n {
                if !used[j] {
                    let cur = cost(i0 - 1, j - 1) - u[i0] - v[j];
                    if cur < minv[j] {
                        minv[j] = cur;
                        way[j] = j0;
                    }
                    if minv[j] < delta {
                        delta = minv[j];
                        j1 = j;
                    }
                }
            }
            for j in 0..=n {
                if used[j] {
                    u[p[j]] += delta;
                    v[j] -= delta;
                } else {
                    minv[j] -= delta;
                }
            }
            j0 = j1;
            if p[j0] == 0 {
                break;
            }
        }
        loop {
            let j1 = way[j0];
            p[j0] = p[j1];
            j0 = j1;
            if j0 == 0 {
                break;
            }
        }
    }
    let mut out = vec![None; rows];
    for (j, &i) in p.iter().enumerate().skip(1) {
        if (1..=rows).contains(&i) && j <= cols {
            out[i - 1] = Some(j - 1);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Brute force over every assignment of 4 rows to 3 columns.
    #[test]
    fn hungarian_equals_brute_force_on_small_tables() {
        let mut seed = 12345u64;
        let mut next = || {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (seed >> 33) % 50
        };
        for _ in 0..200 {
            let t: Vec<Vec<u64>> = (0..4).map(|_| (0..3).map(|_| next()).collect()).collect();
            let got = hungarian_max(&t);
            let score = |a: &[Option<usize>]| -> u64 {
                a.iter()
                    .enumerate()
                    .filter_map(|(i, c)| c.map(|c| t[i][c]))
                    .sum()
            };
            let mut best = 0;
            for a in 0..4 {
                for b in 0..4 {
                    for c in 0..4 {
                        if a == b || a == c || b == c {
                            continue;
                        }
                        let mut asg = vec![None; 4];
                        asg[a] = Some(0);
                        asg[b] = Some(1);
                        asg[c] = Some(2);
                        best = best.max(score(&asg));
                    }
                }
            }
            assert_eq!(score(&got), best, "{t:?} -> {got:?}");
            let used: Vec<usize> = got.iter().flatten().copied().collect();
            assert_eq!(used.len(), 3);
        }
    }
}
