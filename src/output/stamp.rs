//! Identity of inputs and settings, so a later run can tell whether outputs are current.

use serde::{Deserialize, Serialize};
use std::path::Path;

/// Identity of an input file for resuming: byte size and modification time.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SourceStamp {
    pub bytes: u64,
    /// Modification time, nanoseconds since the Unix epoch.
    pub modified_ns: u128,
}

impl SourceStamp {
    /// The stamp of a file now.
    pub fn of(path: &Path) -> Option<SourceStamp> {
        let m = std::fs::metadata(path).ok()?;
        let modified_ns = m
            .modified()
            .ok()?
            .duration_since(std::time::UNIX_EPOCH)
            .ok()?
            .as_nanos();
        Some(SourceStamp {
            bytes: m.len(),
            modified_ns,
        })
    }
}

/// FNV-1a, 64 bits: a small, stable hash for fingerprints and checksums.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h = 0xcbf2_9ce4_8422_2325u64;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}
