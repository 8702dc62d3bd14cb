//! Colour families: keeping every distinct colour of an image in its palette, and
//! reporting the areas a palette still renders far from their colour.
//!
//! Pixel-weighted squared error lets a large smooth area outvote a small shape in a
//! colour unlike anything around it: k-means gives the area two nearly equal colours and
//! merges the shape into a neighbour. [`keep_families`] runs after the k-means fit and
//! repairs that, judged where the eye judges it (CIEDE2000 against the palette colours as
//! written):
//!
//! 1. The distinct colours are summarised as cells of a grid in the clustering space
//!    (2 ΔE*ab wide in CIELAB), each with its weight and CIELAB centroid.
//! 2. A cell is *lost* when its colour is more than [`LOST_DELTA_E`] from the palette
//!    colour of its nearest mean. Lost cells that touch (26-neighbours on the grid) form a
//!    lost area of colour space; one holding at least [`min_family_pixels`] pixels whose
//!    core (the cells within 6 ΔE*ab of its heaviest cell) is itself more than
//!    [`LOST_DELTA_E`] from every palette colour is a *lost family*.
//! 3. While a family is lost, a move gives up one mean (first the lighter of a pair of
//!    near-duplicate palette colours, closer than [`NEAR_DUPLICATE_DELTA_E`]; then the means
//!    whose rows would cost least to hand to their second-nearest mean, Σ w·(d₂ − d₁), as in
//!    split-and-merge) and places it on the family's core; Lloyd re-converges on the cells.
//!    The move is kept only if the lost families weigh less afterwards: 3 for each
//!    clearly lost one (more than [`LOST_DELTA_E`] + 2 away), 1 for each just lost one. This is the relocation
//!    move of split-and-merge k-means (Kaukoranta, Fränti & Nevalainen 1998) and of random
//!    swap (Fränti 2018), with the place chosen by the lost family and the judge a count of
//!    lost families instead of the SSE.
//! 4. If any move was kept, Lloyd runs on every row from the moved means, and the result is
//!    kept only if its lost families still weigh less than the plain fit's.
//!
//! Nothing here is random, and sums run in row order, so the result does not depend on the
//! thread count. Pinned means (the first `fixed`) are never given up.

use crate::cluster::{self, Dataset, LloydResult, Stop};
use crate::colour::{self, Space};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// A family or area is lost when its colour is more than this CIEDE2000 from its palette
/// colour.
pub const LOST_DELTA_E: f64 = 6.0;
/// Areas of the image farther than this CIEDE2000 from their palette colour are reported.
pub const REPORT_DELTA_E: f64 = 10.0;
/// Smallest area reported (pixels), however large the image: a 4 × 4 patch.
pub const SMALL_AREA_PIXELS: usize = 16;
/// Areas smaller than [`min_family_pixels`] (down to [`SMALL_AREA_PIXELS`]) are reported
/// when rendered on average at least this CIEDE2000 from their colour: twice
/// [`REPORT_DELTA_E`], a different colour rather than a coarse shade of it. On the
/// photographs of the fixtures enlarged past 400 000 pixels (K = 8 and 16), a limit of 15
/// would report about three times as many areas as before, 20 (with the solid rule of
/// [`lost_areas`]) a tenth more, none at K = 16 (figures in DEVELOPERS.md). Smaller
/// groups of colours this far from every other are families too (see [`image_families`]).
pub const STRONG_DELTA_E: f64 = 20.0;
/// Palette colours closer than this CIEDE2000 count as near duplicates.
pub const NEAR_DUPLICATE_DELTA_E: f64 = 3.0;
/// Radius, in ΔE*ab, of a lost family's core around its heaviest cell.
const CORE_RADIUS: f64 = 6.0;

/// Smallest family or area that counts, in pixels, for `total` opaque pixels: 0.1 % of
/// them, at most 400 pixels (a 20 × 20 shape in any image) and at least 16.
pub fn min_family_pixels(total: f64) -> f64 {
    (total * 0.001).clamp(16.0, 400.0)
}

