//! Arbitrary bytes as a histogram file (`decode_histogram`), then `learn` on small ones.
//!
//! Mutated files almost never keep a valid checksum, so each input is also decoded with
//! its last 8 bytes replaced by the right FNV-1a checksum: that lets the fuzzer reach
//! the checks behind the checksum (depth, values, counts, order) and `learn`.
//!
//! Invariants: a file that decodes re-encodes to exactly the same bytes (the format has
//! one encoding per histogram); learning a palette from it either fails cleanly or gives
//! finite scores and shares that sum to about 1.
#![no_main]

use chromasift::batch::encode_histogram;
use chromasift::features::histogram_file::{decode_with_inputs, encode_with_inputs};
use chromasift::reduce::{fnv1a, learn_palette, ReduceOptions};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fn check(bytes: &[u8]) {
    let Ok((h, inputs)) = decode_with_inputs(bytes, Path::new("fuzz.hist")) else {
        return;
    };
    let again = match &inputs {
        Some(list) => encode_with_inputs(&h, list),
        None => encode_histogram(&h),
    };
    assert_eq!(again, bytes, "decode then encode is the identity");
    if h.len() > 64 {
        return;
    }
    let mut opts = ReduceOptions::new(3);
    opts.engine.max_iter = 20;
    let Ok(doc) = learn_palette(&h, &opts) else {
        return;
    };
    assert!(doc.sse.is_finite() && doc.mean_delta_e2000.is_finite());
    let shares: f64 = doc.colors.iter().map(|c| c.share).sum();
    assert!((shares - 1.0).abs() < 1e-6, "shares sum to {shares}");
}

fuzz_target!(|data: &[u8]| {
    check(data);
    if data.len() >= 16 {
        let mut fixed = data.to_vec();
        let body = fixed.len() - 8;
        let sum = fnv1a(&fixed[..body]);
        fixed[body..].copy_from_slice(&sum.to_le_bytes());
        if fixed != data {
            check(&fixed);
        }
    }
});
