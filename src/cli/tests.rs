//! Flag parsing: every flag reaches its library option, and the engine group is the same
//! in every command that fits clusters.

use super::*;
use crate::cluster::{Beta, EngineOptions, Mode};
use crate::colour::Space;
use crate::reduce::ReduceOptions;
use crate::render::Dither;
use clap::CommandFactory;
use std::path::PathBuf;

fn parse(args: &[&str]) -> Command {
    let mut v = vec!["chromasift"];
    v.extend_from_slice(args);
    Cli::try_parse_from(v).unwrap().command
}

fn reduce(args: &[&str]) -> ReduceArgs {
    let mut v = vec!["reduce", "in.png"];
    v.extend_from_slice(args);
    match parse(&v) {
        Command::Reduce(r) => r,
        other => panic!("{other:?}"),
    }
}

#[test]
fn defaults() {
    let r = reduce(&[]);
    assert_eq!(r.options(), ReduceOptions::new(8));
    assert_eq!(r.output.out, PathBuf::from("."));
    assert!(!r.output.json);
}

#[test]
fn each_flag_parses() {
    assert_eq!(reduce(&["-k", "5"]).palette.k, 5);
    assert_eq!(reduce(&["--k", "7"]).palette.k, 7);
    assert_eq!(reduce(&["-o", "x"]).output.out, PathBuf::from("x"));
    assert_eq!(reduce(&["--out", "y"]).output.out, PathBuf::from("y"));
    let e = |args: &[&str]| reduce(args).options().engine;
    assert_eq!(e(&["--mode", "soft"]).mode, Mode::Soft);
    assert_eq!(e(&["--beta", "0.02"]).beta, Beta::Fixed(0.02));
    assert_eq!(e(&["--beta", "auto"]).beta, Beta::Auto);
    assert_eq!(reduce(&["--space", "oklab"]).palette.space, Space::Oklab);
    assert_eq!(e(&["--seed", "3"]).seed, 3);
    assert_eq!(e(&["--restarts", "4"]).restarts, 4);
    assert_eq!(e(&["--max-iter", "9"]).max_iter, 9);
    assert_eq!(e(&["--tolerance", "0.01"]).tolerance, 0.01);
    assert_eq!(e(&["--shift-tolerance", "0"]).shift_tolerance, 0.0);
    assert_eq!(e(&["--split-merge", "5"]).split_merge, 5);
    assert!(e(&["--anneal"]).anneal.is_some());
    assert_eq!(
        e(&["--refine", "none"]).refine,
        crate::cluster::Refine::None
    );
    assert_eq!(
        e(&["--refine", "swap:3"]).refine,
        crate::cluster::Refine::Swap(3)
    );
    assert_eq!(e(&[]).refine, crate::cluster::Refine::default());
    assert_eq!(
        reduce(&["--dither", "floyd-steinberg"]).image.dither,
        Dither::FloydSteinberg
    );
    assert_eq!(
        reduce(&["--max-pixels", "100"]).options().limits.max_pixels,
        100
    );
    assert!(reduce(&["--uncertainty-raw"]).image.uncertainty_raw);
    assert!(reduce(&["--json"]).output.json);
    assert!(Cli::try_parse_from([
        "chromasift",
        "reduce",
        "a.png",
        "--stdout",
        "palette",
        "--json"
    ])
    .is_err());
}

