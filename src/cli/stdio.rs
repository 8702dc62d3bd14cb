//! Standard input and output for the commands: documents and single outputs written to
//! standard output (failures reported once), and standard input held in a temporary file.

use crate::error::Error;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

/// Set when writing to standard output failed; the exit status is then 2.
pub(super) static STDOUT_FAILED: AtomicBool = AtomicBool::new(false);

/// Whether standard output was closed when the process started (`>&-`), as the binary
/// recorded it before the runtime replaced the closed descriptor.
static STDOUT_CLOSED_AT_START: AtomicBool = AtomicBool::new(false);

/// Records whether standard output was closed at start.
pub(super) fn set_stdout_closed_at_start(closed: bool) {
    STDOUT_CLOSED_AT_START.store(closed, Ordering::SeqCst);
}

/// An error when standard output is closed: what is written there would be lost without a
/// word.
pub(super) fn stdout_open() -> std::io::Result<()> {
    if STDOUT_CLOSED_AT_START.load(Ordering::SeqCst) {
        return Err(std::io::Error::other("standard output is closed"));
    }
    Ok(())
}

/// Records a failed write to standard output. A closed pipe (`… | head`) is not worth a
/// message, but still makes the exit status 2.
pub(super) fn stdout_result(result: std::io::Result<()>) {
    if let Err(e) = result {
        if !STDOUT_FAILED.swap(true, Ordering::SeqCst) && e.kind() != std::io::ErrorKind::BrokenPipe
        {
            eprintln!("chromasift: error: standard output: {e}");
        }
    }
}

/// Writes bytes to standard output, as an error naming it.
pub(super) fn write_stdout(bytes: &[u8]) -> Result<(), Error> {
    let mut o = std::io::stdout().lock();
    stdout_open()
        .and_then(|()| o.write_all(bytes))
        .and_then(|()| o.flush())
        .map_err(|e| Error::io(Path::new("standard output"), e))
}

/// Writes one document and a newline to standard output; a failure (a full disk, a closed
/// pipe) is reported once on standard error and makes the exit status 2.
pub(super) fn emit(text: &str) {
    let mut out = std::io::stdout().lock();
    let result = stdout_open()
        .and_then(|()| writeln!(out, "{text}"))
        .and_then(|()| out.flush());
    stdout_result(result);
}

/// Prints a document as pretty JSON on standard output.
pub(super) fn emit_json(doc: &impl serde::Serialize) {
    emit(&serde_json::to_string_pretty(doc).expect("document serialises"));
}

/// Writes one output file atomically, sparing the inputs; `-` writes to standard output.
pub(super) fn write_or_stdout(out: &Path, bytes: &[u8], inputs: &[PathBuf]) -> Result<(), Error> {
    if out.as_os_str() == "-" {
        return write_stdout(bytes);
    }
    let spare: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
    crate::output::write_file_sparing(out, bytes, &spare)?;
    Ok(())
}

/// Reads standard input whole, at most `limit` bytes.
pub(super) fn read_stdin(limit: u64) -> Result<Vec<u8>, Error> {
    let name = Path::new("standard input");
    let mut bytes = Vec::new();
    std::io::stdin()
        .lock()
        .take(limit + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(name, e))?;
    if bytes.len() as u64 > limit {
        return Err(Error::LimitExceeded {
            path: name.into(),
            message: format!("input is over the limit of {limit} bytes"),
        });
    }
    Ok(bytes)
}

/// Where standard input was copied for this run (see [`stdin_to_file`]).
static STDIN_COPY: std::sync::OnceLock<PathBuf> = std::sync::OnceLock::new();

/// `text` with the temporary copy of standard input named as what it is.
pub(super) fn shown(text: &str) -> String {
    match STDIN_COPY.get() {
        Some(p) => text.replace(&p.display().to_string(), "standard input"),
        None => text.to_string(),
    }
}

/// A path as messages name it: "standard input" for the copy of standard input.
pub(super) fn shown_path(path: &Path) -> String {
    shown(&path.display().to_string())
}

/// Standard input copied into `stdin.tif` (TIFF bytes) or `stdin.img` in a new temporary
/// folder, at most the default allocation limit.
pub(super) fn stdin_to_file() -> Result<(tempfile::TempDir, PathBuf), Error> {
    let name = Path::new("standard input");
    let bytes = read_stdin(crate::Limits::default().max_alloc)?;
    let tiff = bytes.starts_with(b"II*\0")
        || bytes.starts_with(b"MM\0*")
        || bytes.starts_with(b"II+\0")
        || bytes.starts_with(b"MM\0+");
    let dir = tempfile::tempdir().map_err(|e| Error::io(name, e))?;
    let path = dir
        .path()
        .join(if tiff { "stdin.tif" } else { "stdin.img" });
    std::fs::write(&path, &bytes).map_err(|e| Error::io(&path, e))?;
    let _ = STDIN_COPY.set(path.clone());
    Ok((dir, path))
}
