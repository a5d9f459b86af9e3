//! The output folder of a scan or a merge: a lock that keeps two runs from
//! writing into it at once, the check that it holds no other scan's files,
//! and the cleanup of files a killed run left.
//!
//! Invariants:
//! - a whole scan and a merge hold the folder lock [`LOCK`] exclusively
//!   (its text is the holder's process id); a shard holds it shared and
//!   its own `.shard-K-of-N.lock` exclusively, so the shards of one scan
//!   run side by side, but never two copies of one shard, and never a
//!   shard beside a whole scan or a merge. The locks are the operating
//!   system's advisory file locks: a killed run releases them.
//! - [`OUTPUTS`] of an earlier run are kept unless the user asks
//!   (`--overwrite`); a run removes the ones it did not write this time
//!   (no `ell_star.*` of a two-axis scan beside a one-axis scan).
//! - `points.csv` is published last, after `summary.json` and the figures:
//!   a folder with a `points.csv` holds a finished scan.

use std::fs::{self, File, OpenOptions, TryLockError};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::error::{Error, InputError};
use crate::output::provenance::Provenance;

/// Name of the folder lock file.
pub const LOCK: &str = ".pinflow.lock";

/// The files a finished scan or merge writes into its folder.
pub const OUTPUTS: [&str; 12] = [
    "points.csv",
    "summary.json",
    "phases.csv",
    "run.json",
    "phase.png",
    "phase.svg",
    "phase.pdf",
    "phase.txt",
    "ell_star.png",
    "ell_star.svg",
    "ell_star.pdf",
    "ell_star.txt",
];

/// The held locks of an output folder (released when dropped).
pub struct FolderLock {
    folder: File,
    exclusive: bool,
    /// The shard's own lock file, removed when the lock is dropped.
    shard: Option<(File, PathBuf)>,
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        if self.exclusive {
            // The next holder must not read a stale process id.
            let _ = self.folder.set_len(0);
        }
        if let Some((_, path)) = &self.shard {
            let _ = fs::remove_file(path);
        }
    }
}

/// Lock `dir` (which exists) for a whole scan or merge (`shard` None) or
/// for shard (k, n).
pub fn lock(dir: &Path, shard: Option<(usize, usize)>) -> Result<FolderLock, Error> {
    let path = dir.join(LOCK);
    let mut folder = open_lock(&path)?;
    let exclusive = shard.is_none();
    let got = if exclusive {
        folder.try_lock()
    } else {
        folder.try_lock_shared()
    };
    if let Err(e) = got {
        return Err(held(&path, &mut folder, e, dir));
    }
    if exclusive {
        write_pid(&mut folder).map_err(|e| Error::io(&path, e))?;
    }
    let mut lock = FolderLock {
        folder,
        exclusive,
        shard: None,
    };
    if let Some((k, n)) = shard {
        let own = dir.join(format!(".shard-{k}-of-{n}.lock"));
        let mut file = open_lock(&own)?;
        if let Err(e) = file.try_lock() {
            return Err(held(&own, &mut file, e, dir));
        }
        write_pid(&mut file).map_err(|e| Error::io(&own, e))?;
        lock.shard = Some((file, own));
    }
    Ok(lock)
}

fn open_lock(path: &Path) -> Result<File, Error> {
    OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(false)
        .open(path)
        .map_err(|e| Error::io(path, e))
}

fn write_pid(file: &mut File) -> std::io::Result<()> {
    file.set_len(0)?;
    file.seek(SeekFrom::Start(0))?;
    file.write_all(format!("{}\n", std::process::id()).as_bytes())?;
    file.flush()
}

/// The message for a lock another run holds, with its process id when the
/// lock file names one.
fn held(path: &Path, file: &mut File, e: TryLockError, dir: &Path) -> Error {
    if let TryLockError::Error(e) = e {
        return Error::io(path, e);
    }
    let mut text = String::new();
    let _ = file.read_to_string(&mut text);
    let who = match text.trim().parse::<u32>() {
        Ok(pid) => format!("another pinflow run (pid {pid})"),
        Err(_) => "other pinflow runs (shards of a scan)".to_string(),
    };
    InputError::new(
        "command line",
        "--out",
        format!(
            "{who} is writing into `{}`; wait until it ends or choose another --out",
            dir.display()
        ),
    )
    .into()
}

/// Create `dir`, take its lock (see [`lock`]) and run `check` on what it
/// holds. `Ok(Some(lock))`: go ahead (a whole scan has also removed the
/// temporaries a killed run left); `Ok(None)`: nothing to do. A refusal
/// leaves the folder as it was: a lock file made by this call is removed.
pub fn claim(
    dir: &Path,
    shard: Option<(usize, usize)>,
    check: impl FnOnce() -> Result<bool, Error>,
) -> Result<Option<FolderLock>, Error> {
    fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let created = !dir.join(LOCK).exists();
    let lock = lock(dir, shard)?;
    match check() {
        Ok(true) => {
            if shard.is_none() {
                remove_temporaries(dir)?;
            }
            Ok(Some(lock))
        }
        Ok(false) => Ok(None),
        Err(e) => {
            drop(lock);
            if created {
                let _ = fs::remove_file(dir.join(LOCK));
            }
            Err(e)
        }
    }
}

