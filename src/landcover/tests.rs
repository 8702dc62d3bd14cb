//! Unit tests of the landcover workflow's parts.

use super::pass2::first_cause;
use super::*;
use crate::colour;
use crate::error::Error;
use crate::output::OutputSet;

#[test]
fn class_colours_are_distinct() {
    let c = class_colours(16);
    for i in 0..16 {
        for j in 0..i {
            let d = colour::delta_e2000(colour::srgb8_to_lab(c[i]), colour::srgb8_to_lab(c[j]));
            assert!(d > 5.0, "classes {i} and {j} too alike: ΔE2000 {d}");
        }
    }
}

#[test]
fn a_failed_write_reports_its_cause_not_the_other_side_stopping() {
    let dir = tempfile::tempdir().unwrap();
    let set = OutputSet::prepare(dir.path(), &[]).unwrap();
    let message = |r: Result<crate::output::PendingOutput>| match r {
        Err(Error::Data(m)) => m,
        other => panic!("expected a data error, got {other:?}"),
    };
    let err = |m: &str| Error::Data(m.into());
    let cls_stopped = || Err(err("the uncertainty writer stopped early"));
    let unc_stopped = || Err(err("the class pass stopped early"));
    // The uncertainty side failed: the class side only saw the channel close.
    assert_eq!(
        message(first_cause(cls_stopped(), Err(err("disk full")))),
        "disk full"
    );
    // The class side failed: its cause wins over the uncertainty side stopping.
    assert_eq!(
        message(first_cause(Err(err("disk full")), unc_stopped())),
        "disk full"
    );
    assert_eq!(
        message(first_cause(Ok(()), Err(err("disk full")))),
        "disk full"
    );
    // Both sides stopped: the class side's report.
    assert_eq!(
        message(first_cause(cls_stopped(), unc_stopped())),
        "the uncertainty writer stopped early"
    );
    assert!(first_cause(Ok(()), Ok(set.begin("u.tif").unwrap())).is_ok());
}
