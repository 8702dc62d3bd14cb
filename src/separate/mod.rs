//! The `separate` workflow: artwork to one plate per ink, with the inks chosen from a
//! shop's library to minimise CIEDE2000, small specks merged away, optional trapping,
//! a proof and a swatch sheet; on request, films a shop can expose screens from (see
//! [`films`]).

mod film_output;
pub mod films;
mod ink_choice;
pub mod regions;
pub mod select;
pub mod tint;
mod write;

pub use crate::output::file_safe;
pub use films::FilmSettings;
use ink_choice::choose_for_target;
pub use ink_choice::resolve_inks;
use write::write_plate;
pub use write::{plate_name, proof_rgba, summary_table, swatches_svg};

use crate::cluster::EngineOptions;
use crate::colour::inks::{self, Ink};
use crate::colour::{self, adapt, delta_e2000};
use crate::error::{Error, Result};
use crate::features::image::{image_colours, ImageColours, InputProfile};
use crate::limits::Limits;
use crate::output::DocumentHeader;
use crate::raster::{self, Decoded};
use rayon::prelude::*;
use regions::FIXED;
use select::{CostTable, Method};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Default smallest region a plate may hold, in pixels: a 4 × 4 speck (about 0.34 mm
/// at 300 dpi). Our choice for ordinary screen meshes; raise it for coarse ones.
pub const DEFAULT_MIN_AREA: usize = 16;

/// Default alpha threshold in per cent: pixels less opaque than this get no ink (common
/// practice: half opaque).
pub const DEFAULT_ALPHA_THRESHOLD: f64 = 50.0;

/// Settings of a separation.
#[derive(Debug, Clone, PartialEq)]
pub struct SeparateOptions {
    /// Inks to choose (forced inks count toward it). Ignored with `all`. Default: 4.
    pub k: usize,
    /// Inks that must be in the set, by name (case-insensitive).
    pub use_inks: Vec<String>,
    /// Use every ink in the library as given.
    pub all: bool,
    /// Paper or garment colour: pixels as near or nearer to it than to any chosen ink get no
    /// ink.
    pub substrate: Option<[u8; 3]>,
    /// Smallest 8-connected region of any plate, in pixels. Default: [`DEFAULT_MIN_AREA`].
    pub min_area: usize,
    /// Trap width in pixels: lighter inks spread this far under darker neighbours. Default: 0.
    pub trap: u32,
    /// Print resolution in dots per inch; default: from the file, if it records one.
    pub dpi: Option<f64>,
    /// The k-means engine's settings, for the k-means start of the ink search.
    pub engine: EngineOptions,
    /// Decode limits.
    pub limits: Limits,
    /// Choose the number of inks as the smallest meeting a ΔE2000 target (then `k` is
    /// unused). Default: off.
    pub target: Option<crate::features::quality::QualityTarget>,
    /// How inks are chosen: keep every distinct colour family the library can match
    /// (default) or the pixel-weighted ΔE2000 alone.
    pub objective: crate::families::Objective,
    /// Pixels whose alpha is below this share of opaque, in per cent, get no ink; the
    /// others are separated as if opaque. Default: [`DEFAULT_ALPHA_THRESHOLD`].
    pub alpha_threshold: f64,
    /// Films (and the stacked proof and per-plate previews); `None`: none. Default: none.
    pub films: Option<FilmSettings>,
    /// Remove plate, film, preview and cleanup files of an earlier run with other plates
    /// (after this run's outputs are in place) instead of refusing to run. Default: off.
    pub replace: bool,
}

impl Default for SeparateOptions {
    fn default() -> Self {
        SeparateOptions {
            k: 4,
            use_inks: Vec::new(),
            all: false,
            substrate: None,
            min_area: DEFAULT_MIN_AREA,
            trap: 0,
            dpi: None,
            engine: EngineOptions::default(),
            limits: Limits::default(),
            target: None,
            objective: crate::families::Objective::Families,
            alpha_threshold: DEFAULT_ALPHA_THRESHOLD,
            films: None,
            replace: false,
        }
    }
}

/// One ink of the separation document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InkReport {
    pub name: String,
    /// CIELAB D50 of the ink, as in the library.
    pub lab_d50: [f64; 3],
    /// Display colour (sRGB).
    pub hex: String,
    /// Pixels this plate prints, before trapping.
    pub pixels: u64,
    /// Share of the printed (inked) area, before trapping.
    pub coverage: f64,
    /// Printed area in cm² (needs a resolution), before trapping.
    pub area_cm2: Option<f64>,
    /// Mean CIEDE2000 between the artwork pixels of this plate and the ink.
    pub mean_delta_e2000: f64,
    /// File name of the plate.
    pub plate: String,
    /// Pixels this plate prints as printed: after trapping and, with films, after the
    /// minimum-feature cleanup (a tinted pixel counts once).
    #[serde(default)]
    pub pixels_printed: u64,
    /// `pixels_printed` over the same inked area as `coverage` (so the two compare
    /// directly; with trapping, the plates' sum exceeds 1).
    #[serde(default)]
    pub coverage_printed: f64,
    /// Ink on the film (after screening), over the same inked area as `coverage`; only
    /// when films were made.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub film_coverage: Option<f64>,
}

