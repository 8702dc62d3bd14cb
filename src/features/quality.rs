//! How close a palette is to the colours it replaces: per-entry CIEDE2000, its weighted
//! mean and 95th percentile, and the search for the fewest colours meeting a target.

use crate::cluster::{Dataset, KMeansModel, KMeansParams, ValidParams};
use crate::colour::{self, Space};
use crate::error::{Error, ParamsError, Result};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Which statistic of the per-pixel CIEDE2000 a target bounds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum TargetStatistic {
    /// Mean over pixels.
    Mean,
    /// 95th percentile over pixels (the smallest ΔE that at least 95 % of pixels are within).
    P95,
}

impl TargetStatistic {
    pub fn name(self) -> &'static str {
        match self {
            TargetStatistic::Mean => "mean",
            TargetStatistic::P95 => "95th percentile",
        }
    }
}

/// "The fewest colours whose CIEDE2000 is at most `delta_e`", searched K = 1..=`k_max`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct QualityTarget {
    /// Largest acceptable ΔE2000 (of the chosen statistic).
    pub delta_e: f64,
    pub statistic: TargetStatistic,
    /// Largest K tried.
    pub k_max: usize,
}

impl QualityTarget {
    /// Checks the target's numbers.
    pub fn check(&self) -> Result<()> {
        if !(self.delta_e.is_finite() && self.delta_e >= 0.0) {
            return Err(Error::Params(ParamsError::BadTarget(format!(
                "`target_delta_e` must be a finite number >= 0 (got {})",
                self.delta_e
            ))));
        }
        if self.k_max == 0 || self.k_max > crate::cluster::MAX_K {
            return Err(Error::Params(ParamsError::BadTarget(format!(
                "`k_max` must be between 1 and {} (got {})",
                crate::cluster::MAX_K,
                self.k_max
            ))));
        }
        Ok(())
    }
}

/// Per-entry CIEDE2000 between each colour (`labs`) and the palette colour of its
/// cluster, the cluster means (`k × 3`, in `space`) rounded to sRGB8 as they are written.
pub fn entry_delta_e2000(
    means: &[f64],
    labels: &[u32],
    labs: &[[f64; 3]],
    space: Space,
) -> Vec<f64> {
    let palette_lab: Vec<[f64; 3]> = means
        .chunks_exact(3)
        .map(|m| colour::srgb8_to_lab(colour::space_to_srgb8([m[0], m[1], m[2]], space)))
        .collect();
    labels
        .par_iter()
        .zip(labs.par_iter())
        .with_min_len(4096)
        .map(|(&l, lab)| colour::delta_e2000(*lab, palette_lab[l as usize]))
        .collect()
}

/// Weighted mean (Σ w·v / `total`, summed in entry order) and weighted 95th percentile
/// (the smallest value that entries holding at least 95 % of the weight are within).
pub fn mean_and_p95(values: &[f64], weights: &[f64], total: f64) -> (f64, f64) {
    let mut sum = 0.0;
    for (v, w) in values.iter().zip(weights) {
        sum += w * v;
    }
    if values.is_empty() {
        return (sum / total, 0.0);
    }
    // Entries in value order (ties: entry order). The key orders exactly as
    // `f64::total_cmp`, and with the index it is a total order. Instead of sorting every
    // entry, keys fall into BUCKETS equal slices of their range (bucket order = key order);
    // bucket weights locate the bucket where the running weight reaches 95 %, and only that
    // bucket's entries are sorted and walked. With integer weights (pixel counts) every sum
    // is exact, so the result is the one a full sort and walk gives.
    const BUCKETS: usize = 1 << 16;
    let key = |v: f64| {
        let b = v.to_bits() as i64;
        b ^ (((b >> 63) as u64) >> 1) as i64
    };
    // Least and greatest key, and the value with the greatest key (the answer when the
    // weights never reach 95 %: the last entry in value order).
    let (lo, hi, top) = values
        .iter()
        .fold((i64::MAX, i64::MIN, 0.0), |(lo, hi, top), &v| {
            let k = key(v);
            (lo.min(k), hi.max(k), if k > hi { v } else { top })
        });
    let span = (hi as i128 - lo as i128) as u128 + 1;
    let bucket = |k: i64| ((k as i128 - lo as i128) as u128 * BUCKETS as u128 / span) as usize;
    let mut mass = vec![0.0f64; BUCKETS];
    for (&v, &w) in values.iter().zip(weights) {
        mass[bucket(key(v))] += w;
    }
    let need = 0.95 * weights.iter().sum::<f64>();
    let mut cum = 0.0;
    let mut p95 = top;
    for (b, &m) in mass.iter().enumerate() {
        if cum + m < need {
            cum += m;
            continue;
        }
        let mut order: Vec<(i64, usize)> = values
            .iter()
            .enumerate()
            .filter(|(_, &v)| bucket(key(v)) == b)
            .map(|(i, &v)| (key(v), i))
            .collect();
        order.sort_unstable();
        let mut found = false;
        for &(_, i) in &order {
            cum += weights[i];
            if cum >= need {
                p95 = values[i];
                found = true;
                break;
            }
        }
        if found {
            break;
        }
    }
    (sum / total, p95)
}