/// How colours are chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Objective {
    /// k-means, then moves that bring back every distinct colour family the palette lost
    /// (see the module documentation). The default.
    Families,
    /// Plain k-means: the pixel-weighted squared error alone (`sse` is accepted too).
    Plain,
}

impl std::str::FromStr for Objective {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "families" => Ok(Objective::Families),
            "plain" | "sse" => Ok(Objective::Plain),
            _ => Err(format!("unknown objective '{s}' (use families or plain)")),
        }
    }
}

impl Objective {
    /// Lowercase name, as in documents.
    pub fn name(self) -> &'static str {
        match self {
            Objective::Families => "families",
            Objective::Plain => "plain",
        }
    }
}

/// The distinct colours summarised on a grid of the clustering space.
struct Cells {
    /// Centroids in the clustering space, `n × 3`.
    feat: Vec<f32>,
    /// Centroids in CIELAB.
    lab: Vec<[f64; 3]>,
    weight: Vec<f64>,
    key: Vec<[i32; 3]>,
    index: HashMap<[i32; 3], u32>,
    /// Cell of each entry (`u32::MAX` for entries of no weight).
    of_entry: Vec<u32>,
}

impl Cells {
    fn new(rows: &[f32], labs: &[[f64; 3]], weights: &[f64], space: Space) -> Cells {
        let side = match space {
            Space::Cielab => 2.0,
            Space::Oklab => 0.02,
        };
        let mut index: HashMap<[i32; 3], u32> = HashMap::new();
        let mut key = Vec::new();
        let mut sums: Vec<([f64; 3], [f64; 3], f64)> = Vec::new();
        let mut of_entry = vec![u32::MAX; weights.len()];
        for (e, ((x, lab), &w)) in rows.chunks_exact(3).zip(labs).zip(weights).enumerate() {
            if w <= 0.0 {
                continue;
            }
            let k = [
                (x[0] as f64 / side).floor() as i32,
                (x[1] as f64 / side).floor() as i32,
                (x[2] as f64 / side).floor() as i32,
            ];
            let c = *index.entry(k).or_insert_with(|| {
                key.push(k);
                sums.push(([0.0; 3], [0.0; 3], 0.0));
                (sums.len() - 1) as u32
            }) as usize;
            of_entry[e] = c as u32;
            let s = &mut sums[c];
            for d in 0..3 {
                s.0[d] += w * x[d] as f64;
                s.1[d] += w * lab[d];
            }
            s.2 += w;
        }
        let mut feat = Vec::with_capacity(sums.len() * 3);
        let mut lab = Vec::with_capacity(sums.len());
        let mut weight = Vec::with_capacity(sums.len());
        for (f, l, w) in sums {
            feat.extend(f.iter().map(|v| (v / w) as f32));
            lab.push([l[0] / w, l[1] / w, l[2] / w]);
            weight.push(w);
        }
        Cells {
            feat,
            lab,
            weight,
            key,
            index,
            of_entry,
        }
    }

    fn len(&self) -> usize {
        self.weight.len()
    }
}

/// CIELAB of each mean's palette colour, as written (rounded to sRGB8).
fn palette_labs(means: &[f64], space: Space) -> Vec<[f64; 3]> {
    means
        .chunks_exact(3)
        .map(|m| colour::srgb8_to_lab(colour::space_to_srgb8([m[0], m[1], m[2]], space)))
        .collect()
}

/// Every cell judged against a set of means.
struct Judged {
    /// CIEDE2000 from each cell to its nearest mean's palette colour.
    error: Vec<f64>,
    /// Per mean: Σ w·(d₂ − d₁) over its cells, what giving it up would cost in squared error.
    give_up_cost: Vec<f64>,
    /// Per mean: the weight of its cells.
    mean_weight: Vec<f64>,

    palette_lab: Vec<[f64; 3]>,
}