/// One film of the separation document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FilmReport {
    /// Film number (the underbase, when made, is 1) and print order.
    pub number: usize,
    pub print_order: usize,
    pub ink: String,
    /// `colour`, `underbase` or `highlight white`.
    pub role: String,
    /// Screen of its tints, or `solid`.
    pub screen: String,
    pub angle: Option<f64>,
    /// Share of the artwork area that is ink on the film.
    pub coverage_of_artwork: f64,
    /// Files of this film.
    pub files: Vec<String>,
}

/// The films part of the separation document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FilmsReport {
    pub dpi: f64,
    pub job: String,
    pub mirror: bool,
    pub margin_mm: f64,
    /// Page size in millimetres.
    pub page_mm: [f64; 2],
    pub tints: bool,
    /// Minimum feature in film pixels and millimetres, and what cleanup did.
    pub min_feature_px: Option<usize>,
    pub min_feature_mm: Option<f64>,
    pub cleanup_removed: usize,
    pub cleanup_grown: usize,
    pub films: Vec<FilmReport>,
    /// The PDF with every film, when written.
    pub pdf: Option<String>,
    pub notes: Vec<String>,
}

/// The separation document (`STEM.separation.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SeparationDocument {
    /// Tool version, input, seed and every engine setting.
    #[serde(flatten)]
    pub header: DocumentHeader,
    pub ink_library: Option<String>,
    /// How the inks were chosen: exhaustive (best subset), swaps (local optimum) or all.
    pub selection: String,
    /// `#rrggbb` of the substrate, or null.
    pub substrate: Option<String>,
    pub min_area: usize,
    pub trap: u32,
    pub dpi: Option<f64>,
    /// Mean CIEDE2000 over all non-transparent pixels between the artwork and its
    /// reproduction (ink or substrate).
    pub mean_delta_e2000: f64,
    /// Regions merged away by `min_area`, and small ones kept (nothing to merge into).
    pub regions_merged: usize,
    pub regions_kept_isolated: usize,
    /// Inks in print order (lightest first).
    pub inks: Vec<InkReport>,
    /// Alpha threshold in per cent (see [`SeparateOptions::alpha_threshold`]).
    #[serde(default = "default_alpha_threshold")]
    pub alpha_threshold: f64,
    /// The films, when made.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub films: Option<FilmsReport>,
    /// How the number of inks was chosen, when a ΔE2000 target chose it.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
    /// How the artwork's colours were read (its embedded colour profile).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input_profile: Option<InputProfile>,
}

fn default_alpha_threshold() -> f64 {
    DEFAULT_ALPHA_THRESHOLD
}

