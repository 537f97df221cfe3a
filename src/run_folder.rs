//! The output folder of a run, one life for `track`, `segment` and `join`: refuse a folder
//! that holds an earlier run (unless replacing), clear what killed runs left behind, write
//! everything into a hidden staging folder, and publish it at once (run.json last), removing
//! the earlier run's files that this run did not write, so a folder never mixes two runs and a
//! failed run leaves the earlier outputs as they were.

use crate::error::{Error, Result};
use crate::output::{ensure_dir, Removal, Staging};
use std::path::Path;

/// Every file (and the `review`, `analysis` and `lookalike` folders) a run may write; a
/// replacing run removes the ones it did not write this time, so that a folder never mixes
/// two runs. The analysis and the look-alikes are made after the run is published, from its
/// outputs, so an earlier run's are always removed: a run without them (`--no-analysis`,
/// tracks too short, no `--lookalike`) must not sit beside the earlier run's report, nor its
/// report show the earlier run's expected accuracy.
pub const RUN_OUTPUTS: [&str; 10] = [
    "detections.csv",
    "labels.tif",
    "tracks.csv",
    "per_track.csv",
    "qc_movie.gif",
    "qc_sheet.png",
    "review",
    "analysis",
    "lookalike",
    "run.json",
];

/// Refuses a folder that holds an earlier run's outputs, unless replacing is asked for.
///
/// # Errors
/// [`Error::Input`] naming the folder.
pub fn check_output_dir(dir: &Path, replace: bool) -> Result<()> {
    if !replace && dir.join("run.json").exists() {
        return Err(Error::input(
            dir,
            "holds the outputs of an earlier run (run.json); choose another folder or give --force to replace them",
        ));
    }
    Ok(())
}

/// The name of the lock file a run holds in its folder.
pub const LOCK_FILE: &str = ".caravan.lock";

/// An exclusive lock on a run folder: one run at a time writes into it. It is an operating
/// system lock on `.caravan.lock` (which holds the running process's id), released when the
/// run ends, however it ends: a lock file left by a killed run does not block the next one.
#[derive(Debug)]
pub struct FolderLock {
    _file: std::fs::File,
}

impl FolderLock {
    /// Takes the lock of `dir` (created if needed) at once, or refuses.
    ///
    /// # Errors
    /// Another run holds the folder (naming its process), or the folder cannot be written.
    pub fn take(dir: &Path) -> Result<FolderLock> {
        use std::io::{Read, Seek, Write};
        ensure_dir(dir)?;
        let path = dir.join(LOCK_FILE);
        let mut file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(|e| Error::output(&path, e))?;
        match file.try_lock() {
            Ok(()) => {}
            Err(std::fs::TryLockError::WouldBlock) => {
                let mut holder = String::new();
                let _ = file.read_to_string(&mut holder);
                let holder = holder.trim();
                let who = if holder.is_empty() {
                    "another process".to_string()
                } else {
                    format!("process {holder}")
                };
                return Err(Error::input(
                    dir,
                    format!("is in use by another caravan run ({who}); wait for it to finish or choose another folder"),
                ));
            }
            Err(std::fs::TryLockError::Error(e)) => return Err(Error::output(&path, e)),
        }
        let mut write_pid = || -> std::io::Result<()> {
            file.set_len(0)?;
            file.rewind()?;
            write!(file, "{}", std::process::id())?;
            file.flush()
        };
        write_pid().map_err(|e| Error::output(&path, e))?;
        Ok(FolderLock { _file: file })
    }
}

/// A run's output folder while the run writes into it (locked for this run, see
/// [`FolderLock`]).
pub struct RunFolder {
    staging: Staging,
    _lock: FolderLock,
}

impl RunFolder {
    /// Checks `dir` ([`check_output_dir`]), creates it, takes its lock ([`FolderLock`]),
    /// removes what interrupted runs left (`*.partial-PID` files and staging folders of other
    /// processes: none can be running, the lock says so) and opens a staging folder in it.
    ///
    /// # Errors
    /// A folder holding an earlier run (without `replace`), one another run is writing into,
    /// or one that cannot be written.
    pub fn open(dir: &Path, replace: bool) -> Result<RunFolder> {
        check_output_dir(dir, replace)?;
        let lock = FolderLock::take(dir)?;
        remove_stale_partials(dir);
        Ok(RunFolder {
            staging: Staging::new(dir)?,
            _lock: lock,
        })
    }

    /// Where the run writes its outputs until they are published.
    pub fn work(&self) -> &Path {
        self.staging.path()
    }

    /// Moves the staged outputs into the folder (run.json last) and takes out those of
    /// [`RUN_OUTPUTS`] that this run did not write (`written(name)` is false), left by an
    /// earlier run. What the earlier run left is removed on a thread of its own: dropping the
    /// returned [`Removal`] waits for it.
    ///
    /// # Errors
    /// A file that cannot be moved into place.
    pub fn publish(self, written: impl Fn(&str) -> bool) -> Result<Removal> {
        let stale: Vec<&str> = RUN_OUTPUTS.iter().copied().filter(|n| !written(n)).collect();
        self.staging.publish(&RUN_OUTPUTS, &stale)
    }
}

/// Removes half-written files that an interrupted earlier run left (hidden `*.partial-PID`
/// names of other processes), so that a resumed or repeated run leaves a clean folder.
pub(crate) fn remove_stale_partials(dir: &Path) {
    let own = format!(".partial-{}", std::process::id());
    let Ok(entries) = std::fs::read_dir(dir) else { return };
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') && name.contains(".partial-") && !name.ends_with(&own) {
            let _ = if entry.path().is_dir() {
                std::fs::remove_dir_all(entry.path())
            } else {
                std::fs::remove_file(entry.path())
            };
        }
        let own_staging = format!(".staging-{}", std::process::id());
        if name.starts_with(".staging-") && name != own_staging {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}
