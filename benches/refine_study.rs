//! Not a Criterion benchmark: the measurement behind the default global refinement
//! (DEVELOPERS.md, "Global refinement"). On the seeded 2-D Gaussian sets of
//! `tests/support/gauss.rs` it runs `cluster::fit` with each refinement variant and
//! prints, per variant, the Centroid Index (Fränti, Rezaei & Zhao 2014) per set summed
//! over the seeds, the number of (set, seed) runs with CI > 0, the SSE relative to the
//! best any variant found, and the fit time.
//!
//! ```sh
//! CARGO_TARGET_DIR=/tmp/bench-target cargo bench --bench refine_study -- \
//!     [--seeds N] [--variants none,swap:4,random-swap:50,split-merge:32,none*10] \
//!     [--dump DIR] [--json FILE]
//! ```
//!
//! A variant is a refinement as `Refine` parses it (or `default`), optionally followed by
//! `*R` for R k-means++ starts (restarts); `truth` is Lloyd from the true centres. `--dump DIR` also writes each set as
//! `DIR/NAME-sSEED.csv` (x,y per line) with its true centres in `DIR/NAME-sSEED.centres.csv`,
//! for `benches/refine_sklearn.py`.

#[path = "../tests/support/gauss.rs"]
mod gauss;

use chromasift::cluster::{fit, fit_from, Dataset, KMeansParams, Refine};
use std::io::Write;
use std::time::Instant;

struct Variant {
    label: String,
    refine: Refine,
    restarts: usize,
    /// Lloyd from the true centres instead of k-means++ (a check of the set: the truth
    /// should be a local optimum with CI 0 and an SSE no better run beats by much).
    truth: bool,
}

fn parse_variant(s: &str) -> Variant {
    if s == "truth" {
        return Variant {
            label: s.into(),
            refine: Refine::None,
            restarts: 1,
            truth: true,
        };
    }
    let (r, restarts) = match s.split_once('*') {
        Some((a, b)) => (a, b.parse().expect("restarts after *")),
        None => (s, 1),
    };
    let refine: Refine = if r == "default" {
        Refine::default()
    } else {
        r.parse().expect("a refinement")
    };
    Variant {
        label: s.to_string(),
        refine,
        restarts,
        truth: false,
    }
}

