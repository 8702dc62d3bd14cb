//! Unit tests of the reduce workflow.

use super::*;

#[test]
fn fingerprint_tells_split_merge_settings_apart() {
    let base = ReduceOptions::new(8);
    let with = |n: usize| {
        let mut o = base.clone();
        o.engine.split_merge = n;
        o
    };
    assert_eq!(with(0).fingerprint(None), base.fingerprint(None));
    assert_ne!(with(8).fingerprint(None), base.fingerprint(None));
    assert_ne!(with(8).fingerprint(None), with(16).fingerprint(None));
    let annealed = |n: usize| {
        let mut o = base.clone();
        o.engine.anneal = Some(crate::cluster::Anneal {
            split_merge: n,
            ..crate::cluster::Anneal::default()
        });
        o
    };
    assert_ne!(
        annealed(32).fingerprint(None),
        annealed(0).fingerprint(None)
    );
    assert_ne!(annealed(32).fingerprint(None), base.fingerprint(None));
}
