//! Speed benchmarks of the `reduce` workflow and of its phases.
//!
//! Run: `cargo bench --bench kmeans` (see benches/README.md). Two input sets:
//!
//! * a seeded, photo-like synthetic image made here (smooth gradients, shaded shapes
//!   with soft edges, fine texture and Gaussian sensor noise), at 12 MP (4000 × 3000)
//!   and 3 MP; always benchmarked;
//! * a real photo, only when `CHROMASIFT_BENCH_PHOTO=/path/to/image` is set (used by
//!   benches/compare_sklearn.py); its benchmarks are named `photo/...`.
//!
//! Ids: `reduce/hard:k16x12mp`, `reduce/soft:k16x12mp`, `reduce/hard:k16x3mp`,
//! `phases/histogram:12mp`, `phases/features:12mp`, `phases/cluster-only:k16`,
//! `phases/cluster-only-soft:k16`, `phases/assign:k16`, `phases/render:12mp`,
//! `phases/encode-png:12mp`; with a photo: `photo/decode`, `photo/histogram`, `photo/features`,
//! `photo/cluster-only:k16`, `photo/cluster-only-soft:k16`, `photo/assign:k16`,
//! `photo/render`, `photo/encode-png`, `photo/reduce-image:hard:k16`, `photo/reduce-image:soft:k16`.
//! Select some with a regex, e.g. `cargo bench --bench kmeans -- '^phases/'`.
//!
//! Inputs are built lazily, once, and only for the benchmarks the filter selects.

use chromasift::cluster::{fit, Dataset, KMeansModel, KMeansParams, Mode, ValidParams};
use chromasift::colour::Space;
use chromasift::histogram::{self, IndexedHistogram};
use chromasift::limits::Limits;
use chromasift::raster::{self, Decoded, Pixels};
use chromasift::reduce::{encode_reduced, entry_features, reduce_image, ReduceOptions, Reduction};
use chromasift::render;
use criterion::{criterion_group, criterion_main, Criterion, SamplingMode};
use std::hint::black_box;
use std::path::PathBuf;
use std::sync::OnceLock;
use std::time::Duration;

const K: usize = 16;
const SEED: u64 = 7;

// ---------------------------------------------------------------------------------
// Synthetic photo-like image
// ---------------------------------------------------------------------------------

/// SplitMix64: a tiny seeded generator, enough for test images.
struct Mix(u64);

impl Mix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    fn unit(&mut self) -> f32 {
        (self.next() >> 40) as f32 * (1.0 / (1u64 << 24) as f32)
    }
    fn range(&mut self, lo: f32, hi: f32) -> f32 {
        lo + (hi - lo) * self.unit()
    }
    /// Two independent standard normal draws (Box–Muller).
    fn normal_pair(&mut self) -> (f32, f32) {
        let u1 = self.unit().max(1e-7);
        let u2 = self.unit();
        let r = (-2.0 * u1.ln()).sqrt();
        let t = std::f32::consts::TAU * u2;
        (r * t.cos(), r * t.sin())
    }
}

/// A filled shape with its own colour, a linear shading across it and a soft edge.
struct Shape {
    ellipse: bool,
    cx: f32,
    cy: f32,
    rx: f32,
    ry: f32,
    angle_cos: f32,
    angle_sin: f32,
    colour: [f32; 3],
    /// Brightness change from one side of the shape to the other (lighting).
    shade: f32,
    /// Edge softness in pixels.
    soft: f32,
}

impl Shape {
    fn random(r: &mut Mix, w: f32, h: f32) -> Shape {
        let a = r.range(0.0, std::f32::consts::PI);
        let base = [
            r.range(20.0, 235.0),
            r.range(20.0, 235.0),
            r.range(20.0, 235.0),
        ];
        Shape {
            ellipse: r.unit() < 0.6,
            cx: r.range(0.0, w),
            cy: r.range(0.0, h),
            rx: r.range(0.03, 0.22) * w,
            ry: r.range(0.03, 0.22) * h,
            angle_cos: a.cos(),
            angle_sin: a.sin(),
            colour: base,
            shade: r.range(-70.0, 70.0),
            soft: r.range(1.0, 6.0),
        }
    }

