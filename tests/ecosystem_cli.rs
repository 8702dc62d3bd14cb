//! Pipelines, completions, the manual page and terminal manners.

mod common;

use common::{fixture, run, stderr};
use std::io::Write;
use std::process::{Command, Stdio};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_chromasift")
}

/// Runs the binary with `input` on standard input; returns (exit code, stdout, stderr).
fn piped(args: &[&str], input: &[u8], env: &[(&str, &str)]) -> (Option<i32>, Vec<u8>, String) {
    let mut c = Command::new(bin());
    c.args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    for (k, v) in env {
        c.env(k, v);
    }
    let mut child = c.spawn().unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let data = input.to_vec();
    let feeder = std::thread::spawn(move || {
        let _ = stdin.write_all(&data);
    });
    let o = child.wait_with_output().unwrap();
    feeder.join().unwrap();
    (
        o.status.code(),
        o.stdout,
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn stdin_to_stdout_equals_the_file_path_result_byte_for_byte() {
    let poster = fixture("demo/harbour-poster.png");
    let bytes = std::fs::read(&poster).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("files");
    let o = run(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "6",
            "-o",
            out.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for (which, file) in [
        ("reduced", "harbour-poster.reduced.png"),
        ("uncertainty", "harbour-poster.uncertainty.png"),
    ] {
        let (code, stdout, err) =
            piped(&["reduce", "-", "-k", "6", "--stdout", which], &bytes, &[]);
        assert_eq!(code, Some(0), "{err}");
        assert_eq!(stdout, std::fs::read(out.join(file)).unwrap(), "{which}");
    }
    // The palette document differs only in the input name, which standard input lacks.
    let (code, stdout, err) = piped(
        &["reduce", "-", "-k", "6", "--stdout", "palette"],
        &bytes,
        &[],
    );
    assert_eq!(code, Some(0), "{err}");
    let mut a: serde_json::Value = serde_json::from_slice(&stdout).unwrap();
    let mut b: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("harbour-poster.palette.json")).unwrap())
            .unwrap();
    a.as_object_mut().unwrap().remove("input");
    b.as_object_mut().unwrap().remove("input");
    assert_eq!(a, b);

    // --stdout and -o contradict each other: refused, nothing written.
    let quiet = dir.path().join("none");
    let o = run(
        &[
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "6",
            "--stdout",
            "reduced",
            "-o",
            quiet.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(!quiet.exists());
    // A file input with --stdout writes nothing to the current folder either.
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_chromasift"))
        .args([
            "reduce",
            poster.to_str().unwrap(),
            "-k",
            "6",
            "--stdout",
            "reduced",
        ])
        .current_dir(quiet_parent(dir.path()))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(
        o.stdout,
        std::fs::read(out.join("harbour-poster.reduced.png")).unwrap()
    );
    assert!(!quiet.exists());
    assert!(common::files_in(&quiet_parent(dir.path())).is_empty());
}

#[test]
fn stdin_without_stdout_writes_stdin_named_files_and_bad_input_fails_cleanly() {
    let bytes = std::fs::read(fixture("demo/harbour-poster.png")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    let (code, _, err) = piped(
        &["reduce", "-", "-k", "4", "-o", out.to_str().unwrap()],
        &bytes,
        &[],
    );
    assert_eq!(code, Some(0), "{err}");
    assert_eq!(
        common::files_in(&out),
        [
            "stdin.palette.csv",
            "stdin.palette.json",
            "stdin.reduced.png",
            "stdin.uncertainty.png"
        ]
    );
    for bad in [&b""[..], b"not an image at all", &bytes[..bytes.len() / 3]] {
        let (code, stdout, err) =
            piped(&["reduce", "-", "-k", "4", "--stdout", "reduced"], bad, &[]);
        assert_eq!(code, Some(2), "{err}");
        assert!(stdout.is_empty());
        assert!(
            err.starts_with("chromasift: error: standard input: "),
            "{err}"
        );
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    }
    let (code, _, err) = piped(&["reduce", "-", "--stdout", "everything"], &bytes, &[]);
    assert_eq!(code, Some(2));
    assert!(
        err.contains("--stdout takes reduced, uncertainty or palette"),
        "{err}"
    );
}

#[test]
fn completions_and_manual_page_generate() {
    for shell in ["bash", "zsh", "fish"] {
        let o = run(&["completions", shell], &[]);
        assert_eq!(o.status.code(), Some(0), "{shell}: {}", stderr(&o));
        let text = String::from_utf8(o.stdout).unwrap();
        for word in ["reduce", "sweep", "landcover", "target-delta-e"] {
            assert!(text.contains(word), "{shell} completions lack {word}");
        }
    }
    let o = run(&["completions", "tcsh-ish"], &[]);
    assert_eq!(o.status.code(), Some(2));
    let o = run(&["manpage"], &[]);
    assert_eq!(o.status.code(), Some(0));
    let man = String::from_utf8(o.stdout).unwrap();
    assert!(man.contains(".TH chromasift 1"), "{man}");
    for word in ["reduce", "separate", "landcover", "batch", "sweep"] {
        assert!(man.contains(word), "manual page lacks {word}");
    }
}

/// Colour only on a terminal, and never with NO_COLOR set (the no-color.org convention).
/// `script` (util-linux) gives the command a pseudo-terminal.
#[test]
fn no_colour_off_a_terminal_or_with_no_color() {
    let o = run(&["reduce", "--help"], &[]);
    assert!(!o.stdout.contains(&0x1b), "escape codes off a terminal");
    let o = run(&["reduce", "-k", "zero"], &[]);
    assert!(!o.stderr.contains(&0x1b));
    let have_script = Command::new("script").arg("--version").output().is_ok();
    if !have_script {
        eprintln!("`script` not found: terminal half of the check skipped");
        return;
    }
    let on_tty = |no_color: bool| -> Vec<u8> {
        let mut c = Command::new("script");
        c.args(["-qc", &format!("{} reduce --help", bin()), "/dev/null"]);
        c.env_remove("NO_COLOR");
        if no_color {
            c.env("NO_COLOR", "1");
        }
        c.output().unwrap().stdout
    };
    assert!(on_tty(false).contains(&0x1b), "styled help on a terminal");
    assert!(!on_tty(true).contains(&0x1b), "NO_COLOR turns styling off");
}

#[test]
fn every_workflow_offers_json_and_the_help_states_the_exit_codes() {
    for c in [
        "reduce",
        "separate",
        "landcover",
        "batch",
        "learn",
        "apply",
        "histogram",
        "sweep",
    ] {
        let o = run(&[c, "--help"], &[]);
        let help = String::from_utf8(o.stdout).unwrap();
        assert!(help.contains("--json"), "{c} --help lacks --json");
    }
    let o = run(&["--help"], &[]);
    let help = String::from_utf8(o.stdout).unwrap();
    for code in ["0 success", "1 some inputs", "2 usage error", "130"] {
        assert!(
            help.contains(code),
            "top-level help lacks exit code {code}: {help}"
        );
    }
}

/// An empty folder to run in (created under `root`).
fn quiet_parent(root: &std::path::Path) -> std::path::PathBuf {
    let p = root.join("cwd");
    std::fs::create_dir_all(&p).unwrap();
    p
}

/// A mistyped command or flag is answered with the nearest one, in one line, and nothing
/// runs; every command has its own manual page.
#[test]
fn typos_get_the_nearest_name_and_every_command_has_a_page() {
    let o = run(&["seperate", "a.png"], &[]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(err.contains("did you mean 'separate'"), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    let poster = fixture("demo/harbour-poster.png");
    let o = run(&["reduce", poster.to_str().unwrap(), "--colors", "6"], &[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("did you mean '-k'"), "{}", stderr(&o));
    let o = run(&["landcover", "s.tif", "--restart", "3"], &[]);
    assert!(
        stderr(&o).contains("did you mean '--restarts'"),
        "{}",
        stderr(&o)
    );

    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("man");
    let o = run(&["manpage", "--all", "-o", out.to_str().unwrap()], &[]);
    assert!(o.status.success(), "{}", stderr(&o));
    for cmd in [
        "reduce",
        "separate",
        "landcover",
        "batch",
        "learn",
        "apply",
        "histogram",
        "sweep",
    ] {
        let page = std::fs::read_to_string(out.join(format!("chromasift-{cmd}.1"))).unwrap();
        assert!(page.starts_with(".ie") || page.contains(".TH"), "{cmd}");
        assert!(page.contains(&format!("chromasift\\-{cmd}")), "{cmd}");
    }
    let one = run(&["manpage", "sweep"], &[]);
    assert!(one.status.success());
    let text = String::from_utf8_lossy(&one.stdout);
    assert!(text.contains("silhouette\\-sample"), "{text}");
    let bad = run(&["manpage", "sweap"], &[]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(
        stderr(&bad).contains("did you mean 'sweep'"),
        "{}",
        stderr(&bad)
    );
}

/// K is bounded and worded the same wherever it is given: "k must be at least 1" and
/// "k must be at most N (got M)", with what sets the bound.
#[test]
fn k_bounds_read_the_same_in_every_command() {
    let poster = fixture("demo/harbour-poster.png");
    let p = poster.to_str().unwrap();
    let inks = fixture("demo/quayside-inks.csv");
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o");
    let o = out.to_str().unwrap();
    let cases: [(&[&str], &str); 6] = [
        (
            &["reduce", p, "-k", "0", "-o", o],
            "k must be at least 1 (got 0)",
        ),
        (
            &["reduce", p, "-k", "70000", "-o", o],
            "k must be at most 65535 (got 70000)",
        ),
        (
            &["landcover", p, "-k", "300", "-o", o],
            "k must be at most 255 (got 300)",
        ),
        (
            &["sweep", p, "--k", "2..300", "-o", o],
            "k must be at most 256 (got 300)",
        ),
        (
            &["sweep", p, "--k", "0..3", "-o", o],
            "k must be at least 1 (got 0)",
        ),
        (
            &[
                "separate",
                p,
                "--inks",
                inks.to_str().unwrap(),
                "-k",
                "99",
                "-o",
                o,
            ],
            "k must be at most",
        ),
    ];
    for (args, want) in cases {
        let r = run(args, &[]);
        assert_eq!(r.status.code(), Some(2), "{args:?}");
        let err = stderr(&r);
        assert!(err.contains(want), "{args:?}: {err}");
        assert_eq!(err.trim_end().lines().count(), 1, "{err}");
        assert!(!out.exists(), "{args:?} wrote outputs");
    }
}

/// Standard input is named as such in every message, never by the temporary file that
/// holds it for the run: a summary, a note, and an error.
#[test]
fn messages_name_standard_input_not_its_temporary_copy() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("plates");
    let poster = std::fs::read(fixture("demo/harbour-poster.png")).unwrap();
    let inks = fixture("demo/quayside-inks.csv");
    let (code, _, err) = piped(
        &[
            "separate",
            "-",
            "--inks",
            inks.to_str().unwrap(),
            "-k",
            "4",
            "--substrate",
            "#101010",
            "-o",
            out.to_str().unwrap(),
        ],
        &poster,
        &[],
    );
    assert_eq!(code, Some(0), "{err}");
    assert!(err.contains("note: standard input:"), "{err}");
    assert!(err.contains("standard input: 4 plates written"), "{err}");
    let first = err;
    let (code, _, err) = piped(
        &[
            "landcover",
            "-",
            "-k",
            "3",
            "-o",
            dir.path().join("lc").to_str().unwrap(),
        ],
        b"not an image at all",
        &[],
    );
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("standard input"), "{err}");
    for e in [&first, &err] {
        assert!(!e.contains("stdin.img") && !e.contains(".tmp"), "{e}");
    }
}
