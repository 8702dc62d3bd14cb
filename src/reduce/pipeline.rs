//! The shared core of `reduce`, `apply` and `learn`: means for the histogram's entries
//! (fitted, searched for a target, or given), quantised to sRGB, rendered and scored.

use super::{FixedPalette, PaletteColour, PaletteDocument, ReduceOptions, Reduction};
use crate::cluster::{finish, fit_hard, stop_rule, Beta, Dataset, KMeansModel, Mode, ValidParams};
use crate::colour::{self, Space};
use crate::error::{Error, ParamsError, Result};
use crate::families::{self, Objective};
use crate::features::histogram::Histogram;
use crate::features::quality::{search_k, TargetStatistic};
use crate::features::rows::entry_features;
use crate::output::DocumentHeader;
use crate::render::{self, Dither, NO_INDEX};
use crate::trace::Phases;
use rayon::prelude::*;
use std::collections::HashMap;

/// The pixels of the image a histogram came from (empty for `learn`, which has none).
pub(super) struct Pixels<'a> {
    pub entry: Vec<u32>,
    pub width: u32,
    pub height: u32,
    pub alpha: Option<Vec<u8>>,
    pub fixed: Option<&'a FixedPalette>,
}

/// Means in the clustering space and what each entry took from them.
struct Fitted {
    means: Vec<f64>,
    beta: Option<f64>,
    sse: f64,
    iterations: usize,
    labels: Vec<u32>,
    entropy: Vec<f32>,
    family_moves: usize,
}

impl Fitted {
    fn from_model(model: &KMeansModel, data: &Dataset, family_moves: usize) -> Fitted {
        let a = model.assign(data);
        Fitted {
            means: model.means.clone(),
            beta: model.beta,
            sse: model.sse,
            iterations: model.iterations(),
            labels: a.labels,
            entropy: a.entropy,
            family_moves,
        }
    }
}

/// The entries of one histogram as the engine and the scores see them.
struct Entries<'a> {
    hist: &'a Histogram,
    weights: Vec<f64>,
    rows: Vec<f32>,
    labs: Vec<[f64; 3]>,
}

/// The shared core: per-entry clustering (or mapping), rendering and scores.
pub(super) fn reduce_indexed(
    hist: &Histogram,
    px: Pixels<'_>,
    opts: &ReduceOptions,
) -> Result<Reduction> {
    // A given palette is applied in the space it was chosen in.
    let palette_space;
    let opts = match px.fixed {
        Some(fp) if fp.space != opts.space => {
            palette_space = ReduceOptions {
                space: fp.space,
                ..opts.clone()
            };
            &palette_space
        }
        _ => opts,
    };
    let params = opts.kmeans_params().check()?;
    let mut ph = Phases::start("reduce");
    if hist.is_empty() {
        return Err(Error::Data(
            "every pixel is fully transparent; there is nothing to reduce".into(),
        ));
    }
    let (rows, labs) = entry_features(hist, opts.space);
    let en = Entries {
        hist,
        weights: hist.weights(),
        rows,
        labs,
    };
    ph.mark("features");
    let data = Dataset::new(&en.rows, 3, Some(&en.weights))?;
    let mut notes = Vec::new();
    check_pins(opts, px.fixed.is_some(), &mut notes)?;

    let fitted = if let Some(fp) = px.fixed {
        fit_given(fp, &data, opts)
    } else if opts.target.is_some() && hist.len() > 1 {
        let f = fit_to_target(&data, &en, opts, &params, &mut notes)?;
        ph.mark("fit");
        f
    } else if hist.len() <= opts.k && opts.pinned.is_empty() {
        every_colour(&en, opts, &mut notes)
    } else {
        fit_palette(&data, &en, &px, opts, &params, &mut notes, &mut ph)?
    };
    ph.mark("assign");
    let red = render_and_score(&en, px, opts, fitted, notes);
    ph.mark("render, scores and lost areas");
    Ok(red)
}