/// A whole scan into `dir`: the folder may not hold another scan's
/// [`OUTPUTS`] or an unfinished scan (`partial`) unless `overwrite`, or
/// `resume` is `Some(true)` with that unfinished scan to continue (`None`:
/// the caller cannot resume, and the message does not offer it).
///
/// A finished scan whose `run.json` records this very run (`rerun`: the
/// same model bytes, parameters, grid, options and pinflow revision; see
/// [`same_run`]) is not another scan's: running it again rewrites the
/// same bytes, so it goes ahead.
pub fn check_whole(
    dir: &Path,
    partial: &Path,
    overwrite: bool,
    (resume, rerun): (Option<bool>, Option<&Provenance>),
) -> Result<bool, Error> {
    if overwrite || (resume == Some(true) && partial.exists()) {
        return Ok(true);
    }
    if !partial.exists() && rerun.is_some_and(|p| same_run(dir, p)) {
        return Ok(true);
    }
    let mut found = present(dir, &OUTPUTS);
    let mut hint = "";
    if partial.exists() {
        let name = partial.file_name().unwrap_or_default().to_string_lossy();
        found.push(format!("the unfinished {name}"));
        if resume.is_some() {
            hint = ", --resume to continue the unfinished scan";
        }
    }
    refuse_existing(dir, &found, hint)?;
    Ok(true)
}

/// Whether `dir` holds a finished scan (`points.csv` and `run.json`) whose
/// `run.json` records the run `p`: every field equal except how it was
/// called (`arguments`, `caller`), which changes no output byte.
pub fn same_run(dir: &Path, p: &Provenance) -> bool {
    let Ok(text) = fs::read_to_string(dir.join("run.json")) else {
        return false;
    };
    // Both sides parsed from text, so that equal text gives equal values.
    let Ok(written) = crate::output::to_json(p) else {
        return false;
    };
    let (Ok(mut old), Ok(mut new)) = (
        serde_json::from_str::<Value>(&text),
        serde_json::from_str::<Value>(&written),
    ) else {
        return false;
    };
    for v in [&mut old, &mut new] {
        if let Some(map) = v.as_object_mut() {
            map.remove("arguments");
            map.remove("caller");
        }
    }
    dir.join("points.csv").is_file() && old == new
}

/// The files of `names` that exist in `dir`.
pub fn present(dir: &Path, names: &[&str]) -> Vec<String> {
    names
        .iter()
        .filter(|n| fs::symlink_metadata(dir.join(n)).is_ok())
        .map(|n| n.to_string())
        .collect()
}

/// Refuse a folder holding `found` (another scan's files) unless
/// `--overwrite` was given; `hint` says what else the user can do.
pub fn refuse_existing(dir: &Path, found: &[String], hint: &str) -> Result<(), Error> {
    if found.is_empty() {
        return Ok(());
    }
    Err(InputError::new(
        "command line",
        "--out",
        format!(
            "`{}` already holds the files of another scan ({}); pass --overwrite to replace them{hint}, or choose another --out",
            dir.display(),
            found.join(", ")
        ),
    )
    .into())
}

/// Remove the temporaries that a killed run left beside [`OUTPUTS`]
/// (`.NAME.PID.partial` of the atomic writer, `.NAME.PID-N.tmp.EXT` of the
/// figure writer). Only call while holding the folder lock exclusively.
pub fn remove_temporaries(dir: &Path) -> Result<(), Error> {
    for entry in fs::read_dir(dir).map_err(|e| Error::io(dir, e))?.flatten() {
        let name = entry.file_name().to_string_lossy().to_string();
        if is_temporary(&name) {
            let path = entry.path();
            fs::remove_file(&path).map_err(|e| Error::io(&path, e))?;
        }
    }
    Ok(())
}

/// A temporary of one of [`OUTPUTS`].
pub fn is_temporary(name: &str) -> bool {
    OUTPUTS.iter().any(|out| {
        name.strip_prefix('.')
            .and_then(|rest| rest.strip_prefix(out))
            .and_then(|rest| rest.strip_prefix('.'))
            .is_some_and(|rest| rest.ends_with(".partial") || rest.contains(".tmp."))
    })
}

/// Remove the [`OUTPUTS`] that this run did not write (`written`).
pub fn remove_stale(dir: &Path, written: &[String]) -> Result<(), Error> {
    for name in OUTPUTS.iter().filter(|n| !written.iter().any(|w| w == *n)) {
        let path = dir.join(name);
        if fs::symlink_metadata(&path).is_ok() {
            fs::remove_file(&path).map_err(|e| Error::io(&path, e))?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn temporaries_are_recognised_and_outputs_are_not() {
        assert!(is_temporary(".phase.png.1234-0.tmp.png"));
        assert!(is_temporary(".points.csv.77.partial"));
        assert!(is_temporary(".summary.json.9.partial"));
        assert!(!is_temporary("phase.png"));
        assert!(!is_temporary(".points.running.csv"));
        assert!(!is_temporary(".notes.txt.1.partial"));
        assert!(!is_temporary(LOCK));
    }
}