/// Outcome of a search for the smallest K meeting a target.
#[derive(Debug, Clone)]
pub struct TargetSearch {
    /// The model at the chosen K.
    pub model: KMeansModel,
    /// (K, mean ΔE2000, 95th-percentile ΔE2000) of every K tried, in order.
    pub tried: Vec<(usize, f64, f64)>,
    /// Whether the chosen K meets the target (false: none up to k_max did).
    pub met: bool,
}

/// Searches K = 1, 2, … along the warm-started path of [`crate::cluster::k_path`] for
/// the smallest K whose ΔE2000 statistic is at most the target.
pub fn search_k(
    data: &Dataset,
    labs: &[[f64; 3]],
    total: f64,
    space: Space,
    params: &ValidParams,
    target: &QualityTarget,
) -> Result<TargetSearch> {
    let weights: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let mut tried = Vec::new();
    let mut last: Option<(usize, crate::cluster::LloydResult)> = None;
    let mut met = false;
    let path = crate::cluster::KPath {
        k_min: 1,
        k_max: target.k_max,
        seed: params.engine.seed,
        stop: crate::cluster::stop_rule(params),
        accelerate: params.accelerate,
        refine: params.engine.refine,
        tolerance: params.engine.tolerance,
    };
    crate::cluster::k_path(data, &path, |k, res| {
        let de = entry_delta_e2000(&res.means, &res.labels, labs, space);
        let (mean, p95) = mean_and_p95(&de, &weights, total);
        tried.push((k, mean, p95));
        last = Some((k, res.clone()));
        let value = match target.statistic {
            TargetStatistic::Mean => mean,
            TargetStatistic::P95 => p95,
        };
        met = value <= target.delta_e;
        !met
    });
    let (k, hard) = last.ok_or_else(|| Error::Data("no colours to fit".into()))?;
    let p = KMeansParams {
        k,
        ..(**params).clone()
    }
    .check()?;
    Ok(TargetSearch {
        model: crate::cluster::finish(data, &p, 0, hard),
        tried,
        met,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The weighted 95th percentile by its definition: for each candidate value, the
    /// weight of entries at or below it; the smallest value reaching 95 % of the total.
    fn p95_by_definition(values: &[f64], weights: &[f64]) -> f64 {
        let need = 0.95 * weights.iter().sum::<f64>();
        let mut cands: Vec<f64> = values.to_vec();
        cands.sort_by(f64::total_cmp);
        for c in cands {
            let below: f64 = values
                .iter()
                .zip(weights)
                .filter(|(v, _)| v.total_cmp(&c).is_le())
                .map(|(_, w)| w)
                .sum();
            if below >= need {
                return c;
            }
        }
        f64::NAN
    }

    #[test]
    fn weighted_p95_follows_its_definition_with_ties() {
        let mut r = crate::rng::Rng::new(3, 0);
        for n in [1usize, 2, 5, 40, 301] {
            // Values on a coarse grid so that many tie; integer weights so sums are exact.
            let values: Vec<f64> = (0..n).map(|_| r.below(7) as f64 * 0.5).collect();
            let weights: Vec<f64> = (0..n).map(|_| 1.0 + r.below(9) as f64).collect();
            let total: f64 = weights.iter().sum();
            let (mean, p95) = mean_and_p95(&values, &weights, total);
            assert_eq!(p95, p95_by_definition(&values, &weights), "n = {n}");
            let m: f64 = values.iter().zip(&weights).map(|(v, w)| v * w).sum::<f64>() / total;
            assert!((mean - m).abs() <= 1e-12 * m.abs().max(1.0));
        }
        // Continuous values over a wide range (many occupied buckets, negatives, a few
        // exact repeats, zero weights) against the definition.
        for n in [3usize, 1000, 3000] {
            let values: Vec<f64> = (0..n)
                .map(|i| {
                    if i % 97 == 0 {
                        2.5
                    } else {
                        (r.uniform() - 0.1) * 10f64.powi(r.below(5) as i32)
                    }
                })
                .collect();
            let weights: Vec<f64> = (0..n).map(|_| r.below(6) as f64).collect();
            let total: f64 = weights.iter().sum::<f64>().max(1.0);
            let (_, p95) = mean_and_p95(&values, &weights, total);
            assert_eq!(p95, p95_by_definition(&values, &weights), "n = {n}");
        }
    }
}
