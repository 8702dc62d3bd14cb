//! Folders of images: every image under a folder, recursively, in a stable order.

use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// File endings read as images (case-insensitive).
pub const IMAGE_EXTENSIONS: [&str; 8] = ["png", "jpg", "jpeg", "tif", "tiff", "webp", "bmp", "gif"];

/// Images under `dir` (recursively, sorted) and the files that are not images.
pub fn collect_images(dir: &Path) -> Result<(Vec<PathBuf>, Vec<PathBuf>)> {
    let (images, others, mut unreadable) = walk_images(dir)?;
    match unreadable.is_empty() {
        true => Ok((images, others)),
        false => Err(unreadable.remove(0).1),
    }
}

/// Sub-folders that could not be read, with the error, in the order met.
pub type Unreadable = Vec<(PathBuf, Error)>;

/// As [`collect_images`], but a sub-folder that cannot be read is listed, not fatal (a
/// batch reports it as failed and goes on); only `dir` itself must be readable.
pub fn walk_images(dir: &Path) -> Result<(Vec<PathBuf>, Vec<PathBuf>, Unreadable)> {
    let meta = std::fs::metadata(dir).map_err(|source| Error::Open {
        path: dir.into(),
        source,
    })?;
    if !meta.is_dir() {
        return Err(Error::output(dir, "is not a folder"));
    }
    let mut images = Vec::new();
    let mut others = Vec::new();
    let mut unreadable = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let rd = match std::fs::read_dir(&d) {
            Ok(rd) => rd,
            Err(source) => {
                let e = Error::Open {
                    path: d.clone(),
                    source,
                };
                if d == dir {
                    return Err(e);
                }
                unreadable.push((d, e));
                continue;
            }
        };
        for e in rd.flatten() {
            let p = e.path();
            let name = e.file_name().to_string_lossy().into_owned();
            if name.starts_with('.') {
                continue;
            }
            // A symbolic link to a file counts as that file; links to folders are not
            // followed (no loops), and they and broken links are listed with the others.
            let kind = match e.file_type() {
                Ok(t) if t.is_symlink() => match std::fs::metadata(&p) {
                    Ok(m) if m.is_file() => Some(false),
                    _ => {
                        others.push(p);
                        continue;
                    }
                },
                Ok(t) if t.is_dir() => Some(true),
                Ok(t) if t.is_file() => Some(false),
                _ => None,
            };
            match kind {
                Some(true) => stack.push(p),
                Some(false) => {
                    let ext = p
                        .extension()
                        .and_then(|x| x.to_str())
                        .unwrap_or("")
                        .to_ascii_lowercase();
                    if IMAGE_EXTENSIONS.contains(&ext.as_str()) {
                        images.push(p);
                    } else {
                        others.push(p);
                    }
                }
                None => {}
            }
        }
    }
    images.sort();
    others.sort();
    unreadable.sort_by(|a, b| a.0.cmp(&b.0));
    Ok((images, others, unreadable))
}