/// Pinned colours: refused with a target or more pins than k; noted where they do nothing.
fn check_pins(opts: &ReduceOptions, fixed: bool, notes: &mut Vec<String>) -> Result<()> {
    if opts.pinned.is_empty() {
        return Ok(());
    }
    if opts.target.is_some() && !fixed {
        return Err(Error::Params(ParamsError::BadPinned(
            "pinned colours cannot be combined with a colour-difference target".into(),
        )));
    }
    if opts.pinned.len() > opts.k && !fixed {
        return Err(Error::Params(ParamsError::BadPinned(format!(
            "{} colours pinned but k is {}; pinned colours count toward k",
            opts.pinned.len(),
            opts.k
        ))));
    }
    if fixed {
        notes.push("a given palette is used as it is, so the pinned colours have no effect".into());
    } else if opts.engine.anneal.is_some() || opts.engine.split_merge > 0 {
        notes.push(
            "with pinned colours every start extends the pins by k-means++, so the \
             annealing and split-and-merge settings have no effect"
                .into(),
        );
    }
    Ok(())
}

/// Maps the entries onto a palette given in advance.
fn fit_given(fp: &FixedPalette, data: &Dataset, opts: &ReduceOptions) -> Fitted {
    let means: Vec<f64> = fp
        .colours
        .iter()
        .flat_map(|&c| colour::linear_to_space(colour::srgb8_to_linear(c), opts.space))
        .collect();
    let m32: Vec<f32> = means.iter().map(|&v| v as f32).collect();
    let (_, sse) = crate::cluster::assign_nearest(data, &m32);
    let beta = match opts.engine.beta {
        Beta::Fixed(b) => Some(b),
        Beta::Auto => fp
            .beta
            .or_else(|| crate::cluster::auto_beta(sse, data.total_weight(), 3)),
    };
    let a = crate::cluster::soft_assign(data, &means, beta);
    Fitted {
        means,
        beta,
        sse,
        iterations: 0,
        labels: a.labels,
        entropy: a.entropy,
        family_moves: 0,
    }
}

/// The fewest colours whose ΔE2000 statistic meets the target.
fn fit_to_target(
    data: &Dataset,
    en: &Entries<'_>,
    opts: &ReduceOptions,
    params: &ValidParams,
    notes: &mut Vec<String>,
) -> Result<Fitted> {
    let target = opts.target.as_ref().expect("called with a target");
    target.check()?;
    let unused: Vec<&str> = [
        (opts.engine.anneal.is_some(), "`anneal`"),
        (opts.engine.split_merge > 0, "`split_merge`"),
        (opts.engine.restarts > 1, "`restarts`"),
    ]
    .into_iter()
    .filter_map(|(set, name)| set.then_some(name))
    .collect();
    if !unused.is_empty() {
        notes.push(format!(
            "the K search follows one warm-started path of K (the sweep's), so {} have \
             no effect with a ΔE2000 target",
            unused.join(", ")
        ));
    }
    let search = search_k(
        data,
        &en.labs,
        en.hist.total() as f64,
        opts.space,
        params,
        target,
    )?;
    let (k, mean, p95) = *search.tried.last().expect("at least one K tried");
    let shown = |(k, m, p): &(usize, f64, f64)| match target.statistic {
        TargetStatistic::Mean => format!("K = {k}: {m:.2}"),
        TargetStatistic::P95 => format!("K = {k}: {p:.2}"),
    };
    let before = search
        .tried
        .len()
        .checked_sub(2)
        .map(|i| format!("; {}", shown(&search.tried[i])))
        .unwrap_or_default();
    notes.push(if search.met {
        format!(
            "chose K = {k}, the smallest K whose {} ΔE2000 is at most {} ({}{before})",
            target.statistic.name(),
            target.delta_e,
            shown(&(k, mean, p95)),
        )
    } else {
        format!(
            "no K up to {} has a {} ΔE2000 of at most {}; using K = {k} ({})",
            target.k_max,
            target.statistic.name(),
            target.delta_e,
            shown(&(k, mean, p95)),
        )
    });
    Ok(Fitted::from_model(&search.model, data, 0))
}

/// No more distinct colours than K: every colour is its own palette colour.
fn every_colour(en: &Entries<'_>, opts: &ReduceOptions, notes: &mut Vec<String>) -> Fitted {
    let n = en.hist.len();
    if n < opts.k {
        let (colours, them) = if n == 1 {
            ("colour", "it")
        } else {
            ("colours", "them all")
        };
        notes.push(format!(
            "the image has only {n} distinct {colours}; returning {them} instead of {}",
            opts.k
        ));
    }
    Fitted {
        means: en.rows.iter().map(|&v| v as f64).collect(),
        beta: None,
        sse: 0.0,
        iterations: 0,
        labels: (0..n as u32).collect(),
        entropy: vec![0.0f32; n],
        family_moves: 0,
    }
}

