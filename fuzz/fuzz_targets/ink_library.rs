//! Arbitrary bytes as an ink library (CSV `name,L,a,b` / `name,hex`, or a JSON array).
//!
//! Invariants on every library that parses: at least one ink, names non-empty and unique
//! (ignoring case), L* in 0..100, a* and b* within ±200, all finite, and a `#rrggbb` hex.
#![no_main]

use chromasift::inks::parse_library;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(inks) = parse_library(text, Path::new("fuzz-inks.csv")) else {
        return;
    };
    assert!(!inks.is_empty());
    let mut names = std::collections::HashSet::new();
    for ink in &inks {
        assert!(!ink.name.is_empty());
        assert!(
            names.insert(ink.name.to_lowercase()),
            "duplicate {}",
            ink.name
        );
        let [l, a, b] = ink.lab_d50;
        assert!(l.is_finite() && a.is_finite() && b.is_finite());
        assert!((0.0..=100.0).contains(&l) && a.abs() <= 200.0 && b.abs() <= 200.0);
        assert!(
            chromasift::colour::parse_hex(&ink.hex).is_ok(),
            "{}",
            ink.hex
        );
    }
});