/// Every command that fits clusters takes the same engine flags, with the same defaults,
/// and resolves them to the same engine options.
#[test]
fn every_fitting_command_has_the_same_engine_flags() {
    let engine_flags = [
        "mode",
        "beta",
        "seed",
        "restarts",
        "max-iter",
        "tolerance",
        "shift-tolerance",
        "refine",
        "anneal",
        "anneal-start",
        "anneal-end",
        "anneal-factor",
        "split-merge",
    ];
    let top = Cli::command();
    for name in ["reduce", "separate", "landcover", "batch", "learn", "sweep"] {
        let cmd = top.find_subcommand(name).unwrap();
        for flag in engine_flags {
            let arg = cmd
                .get_arguments()
                .find(|a| a.get_long() == Some(flag))
                .unwrap_or_else(|| panic!("{name} lacks --{flag}"));
            let reference = top
                .find_subcommand("reduce")
                .unwrap()
                .get_arguments()
                .find(|a| a.get_long() == Some(flag))
                .unwrap();
            assert_eq!(
                arg.get_default_values(),
                reference.get_default_values(),
                "{name} --{flag}"
            );
        }
    }
    let given = [
        "--seed",
        "9",
        "--restarts",
        "3",
        "--mode",
        "soft",
        "--beta",
        "0.5",
        "--max-iter",
        "40",
    ];
    let want = EngineOptions {
        seed: 9,
        restarts: 3,
        mode: Mode::Soft,
        beta: Beta::Fixed(0.5),
        max_iter: 40,
        ..EngineOptions::default()
    };
    let with = |head: &[&str]| {
        let mut v = head.to_vec();
        v.extend_from_slice(&given);
        parse(&v)
    };
    match with(&["reduce", "a.png"]) {
        Command::Reduce(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
    match with(&["separate", "a.png", "--inks", "i.csv"]) {
        Command::Separate(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
    match with(&["landcover", "s.tif"]) {
        Command::Landcover(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
    match with(&["batch", "dir", "-o", "out"]) {
        Command::Batch(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
    match with(&["learn", "dir", "-o", "p.json"]) {
        Command::Learn(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
    match with(&["sweep", "a.png"]) {
        Command::Sweep(a) => assert_eq!(a.options().engine, want),
        _ => unreachable!(),
    }
}

/// `apply` maps onto a given palette: it shows the flags it uses and refuses fitting flags.
#[test]
fn apply_shows_only_what_it_uses() {
    let top = Cli::command();
    let apply = top.find_subcommand("apply").unwrap();
    let longs: Vec<&str> = apply.get_arguments().filter_map(|a| a.get_long()).collect();
    for used in [
        "palette",
        "beta",
        "dither",
        "uncertainty-raw",
        "max-pixels",
        "out",
        "json",
    ] {
        assert!(longs.contains(&used), "apply lacks --{used}");
    }
    for unused in [
        "restarts",
        "anneal",
        "k",
        "target-delta-e",
        "split-merge",
        "space",
        "seed",
    ] {
        assert!(!longs.contains(&unused), "apply lists --{unused}");
    }
    match parse(&["apply", "a.png", "--palette", "p.json", "--beta", "0.1"]) {
        Command::Apply(a) => assert_eq!(a.options().engine.beta, Beta::Fixed(0.1)),
        _ => unreachable!(),
    }
    assert!(Cli::try_parse_from([
        "chromasift",
        "apply",
        "a.png",
        "--palette",
        "p.json",
        "--restarts",
        "3"
    ])
    .is_err());
    let learn = top.find_subcommand("learn").unwrap();
    assert!(!learn
        .get_arguments()
        .any(|a| a.get_long() == Some("dither")));
}

fn separate(args: &[&str]) -> SeparateArgs {
    let mut v = vec!["separate", "art.png", "--inks", "inks.csv"];
    v.extend_from_slice(args);
    match parse(&v) {
        Command::Separate(s) => s,
        other => panic!("{other:?}"),
    }
}

#[test]
fn separate_flags_parse() {
    let d = separate(&[]);
    assert_eq!(d.options(), crate::separate::SeparateOptions::default());
    assert_eq!(d.inks, PathBuf::from("inks.csv"));
    assert_eq!(separate(&["-k", "3"]).k, 3);
    assert_eq!(
        separate(&["--use", "Night Black, Harbour Blue"])
            .options()
            .use_inks,
        vec!["Night Black", "Harbour Blue"]
    );
    assert!(separate(&["--all"]).all);
    assert_eq!(
        separate(&["--substrate", "#ffeedd"]).substrate,
        Some([0xff, 0xee, 0xdd])
    );
    assert_eq!(separate(&["--min-area", "24"]).min_area, 24);
    assert_eq!(separate(&["--trap", "2"]).trap, 2);
    assert_eq!(separate(&["--dpi", "300"]).dpi, Some(300.0));
    assert_eq!(separate(&["--seed", "5"]).options().engine.seed, 5);
    assert_eq!(
        separate(&["-o", "plates"]).output.out,
        PathBuf::from("plates")
    );
    assert_eq!(
        separate(&["--max-pixels", "9"]).options().limits.max_pixels,
        9
    );
    assert!(separate(&["--json"]).output.json);
    let bad = [
        "chromasift",
        "separate",
        "a.png",
        "--inks",
        "i.csv",
        "--substrate",
        "white",
    ];
    assert!(Cli::try_parse_from(bad).is_err());
}

#[test]
fn landcover_flags_parse() {
    let lc = |args: &[&str]| {
        let mut v = vec!["landcover", "scene.tif"];
        v.extend_from_slice(args);
        match parse(&v) {
            Command::Landcover(l) => l,
            other => panic!("{other:?}"),
        }
    };
    let d = lc(&[]).options();
    assert_eq!(d, crate::landcover::LandcoverOptions::default());
    assert_eq!(lc(&["-k", "8"]).k, 8);
    assert_eq!(
        lc(&["--bands", "2,3,4,8"]).options().scene.bands,
        Some(vec![2, 3, 4, 8])
    );
    let ix = lc(&["--index", "ndvi:3,4", "--index", "nd:2,4"])
        .rest
        .scene
        .index;
    assert_eq!(ix.len(), 2);
    assert_eq!(ix[1].name(), "nd:2,4");
    assert_eq!(
        lc(&["--scale", "none"]).rest.scene.scale,
        crate::landcover::Scale::None
    );
    assert_eq!(lc(&["--nodata", "-9999"]).rest.scene.nodata, Some(-9999.0));
    assert_eq!(lc(&["--sample", "1000"]).rest.scene.sample, 1000);
    assert_eq!(lc(&["--restarts", "3"]).options().engine.restarts, 3);
    assert_eq!(lc(&["-o", "c"]).rest.output.out, PathBuf::from("c"));
    assert_eq!(lc(&["--max-pixels", "10"]).max_pixels, 10);
    assert!(lc(&["--json"]).rest.output.json);
    assert!(Cli::try_parse_from(["chromasift", "landcover", "s.tif", "--bands", "0"]).is_err());
    assert!(
        Cli::try_parse_from(["chromasift", "landcover", "s.tif", "--index", "evi:1,2"]).is_err()
    );
}

#[test]
fn bad_values_are_refused_by_the_parser() {
    for bad in [
        &["--mode", "fuzzy"][..],
        &["--space", "rgb"],
        &["--dither", "ordered"],
        &["--beta", "sharp"],
        &["-k", "-1"],
    ] {
        let mut v = vec!["chromasift", "reduce", "in.png"];
        v.extend_from_slice(bad);
        assert!(Cli::try_parse_from(v).is_err(), "{bad:?}");
    }
}
