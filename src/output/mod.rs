//! Outputs written safely: each to a temporary file in the target folder, all renamed
//! into place only when every one of them was written; nothing partial is left behind.

mod document;
mod stamp;
pub use document::DocumentHeader;
pub use stamp::{fnv1a, SourceStamp};

use crate::error::{Error, Result};
use std::fs;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use tempfile::NamedTempFile;

/// Prefix of temporary files; a later run may remove stale ones.
pub const TEMP_PREFIX: &str = ".chromasift-tmp-";

/// Longest output file name, in bytes (NAME_MAX of ext4, XFS, Btrfs, APFS and NTFS).
pub const MAX_NAME_BYTES: usize = 255;

use std::sync::{Mutex, MutexGuard};

/// What an interrupted process must clean up: the temporary files being written and the
/// folders created for outputs not yet committed (see [`abandon_and_exit`]).
static LIVE: Mutex<Vec<(PathBuf, bool)>> = Mutex::new(Vec::new());

/// Held while a set is renamed into place, so an interruption waits for the set to be
/// complete (or rolled back) instead of leaving half of it.
static COMMIT: Mutex<()> = Mutex::new(());

fn lock<T>(m: &Mutex<T>) -> MutexGuard<'_, T> {
    m.lock().unwrap_or_else(|e| e.into_inner())
}

/// Keeps a path in [`LIVE`] while it is a temporary file (or an uncommitted new folder).
#[derive(Debug)]
struct Live(PathBuf);

impl Drop for Live {
    fn drop(&mut self) {
        let mut l = lock(&LIVE);
        if let Some(i) = l.iter().rposition(|(p, _)| *p == self.0) {
            l.swap_remove(i);
        }
    }
}

/// A new temporary file in `dir`, listed in [`LIVE`] from the moment it exists.
fn live_temp(dir: &Path) -> std::io::Result<(NamedTempFile, Live)> {
    let mut l = lock(&LIVE);
    // The error names the folder or the final file where it is reported, not the
    // temporary file's internal name (which the error of `tempfile` ends with).
    let tmp = NamedTempFile::with_prefix_in(TEMP_PREFIX, dir).map_err(|e| {
        // `tempfile` wraps the system's error in one that adds the path.
        let code = e.raw_os_error().or_else(|| {
            e.get_ref()
                .and_then(|inner| inner.source())
                .and_then(|s| s.downcast_ref::<std::io::Error>())
                .and_then(std::io::Error::raw_os_error)
        });
        match code {
            Some(code) => std::io::Error::from_raw_os_error(code),
            None => std::io::Error::from(e.kind()),
        }
    })?;
    l.push((tmp.path().to_path_buf(), false));
    let live = Live(tmp.path().to_path_buf());
    Ok((tmp, live))
}

/// Ends the process with `code` after removing every temporary file it is writing and
/// every output folder it created for nothing: for a Ctrl-C or SIGTERM handler, since
/// ending the process skips the destructors that would do it. A set being renamed into
/// place is finished first.
pub fn abandon_and_exit(code: i32) -> ! {
    let _commit = lock(&COMMIT);
    let live = lock(&LIVE);
    for (p, _) in live.iter().filter(|(_, dir)| !dir) {
        let _ = fs::remove_file(p);
    }
    for (p, _) in live.iter().rev().filter(|(_, dir)| *dir) {
        let _ = fs::remove_dir(p);
    }
    std::process::exit(code)
}

/// Names backups of replaced outputs uniquely within the process.
static BACKUPS: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// A set of outputs in one folder, committed together.
#[derive(Debug)]
pub struct OutputSet {
    dir: PathBuf,
    created_dir: Option<Live>,
    inputs: Vec<PathBuf>,
    pending: Vec<(NamedTempFile, PathBuf, Live)>,
    committed: bool,
}

fn canonical(p: &Path) -> Option<PathBuf> {
    fs::canonicalize(p).ok()
}

