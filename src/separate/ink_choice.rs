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

/// Refuses a `min_area` larger than the artwork and a `trap` wider than it: either would
/// print the whole sheet in one ink.
pub(super) fn check_sizes(opts: &SeparateOptions, width: u32, height: u32) -> Result<()> {
    let pixels = width as u64 * height as u64;
    let bad = |m: String| Err(Error::Params(crate::error::ParamsError::Other(m)));
    if opts.min_area as u64 > pixels {
        return bad(format!(
            "`min_area` of {} px is more than the artwork's {width} × {height} = {pixels} px",
            opts.min_area
        ));
    }
    if opts.trap >= width.max(height) {
        return bad(format!(
            "`trap` of {} px is as wide as the artwork ({width} × {height} px) or wider",
            opts.trap
        ));
    }
    Ok(())
}

/// The note for inks left out because no colour is nearer to them (`kept` inks remain).
pub(super) fn idle_note(names: &[&str], kept: usize, substrate: bool) -> String {
    let one = names.len() == 1;
    format!(
        "{} ink{} left out: no colour of the artwork is nearer to {} than to the other \
         chosen inks{}, so {} print nothing; {kept} plate{} instead of {}",
        names.join(", "),
        if one { "" } else { "s" },
        if one { "it" } else { "them" },
        if substrate { " and the substrate" } else { "" },
        if one { "it would" } else { "they would" },
        if kept == 1 { "" } else { "s" },
        kept + names.len(),
    )
}

/// The note naming plates that print no pixel (`px`: pixels per plate after the
/// `min_area` merge, which merged `merged` regions), if any.
pub(super) fn blank_plate_note(
    chosen: &[Ink],
    px: &[u64],
    merged: usize,
    opts: &SeparateOptions,
) -> Option<String> {
    let blank: Vec<&str> = chosen
        .iter()
        .zip(px)
        .filter(|&(_, &n)| n == 0)
        .map(|(ink, _)| ink.name.as_str())
        .collect();
    if blank.is_empty() {
        return None;
    }
    Some(format!(
        "blank plate{}: {} print{} no pixel{}; check before burning a screen{}",
        if blank.len() == 1 { "" } else { "s" },
        blank.join(", "),
        if blank.len() == 1 { "s" } else { "" },
        if merged > 0 {
            format!(
                " once `min_area` ({} px) merged the small regions (a lower `min_area` \
                     keeps them)",
                opts.min_area
            )
        } else {
            String::new()
        },
        if opts.all || !opts.use_inks.is_empty() {
            " or leave the ink out"
        } else {
            ""
        },
    ))
}