fn judge(cells: &Cells, means: &[f64], space: Space) -> Judged {
    let k = means.len() / 3;
    let palette_lab = palette_labs(means, space);
    let m32: Vec<f32> = means.iter().map(|&v| v as f32).collect();
    let per: Vec<(u32, f64, f64)> = (0..cells.len())
        .into_par_iter()
        .with_min_len(1024)
        .map(|c| {
            let (j, d1, d2) = cluster::nearest_two(&cells.feat[c * 3..c * 3 + 3], &m32, 3);
            let e = colour::delta_e2000(cells.lab[c], palette_lab[j]);
            (j as u32, e, (d2 - d1) as f64)
        })
        .collect();
    let mut give_up_cost = vec![0.0; k];
    let mut mean_weight = vec![0.0; k];
    let mut error = Vec::with_capacity(per.len());
    for (c, (j, e, gap)) in per.into_iter().enumerate() {
        let w = cells.weight[c];
        if k > 1 {
            give_up_cost[j as usize] += w * gap;
        }
        mean_weight[j as usize] += w;
        error.push(e);
    }
    Judged {
        error,
        give_up_cost,
        mean_weight,
        palette_lab,
    }
}

/// A distinct colour family of an image.
#[derive(Debug, Clone, PartialEq)]
pub struct Family {
    /// Solid pixels of the family (see [`image_families`]).
    pub pixels: f64,
    /// Mean CIELAB (D65) of those pixels.
    pub lab: [f64; 3],
    /// Mean in the clustering space.
    pub feat: [f32; 3],
}

/// Two neighbouring pixels closer than this ΔE*ab are of one surface.
pub const SOLID_DELTA_E: f64 = 14.0;
/// Radius, in ΔE*ab, of the colour group gathered around each heaviest remaining colour.
const GROUP_RADIUS: f64 = 8.0;
/// A family is distinct when every other family is at least this CIEDE2000 away.
pub const DISTINCT_DELTA_E: f64 = 12.0;

/// The pixels of an image as histogram entries: what [`keep_families`] needs to find the
/// image's colour families.
#[derive(Debug, Clone, Copy)]
pub struct ImageEntries<'a> {
    pub width: u32,
    pub height: u32,
    /// Histogram entry of every pixel ([`crate::features::histogram::TRANSPARENT`] where alpha = 0).
    pub pixel_entry: &'a [u32],
}

