//! Writing a file the user named (`-o FILE`, the files of an output
//! folder) without harming anything else.
//!
//! Invariants:
//! - a regular target is replaced atomically: the bytes go to a temporary
//!   file beside the real target (symbolic links are followed, so a link
//!   keeps pointing where it did), which is renamed into place; a failure
//!   removes the temporary and leaves the old file as it was;
//! - a target that is not a regular file (a device, a pipe, a socket) or is
//!   reached through `/dev` or `/proc` (`/dev/stdout`) is opened and written
//!   directly: it is never replaced, and its write errors are reported as
//!   they are (`/dev/full`: no space left on device);
//! - an output that is one of the run's input files is refused before any
//!   work ([`check_not_input`]).

use std::fs::{self, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, InputError};

/// Most symbolic links followed from an output path to its file.
const MAX_LINKS: usize = 40;

/// Write `bytes` to `path` (see the module invariants).
pub fn write_output(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    if is_direct(path) {
        return write_direct(path, bytes);
    }
    let target = resolve_links(path)?;
    write_atomic_at(&target, path, bytes)
}

/// True when `path` must be written in place: not a regular file (when it
/// exists), or a path under `/dev` or `/proc`.
fn is_direct(path: &Path) -> bool {
    if path.starts_with("/dev") || path.starts_with("/proc") {
        return true;
    }
    matches!(fs::metadata(path), Ok(m) if !m.is_file())
}

/// Open an existing non-regular file for writing and write the bytes.
fn write_direct(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    let mut f = OpenOptions::new()
        .write(true)
        .open(path)
        .map_err(|e| Error::io(path, e))?;
    f.write_all(bytes)
        .and_then(|_| f.flush())
        .map_err(|e| Error::io(path, e))
}

/// The file a path names once symbolic links are followed (a dangling
/// link gives the path its last link points to, which is then created).
pub fn resolve_links(path: &Path) -> Result<PathBuf, Error> {
    let mut p = path.to_path_buf();
    for _ in 0..MAX_LINKS {
        match fs::symlink_metadata(&p) {
            Ok(m) if m.file_type().is_symlink() => {
                let to = fs::read_link(&p).map_err(|e| Error::io(path, e))?;
                p = match p.parent() {
                    Some(dir) if to.is_relative() => dir.join(to),
                    _ => to,
                };
            }
            _ => return Ok(p),
        }
    }
    Err(Error::io(
        path,
        std::io::Error::other("too many levels of symbolic links"),
    ))
}

/// Write `target` atomically; errors name `shown` (the path the user gave).
fn write_atomic_at(target: &Path, shown: &Path, bytes: &[u8]) -> Result<(), Error> {
    let tmp = super::temp_path(target);
    let written = fs::write(&tmp, bytes).and_then(|_| fs::rename(&tmp, target));
    written.map_err(|e| {
        let _ = fs::remove_file(&tmp);
        Error::io(shown, e)
    })
}

/// Refuse an output file that is one of the run's input files (the same
/// file, through any link or path: compared by device and inode).
pub fn check_not_input(path: &Path, inputs: &[&Path], flag: &str) -> Result<(), InputError> {
    if path.as_os_str() == "-" {
        return Ok(());
    }
    for input in inputs.iter().filter(|i| i.as_os_str() != "-") {
        if same_file(path, input) {
            return Err(InputError::new(
                "command line",
                flag,
                format!(
                    "`{}` is the model file `{}`; writing there would destroy it: give another output file",
                    path.display(),
                    input.display()
                ),
            ));
        }
    }
    Ok(())
}

/// True when both paths exist and are the same file.
pub fn same_file(a: &Path, b: &Path) -> bool {
    match (fs::metadata(a), fs::metadata(b)) {
        (Ok(x), Ok(y)) => same_inode(&x, &y, a, b),
        _ => false,
    }
}

#[cfg(unix)]
fn same_inode(x: &fs::Metadata, y: &fs::Metadata, _: &Path, _: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    x.dev() == y.dev() && x.ino() == y.ino()
}

#[cfg(not(unix))]
fn same_inode(_: &fs::Metadata, _: &fs::Metadata, a: &Path, b: &Path) -> bool {
    matches!((fs::canonicalize(a), fs::canonicalize(b)), (Ok(x), Ok(y)) if x == y)
}
