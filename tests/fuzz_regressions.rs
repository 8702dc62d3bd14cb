//! Inputs found by the fuzz targets in `fuzz/` (see `fuzz/README.md`), each kept as a test
//! named for what it broke. Bytes are inline; the comment says which target found them.

use chromasift::batch::{decode_histogram, encode_histogram};
use chromasift::reduce::fnv1a;
use std::path::Path;

/// With its FNV-1a trailer recomputed, `bytes` is a histogram file whose only fault is
/// what the test is about.
fn with_checksum(mut bytes: Vec<u8>) -> Vec<u8> {
    let body = bytes.len() - 8;
    let sum = fnv1a(&bytes[..body]);
    bytes[body..].copy_from_slice(&sum.to_le_bytes());
    bytes
}

/// Found by `histogram_file`: a header whose 7 reserved bytes (after the sample depth)
/// are not zero was accepted, and re-encoding it gave other bytes. The format (README,
/// "Histogram files") says those bytes are zero, so a file that sets them is from another
/// writer or damaged, and is refused.
#[test]
fn histogram_file_reserved_bytes_must_be_zero() {
    let found = with_checksum(vec![
        0x43, 0x53, 0x48, 0x49, 0x53, 0x54, 0x00, 0x01, 0x08, 0x43, 0xff, 0xff, 0x21, 0x00, 0x04,
        0x21, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xff, 0xff, 0x53, 0x54,
        0x00, 0x01,
    ]);
    let e = decode_histogram(&found, Path::new("found.hist"))
        .unwrap_err()
        .to_string();
    assert!(e.contains("found.hist") && e.contains("reserved"), "{e}");
    // The same header with the reserved bytes zero is an empty 8-bit histogram, and
    // encodes back to the same bytes.
    let mut clean = found.clone();
    clean[9..16].fill(0);
    let clean = with_checksum(clean);
    let h = decode_histogram(&clean, Path::new("clean.hist")).unwrap();
    assert!(h.is_empty() && h.depth == 8);
    assert_eq!(encode_histogram(&h), clean);
}