/// The distinct colour families of an image:
///
/// 1. A pixel is *solid* when it has a horizontal and a vertical 4-neighbour within
///    [`SOLID_DELTA_E`] (ΔE*ab) of it: inside a flat area, a gradient, a rule or a dot two
///    or more pixels wide, but not on an anti-aliased or blurred border one pixel wide,
///    whose colours are mixtures.
/// 2. Solid pixels are counted per cell of colour, and the cells gathered, heaviest first,
///    into groups of the cells within 8 ΔE*ab of it.
/// 3. A group of at least half of [`min_family_pixels`] solid pixels (borders and JPEG
///    blur leave a small shape fewer solid pixels than pixels) is a family. It is
///    *distinct* when every heavier group is at least [`DISTINCT_DELTA_E`] (ΔE2000) away;
///    a group near a heavier one shades into it. In a photograph most colours shade into
///    their neighbours, while a small shape in a colour unlike its surroundings stands
///    alone. Distinct families are returned, largest first.
/// 4. A smaller group, down to half of [`SMALL_AREA_PIXELS`] solid pixels, is a family
///    too when it is at least [`STRONG_DELTA_E`] from every group of step 3 and every
///    heavier such small family: a dot in a colour unlike anything else in the image,
///    too small to count in step 3 on a large image. These come last, largest first.
fn image_families(image: ImageEntries, cells: &Cells, labs: &[[f64; 3]]) -> Vec<Family> {
    let mut ph = crate::trace::Phases::start("image families");
    let (w, h) = (image.width as usize, image.height as usize);
    let pixel_entry = image.pixel_entry;
    if pixel_entry.len() != w * h || pixel_entry.is_empty() {
        return Vec::new();
    }
    let transparent = crate::features::histogram::TRANSPARENT;
    let limit = (SOLID_DELTA_E * SOLID_DELTA_E) as f32;
    // CIELAB of each entry in single precision with its cell, read once per pixel; NaN
    // for transparent pixels: every comparison with NaN is false, so a transparent pixel
    // is near nothing.
    let entry_px: Vec<([f32; 3], u32)> = labs
        .iter()
        .zip(&cells.of_entry)
        .map(|(l, &cell)| ([l[0] as f32, l[1] as f32, l[2] as f32], cell))
        .collect();
    let px_of = |e: u32| {
        if e == transparent {
            ([f32::NAN; 3], u32::MAX)
        } else {
            entry_px[e as usize]
        }
    };
    // Two neighbouring pixels are of one surface when within SOLID_DELTA_E of each other
    // (symmetric, so each pair is tested once: across with the pixel to its right, down
    // with the pixel below).
    let near = |(x, _): &([f32; 3], u32), (y, _): &([f32; 3], u32)| {
        (x[0] - y[0]).powi(2) + (x[1] - y[1]).powi(2) + (x[2] - y[2]).powi(2) <= limit
    };
    // Solid pixels per cell, counted over fixed bands of rows and added in band order.
    const BAND: usize = 64;
    let n_cells = cells.len();
    let parts: Vec<(Vec<u32>, usize)> = (0..h.div_ceil(BAND))
        .into_par_iter()
        .map(|band| {
            let mut counts = vec![0u32; n_cells];
            let mut opaque = 0usize;
            let y0 = band * BAND;
            let px_row = |y: usize, out: &mut Vec<([f32; 3], u32)>| {
                out.clear();
                out.extend(pixel_entry[y * w..(y + 1) * w].iter().map(|&e| px_of(e)));
            };
            // The CIELAB and cell of this row's pixels and the next's; right[x]: pixel x is near pixel x + 1
            // of its row; down[x]: near the pixel below; up: the row above's down.
            let (mut cur, mut next) = (Vec::with_capacity(w), Vec::with_capacity(w));
            let mut right = vec![false; w];
            let mut up = vec![false; w];
            let mut down = vec![false; w];
            px_row(y0, &mut cur);
            if y0 > 0 {
                px_row(y0 - 1, &mut next);
                for ((u, a), b) in up.iter_mut().zip(&next).zip(&cur) {
                    *u = near(a, b);
                }
            }
            for y in y0..(y0 + BAND).min(h) {
                for (r, p) in right.iter_mut().zip(cur.windows(2)) {
                    *r = near(&p[0], &p[1]);
                }
                if y + 1 < h {
                    px_row(y + 1, &mut next);
                    for ((d, a), b) in down.iter_mut().zip(&cur).zip(&next) {
                        *d = near(a, b);
                    }
                } else {
                    down.iter_mut().for_each(|d| *d = false);
                }
                let row = &pixel_entry[y * w..(y + 1) * w];
                for x in 0..w {
                    if row[x] == transparent {
                        continue;
                    }
                    opaque += 1;
                    let across = (x > 0 && right[x - 1]) || right[x];
                    if across && (up[x] || down[x]) {
                        let cell = cur[x].1;
                        if cell != u32::MAX {
                            counts[cell as usize] += 1;
                        }
                    }
                }
                std::mem::swap(&mut up, &mut down);
                std::mem::swap(&mut cur, &mut next);
            }
            (counts, opaque)
        })
        .collect();
    let mut solid = vec![0u32; n_cells];
    let mut opaque = 0;
    for (counts, o) in parts {
        opaque += o;
        for (s, c) in solid.iter_mut().zip(counts) {
            *s += c;
        }
    }
    ph.mark("solid pixels");
    let min_pixels = 0.5 * min_family_pixels(opaque as f64);

    // Groups around the heaviest remaining cell (ties: lower cell).
    let mut order: Vec<usize> = (0..n_cells).filter(|&c| solid[c] > 0).collect();
    order.sort_by(|&a, &b| solid[b].cmp(&solid[a]).then(a.cmp(&b)));
    let mut taken = vec![false; n_cells];
    // Cells are 2 units of the clustering space wide (about 2 ΔE*ab in either space).
    let reach = (GROUP_RADIUS / 2.0).ceil() as i32 + 1;
    let mut groups: Vec<Family> = Vec::new();
    let mut small: Vec<Family> = Vec::new();
    for &seed in &order {
        if taken[seed] {
            continue;
        }
        let key = cells.key[seed];
        let centre = cells.lab[seed];
        let (mut n, mut l, mut f) = (0.0, [0.0f64; 3], [0.0f64; 3]);
        for dx in -reach..=reach {
            for dy in -reach..=reach {
                for dz in -reach..=reach {
                    let q = [key[0] + dx, key[1] + dy, key[2] + dz];
                    let Some(&c) = cells.index.get(&q) else {
                        continue;
                    };
                    let c = c as usize;
                    if taken[c] || solid[c] == 0 {
                        continue;
                    }
                    let cl = cells.lab[c];
                    let d2: f64 = (0..3).map(|d| (cl[d] - centre[d]).powi(2)).sum();
                    if d2 <= GROUP_RADIUS * GROUP_RADIUS {
                        taken[c] = true;
                        let cw = solid[c] as f64;
                        n += cw;
                        for d in 0..3 {
                            l[d] += cw * cl[d];
                            f[d] += cw * cells.feat[c * 3 + d] as f64;
                        }
                    }
                }
            }
        }
        let group = Family {
            pixels: n,
            lab: [l[0] / n, l[1] / n, l[2] / n],
            feat: [(f[0] / n) as f32, (f[1] / n) as f32, (f[2] / n) as f32],
        };
        if n >= min_pixels {
            groups.push(group);
        } else if n >= SMALL_AREA_PIXELS as f64 / 2.0 {
            small.push(group);
        }
    }
    // Heaviest first (stable). Groups closer than DISTINCT_DELTA_E are linked, and a chain
    // of links is one family (a long gradient is a chain), headed by its heaviest group.
    groups.sort_by(|a, b| b.pixels.total_cmp(&a.pixels));
    let mut head: Vec<usize> = (0..groups.len()).collect();
    fn root(head: &mut [usize], mut i: usize) -> usize {
        while head[i] != i {
            head[i] = head[head[i]];
            i = head[i];
        }
        i
    }
    for i in 0..groups.len() {
        for j in 0..i {
            if colour::delta_e2000(groups[i].lab, groups[j].lab) < DISTINCT_DELTA_E {
                let (a, b) = (root(&mut head, i), root(&mut head, j));
                // The lower index (the heavier group) stays the root.
                head[a.max(b)] = a.min(b);
            }
        }
    }
    let distinct: Vec<bool> = (0..groups.len()).map(|i| root(&mut head, i) == i).collect();
    let mut families: Vec<Family> = groups
        .iter()
        .zip(distinct)
        .filter_map(|(g, d)| d.then_some(g.clone()))
        .collect();
    // A smaller group (down to half of SMALL_AREA_PIXELS) is a family when it is at least
    // STRONG_DELTA_E from every group above and every heavier small family: a small shape
    // in a colour unlike anything else in the image.
    small.sort_by(|a, b| b.pixels.total_cmp(&a.pixels));
    let mut strong: Vec<Family> = Vec::new();
    for g in small {
        let far = |o: &Family| colour::delta_e2000(g.lab, o.lab) >= STRONG_DELTA_E;
        if groups.iter().chain(&strong).all(far) {
            strong.push(g);
        }
    }
    families.extend(strong);
    ph.mark("groups");
    families
}