    /// Coverage (0..1) of pixel (x, y) and its position across the shape (-1..1).
    fn cover(&self, x: f32, y: f32) -> (f32, f32) {
        let dx = x - self.cx;
        let dy = y - self.cy;
        let u = (dx * self.angle_cos + dy * self.angle_sin) / self.rx;
        let v = (-dx * self.angle_sin + dy * self.angle_cos) / self.ry;
        // Approximate signed distance to the outline, in pixels (negative inside).
        let sd = if self.ellipse {
            ((u * u + v * v).sqrt() - 1.0) * self.rx.min(self.ry)
        } else {
            ((u.abs() - 1.0) * self.rx).max((v.abs() - 1.0) * self.ry)
        };
        let c = (0.5 - sd / self.soft).clamp(0.0, 1.0);
        (c, u.clamp(-1.0, 1.0))
    }
}

/// A seeded photo-like RGBA image: a sky-to-ground background of smooth gradients, 24
/// shaded overlapping shapes with soft edges, a fine texture, and Gaussian noise of
/// σ = 2 levels per channel (sensor-like).
fn synthetic_photo(width: u32, height: u32, seed: u64) -> Vec<u8> {
    let (w, h) = (width as f32, height as f32);
    let mut r = Mix(seed);
    let shapes: Vec<Shape> = (0..24).map(|_| Shape::random(&mut r, w, h)).collect();
    let horizon = r.range(0.45, 0.65) * h;
    let mut out = vec![0u8; width as usize * height as usize * 4];
    for y in 0..height {
        let fy = y as f32;
        // Background: sky gradient above the horizon, warm ground gradient below.
        let sky_t = (fy / horizon).min(1.0);
        let ground_t = ((fy - horizon) / (h - horizon)).clamp(0.0, 1.0);
        for x in 0..width {
            let fx = x as f32;
            let sx = fx / w;
            let mut c = if fy < horizon {
                [
                    70.0 + 120.0 * sky_t + 20.0 * sx,
                    110.0 + 90.0 * sky_t + 10.0 * (sx * 3.0).sin(),
                    200.0 + 40.0 * sky_t - 30.0 * sx,
                ]
            } else {
                [
                    120.0 - 60.0 * ground_t + 25.0 * (sx * 5.0 + ground_t * 2.0).sin(),
                    100.0 - 40.0 * ground_t + 15.0 * (sx * 7.0).cos(),
                    60.0 - 30.0 * ground_t,
                ]
            };
            for s in &shapes {
                let (cov, u) = s.cover(fx, fy);
                if cov > 0.0 {
                    let light = s.shade * u;
                    for (cd, sd) in c.iter_mut().zip(s.colour) {
                        *cd = *cd * (1.0 - cov) + (sd + light) * cov;
                    }
                }
            }
            // Fine texture: a few incommensurate ripples.
            let t = 4.0 * (fx * 0.071 + fy * 0.013).sin() * (fy * 0.057 - fx * 0.021).cos()
                + 2.0 * (fx * 0.31 + fy * 0.17).sin();
            let (n0, n1) = r.normal_pair();
            let (n2, _) = r.normal_pair();
            let i = (y as usize * width as usize + x as usize) * 4;
            out[i] = (c[0] + t + 2.0 * n0).round().clamp(0.0, 255.0) as u8;
            out[i + 1] = (c[1] + t + 2.0 * n1).round().clamp(0.0, 255.0) as u8;
            out[i + 2] = (c[2] + t + 2.0 * n2).round().clamp(0.0, 255.0) as u8;
            out[i + 3] = 255;
        }
    }
    out
}

// ---------------------------------------------------------------------------------
// Prepared inputs (built once, lazily)
// ---------------------------------------------------------------------------------

/// An image and the results of each phase, so each phase can be timed on its own.
struct Prepared {
    name: String,
    image: Decoded,
    indexed: IndexedHistogram,
    weights: Vec<f64>,
    rows: Vec<f32>,
    hard: Reduction,
}