/// k-means (with its restarts, annealing and moves), then the colour-family moves.
fn fit_palette(
    data: &Dataset,
    en: &Entries<'_>,
    px: &Pixels<'_>,
    opts: &ReduceOptions,
    params: &ValidParams,
    notes: &mut Vec<String>,
    ph: &mut Phases,
) -> Result<Fitted> {
    let (restart, mut hard) = fit_hard(data, params)?;
    ph.mark("fit");
    let mut family_moves = 0;
    if opts.objective == Objective::Families {
        let pinned = params.pinned.len() / 3;
        // With an image, families are judged on its pixels; a histogram alone (learn)
        // is judged by its colours.
        let image = (!px.entry.is_empty()).then_some(families::ImageEntries {
            width: px.width,
            height: px.height,
            pixel_entry: &px.entry,
        });
        if let Some(kept) = families::keep_families(
            data,
            &en.labs,
            opts.space,
            image,
            &hard,
            pinned,
            stop_rule(params),
            params.accelerate,
        ) {
            notes.push(format!(
                "moved {} palette colour{} to keep distinct colour families that plain \
                 k-means merged into a neighbour (families more than ΔE2000 6 from the \
                 palette: {} before, {} after)",
                kept.moves,
                if kept.moves == 1 { "" } else { "s" },
                kept.lost_before,
                kept.lost_after,
            ));
            family_moves = kept.moves;
            hard = kept.hard;
        }
        ph.mark("families");
    }
    let model = finish(data, params, restart, hard);
    Ok(Fitted::from_model(&model, data, family_moves))
}

/// Cluster means rounded to sRGB8; clusters that land on one colour share a slot.
struct Slots {
    colours: Vec<[u8; 3]>,
    lab: Vec<[f64; 3]>,
    /// Each slot's colour in the clustering space (for dithering).
    features: Vec<f32>,
    cluster_slot: Vec<u16>,
    entry_slot: Vec<u16>,
}

/// A given palette keeps its own colours, one slot each, in its order (slot i = colour i).
fn quantise(means: &[f64], labels: &[u32], space: Space, given: Option<&[[u8; 3]]>) -> Slots {
    let mut slot_of_colour: HashMap<[u8; 3], u16> = HashMap::new();
    let mut colours: Vec<[u8; 3]> = Vec::new();
    let cluster_slot: Vec<u16> = match given {
        Some(g) => {
            colours = g.to_vec();
            (0..g.len() as u16).collect()
        }
        None => means
            .chunks_exact(3)
            .map(|m| {
                let c = colour::space_to_srgb8([m[0], m[1], m[2]], space);
                *slot_of_colour.entry(c).or_insert_with(|| {
                    colours.push(c);
                    (colours.len() - 1) as u16
                })
            })
            .collect(),
    };
    let lab = colours.iter().map(|&c| colour::srgb8_to_lab(c)).collect();
    let features = colours
        .iter()
        .flat_map(|&c| {
            let f = colour::linear_to_space(colour::srgb8_to_linear(c), space);
            [f[0] as f32, f[1] as f32, f[2] as f32]
        })
        .collect();
    let entry_slot = labels.iter().map(|&l| cluster_slot[l as usize]).collect();
    Slots {
        colours,
        lab,
        features,
        cluster_slot,
        entry_slot,
    }
}

/// Per-slot pixel counts and uncertainty sums, and the summed ΔE*ab and ΔE2000.
struct Scores {
    pixels: Vec<u64>,
    uncertainty: Vec<f64>,
    de76: f64,
    de2000: f64,
    /// Each entry's ΔE2000 to its own palette colour, when computed on the way.
    entry_error: Vec<f64>,
}

impl Scores {
    fn new(n_slots: usize) -> Scores {
        Scores {
            pixels: vec![0u64; n_slots],
            uncertainty: vec![0.0f64; n_slots],
            de76: 0.0,
            de2000: 0.0,
            entry_error: Vec::new(),
        }
    }
}