/// A separation in memory.
#[derive(Debug, Clone)]
pub struct Separation {
    pub width: u32,
    pub height: u32,
    /// Chosen inks in plate (print) order, lightest first.
    pub inks: Vec<Ink>,
    /// Per pixel: plate index, `inks.len()` for substrate (no ink), or [`FIXED`] (transparent).
    pub labels: Vec<u16>,
    /// Per plate, per pixel: prints here (after trapping).
    pub masks: Vec<Vec<bool>>,
    /// With tints: per pixel, the amount (0..=255) its own plate prints there (see
    /// `tint.rs`); a trapped spread onto a neighbour prints solid.
    pub tints: Option<Vec<u8>>,
    pub document: SeparationDocument,
}

/// Separates decoded artwork with a library (in memory).
pub fn separate_image(
    img: &Decoded,
    library: &[Ink],
    opts: &SeparateOptions,
    library_path: &Path,
    stem: &str,
) -> Result<Separation> {
    let (k, forced) = resolve_inks(library, opts, library_path)?;
    ink_choice::check_sizes(opts, img.width, img.height)?;
    let mut ph = crate::trace::Phases::start("separate");
    // Read through the image's embedded profile, as `reduce` reads it.
    let ImageColours {
        indexed: ih,
        profile: read,
    } = image_colours(img);
    let hist = &ih.histogram;
    if hist.is_empty() {
        return Err(Error::Data(
            "every pixel is fully transparent; there is nothing to separate".into(),
        ));
    }
    // The cost table holds 4 bytes per colour and ink: bound it before allocating.
    let table_bytes = (hist.len() as u64)
        .saturating_mul(library.len() as u64)
        .saturating_mul(4);
    if table_bytes > opts.limits.max_alloc {
        return Err(Error::LimitExceeded {
            path: library_path.into(),
            message: format!(
                "matching {} artwork colours against {} inks needs {table_bytes} bytes, over \
                 the limit of {} bytes; use a smaller ink library",
                hist.len(),
                library.len(),
                opts.limits.max_alloc
            ),
        });
    }
    let reader = hist.reader();
    let lin: Vec<[f64; 3]> = (0..hist.len())
        .into_par_iter()
        .with_min_len(4096)
        .map(|i| reader.linear(i))
        .collect();
    let labs: Vec<[f64; 3]> = lin
        .par_iter()
        .with_min_len(4096)
        .map(|&l| adapt::linear_to_lab_d50(l))
        .collect();
    let weights = hist.weights();
    let substrate_lab = opts.substrate.map(adapt::srgb8_to_lab_d50);
    ph.mark("histogram and CIELAB D50");
    let mut table = CostTable::new(&labs, &weights, library, substrate_lab);
    let tints = opts.films.as_ref().is_some_and(|f| f.tints);
    let amounts = tints.then(|| {
        let paper = opts.substrate.unwrap_or([255, 255, 255]);
        tint::tinted_costs(&mut table, &lin, &labs, library, paper)
    });
    ph.mark("cost table");
    let mut notes = Vec::new();
    if img.more_frames {
        notes.push(crate::raster::MORE_FRAMES_NOTE.to_string());
    }
    // Named by the stem here; `separate_file` puts the file name in.
    let input_profile = InputProfile::of_image(stem.to_string(), read.as_ref());
    notes.extend(input_profile.note.clone());
    let selection = if opts.all {
        select::Selection {
            chosen: (0..library.len()).collect(),
            total_delta_e: table.objective(&(0..library.len()).collect::<Vec<_>>()),
            method: Method::All,
        }
    } else if let Some(target) = &opts.target {
        target.check()?;
        let (selection, note) =
            choose_for_target(&table, &labs, &weights, library, &forced, opts, target);
        notes.push(note);
        selection
    } else {
        let mut selection = select::choose(&select::InkSearch {
            t: &table,
            entry_labs: &labs,
            inks: library,
            k,
            forced: &forced,
            engine: &opts.engine,
        });
        if opts.objective == crate::families::Objective::Families {
            let families = crate::families::distinct_families(
                crate::families::ImageEntries {
                    width: img.width,
                    height: img.height,
                    pixel_entry: &ih.pixel_entry,
                },
                &labs,
                &weights,
            );
            if let Some(kept) = select::keep_families(
                &table,
                library,
                substrate_lab,
                &families,
                &selection.chosen,
                &forced,
            ) {
                notes.push(format!(
                    "swapped {} ink{} so that distinct colour families of the artwork keep a \
                     matching ink (families lost: {} before, {} after)",
                    kept.swaps,
                    if kept.swaps == 1 { "" } else { "s" },
                    kept.lost_before,
                    kept.lost_after,
                ));
                selection = select::Selection {
                    total_delta_e: table.objective(&kept.chosen),
                    chosen: kept.chosen,
                    method: selection.method,
                };
            }
        }
        selection
    };

    ph.mark("ink choice");
    // Print order: lightest first (ties by name).
    let mut order = selection.chosen.clone();
    order.sort_by(|&a, &b| {
        library[b].lab_d50[0]
            .total_cmp(&library[a].lab_d50[0])
            .then(library[a].name.cmp(&library[b].name))
    });
    // Each entry to its nearest ink; the substrate (free: it costs no screen) where it is
    // as near or nearer.
    let label_entries = |order: &[usize]| -> Vec<u16> {
        let substrate_label = order.len() as u16;
        (0..hist.len())
            .into_par_iter()
            .with_min_len(4096)
            .map(|e| {
                let mut best = (f32::INFINITY, 0u16);
                for (p, &i) in order.iter().enumerate() {
                    let c = table.cost[e * table.m + i];
                    if c < best.0 {
                        best = (c, p as u16);
                    }
                }
                let prints = amounts
                    .as_ref()
                    .is_none_or(|a| a[e * table.m + order[best.1 as usize]] > 0);
                match &table.substrate {
                    Some(s) if s[e] <= best.0 => substrate_label,
                    _ if !prints => substrate_label,
                    _ => best.1,
                }
            })
            .collect()
    };
    let mut entry_label = label_entries(&order);
    // A chosen ink that no pixel takes would burn a screen for a blank plate: it is left
    // out (unless `use` asked for it). The other inks' pixels do not change.
    let idle: Vec<usize> = {
        let mut weight = vec![0.0f64; order.len()];
        for (&l, &w) in entry_label.iter().zip(&weights) {
            if let Some(v) = weight.get_mut(l as usize) {
                *v += w;
            }
        }
        order
            .iter()
            .zip(&weight)
            .filter(|&(i, &w)| w == 0.0 && !forced.contains(i))
            .map(|(&i, _)| i)
            .collect()
    };
    if !opts.all && !idle.is_empty() && idle.len() < order.len() {
        order.retain(|i| !idle.contains(i));
        entry_label = label_entries(&order);
        let names: Vec<&str> = idle.iter().map(|&i| library[i].name.as_str()).collect();
        notes.push(ink_choice::idle_note(
            &names,
            order.len(),
            table.substrate.is_some(),
        ));
    }
    let chosen: Vec<Ink> = order.iter().map(|&i| library[i].clone()).collect();
    let n_inks = chosen.len();
    // Transparent pixels map to `render::NO_INDEX`, which is `FIXED`.
    const _: () = assert!(crate::render::NO_INDEX == FIXED);
    let mut labels: Vec<u16> = crate::render::remap(&ih.pixel_entry, &entry_label);
    let (w, h) = (img.width as usize, img.height as usize);
    if img.has_alpha {
        let (partial, dropped) =
            films::apply_alpha_threshold(&mut labels, &img.alpha8(), opts.alpha_threshold / 100.0);
        if partial > 0 {
            notes.push(format!(
                "transparency: {partial} pixels are partly transparent; {dropped} of them, less \
                 opaque than the `alpha_threshold` of {} %, get no ink, the other {} are \
                 separated as if opaque",
                opts.alpha_threshold,
                partial - dropped
            ));
        }
    }
    if let Some(lab) = substrate_lab {
        let underbase = opts.films.as_ref().is_some_and(|f| f.underbase.is_some());
        if lab[0] < films::DARK_SUBSTRATE_LIGHTNESS && !underbase {
            notes.push(format!(
                "the substrate is dark (L* {:.0}); colours printed straight onto it lose most \
                 of their brightness: with films, `underbase` lays a white under them",
                lab[0]
            ));
        }
    }
    ph.mark("labels");
    let merge = regions::merge_small_regions(&mut labels, w, h, opts.min_area);
    ph.mark("min-area merge");
    let mut lightness: Vec<f64> = chosen.iter().map(|i| i.lab_d50[0]).collect();
    lightness.push(substrate_lab.map_or(100.0, |l| l[0]));
    let mut is_ink = vec![true; n_inks];
    is_ink.push(false);
    let mut masks = regions::trap(&labels, w, h, &lightness, &is_ink, opts.trap);
    masks.truncate(n_inks);
    ph.mark("trapping");
    let printed: Vec<u64> = masks
        .iter()
        .map(|m| m.iter().filter(|&&v| v).count() as u64)
        .collect();

    // Statistics per plate from the final labels (after merging, before trapping). The
    // ΔE2000 of each (entry, ink) pair is already in the cost table.
    let substrate_cost = |e: usize| -> f64 {
        match &table.substrate {
            Some(s) => s[e] as f64,
            None => delta_e2000(labs[e], [100.0, 0.0, 0.0]),
        }
    };
    let parts: Vec<(Vec<u64>, Vec<f64>)> = labels
        .par_chunks(1 << 16)
        .zip(ih.pixel_entry.par_chunks(1 << 16))
        .map(|(ls, es)| {
            let mut px = vec![0u64; n_inks + 1];
            let mut de = vec![0.0f64; n_inks + 1];
            for (&l, &e) in ls.iter().zip(es) {
                if l == FIXED {
                    continue;
                }
                let (l, e) = (l as usize, e as usize);
                px[l] += 1;
                de[l] += if l < n_inks {
                    table.cost[e * table.m + order[l]] as f64
                } else {
                    substrate_cost(e)
                };
            }
            (px, de)
        })
        .collect();
    let mut px = vec![0u64; n_inks + 1];
    let mut de = vec![0.0f64; n_inks + 1];
    for (p, d) in parts {
        for l in 0..=n_inks {
            px[l] += p[l];
            de[l] += d[l];
        }
    }
    let inked: u64 = px[..n_inks].iter().sum();
    let total: u64 = px.iter().sum();
    let dpi = opts.dpi.or(img.dpi);
    let cm2_per_px = dpi.map(|d| (2.54 / d) * (2.54 / d));
    let inks_report: Vec<InkReport> = chosen
        .iter()
        .enumerate()
        .map(|(p, ink)| InkReport {
            name: ink.name.clone(),
            lab_d50: ink.lab_d50,
            hex: ink.hex.clone(),
            pixels: px[p],
            coverage: if inked > 0 {
                px[p] as f64 / inked as f64
            } else {
                0.0
            },
            area_cm2: cm2_per_px.map(|a| a * px[p] as f64),
            mean_delta_e2000: if px[p] > 0 { de[p] / px[p] as f64 } else { 0.0 },
            plate: plate_name(stem, p + 1, &ink.name),
            pixels_printed: printed[p],
            coverage_printed: if inked > 0 {
                printed[p] as f64 / inked as f64
            } else {
                0.0
            },
            film_coverage: None,
        })
        .collect();
    notes.extend(ink_choice::blank_plate_note(
        &chosen,
        &px,
        merge.merged,
        opts,
    ));
    ph.mark("statistics");
    let document = SeparationDocument {
        header: DocumentHeader::new(None, opts.engine),
        ink_library: library_path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned()),
        selection: match selection.method {
            Method::Exhaustive => "exhaustive",
            Method::Swaps => "swaps",
            Method::All => "all",
        }
        .into(),
        substrate: opts.substrate.map(colour::hex),
        min_area: opts.min_area,
        trap: opts.trap,
        dpi,
        mean_delta_e2000: de.iter().sum::<f64>() / total as f64,
        regions_merged: merge.merged,
        regions_kept_isolated: merge.kept_isolated,
        inks: inks_report,
        alpha_threshold: opts.alpha_threshold,
        films: None,
        notes,
        input_profile: Some(input_profile),
    };
    let tints = amounts.map(|a| tint::pixel_amounts(&labels, &ih.pixel_entry, &a, table.m, &order));
    Ok(Separation {
        width: img.width,
        height: img.height,
        inks: chosen,
        labels,
        masks,
        tints,
        document,
    })
}