impl OutputSet {
    /// Prepares `dir` for outputs: refuses a path that exists and is not a folder,
    /// creates a missing folder (removed again if nothing is committed), and checks
    /// that it is writable. `inputs` are files that must never be overwritten.
    pub fn prepare(dir: &Path, inputs: &[&Path]) -> Result<Self> {
        let dir = if dir.as_os_str().is_empty() {
            Path::new(".")
        } else {
            dir
        };
        let mut created_dir = None;
        match fs::metadata(dir) {
            Ok(m) if m.is_dir() => {}
            Ok(_) => return Err(Error::output(dir, "output path exists and is not a folder")),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let mut l = lock(&LIVE);
                fs::create_dir_all(dir)
                    .map_err(|e| Error::output(dir, format!("cannot create output folder: {e}")))?;
                l.push((dir.to_path_buf(), true));
                created_dir = Some(Live(dir.to_path_buf()));
            }
            Err(e) => return Err(Error::output(dir, format!("cannot use output folder: {e}"))),
        }
        let set = OutputSet {
            dir: dir.to_path_buf(),
            created_dir,
            inputs: inputs.iter().filter_map(|p| canonical(p)).collect(),
            pending: Vec::new(),
            committed: false,
        };
        // Writability check: a temporary file that is removed at once.
        live_temp(&set.dir)
            .map_err(|e| Error::output(&set.dir, format!("output folder is not writable: {e}")))?;
        Ok(set)
    }

    /// The output folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Full path of an output named `name` in the folder.
    pub fn path_of(&self, name: &str) -> PathBuf {
        self.dir.join(name)
    }

    /// Checks that `name` may be written: not a folder, not one of the inputs.
    pub fn check_target(&self, name: &str) -> Result<PathBuf> {
        let target = self.path_of(name);
        // Checked before anything is written, so a set never fails halfway through its
        // renames on a name the file system cannot hold (255 bytes on common ones).
        if name.len() > MAX_NAME_BYTES {
            return Err(Error::output(
                &target,
                format!(
                    "output file name is {} bytes long; file systems allow {MAX_NAME_BYTES} \
                     (rename the input to something shorter)",
                    name.len()
                ),
            ));
        }
        if let Ok(m) = fs::symlink_metadata(&target) {
            if m.is_dir() {
                return Err(Error::output(&target, "an output would replace a folder"));
            }
            if let Some(c) = canonical(&target) {
                if self.inputs.contains(&c) {
                    return Err(Error::output(
                        &target,
                        "this output would overwrite the input file",
                    ));
                }
            }
        }
        Ok(target)
    }

    /// Starts one output: a temporary file in the folder that [`OutputSet::finish`] adds
    /// to the set. A started output may be written on another thread.
    pub fn begin(&self, name: &str) -> Result<PendingOutput> {
        let target = self.check_target(name)?;
        let (tmp, live) = live_temp(&self.dir).map_err(|e| Error::io(&target, e))?;
        Ok(PendingOutput { tmp, target, live })
    }

    /// Completes a started output: ordinary permissions, data on disk, renamed on commit.
    pub fn finish(&mut self, out: PendingOutput) -> Result<PathBuf> {
        let PendingOutput { tmp, target, live } = out;
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            // Temporary files are private (0600); outputs get ordinary file permissions.
            tmp.as_file()
                .set_permissions(fs::Permissions::from_mode(0o644))
                .map_err(|e| Error::io(&target, e))?;
        }
        tmp.as_file()
            .sync_data()
            .map_err(|e| Error::io(&target, e))?;
        self.pending.push((tmp, target.clone(), live));
        Ok(target)
    }

    /// Writes one output into a temporary file; it is renamed to `name` on commit.
    pub fn write<F>(&mut self, name: &str, f: F) -> Result<PathBuf>
    where
        F: FnOnce(&mut BufWriter<&mut fs::File>) -> std::io::Result<()>,
    {
        let mut out = self.begin(name)?;
        out.write_with(f)?;
        self.finish(out)
    }

    /// Writes a complete byte buffer as one output.
    pub fn write_bytes(&mut self, name: &str, bytes: &[u8]) -> Result<PathBuf> {
        self.write(name, |w| w.write_all(bytes))
    }

    /// Renames every pending output into place. Files they replace are first moved aside
    /// (to temporary names); if any rename fails, the new outputs already in place are
    /// removed and the old files put back, so neither a mixed set nor a lost earlier one
    /// is left (the other temporary files delete themselves).
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        let _commit = lock(&COMMIT);
        let pending = std::mem::take(&mut self.pending);
        let mut moved: Vec<(PathBuf, PathBuf)> = Vec::new();
        let put_back = |moved: &[(PathBuf, PathBuf)]| {
            for (target, backup) in moved.iter().rev() {
                let _ = fs::rename(backup, target);
            }
        };
        for (_, target, _) in &pending {
            if let Ok(m) = fs::symlink_metadata(target) {
                if m.is_dir() {
                    put_back(&moved);
                    return Err(Error::output(target, "an output would replace a folder"));
                }
                let n = BACKUPS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let backup = self
                    .dir
                    .join(format!("{TEMP_PREFIX}old-{}-{n}", std::process::id()));
                if let Err(e) = fs::rename(target, &backup) {
                    put_back(&moved);
                    return Err(Error::io(target, e));
                }
                moved.push((target.clone(), backup));
            }
        }
        let mut done = Vec::new();
        for (tmp, target, _live) in pending {
            if let Err(e) = tmp.persist(&target) {
                for d in &done {
                    let _ = fs::remove_file(d);
                }
                put_back(&moved);
                return Err(Error::io(&target, e.error));
            }
            done.push(target);
        }
        for (_, backup) in &moved {
            let _ = fs::remove_file(backup);
        }
        self.committed = true;
        self.created_dir = None;
        Ok(done)
    }
}