/// The distinct colour families of an image (see [`image_families`]) from its histogram:
/// entries' CIELAB values (`labs`, any white point: the families come out in the same
/// CIELAB) and pixel counts (`weights`).
pub fn distinct_families(image: ImageEntries, labs: &[[f64; 3]], weights: &[f64]) -> Vec<Family> {
    let rows: Vec<f32> = labs
        .iter()
        .flat_map(|l| [l[0] as f32, l[1] as f32, l[2] as f32])
        .collect();
    let cells = Cells::new(&rows, labs, weights, Space::Cielab);
    image_families(image, &cells, labs)
}

/// The families (of [`image_families`]) farther than [`LOST_DELTA_E`] from every palette
/// colour, worst first.
fn lost_image_families(families: &[Family], palette_lab: &[[f64; 3]]) -> Vec<LostFamily> {
    let mut out: Vec<LostFamily> = families
        .iter()
        .filter_map(|f| {
            let error = palette_lab
                .iter()
                .map(|&p| colour::delta_e2000(f.lab, p))
                .fold(f64::INFINITY, f64::min);
            (error > LOST_DELTA_E).then_some(LostFamily {
                weight: f.pixels,
                error,
                feat: f.feat,
            })
        })
        .collect();
    out.sort_by(|a, b| (b.weight * b.error).total_cmp(&(a.weight * a.error)));
    out
}

