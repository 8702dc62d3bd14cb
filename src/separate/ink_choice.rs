//! Which inks: the library read, the inks asked for by name, and the number of inks
//! chosen for a colour-difference target.

use super::select::{self, CostTable};
use super::SeparateOptions;
use crate::colour::inks::Ink;
use crate::error::{Error, Result};
use std::path::Path;

pub(super) fn table_error(path: &Path, message: String) -> Error {
    Error::Table {
        path: path.into(),
        line: None,
        message,
    }
}

/// Resolves `--use` names and checks K against the library.
pub fn resolve_inks(
    library: &[Ink],
    opts: &SeparateOptions,
    library_path: &Path,
) -> Result<(usize, Vec<usize>)> {
    let mut forced = Vec::new();
    for name in &opts.use_inks {
        let name = name.trim();
        let i = library
            .iter()
            .position(|ink| ink.name.eq_ignore_ascii_case(name))
            .ok_or_else(|| {
                table_error(
                    library_path,
                    format!("no ink named '{name}' (asked for with `use_inks`)"),
                )
            })?;
        if !forced.contains(&i) {
            forced.push(i);
        }
    }
    if opts.all {
        return Ok(((0..library.len()).count(), (0..library.len()).collect()));
    }
    if opts.target.is_some() {
        // The number of inks is searched; only the forced inks are fixed.
        return Ok((forced.len().max(1), forced));
    }
    if opts.k == 0 {
        return Err(crate::error::ParamsError::KTooSmall(0).into());
    }
    if opts.k > library.len() {
        return Err(table_error(
            library_path,
            crate::error::ParamsError::KTooLarge {
                got: opts.k,
                max: library.len(),
                why: ": the library has no more inks",
            }
            .to_string(),
        ));
    }
    if forced.len() > opts.k {
        return Err(table_error(
            library_path,
            format!(
                "`use_inks` names {} inks but `k` is {}",
                forced.len(),
                opts.k
            ),
        ));
    }
    Ok((opts.k, forced))
}

/// The smallest number of inks (from the forced ones, at least 1, up to the target's
/// `k_max` and the library size) whose best set reproduces the artwork within the target,
/// judged on the ink choice itself (each colour to its nearest chosen ink or the
/// substrate, before small regions are merged). Returns the selection and a note saying
/// what was chosen and why.
pub(super) fn choose_for_target(
    table: &CostTable,
    labs: &[[f64; 3]],
    weights: &[f64],
    library: &[Ink],
    forced: &[usize],
    opts: &SeparateOptions,
    target: &crate::features::quality::QualityTarget,
) -> (select::Selection, String) {
    let total: f64 = weights.iter().sum();
    let lo = forced.len().max(1);
    let hi = target.k_max.min(library.len()).max(lo);
    let mut tried: Vec<(usize, f64)> = Vec::new();
    let mut last = None;
    for k in lo..=hi {
        let sel = select::choose(&select::InkSearch {
            t: table,
            entry_labs: labs,
            inks: library,
            k,
            forced,
            engine: &opts.engine,
        });
        let per_entry: Vec<f64> = (0..table.n)
            .map(|e| {
                let best = sel
                    .chosen
                    .iter()
                    .map(|&i| table.cost[e * table.m + i])
                    .fold(f32::INFINITY, f32::min);
                match &table.substrate {
                    Some(s) => best.min(s[e]) as f64,
                    None => best as f64,
                }
            })
            .collect();
        let (mean, p95) = crate::features::quality::mean_and_p95(&per_entry, weights, total);
        let value = match target.statistic {
            crate::features::quality::TargetStatistic::Mean => mean,
            crate::features::quality::TargetStatistic::P95 => p95,
        };
        tried.push((k, value));
        let met = value <= target.delta_e;
        last = Some(sel);
        if met {
            let before = tried
                .len()
                .checked_sub(2)
                .map(|i| format!("; {} inks: {:.2}", tried[i].0, tried[i].1))
                .unwrap_or_default();
            return (
                last.unwrap(),
                format!(
                    "chose {k} inks, the fewest whose {} ΔE2000 is at most {} ({k} inks: {value:.2}{before})",
                    target.statistic.name(),
                    target.delta_e
                ),
            );
        }
    }
    let (k, value) = *tried.last().expect("at least one size tried");
    (
        last.expect("at least one size tried"),
        format!(
            "no set of up to {hi} inks has a {} ΔE2000 of at most {}; using {k} inks ({value:.2})",
            target.statistic.name(),
            target.delta_e
        ),
    )
}