/// Writes one file atomically (temporary file in its folder, then renamed).
pub fn write_file(path: &Path, bytes: &[u8]) -> Result<PathBuf> {
    write_file_sparing(path, bytes, &[])
}

/// [`write_file`], refusing to replace any of `inputs`: a command whose output is one
/// file (`learn`, `histogram`) names the files it read, so `-o` can never overwrite one.
pub fn write_file_sparing(path: &Path, bytes: &[u8], inputs: &[&Path]) -> Result<PathBuf> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .and_then(|n| n.to_str())
        .ok_or_else(|| Error::output(path, "not a file name"))?;
    let mut set = OutputSet::prepare(dir, inputs)?;
    set.write_bytes(name, bytes)?;
    Ok(set.commit()?.remove(0))
}

/// A temporary file next to the outputs that is never committed: it holds intermediate
/// data (the tiles of a raster being assembled, say) and is removed when dropped, on
/// every path, or by [`abandon_and_exit`] on an interruption.
#[derive(Debug)]
pub struct ScratchFile {
    tmp: NamedTempFile,
    _live: Live,
}

impl OutputSet {
    /// A new [`ScratchFile`] in the output folder, for the output `name` (named in errors).
    pub fn scratch(&self, name: &str) -> Result<ScratchFile> {
        let target = self.path_of(name);
        let (tmp, live) = live_temp(&self.dir).map_err(|e| Error::io(&target, e))?;
        Ok(ScratchFile { tmp, _live: live })
    }
}

impl std::io::Read for ScratchFile {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        self.tmp.as_file_mut().read(buf)
    }
}

impl Write for ScratchFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.tmp.as_file_mut().write(buf)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.tmp.as_file_mut().flush()
    }
}

impl std::io::Seek for ScratchFile {
    fn seek(&mut self, pos: std::io::SeekFrom) -> std::io::Result<u64> {
        self.tmp.as_file_mut().seek(pos)
    }
}

/// One output being written (see [`OutputSet::begin`]).
#[derive(Debug)]
pub struct PendingOutput {
    tmp: NamedTempFile,
    target: PathBuf,
    live: Live,
}

