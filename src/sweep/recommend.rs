//! From the measures to a choice: the K each criterion suggests, and one recommended K
//! with its reason.

use super::measures::{FAMILY_DELTA_E2000, MIN_SHARE, MIN_STABILITY};
use super::{Recommendation, SweepRow};
use std::collections::BTreeMap;

/// The K each criterion suggests.
pub fn suggest(rows: &[SweepRow]) -> BTreeMap<String, usize> {
    let mut out = BTreeMap::new();
    let best = |key: &dyn Fn(&SweepRow) -> Option<f64>, higher: bool| {
        let mut b: Option<(f64, usize)> = None;
        for r in rows {
            if let Some(v) = key(r) {
                let better = match b {
                    None => true,
                    Some((bv, _)) => {
                        if higher {
                            v > bv
                        } else {
                            v < bv
                        }
                    }
                };
                if better {
                    b = Some((v, r.k));
                }
            }
        }
        b
    };
    if let Some((_, k)) = best(&|r| r.silhouette, true) {
        out.insert("silhouette".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.bic, false) {
        out.insert("bic".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.bic_full, false) {
        out.insert("bic_full".to_string(), k);
    }
    if let Some((_, k)) = best(&|r| r.icl, false) {
        out.insert("icl".to_string(), k);
    }
    // Stability is near 1 for every K that splits the data the same way each time: the
    // largest such K is the finest partition the data supports.
    if let Some((top, _)) = best(&|r| r.stability, true) {
        if let Some(r) = rows
            .iter()
            .rev()
            .find(|r| r.stability.is_some_and(|s| s >= top - 0.02))
        {
            out.insert("stability".to_string(), r.k);
        }
    }
    out
}

/// The recommended K and the reason for it.
///
/// Colour images ("distinct colours"): at every K up to the full-covariance BIC's or the
/// ICL's choice (whichever is larger), count the colour families among the fitted colours
/// (colours closer than [`FAMILY_DELTA_E2000`] chained into one, families under
/// [`MIN_SHARE`] of the pixels left out); the recommendation is the most families any of
/// those K shows. Past the number of families, k-means splits a family into near-identical
/// colours, which chain back into one, even where the likelihood keeps rising; and a K
/// where k-means split one broad family instead of separating two close ones still counts
/// the families it did find. Multi-band scenes ("stable classes"): the largest K up to the
/// same bound whose partition is stable (at least [`MIN_STABILITY`]) and whose smallest
/// class holds at least [`MIN_SHARE`]. When nothing passes, the ICL's choice.
pub fn recommend(rows: &[SweepRow], suggested: &BTreeMap<String, usize>) -> Option<Recommendation> {
    let first = rows.first()?;
    let colour_image = first.mean_delta_e2000.is_some();
    let last_k = rows.last().map_or(first.k, |r| r.k);
    let upper = match (suggested.get("bic_full"), suggested.get("icl")) {
        (None, None) => last_k,
        (a, b) => *a.max(b).expect("one is set"),
    };
    let bound = format!(
        "up to K = {upper} (the larger of the full-covariance BIC's and the ICL's choices)"
    );
    let fallback = || {
        let k = suggested
            .get("icl")
            .or(suggested.get("bic_full"))
            .copied()
            .unwrap_or(first.k);
        (
            k,
            "criteria",
            format!("No K of the range passes the rule; the ICL's choice, K = {k}, stands."),
        )
    };
    let (k, rule, reason) = if colour_image {
        // The most families, first seen at the smallest K.
        let mut most: Option<(usize, &SweepRow)> = None;
        for r in rows.iter().filter(|r| r.k <= upper) {
            let f = r.families.unwrap_or(0);
            if f > 0 && most.is_none_or(|(m, _)| f > m) {
                most = Some((f, r));
            }
        }
        match most {
            Some((f, r)) => {
                let how = if f == r.k {
                    format!(
                        "at K = {} every fitted colour is at least ΔE2000 {FAMILY_DELTA_E2000} from the others{}",
                        r.k,
                        r.closest_delta_e2000
                            .map_or(String::new(), |d| format!(" (closest pair {d:.1})"))
                    )
                } else {
                    format!(
                        "the {} fitted colours at K = {} form {f} families of colours within ΔE2000 {FAMILY_DELTA_E2000} of each other",
                        r.k, r.k
                    )
                };
                let mut more: Vec<String> = rows
                    .iter()
                    .filter(|o| o.k > r.k && o.k <= upper)
                    .map(|o| format!("{} at K = {}", o.families.unwrap_or(0), o.k))
                    .collect();
                if more.len() > 4 {
                    more.truncate(4);
                    more.push("…".into());
                }
                // The sweep's own fit at K = f may not show the f families (it spent a colour
                // inside one and merged two others): the table says so, and the reason too.
                let short = rows
                    .iter()
                    .find(|o| o.k == f)
                    .and_then(|o| o.families)
                    .filter(|&n| n < f)
                    .map_or(String::new(), |n| {
                        format!(
                            " At K = {f} itself this sweep's plain k-means fit shows {n}: it spent a colour inside a family and merged two others; `reduce` with its default objective moves colours to bring lost families back, and its lost-area report names any it could not."
                        )
                    });
                (
                    f,
                    "distinct colours",
                    format!(
                        "{f} colour families: {how}, and no K {bound} shows more{}.{short} Colours closer than ΔE2000 {FAMILY_DELTA_E2000} count as one family; families under {:.1} % of the pixels are not counted.",
                        if more.is_empty() {
                            String::new()
                        } else {
                            format!(" (larger K split a family into near-identical colours: {} families)", more.join(", "))
                        },
                        100.0 * MIN_SHARE
                    ),
                )
            }
            None => fallback(),
        }
    } else {
        let passes = |r: &SweepRow| {
            r.k <= upper
                && (r.k == 1 || r.stability.is_some_and(|s| s >= MIN_STABILITY))
                && r.smallest_share >= MIN_SHARE
        };
        match rows.iter().rfind(|r| passes(r)) {
            Some(r) => {
                let mut reason = format!(
                    "K = {} is the largest K {bound} whose partition is stable across subsamples (adjusted Rand index {} ≥ {MIN_STABILITY}) and whose smallest class holds at least {:.1} % of the pixels ({:.1} %).",
                    r.k,
                    r.stability.map_or("n/a".into(), |s| format!("{s:.3}")),
                    100.0 * MIN_SHARE,
                    100.0 * r.smallest_share
                );
                if let Some(next) = rows.iter().find(|o| o.k == r.k + 1) {
                    let why = if next.k > upper {
                        format!("it is above the mixture criteria's K = {upper}")
                    } else if next.smallest_share < MIN_SHARE {
                        format!(
                            "its smallest class holds only {:.2} % of the pixels",
                            100.0 * next.smallest_share
                        )
                    } else {
                        format!(
                            "its partition changes from subsample to subsample (adjusted Rand index {:.3})",
                            next.stability.unwrap_or(f64::NAN)
                        )
                    };
                    reason.push_str(&format!(" Not K = {}: {why}.", next.k));
                }
                (r.k, "stable classes", reason)
            }
            None => fallback(),
        }
    };
    let agreeing: Vec<String> = suggested
        .iter()
        .filter(|(_, &v)| v == k)
        .map(|(n, _)| n.clone())
        .collect();
    let others: Vec<String> = suggested
        .iter()
        .filter(|(_, &v)| v != k)
        .map(|(n, v)| format!("{n} {v}"))
        .collect();
    let mut agreement = format!(
        "{} of {} criteria agree ({})",
        agreeing.len(),
        suggested.len(),
        if agreeing.is_empty() {
            "none".to_string()
        } else {
            agreeing.join(", ")
        }
    );
    if !others.is_empty() {
        agreement.push_str(&format!("; the others suggest {}", others.join(", ")));
    }
    if agreeing.is_empty() {
        // Typical of photographs, whose colours run into each other: no count is right.
        agreement.push_str(
            "; low confidence: with no criterion agreeing, the image may have no natural \
             number of colours (a photograph): `reduce --target-delta-e` chooses K by the \
             error you accept",
        );
    }
    Some(Recommendation {
        k,
        rule: rule.to_string(),
        reason,
        agreeing,
        agreement,
    })
}