impl Prepared {
    fn new(name: String, image: Decoded) -> Prepared {
        let indexed = match &image.pixels {
            Pixels::Rgba8(p) => histogram::from_rgba8(p),
            Pixels::Rgba16(p) => histogram::from_rgba16(p),
        };
        let weights = indexed.histogram.weights();
        let (rows, _) = entry_features(&indexed.histogram, Space::Cielab);
        let hard = reduce_image(&image, &ReduceOptions::new(K)).expect("reduce");
        let p = Prepared {
            name,
            image,
            indexed,
            weights,
            rows,
            hard,
        };
        let soft = p.fit(Mode::Soft);
        eprintln!(
            "[bench input] {}: {} x {} = {} pixels, {} distinct colours; k = {K}: hard {} iterations, \
             SSE {:.6e}; soft {}+{} iterations, SSE {:.6e}",
            p.name,
            p.image.width,
            p.image.height,
            p.image.pixel_count(),
            p.indexed.histogram.len(),
            p.hard.document.iterations,
            p.hard.document.sse,
            soft.hard_iterations,
            soft.soft_iterations,
            soft.sse,
        );
        p
    }

    fn data(&self) -> Dataset<'_> {
        Dataset::new(&self.rows, 3, Some(&self.weights)).expect("dataset")
    }

    fn params(mode: Mode) -> ValidParams {
        KMeansParams::new(K).mode(mode).check().expect("params")
    }

    fn fit(&self, mode: Mode) -> KMeansModel {
        fit(&self.data(), &Self::params(mode)).expect("fit")
    }
}

fn synthetic(mp: usize) -> &'static Prepared {
    static TWELVE: OnceLock<Prepared> = OnceLock::new();
    static THREE: OnceLock<Prepared> = OnceLock::new();
    let (cell, w, h) = match mp {
        12 => (&TWELVE, 4000, 3000),
        3 => (&THREE, 2000, 1500),
        _ => unreachable!("only 12 and 3 MP are prepared"),
    };
    cell.get_or_init(|| {
        let rgba = synthetic_photo(w, h, SEED);
        Prepared::new(
            format!("synthetic {mp} MP (seed {SEED})"),
            Decoded::from_rgba8(w, h, rgba),
        )
    })
}

fn photo_path() -> Option<PathBuf> {
    std::env::var_os("CHROMASIFT_BENCH_PHOTO").map(PathBuf::from)
}

fn photo() -> &'static Prepared {
    static PHOTO: OnceLock<Prepared> = OnceLock::new();
    PHOTO.get_or_init(|| {
        let path = photo_path().expect("CHROMASIFT_BENCH_PHOTO is set");
        let image = raster::decode(&path, &Limits::default()).expect("decode the photo");
        Prepared::new(path.display().to_string(), image)
    })
}

// ---------------------------------------------------------------------------------
// Benchmarks
// ---------------------------------------------------------------------------------

fn config() -> Criterion {
    Criterion::default()
        .sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(4))
}

/// Whole in-memory reductions (histogram → features → fit → assign → render →
/// statistics); decoding and file writing are not included.
fn bench_reduce(c: &mut Criterion) {
    let mut g = c.benchmark_group("reduce");
    g.sampling_mode(SamplingMode::Flat);
    for (id, mp, mode) in [
        ("hard:k16x12mp", 12, Mode::Hard),
        ("soft:k16x12mp", 12, Mode::Soft),
        ("hard:k16x3mp", 3, Mode::Hard),
    ] {
        g.bench_function(id, |b| {
            let p = synthetic(mp);
            let mut opts = ReduceOptions::new(K);
            opts.engine.mode = mode;
            b.iter(|| reduce_image(black_box(&p.image), black_box(&opts)).expect("reduce"))
        });
    }
    g.finish();
}