/// A colour family the palette lost.
#[derive(Debug, Clone)]
struct LostFamily {
    /// Pixels in its lost area.
    weight: f64,
    /// CIEDE2000 from its core to the nearest palette colour.
    error: f64,
    /// Core centroid in the clustering space.
    feat: [f32; 3],
}

fn lost_families(cells: &Cells, judged: &Judged, min_weight: f64) -> Vec<LostFamily> {
    let n = cells.len();
    let mut seen = vec![false; n];
    let mut out = Vec::new();
    let mut stack = Vec::new();
    let mut members = Vec::new();
    for c0 in 0..n {
        if seen[c0] || judged.error[c0] <= LOST_DELTA_E {
            continue;
        }
        seen[c0] = true;
        stack.push(c0);
        members.clear();
        while let Some(c) = stack.pop() {
            members.push(c);
            let k = cells.key[c];
            for dx in -1..=1 {
                for dy in -1..=1 {
                    for dz in -1..=1 {
                        let q = [k[0] + dx, k[1] + dy, k[2] + dz];
                        if let Some(&i) = cells.index.get(&q) {
                            let i = i as usize;
                            if !seen[i] && judged.error[i] > LOST_DELTA_E {
                                seen[i] = true;
                                stack.push(i);
                            }
                        }
                    }
                }
            }
        }
        let weight: f64 = {
            members.sort_unstable();
            members.iter().map(|&c| cells.weight[c]).sum()
        };
        if weight < min_weight {
            continue;
        }
        let heaviest = *members
            .iter()
            .max_by(|&&a, &&b| cells.weight[a].total_cmp(&cells.weight[b]).then(b.cmp(&a)))
            .expect("a lost area has a cell");
        let centre = cells.lab[heaviest];
        let (mut wf, mut f, mut l) = (0.0, [0.0f64; 3], [0.0f64; 3]);
        for &c in &members {
            let lab = cells.lab[c];
            let d2: f64 = (0..3).map(|d| (lab[d] - centre[d]).powi(2)).sum();
            if d2 <= CORE_RADIUS * CORE_RADIUS {
                let w = cells.weight[c];
                wf += w;
                for d in 0..3 {
                    f[d] += w * cells.feat[c * 3 + d] as f64;
                    l[d] += w * lab[d];
                }
            }
        }
        let core_lab = [l[0] / wf, l[1] / wf, l[2] / wf];
        let error = judged
            .palette_lab
            .iter()
            .map(|&p| colour::delta_e2000(core_lab, p))
            .fold(f64::INFINITY, f64::min);
        if error > LOST_DELTA_E {
            out.push(LostFamily {
                weight,
                error,
                feat: [(f[0] / wf) as f32, (f[1] / wf) as f32, (f[2] / wf) as f32],
            });
        }
    }
    // Worst first: most pixels times error (stable: ties keep cell order).
    out.sort_by(|a, b| (b.weight * b.error).total_cmp(&(a.weight * a.error)));
    out
}

