//! Inputs found by the fuzz targets in `fuzz/` (see `fuzz/README.md`), each kept as a test
//! named for what it broke. Bytes are inline; the comment says which target found them.

mod common;

use chromasift::batch::{decode_histogram, encode_histogram};
use chromasift::geotiff::read_geotags;
use chromasift::reduce::fnv1a;
use common::{assert_refusal, fixture, run};
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

/// The IFD entries of a little-endian classic TIFF: (byte position of the entry, tag).
fn ifd_entries(tif: &[u8]) -> Vec<(usize, u16)> {
    assert_eq!(&tif[..4], b"II\x2a\x00");
    let ifd = u32::from_le_bytes(tif[4..8].try_into().unwrap()) as usize;
    let n = u16::from_le_bytes([tif[ifd], tif[ifd + 1]]) as usize;
    (0..n)
        .map(|i| {
            let at = ifd + 2 + 12 * i;
            (at, u16::from_le_bytes([tif[at], tif[at + 1]]))
        })
        .collect()
}

/// Found by `geotiff` (`fixtures/fuzz/geo-ascii-params-count-1560281111.tif`, 595 bytes):
/// its GeoAsciiParams tag (34737, ASCII) declares 1 560 281 111 characters. The `tiff`
/// crate allocates a buffer of the declared size before reading, bounded only by the
/// decoding limit (3 GiB by default), so reading the tags asked for 1.5 GB. A tag longer
/// than its file is now refused first, naming the tag.
#[test]
fn geotiff_tag_longer_than_the_file_is_refused_before_allocating() {
    let found = fixture("fuzz/geo-ascii-params-count-1560281111.tif");
    let e = read_geotags(&found).unwrap_err().to_string();
    assert!(
        e.contains("GeoAsciiParams (34737)") && e.contains("1560281111 values"),
        "{e}"
    );

    // The same fault in a good GeoTIFF of our fixtures reaches `landcover` itself: run it
    // in an address space of 512 MiB, too small for the claimed 1.5 GB, so an allocation
    // of the declared size would abort the process instead of giving a clean refusal.
    let mut tif = std::fs::read(fixture("rasters/utm_u16_4band_strips.tif")).unwrap();
    let (at, _) = ifd_entries(&tif)
        .into_iter()
        .find(|&(_, tag)| tag == 34737)
        .expect("the fixture has GeoAsciiParams");
    tif[at + 4..at + 8].copy_from_slice(&1_560_281_111u32.to_le_bytes());
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("long-ascii.tif");
    std::fs::write(&input, &tif).unwrap();
    let out = dir.path().join("out");
    let o = std::process::Command::new("sh")
        .arg("-c")
        .arg("ulimit -v 524288 && exec \"$0\" \"$@\"")
        .args([
            env!("CARGO_BIN_EXE_chromasift"),
            "landcover",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert_refusal(
        &o,
        "landcover",
        &[
            "long-ascii.tif",
            "GeoAsciiParams (34737)",
            "but the file has only",
        ],
    );
    assert!(!out.exists());
}

/// Found by `histogram_file` (`fixtures/fuzz/hist-counts-past-u64.hist`, 11 entries,
/// checksum valid): two counts of about 1.8 × 10¹⁹ and 1.1 × 10¹⁹ add up past u64, and
/// `learn` panicked on the overflow when summing the pixels (in builds with overflow
/// checks; a release build wrapped around to a wrong total). Histogram files whose counts
/// add up to more than 2⁵³ (past which f64 weights are no longer exact) are now refused,
/// and so are inputs that reach it together.
#[test]
fn histogram_counts_past_two_to_the_53_are_refused() {
    let found = fixture("fuzz/hist-counts-past-u64.hist");
    let bytes = std::fs::read(&found).unwrap();
    let e = decode_histogram(&bytes, &found).unwrap_err().to_string();
    assert!(e.contains("2^53"), "{e}");
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("p.json");
    let o = run(
        &[
            "learn",
            found.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_refusal(&o, "learn", &["hist-counts-past-u64.hist", "2^53"]);

    // Two files of 2⁵³ pixels each are valid alone, and refused together.
    let one = |c: u16| chromasift::histogram::Histogram {
        depth: 8,
        colours: vec![[c, c, c]],
        counts: vec![1 << 53],
        ..Default::default()
    };
    let (a, b) = (dir.path().join("a.hist"), dir.path().join("b.hist"));
    std::fs::write(&a, encode_histogram(&one(10))).unwrap();
    std::fs::write(&b, encode_histogram(&one(200))).unwrap();
    let args = |files: &[&Path]| {
        let mut v: Vec<String> = vec!["learn".into()];
        v.extend(files.iter().map(|f| f.to_str().unwrap().to_string()));
        v.extend([
            "-k".into(),
            "1".into(),
            "-o".into(),
            out.to_str().unwrap().into(),
        ]);
        v
    };
    let a_only = args(&[&a]);
    let o = run(&a_only.iter().map(String::as_str).collect::<Vec<_>>(), &[]);
    assert!(o.status.success(), "{}", common::stderr(&o));
    std::fs::remove_file(&out).unwrap();
    let both = args(&[&a, &b]);
    let o = run(&both.iter().map(String::as_str).collect::<Vec<_>>(), &[]);
    assert_refusal(&o, "learn", &["2^53"]);
    assert!(!out.exists());
}