/// Each phase of a reduction on its own; `get` gives the prepared input, `size` is
/// appended to the size-dependent ids (none for the photo).
fn phase_group(c: &mut Criterion, group: &str, get: fn() -> &'static Prepared, size: &str) {
    let id = |base: &str| {
        if size.is_empty() {
            base.to_string()
        } else {
            format!("{base}:{size}")
        }
    };
    let mut g = c.benchmark_group(group);
    g.sampling_mode(SamplingMode::Flat);
    if group == "photo" {
        g.bench_function("decode", |b| {
            let path = photo_path().expect("photo path");
            let bytes = std::fs::read(&path).expect("read the photo");
            b.iter(|| {
                raster::decode_bytes(black_box(&bytes), &path, &Limits::default()).expect("decode")
            })
        });
    }
    g.bench_function(id("histogram"), |b| {
        let p = get();
        match &p.image.pixels {
            Pixels::Rgba8(px) => b.iter(|| histogram::from_rgba8(black_box(px))),
            Pixels::Rgba16(px) => b.iter(|| histogram::from_rgba16(black_box(px))),
        }
    });
    g.bench_function(id("features"), |b| {
        let p = get();
        b.iter(|| entry_features(black_box(&p.indexed.histogram), Space::Cielab))
    });
    // The clustering step alone: k-means++ seeding and Lloyd (plus the soft phase).
    for (id, mode) in [
        ("cluster-only:k16", Mode::Hard),
        ("cluster-only-soft:k16", Mode::Soft),
    ] {
        g.bench_function(id, |b| {
            let p = get();
            let data = p.data();
            let params = Prepared::params(mode);
            b.iter(|| fit(black_box(&data), black_box(&params)).expect("fit"))
        });
    }
    // Labels and normalised entropy of every histogram entry at the model's β.
    g.bench_function("assign:k16", |b| {
        let p = get();
        let model = p.fit(Mode::Hard);
        let data = p.data();
        b.iter(|| model.assign(black_box(&data)))
    });
    // Per-pixel work after clustering: palette index and 8-bit uncertainty of every pixel.
    g.bench_function(id("render"), |b| {
        let p = get();
        let red = &p.hard;
        let entry_index: Vec<u16> = {
            // Palette index of each entry, read back from the first pixel that uses it.
            let mut e = vec![0u16; p.indexed.histogram.len()];
            for (&pe, &pi) in red.pixel_entry.iter().zip(&red.pixel_index) {
                if pe != histogram::TRANSPARENT {
                    e[pe as usize] = pi;
                }
            }
            e
        };
        b.iter(|| {
            let idx = render::remap(black_box(&red.pixel_entry), black_box(&entry_index));
            let grey = render::uncertainty_u8(
                black_box(&red.pixel_entry),
                black_box(&red.entry_uncertainty),
            );
            (idx, grey)
        })
    });
    // PNG encoding of the two images `reduce` always writes (into memory).
    g.bench_function(id("encode-png"), |b| {
        let p = get();
        let red = &p.hard;
        let grey = render::uncertainty_u8(&red.pixel_entry, &red.entry_uncertainty);
        b.iter(|| {
            let mut out = Vec::with_capacity(16 << 20);
            encode_reduced(black_box(red), &mut out).expect("encode");
            raster::write_grey_png(&mut out, red.width, red.height, black_box(&grey))
                .expect("encode");
            out.len()
        })
    });
    if group == "photo" {
        for (id, mode) in [
            ("reduce-image:hard:k16", Mode::Hard),
            ("reduce-image:soft:k16", Mode::Soft),
        ] {
            g.bench_function(id, |b| {
                let p = get();
                let mut opts = ReduceOptions::new(K);
                opts.engine.mode = mode;
                b.iter(|| reduce_image(black_box(&p.image), black_box(&opts)).expect("reduce"))
            });
        }
    }
    g.finish();
}

fn bench_phases(c: &mut Criterion) {
    phase_group(c, "phases", || synthetic(12), "12mp");
}

fn bench_photo(c: &mut Criterion) {
    if photo_path().is_some() {
        phase_group(c, "photo", photo, "");
    }
}

criterion_group! {
    name = benches;
    config = config();
    targets = bench_reduce, bench_phases, bench_photo
}
criterion_main!(benches);