fn main() {
    let mut seeds = 5u64;
    let mut variants = "none,swap:4,none*10".to_string();
    let mut dump: Option<String> = None;
    let mut json: Option<String> = None;
    let mut only: Option<String> = None;
    let mut photos = false;
    let mut image_path: Option<String> = None;
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--seeds" => seeds = args.next().unwrap().parse().unwrap(),
            "--variants" => variants = args.next().unwrap(),
            "--dump" => dump = args.next(),
            "--json" => json = args.next(),
            "--sets" => only = args.next(),
            "--photos" => photos = true,
            "--image" => image_path = args.next(),
            "--bench" => {}
            _ => {}
        }
    }
    let variants: Vec<Variant> = variants.split(',').map(parse_variant).collect();
    if photos {
        photo_study(&variants, seeds);
        return;
    }
    if let Some(path) = image_path {
        image_study(&path, &variants, seeds);
        return;
    }
    let specs: Vec<gauss::Spec> = gauss::SPECS
        .iter()
        .copied()
        .filter(|s| {
            only.as_ref()
                .is_none_or(|o| o.split(',').any(|n| n == s.name))
        })
        .collect();
    println!(
        "threads: {}, seeds 0..{seeds}, load average at start: {}",
        rayon::current_num_threads(),
        std::fs::read_to_string("/proc/loadavg")
            .unwrap_or_default()
            .trim()
    );
    // ci[v][set] summed over seeds, misses[v], time[v], sse ratio product[v]
    let nv = variants.len();
    let mut ci = vec![vec![0usize; specs.len()]; nv];
    let mut time = vec![vec![0.0f64; specs.len()]; nv];
    let mut log_ratio = vec![0.0f64; nv];
    let mut runs = 0usize;
    let mut records = Vec::new();
    for (si, spec) in specs.iter().enumerate() {
        for seed in 0..seeds {
            let set = gauss::draw(*spec, seed);
            if let Some(dir) = &dump {
                std::fs::create_dir_all(dir).unwrap();
                let stem = format!("{dir}/{}-s{seed}", spec.name);
                let mut f = std::fs::File::create(format!("{stem}.csv")).unwrap();
                for p in set.points.chunks_exact(2) {
                    writeln!(f, "{},{}", p[0], p[1]).unwrap();
                }
                let mut f = std::fs::File::create(format!("{stem}.centres.csv")).unwrap();
                for c in set.centres.chunks_exact(2) {
                    writeln!(f, "{},{}", c[0], c[1]).unwrap();
                }
            }
            let data = Dataset::new(&set.points, 2, None).unwrap();
            let mut sses = Vec::new();
            for (vi, v) in variants.iter().enumerate() {
                let params = KMeansParams::new(spec.k)
                    .seed(seed)
                    .refine(v.refine)
                    .restarts(v.restarts)
                    .check()
                    .unwrap();
                let t0 = Instant::now();
                let model = if v.truth {
                    let init: Vec<f32> = set.centres.iter().map(|&c| c as f32).collect();
                    fit_from(&data, &init, &params).unwrap()
                } else {
                    fit(&data, &params).unwrap()
                };
                let dt = t0.elapsed().as_secs_f64();
                let c = gauss::centroid_index(&model.means, &set.centres, 2);
                ci[vi][si] += c;
                time[vi][si] += dt;
                sses.push(model.sse);
                if std::env::var_os("REFINE_STUDY_VERBOSE").is_some() && c > 0 {
                    eprintln!(
                        "{} seed {seed} {}: CI {c}, SSE {:.6e}",
                        spec.name, v.label, model.sse
                    );
                }
                records.push(serde_json::json!({
                    "set": spec.name, "seed": seed, "variant": v.label,
                    "ci": c, "sse": model.sse, "seconds": dt,
                }));
            }
            let best = sses.iter().copied().fold(f64::INFINITY, f64::min);
            for (vi, s) in sses.iter().enumerate() {
                log_ratio[vi] += (s / best).ln();
            }
            runs += 1;
        }
    }
    print!("{:<18}", "set (n)");
    for v in &variants {
        print!("{:>16}", v.label);
    }
    println!();
    for (si, spec) in specs.iter().enumerate() {
        let n = gauss::draw(*spec, 0).truth.len();
        print!("{:<18}", format!("{} ({n})", spec.name));
        for vi in 0..nv {
            print!(
                "{:>16}",
                format!(
                    "{} {:.0}ms",
                    ci[vi][si],
                    1000.0 * time[vi][si] / seeds as f64
                )
            );
        }
        println!();
    }
    print!("{:<18}", "CI sum");
    for row in &ci {
        print!("{:>16}", row.iter().sum::<usize>());
    }
    println!();
    print!("{:<18}", "sets with CI>0");
    for row in &ci {
        print!("{:>16}", row.iter().filter(|&&c| c > 0).count());
    }
    println!();
    print!("{:<18}", "runs with CI>0");
    for v in &variants {
        let m = records
            .iter()
            .filter(|r| r["variant"] == v.label.as_str() && r["ci"].as_u64() > Some(0))
            .count();
        print!("{:>16}", format!("{m}/{runs}"));
    }
    println!();
    print!("{:<18}", "SSE/best (gmean)");
    for l in &log_ratio {
        print!("{:>16.5}", (l / runs as f64).exp());
    }
    println!();
    print!("{:<18}", "total time s");
    for row in &time {
        print!("{:>16.3}", row.iter().sum::<f64>());
    }
    println!();
    println!(
        "load average at end: {}",
        std::fs::read_to_string("/proc/loadavg")
            .unwrap_or_default()
            .trim()
    );
    if let Some(path) = json {
        std::fs::write(
            path,
            serde_json::to_string_pretty(&serde_json::json!({ "runs": records })).unwrap(),
        )
        .unwrap();
    }
}