/// Scores without dithering: per entry, weighted by its pixel count.
fn score_entries(en: &Entries<'_>, slots: &Slots, entropy: &[f32]) -> Scores {
    let n_slots = slots.colours.len();
    let per_entry: Vec<(f64, f64)> = (0..en.hist.len())
        .into_par_iter()
        .with_min_len(4096)
        .map(|e| {
            let s = slots.entry_slot[e] as usize;
            (
                colour::delta_e76(en.labs[e], slots.lab[s]),
                colour::delta_e2000(en.labs[e], slots.lab[s]),
            )
        })
        .collect();
    let mut sc = Scores::new(n_slots);
    for (e, (d76, d00)) in per_entry.iter().enumerate() {
        let w = en.weights[e];
        let s = slots.entry_slot[e] as usize;
        sc.pixels[s] += en.hist.counts[e];
        sc.uncertainty[s] += w * entropy[e] as f64;
        sc.de76 += w * d76;
        sc.de2000 += w * d00;
    }
    sc.entry_error = per_entry.iter().map(|p| p.1).collect();
    sc
}

/// Scores after dithering: per pixel, against the colour each pixel was given; chunk
/// sums reduced in chunk order.
fn score_pixels(
    en: &Entries<'_>,
    slots: &Slots,
    entropy: &[f32],
    pixel_entry: &[u32],
    pixel_slot: &[u16],
) -> Scores {
    let n_slots = slots.colours.len();
    let parts: Vec<(Vec<u64>, Vec<f64>, f64, f64)> = pixel_entry
        .par_chunks(1 << 16)
        .zip(pixel_slot.par_chunks(1 << 16))
        .map(|(es, ss)| {
            let mut px = vec![0u64; n_slots];
            let mut un = vec![0.0f64; n_slots];
            let (mut a, mut b) = (0.0, 0.0);
            for (&e, &s) in es.iter().zip(ss) {
                if s == NO_INDEX {
                    continue;
                }
                let (e, s) = (e as usize, s as usize);
                px[s] += 1;
                un[s] += entropy[e] as f64;
                a += colour::delta_e76(en.labs[e], slots.lab[s]);
                b += colour::delta_e2000(en.labs[e], slots.lab[s]);
            }
            (px, un, a, b)
        })
        .collect();
    let mut sc = Scores::new(n_slots);
    for (px, un, pa, pb) in parts {
        for s in 0..n_slots {
            sc.pixels[s] += px[s];
            sc.uncertainty[s] += un[s];
        }
        sc.de76 += pa;
        sc.de2000 += pb;
    }
    sc
}