impl PendingOutput {
    /// The final path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Writes through a buffered writer and flushes it.
    pub fn write_with<F>(&mut self, f: F) -> Result<()>
    where
        F: FnOnce(&mut BufWriter<&mut fs::File>) -> std::io::Result<()>,
    {
        let mut w = BufWriter::new(self.tmp.as_file_mut());
        f(&mut w).map_err(|e| Error::io(&self.target, e))?;
        w.flush().map_err(|e| Error::io(&self.target, e))
    }
}

impl Drop for OutputSet {
    fn drop(&mut self) {
        // Pending temporary files delete themselves; remove a folder we made for nothing.
        self.pending.clear();
        if let Some(live) = self.created_dir.take() {
            if !self.committed {
                let _ = fs::remove_dir(&self.dir);
            }
            drop(live);
        }
    }
}

/// The one path from an input to its outputs, shared by the workflows. `load` reads the
/// input (nothing is created when it fails); then the output folder is prepared (no output
/// may replace `input` or a file in `spare`) and every output name known in advance is
/// checked; then `write` computes and writes into the set, which is renamed into place
/// only when `write` succeeded. A data error (`Error::Data`) of either step names `input`.
pub fn one_input<L, T>(
    input: &Path,
    out_dir: &Path,
    spare: &[&Path],
    names: &[String],
    load: impl FnOnce() -> Result<L>,
    write: impl FnOnce(L, &mut OutputSet) -> Result<T>,
) -> Result<(T, Vec<PathBuf>)> {
    let name_input = |e: Error| match e {
        Error::Data(message) => Error::InputData {
            path: input.into(),
            message,
        },
        other => other,
    };
    let loaded = load().map_err(name_input)?;
    let keep: Vec<&Path> = std::iter::once(input)
        .chain(spare.iter().copied())
        .collect();
    let mut set = OutputSet::prepare(out_dir, &keep)?;
    for n in names {
        set.check_target(n)?;
    }
    let made = write(loaded, &mut set).map_err(name_input)?;
    Ok((made, set.commit()?))
}

/// A file-safe form of a name (an ink's, say): lowercase letters and digits, other runs as '-'.
pub fn file_safe(name: &str) -> String {
    let mut s = String::new();
    for c in name.chars() {
        if c.is_alphanumeric() {
            s.extend(c.to_lowercase());
        } else if !s.ends_with('-') {
            s.push('-');
        }
    }
    let s = s.trim_matches('-').to_string();
    if s.is_empty() {
        "ink".into()
    } else {
        s
    }
}