/// Means to give up for a move, best first: with image families, the means no family
/// needs (none is the only palette colour within [`LOST_DELTA_E`] of a family), cheapest
/// first; then the lighter of each near-duplicate pair; then the rest, cheapest by
/// squared-error cost. Pinned means (below `fixed`) are never offered.
fn give_up_order(
    judged: &Judged,
    families: Option<&[Family]>,
    fixed: usize,
    most: usize,
) -> Vec<usize> {
    let k = judged.palette_lab.len();
    let mut out: Vec<usize> = Vec::new();
    let by_cost = |mut v: Vec<usize>| {
        v.sort_by(|&a, &b| {
            judged.give_up_cost[a]
                .total_cmp(&judged.give_up_cost[b])
                .then(a.cmp(&b))
        });
        v
    };
    if let Some(families) = families {
        let mut needed = vec![false; k];
        for f in families {
            let near: Vec<usize> = (0..k)
                .filter(|&j| colour::delta_e2000(f.lab, judged.palette_lab[j]) <= LOST_DELTA_E)
                .collect();
            if let [j] = near[..] {
                needed[j] = true;
            }
        }
        out.extend(by_cost((fixed.min(k)..k).filter(|&j| !needed[j]).collect()));
    }
    let mut pairs: Vec<(f64, usize)> = Vec::new();
    for a in 0..k {
        for b in a + 1..k {
            let d = colour::delta_e2000(judged.palette_lab[a], judged.palette_lab[b]);
            if d < NEAR_DUPLICATE_DELTA_E {
                let lighter = if judged.mean_weight[b] < judged.mean_weight[a] {
                    b
                } else {
                    a
                };
                let other = a + b - lighter;
                // A pinned mean is never given up; its twin may be.
                let pick = if lighter >= fixed { lighter } else { other };
                if pick >= fixed {
                    pairs.push((d, pick));
                }
            }
        }
    }
    pairs.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
    for (_, j) in pairs {
        if !out.contains(&j) {
            out.push(j);
        }
    }
    for j in by_cost((fixed.min(k)..k).collect()) {
        if !out.contains(&j) {
            out.push(j);
        }
    }
    out.truncate(most);
    out
}

/// What [`keep_families`] did.
#[derive(Debug, Clone)]
pub struct Kept {
    /// The hard result on every row after the moves.
    pub hard: LloydResult,
    /// Moves kept.
    pub moves: usize,
    /// Lost families before and after.
    pub lost_before: usize,
    pub lost_after: usize,
}

/// Brings back lost colour families (see the module documentation). `rows` are the
/// entries' features in `space` (`n × 3`), `labs` their CIELAB values, `weights` their
/// pixel counts; `start` is the plain k-means result, whose first `fixed` means are pinned.
/// Returns `None` when the plain result loses no family or no move helps.
#[allow(clippy::too_many_arguments)]
pub fn keep_families(
    data: &Dataset,
    labs: &[[f64; 3]],
    space: Space,
    image: Option<ImageEntries>,
    start: &LloydResult,
    fixed: usize,
    stop: Stop,
    accelerate: bool,
) -> Option<Kept> {
    let mut ph = crate::trace::Phases::start("families");
    let weights: Vec<f64> = (0..data.len()).map(|i| data.weight(i)).collect();
    let k = start.means.len() / 3;
    if data.dim() != 3 || k < 2 || k <= fixed {
        return None;
    }
    let cells = Cells::new(data.rows(), labs, &weights, space);
    let cdata = Dataset::new(&cells.feat, 3, Some(&cells.weight)).ok()?;
    let min_weight = min_family_pixels(data.total_weight());
    ph.mark("cells");
    let image_families = image.map(|im| image_families(im, &cells, labs));
    let families = image_families.as_deref();
    let mut means = start.means.clone();
    let lost_of = |judged: &Judged| match families {
        Some(f) => lost_image_families(f, &judged.palette_lab),
        None => lost_families(&cells, judged, min_weight),
    };
    let mut judged = judge(&cells, &means, space);
    let mut lost = lost_of(&judged);
    let lost_before = lost.len();
    if lost.is_empty() {
        return None;
    }
    let trial_stop = Stop {
        max_iter: stop.max_iter.min(100),
        tolerance: stop.tolerance,
        shift_tolerance: stop.shift_tolerance,
    };
    // A move must lower 2 × (families clearly lost, more than LOST_DELTA_E + 2 away) +
    // (families lost): the family colours are estimates, so a family brought to just
    // past the limit counts as half repaired.
    let score = |lost: &[LostFamily]| {
        lost.iter()
            .map(|l| if l.error > LOST_DELTA_E + 2.0 { 3 } else { 1 })
            .sum::<usize>()
    };
    let score_before = score(&lost);
    let mut moves = 0;
    'rounds: for _ in 0..k {
        if lost.is_empty() {
            break;
        }
        // Trials, in order: every lost family at once (two small families can be closer
        // to each other than to anything else, and one new colour would sit between
        // them), then each of the two worst alone, each time giving up the first means
        // of the give-up order.
        let order = give_up_order(&judged, families, fixed, lost.len().max(3));
        let mut trials: Vec<Vec<(usize, [f32; 3])>> = Vec::new();
        let together = lost.len().min(order.len());
        if together > 1 {
            trials.push((0..together).map(|i| (order[i], lost[i].feat)).collect());
        }
        for fam in lost.iter().take(2) {
            for &j in order.iter().take(3) {
                trials.push(vec![(j, fam.feat)]);
            }
        }
        for trial in trials {
            let mut init: Vec<f32> = means.iter().map(|&v| v as f32).collect();
            for (j, feat) in &trial {
                init[j * 3..j * 3 + 3].copy_from_slice(feat);
            }
            let r = cluster::lloyd_fixed(&cdata, &init, fixed, trial_stop, true);
            let jd = judge(&cells, &r.means, space);
            let lf = lost_of(&jd);
            if score(&lf) < score(&lost) {
                means = r.means;
                judged = jd;
                lost = lf;
                moves += trial.len();
                continue 'rounds;
            }
        }
        break;
    }
    ph.mark("moves");
    if moves == 0 {
        return None;
    }
    let init: Vec<f32> = means.iter().map(|&v| v as f32).collect();
    let hard = cluster::lloyd_fixed(data, &init, fixed, stop, accelerate);
    let after = lost_of(&judge(&cells, &hard.means, space));
    ph.mark("lloyd");
    (score(&after) < score_before).then_some(Kept {
        hard,
        moves,
        lost_before,
        lost_after: after.len(),
    })
}

