//! Arbitrary text through every flag-value parser.
//!
//! The first byte picks a parser; the rest is the value. (The whole command line is the
//! `cli_args` target.)
//!
//! Invariants: accepted values re-read to themselves (hex colours, index specs, names),
//! band numbers are 1-based, and K ranges satisfy 1 ≤ min ≤ max ≤ 256.
#![no_main]

use chromasift::cli::{parse_colour, BandList};
use chromasift::cluster::{Beta, Mode};
use chromasift::colour::{hex, parse_hex, Space};
use chromasift::geotiff::parse_nodata;
use chromasift::landcover::{parse_bands, IndexSpec, Scale};
use chromasift::render::Dither;
use chromasift::sweep::KRange;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&which, rest)) = data.split_first() else {
        return;
    };
    let Ok(s) = std::str::from_utf8(rest) else {
        return;
    };
    match which % 10 {
        0 => {
            if let Ok(c) = parse_hex(s) {
                assert_eq!(parse_hex(&hex(c)), Ok(c));
                let digits = s.trim().trim_start_matches('#').to_ascii_lowercase();
                assert_eq!(digits, hex(c)[1..]);
                assert_eq!(parse_colour(s), Ok(c));
            }
        }
        1 => {
            if let Ok(b) = parse_bands(s) {
                assert_eq!(b.len(), s.split(',').count());
                assert!(b.iter().all(|&v| v >= 1));
                assert_eq!(s.parse::<BandList>().map(|l| l.0), Ok(b));
            }
        }
        2 => {
            if let Ok(i) = s.parse::<IndexSpec>() {
                assert!(i.a >= 1 && i.b >= 1);
                assert_eq!(i.name().parse::<IndexSpec>(), Ok(i));
            }
        }
        3 => {
            if let Ok(Beta::Fixed(v)) = s.parse::<Beta>() {
                // Any f64 text is accepted here; the parameter check rejects the bad ones.
                let _ = v;
            }
        }
        4 => {
            if let Ok(r) = s.parse::<KRange>() {
                assert!(1 <= r.min && r.min <= r.max && r.max <= 256, "{r:?}");
            }
        }
        5 => {
            let _ = parse_nodata(s);
        }
        6 => {
            if let Ok(m) = s.parse::<Mode>() {
                assert_eq!(m.name().parse::<Mode>(), Ok(m));
            }
        }
        7 => {
            if let Ok(sp) = s.parse::<Space>() {
                assert_eq!(sp.name().parse::<Space>(), Ok(sp));
            }
        }
        8 => {
            let _ = s.parse::<Scale>();
        }
        _ => {
            let _ = s.parse::<Dither>();
        }
    }
});