/// Quantises, renders (with dithering if asked), scores, and writes the document.
fn render_and_score(
    en: &Entries<'_>,
    px: Pixels<'_>,
    opts: &ReduceOptions,
    fitted: Fitted,
    mut notes: Vec<String>,
) -> Reduction {
    let fixed = px.fixed;
    let slots = quantise(
        &fitted.means,
        &fitted.labels,
        opts.space,
        fixed.map(|f| f.colours.as_slice()),
    );
    let pixel_slot = match opts.dither {
        Dither::None => render::remap(&px.entry, &slots.entry_slot),
        Dither::FloydSteinberg => render::dither_floyd_steinberg(
            px.width as usize,
            &px.entry,
            &en.rows,
            &slots.features,
            3,
        ),
    };
    let mut sc = match opts.dither {
        Dither::None => score_entries(en, &slots, &fitted.entropy),
        Dither::FloydSteinberg => score_pixels(en, &slots, &fitted.entropy, &px.entry, &pixel_slot),
    };
    let total = en.hist.total() as f64;

    // Order: most pixels first (ties: earlier slot); unused slots are dropped, except the
    // pinned colours (the first clusters of a fit), which are always in the palette. A
    // given palette keeps its own order and every colour, so that one colour has one
    // index in every image mapped onto it.
    let n_slots = slots.colours.len();
    let pinned_slots: Vec<usize> = if fixed.is_none() && opts.target.is_none() {
        slots
            .cluster_slot
            .iter()
            .take(opts.pinned.len())
            .map(|&s| s as usize)
            .collect()
    } else {
        Vec::new()
    };
    let order: Vec<usize> = if fixed.is_some() {
        (0..n_slots).collect()
    } else {
        let mut order: Vec<usize> = (0..n_slots)
            .filter(|&s| sc.pixels[s] > 0 || pinned_slots.contains(&s))
            .collect();
        order.sort_by(|&a, &b| sc.pixels[b].cmp(&sc.pixels[a]).then(a.cmp(&b)));
        order
    };
    let mut new_index = vec![NO_INDEX; n_slots];
    for (i, &s) in order.iter().enumerate() {
        new_index[s] = i as u16;
    }
    let pixel_index: Vec<u16> = pixel_slot
        .par_iter()
        .with_min_len(1 << 14)
        .map(|&s| {
            if s == NO_INDEX {
                NO_INDEX
            } else {
                new_index[s as usize]
            }
        })
        .collect();
    let palette: Vec<[u8; 3]> = order.iter().map(|&s| slots.colours[s]).collect();
    let colors: Vec<PaletteColour> = order
        .iter()
        .enumerate()
        .map(|(i, &s)| PaletteColour {
            index: i,
            hex: colour::hex(slots.colours[s]),
            name: fixed.and_then(|f| f.name(s)).map(str::to_string),
            lab: slots.lab[s],
            pixels: sc.pixels[s],
            share: sc.pixels[s] as f64 / total,
            mean_uncertainty: if sc.pixels[s] > 0 {
                sc.uncertainty[s] / sc.pixels[s] as f64
            } else {
                0.0
            },
        })
        .collect();
    // What the palette lost: areas far from the palette colour of their entries (each
    // entry's own colour, before any dithering).
    let lost_areas = if px.entry.is_empty() {
        Vec::new()
    } else {
        if sc.entry_error.is_empty() {
            sc.entry_error = (0..en.hist.len())
                .into_par_iter()
                .with_min_len(4096)
                .map(|e| colour::delta_e2000(en.labs[e], slots.lab[slots.entry_slot[e] as usize]))
                .collect();
        }
        families::lost_areas(
            px.width,
            px.height,
            &px.entry,
            &sc.entry_error,
            &pixel_index,
            &en.labs,
            &palette,
        )
    };
    let warnings = families::lost_areas_warning(&lost_areas, fixed.is_some());
    notes.extend(palette_notes(
        opts,
        fixed.is_some(),
        palette.len(),
        en.hist.len(),
        fitted.beta,
    ));
    let document = PaletteDocument {
        header: DocumentHeader::new(None, super::document::engine_used(opts, fixed.is_some())),
        space: opts.space,
        // A given palette is mapped by nearest colour: no soft fit.
        mode: if fixed.is_some() {
            Mode::Hard
        } else {
            opts.engine.mode
        },
        k: palette.len(),
        beta: fitted.beta,
        iterations: fitted.iterations,
        sse: fitted.sse,
        mean_delta_e76: sc.de76 / total,
        mean_delta_e2000: sc.de2000 / total,
        colors,
        lost_areas,
        settings: super::document::settings(opts, fixed, fitted.family_moves),
        source: None,
        settings_fingerprint: None,
        colour_profile: None,
        input_profiles: Vec::new(),
        p95_delta_e2000: None,
        p99_delta_e2000: None,
        given_palette: fixed.and_then(|f| f.origin.clone()),
    };
    Reduction {
        width: px.width,
        height: px.height,
        palette,
        pixel_index,
        alpha: px.alpha,
        pixel_entry: px.entry,
        entry_uncertainty: fitted.entropy,
        document,
        notes,
        warnings: warnings.into_iter().collect(),
        entry_lab: en.labs.clone(),
        entry_error: sc.entry_error,
        metadata: Default::default(),
    }
}

/// Remarks on a palette smaller than asked for, and on soft mode that stayed hard.
fn palette_notes(
    opts: &ReduceOptions,
    fixed: bool,
    colours: usize,
    distinct: usize,
    beta: Option<f64>,
) -> Vec<String> {
    let mut notes = Vec::new();
    // Fewer colours than asked for although the image has more: means that collapsed
    // together (a very small β pulls every soft mean to the centre) or that round to one
    // sRGB colour.
    if !fixed && opts.target.is_none() && colours < opts.k && distinct > colours {
        notes.push(format!(
            "the palette has {colours} colours, not the {} asked for: the means came \
             together or round to the same sRGB colour{}",
            opts.k,
            match (opts.engine.mode, opts.engine.beta) {
                (Mode::Soft, Beta::Fixed(_)) => " (try a larger `beta` or `beta` auto)",
                _ => "",
            }
        ));
    }
    if !fixed && opts.engine.mode == Mode::Soft && beta.is_none() {
        notes.push(
            "every colour sits on a palette mean, so soft mode gives the hard result here \
             (beta is null and the uncertainty is 0)"
                .into(),
        );
    }
    notes
}
