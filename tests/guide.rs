//! Runs every command line of GUIDE.md's `sh` blocks, in a scratch folder where
//! `fixtures/` points at the bundled fixtures and `chromasift` is this build.

use std::path::Path;
use std::process::Command;

fn guide_commands() -> Vec<String> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(root.join("GUIDE.md")).unwrap();
    let mut out = Vec::new();
    let mut in_sh = false;
    for line in text.lines() {
        let t = line.trim();
        if t == "```sh" {
            in_sh = true;
        } else if t == "```" {
            in_sh = false;
        } else if in_sh && !t.is_empty() && !t.starts_with('#') {
            out.push(t.to_string());
        }
    }
    out
}

#[test]
fn every_guide_command_runs() {
    let cmds = guide_commands();
    assert!(cmds.len() >= 12, "{cmds:?}");
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    std::os::unix::fs::symlink(root.join("fixtures"), dir.path().join("fixtures")).unwrap();
    let bin_dir = Path::new(env!("CARGO_BIN_EXE_chromasift"))
        .parent()
        .unwrap();
    let path = format!(
        "{}:{}",
        bin_dir.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    for c in &cmds {
        assert!(c.contains("chromasift "), "not a chromasift command: {c}");
        let o = Command::new("sh")
            .args(["-c", c])
            .current_dir(dir.path())
            .env("PATH", &path)
            .output()
            .unwrap();
        assert!(
            o.status.success(),
            "guide command failed: {c}\n{}",
            String::from_utf8_lossy(&o.stderr)
        );
    }
    // Each task left its outputs where the guide says.
    for f in [
        "out/harbour-poster.reduced.png",
        "plates/harbour-poster.separation.json",
        "classes/utm_u16_4band_strips.classes.tif",
        "reduced/batch-report.json",
        "reduced-shared/shared.palette.json",
        "house.palette.json",
        "applied/valley-aerial.reduced.png",
        "sweep/sweep.svg",
        "target/harbour-poster.palette.json",
        "unsure/valley-aerial.uncertainty.tif",
        "valley-uncertainty.png",
    ] {
        assert!(dir.path().join(f).is_file(), "missing {f}");
    }
}