/// `--photos`: on the photographs of `fixtures/reference/engine_sklearn.json`, K = 16 in
/// CIELAB on the weighted colour histogram, each variant's SSE over the mean of ten
/// scikit-learn k-means++ runs (geometric mean over the photos, per seed 0..seeds), the
/// SSE of `reduce` itself with its defaults (seed 0..seeds), and times.
fn photo_study(variants: &[Variant], seeds: u64) {
    use chromasift::{histogram, raster::Decoded, reduce};
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures");
    let doc: serde_json::Value = serde_json::from_slice(
        &std::fs::read(root.join("reference/engine_sklearn.json"))
            .expect("run tests/reference/engine_sklearn.py"),
    )
    .unwrap();
    let photos = doc["photos"].as_array().unwrap();
    let nv = variants.len();
    let mut logs = vec![0.0f64; nv + 1];
    let mut times = vec![0.0f64; nv + 1];
    let mut runs = 0usize;
    print!("{:<22}", "photo");
    for v in variants {
        print!("{:>16}", v.label);
    }
    println!("{:>16}", "reduce");
    for p in photos {
        let img = image::open(root.join(p["file"].as_str().unwrap()))
            .unwrap()
            .to_rgba8();
        let (w, h) = img.dimensions();
        let rgba = img.into_raw();
        let ih = histogram::from_rgba8(&rgba);
        let (rows, _) = reduce::entry_features(&ih.histogram, chromasift::colour::Space::Cielab);
        let weights = ih.histogram.weights();
        let data = Dataset::new(&rows, 3, Some(&weights)).unwrap();
        let want = p["inertia_n_init_1_mean"].as_f64().unwrap();
        let mut line = vec![0.0f64; nv + 1];
        for seed in 0..seeds {
            for (vi, v) in variants.iter().enumerate() {
                let params = KMeansParams::new(16)
                    .seed(seed)
                    .refine(v.refine)
                    .restarts(v.restarts)
                    .check()
                    .unwrap();
                let t0 = Instant::now();
                let model = fit(&data, &params).unwrap();
                times[vi] += t0.elapsed().as_secs_f64();
                line[vi] += (model.sse / want).ln();
            }
            let mut opts = reduce::ReduceOptions::new(16);
            opts.engine.seed = seed;
            let t0 = Instant::now();
            let red =
                reduce::reduce_image(&Decoded::from_rgba8(w, h, rgba.clone()), &opts).unwrap();
            times[nv] += t0.elapsed().as_secs_f64();
            line[nv] += (red.document.sse / want).ln();
        }
        print!("{:<22}", p["name"].as_str().unwrap());
        for (vi, l) in line.iter().enumerate() {
            print!("{:>16.4}", (l / seeds as f64).exp());
            logs[vi] += l;
        }
        println!();
        runs += seeds as usize;
    }
    print!("{:<22}", "gmean SSE/sklearn");
    for l in &logs {
        print!("{:>16.4}", (l / runs as f64).exp());
    }
    println!();
    print!("{:<22}", "total time s");
    for t in &times {
        print!("{:>16.3}", t);
    }
    println!();
}

/// `--image PATH`: the fit alone (K = 16, CIELAB, weighted colour histogram) of each
/// variant on one image, seeds 0..seeds: SSE and time of each fit.
fn image_study(path: &str, variants: &[Variant], seeds: u64) {
    use chromasift::{histogram, reduce};
    let img = image::open(path).unwrap().to_rgba8();
    let ih = histogram::from_rgba8(img.as_raw());
    let (rows, _) = reduce::entry_features(&ih.histogram, chromasift::colour::Space::Cielab);
    let weights = ih.histogram.weights();
    let data = Dataset::new(&rows, 3, Some(&weights)).unwrap();
    println!("{path}: {} colours", data.len());
    for v in variants {
        for seed in 0..seeds {
            let params = KMeansParams::new(16)
                .seed(seed)
                .refine(v.refine)
                .restarts(v.restarts)
                .check()
                .unwrap();
            let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
            let t0 = Instant::now();
            let model = fit(&data, &params).unwrap();
            println!(
                "{:<16} seed {seed}: SSE {:.6e}, {:.3} s (load {})",
                v.label,
                model.sse,
                t0.elapsed().as_secs_f64(),
                load.split_whitespace().next().unwrap_or("?")
            );
        }
    }
}