mod report;
pub use report::{lost_areas, lost_areas_warning, parse_colour, LostArea};

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_follow_the_image_size() {
        assert_eq!(min_family_pixels(1000.0), 16.0);
        assert_eq!(min_family_pixels(100_000.0), 100.0);
        assert_eq!(min_family_pixels(12e6), 400.0);
    }

    /// On an image of 500 000 pixels (floor 400 pixels): of the small areas far from their
    /// palette colour, only the solid one of at least 16 pixels rendered ΔE2000 20 or more
    /// off is reported; a one-pixel line, a patch 15 off and a 9-pixel speck are not.
    #[test]
    fn small_areas_reported_when_far_and_solid() {
        let (w, h) = (1000usize, 500usize);
        // Entries: background, line, patch, faint patch, speck.
        let errors = [0.0, 25.0, 25.0, 15.0, 25.0];
        let labs = [[50.0, 0.0, 0.0]; 5];
        let mut entry = vec![0u32; w * h];
        for x in 100..200 {
            entry[50 * w + x] = 1;
        }
        for y in 100..106 {
            for x in 300..306 {
                entry[y * w + x] = 2;
                entry[y * w + x + 200] = 3;
            }
        }
        for y in 300..303 {
            for x in 700..703 {
                entry[y * w + x] = 4;
            }
        }
        let index = vec![0u16; w * h];
        let areas = lost_areas(
            w as u32,
            h as u32,
            &entry,
            &errors,
            &index,
            &labs,
            &[[119, 119, 119]],
        );
        assert_eq!(areas.len(), 1, "{areas:?}");
        let a = &areas[0];
        assert_eq!(
            (a.pixels, a.x, a.y, a.width, a.height),
            (36, 300, 100, 6, 6)
        );
        assert_eq!(a.delta_e2000, 25.0);
    }

    #[test]
    fn objective_parses() {
        assert_eq!(
            "families".parse::<Objective>().unwrap(),
            Objective::Families
        );
        assert_eq!("SSE".parse::<Objective>().unwrap(), Objective::Plain);
        assert!("eye".parse::<Objective>().is_err());
    }
}