/// The file name without its extension, used to name outputs.
/// A file name that is not valid UTF-8 gives an output name with each invalid sequence
/// replaced by U+FFFD (the input itself is still read under its own name).
pub fn stem_of(input: &Path) -> Result<String> {
    input
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .filter(|s| !s.is_empty())
        .ok_or_else(|| Error::output(input, "cannot derive an output name from this file name"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nothing_lands_until_commit_and_nothing_stays_on_drop() {
        let root = tempfile::tempdir().unwrap();
        let dir = root.path().join("new");
        {
            let mut set = OutputSet::prepare(&dir, &[]).unwrap();
            set.write_bytes("a.txt", b"hello").unwrap();
            assert!(!dir.join("a.txt").exists());
        }
        assert!(!dir.exists(), "an uncommitted new folder is removed");
        let mut set = OutputSet::prepare(&dir, &[]).unwrap();
        set.write_bytes("a.txt", b"hello").unwrap();
        set.commit().unwrap();
        assert_eq!(fs::read(dir.join("a.txt")).unwrap(), b"hello");
        assert_eq!(
            fs::read_dir(&dir).unwrap().count(),
            1,
            "no temporary files remain"
        );
    }

    #[test]
    fn a_failed_rename_takes_back_the_renamed_outputs() {
        let dir = tempfile::tempdir().unwrap();
        // An earlier run's output, which the new set replaces.
        fs::write(dir.path().join("a.png"), b"earlier").unwrap();
        let mut set = OutputSet::prepare(dir.path(), &[]).unwrap();
        set.write_bytes("a.png", b"first").unwrap();
        set.write_bytes("b.json", b"second").unwrap();
        set.write_bytes("c.csv", b"third").unwrap();
        // The second output's temporary file vanishes before the commit: its rename
        // fails; the first output, already renamed, must go again, and the earlier file
        // it replaced must come back.
        fs::remove_file(set.pending[1].0.path()).unwrap();
        assert!(set.commit().is_err());
        assert_eq!(fs::read(dir.path().join("a.png")).unwrap(), b"earlier");
        let names = |d: &Path| {
            let mut v: Vec<_> = fs::read_dir(d)
                .unwrap()
                .map(|e| e.unwrap().file_name().into_string().unwrap())
                .collect();
            v.sort();
            v
        };
        assert_eq!(names(dir.path()), vec!["a.png".to_string()]);

        // A folder appears where an output goes after the checks: refused, nothing moved.
        let mut set = OutputSet::prepare(dir.path(), &[]).unwrap();
        set.write_bytes("a.png", b"first").unwrap();
        set.write_bytes("b.json", b"second").unwrap();
        fs::create_dir(dir.path().join("b.json")).unwrap();
        let e = set.commit().unwrap_err();
        assert!(e.to_string().contains("replace a folder"), "{e}");
        assert_eq!(fs::read(dir.path().join("a.png")).unwrap(), b"earlier");
        assert_eq!(
            names(dir.path()),
            vec!["a.png".to_string(), "b.json".to_string()]
        );
    }

    #[test]
    fn a_committed_set_replaces_earlier_outputs_and_leaves_no_backups() {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("a.png"), b"earlier").unwrap();
        let mut set = OutputSet::prepare(dir.path(), &[]).unwrap();
        set.write_bytes("a.png", b"new").unwrap();
        set.commit().unwrap();
        assert_eq!(fs::read(dir.path().join("a.png")).unwrap(), b"new");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn names_longer_than_file_systems_hold_are_refused_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        let set = OutputSet::prepare(dir.path(), &[]).unwrap();
        assert!(set.check_target(&"x".repeat(MAX_NAME_BYTES)).is_ok());
        let e = set
            .check_target(&"x".repeat(MAX_NAME_BYTES + 1))
            .unwrap_err();
        assert!(e.to_string().contains("256 bytes"), "{e}");
    }

    #[test]
    fn refuses_a_file_as_folder_and_the_input_as_output() {
        let root = tempfile::tempdir().unwrap();
        let file = root.path().join("f");
        fs::write(&file, b"x").unwrap();
        assert!(OutputSet::prepare(&file, &[]).is_err());
        let set = OutputSet::prepare(root.path(), &[&file]).unwrap();
        assert!(set.check_target("f").is_err());
        assert!(set.check_target("g").is_ok());
    }

    #[test]
    fn a_single_file_output_spares_its_inputs() {
        let root = tempfile::tempdir().unwrap();
        let input = root.path().join("in.png");
        fs::write(&input, b"pixels").unwrap();
        // Named directly, and through a link.
        let e = write_file_sparing(&input, b"palette", &[&input]).unwrap_err();
        assert!(e.to_string().contains("overwrite the input"), "{e}");
        let link = root.path().join("link.json");
        std::os::unix::fs::symlink(&input, &link).unwrap();
        assert!(write_file_sparing(&link, b"palette", &[&input]).is_err());
        assert_eq!(fs::read(&input).unwrap(), b"pixels");
        let names: Vec<_> = fs::read_dir(root.path())
            .unwrap()
            .flatten()
            .map(|e| e.file_name())
            .collect();
        assert_eq!(names.len(), 2, "no temporary file left: {names:?}");
        // Another name is written.
        write_file_sparing(&root.path().join("out.json"), b"palette", &[&input]).unwrap();
        assert_eq!(fs::read(root.path().join("out.json")).unwrap(), b"palette");
    }
}