/// What [`separate_file`] did.
#[derive(Debug, Clone)]
pub struct SeparateReport {
    pub outputs: Vec<PathBuf>,
    /// Files of an earlier run with other plates, removed with `replace`.
    pub removed: Vec<PathBuf>,
    pub document: SeparationDocument,
    pub seconds: f64,
}

/// Reads artwork and library, separates, and writes every output atomically. Plate,
/// film, preview and cleanup files of the same stem left by an earlier run with other
/// plates make the run refuse, or with `replace` are removed once the new set is in place.
pub fn separate_file(
    input: &Path,
    library_path: &Path,
    out_dir: &Path,
    opts: &SeparateOptions,
) -> Result<SeparateReport> {
    let t0 = Instant::now();
    if let Some(d) = opts.dpi {
        if !(d.is_finite() && d > 0.0) {
            return Err(crate::error::ParamsError::Other(format!(
                "`dpi` must be a positive number (got {d})"
            ))
            .into());
        }
    }
    if !(opts.alpha_threshold.is_finite() && (0.0..=100.0).contains(&opts.alpha_threshold)) {
        return Err(crate::error::ParamsError::Other(format!(
            "`alpha_threshold` must be between 0 and 100 per cent (got {})",
            opts.alpha_threshold
        ))
        .into());
    }
    if let (Some(f), Some(d)) = (&opts.films, opts.dpi) {
        f.check(d)?;
    }
    let library = inks::read_library_with(library_path, &opts.limits)?;
    resolve_inks(&library, opts, library_path)?;
    let stem = crate::output::stem_of(input)?;
    let ((sep, stale), outputs) = crate::output::one_input(
        input,
        out_dir,
        &[library_path],
        &[],
        || raster::decode(input, &opts.limits),
        |img, set| {
            let mut sep = separate_image(&img, &library, opts, library_path, &stem)?;
            sep.document.header.input = input.file_name().map(|n| n.to_string_lossy().into_owned());
            if let (Some(p), Some(name)) = (
                sep.document.input_profile.as_mut(),
                sep.document.header.input.as_ref(),
            ) {
                p.file = name.clone();
            }
            let made = match &opts.films {
                Some(f) => Some(film_output::make(&mut sep, &img, f, &stem)?),
                None => None,
            };
            drop(img);
            let mut names: Vec<String> =
                sep.document.inks.iter().map(|i| i.plate.clone()).collect();
            if let Some(m) = &made {
                names.extend(m.names.iter().cloned());
            }
            let stale = films::stale_files(set.dir(), &stem, &names);
            if !stale.is_empty() && !opts.replace {
                return Err(films::stale_error(set.dir(), &stale));
            }
            let json = serde_json::to_string_pretty(&sep.document).expect("document serialises");
            set.write_bytes(
                &format!("{stem}.separation.json"),
                format!("{json}\n").as_bytes(),
            )?;
            for (i, ink) in sep.document.inks.iter().enumerate() {
                let mask = &sep.masks[i];
                set.write(&ink.plate, |w| {
                    write_plate(w, sep.width, sep.height, mask, sep.document.dpi)
                })?;
            }
            let proof = proof_rgba(&sep, opts.substrate);
            set.write(&format!("{stem}.proof.png"), |w| {
                raster::write_rgba_png(w, sep.width, sep.height, &proof)
            })?;
            set.write_bytes(
                &format!("{stem}.swatches.svg"),
                swatches_svg(&sep.document).as_bytes(),
            )?;
            if let Some(m) = &made {
                film_output::write(set, m, &sep, opts, &stem)?;
            }
            Ok((sep, stale))
        },
    )?;
    // The new set is in place: only now may the earlier run's files go.
    let mut removed = Vec::new();
    for p in stale {
        std::fs::remove_file(&p).map_err(|e| Error::io(&p, e))?;
        removed.push(p);
    }
    Ok(SeparateReport {
        outputs,
        removed,
        document: sep.document,
        seconds: t0.elapsed().as_secs_f64(),
    })
}
