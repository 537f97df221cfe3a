//! The output folder of a run, one life for `track`, `segment` and `join`: refuse a folder
//! that holds an earlier run (unless replacing), clear what killed runs left behind, write
//! everything into a hidden staging folder, and publish it at once (run.json last), removing
//! the earlier run's files that this run did not write, so a folder never mixes two runs and a
//! failed run leaves the earlier outputs as they were.

use crate::error::{Error, Result};
use crate::output::{ensure_dir, Staging};
use std::path::{Path, PathBuf};

/// Every file a run may write; a replacing run removes the ones it did not write this time,
/// so that a folder never mixes two runs.
pub const RUN_OUTPUTS: [&str; 7] = [
    "detections.csv",
    "labels.tif",
    "tracks.csv",
    "per_track.csv",
    "qc_movie.gif",
    "qc_sheet.png",
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

/// A run's output folder while the run writes into it.
pub struct RunFolder {
    dir: PathBuf,
    staging: Staging,
}

impl RunFolder {
    /// Checks `dir` ([`check_output_dir`]), creates it, removes what interrupted runs left
    /// (`*.partial-PID` files and staging folders of other processes) and opens a staging
    /// folder in it.
    ///
    /// # Errors
    /// A folder holding an earlier run (without `replace`), or one that cannot be written.
    pub fn open(dir: &Path, replace: bool) -> Result<RunFolder> {
        check_output_dir(dir, replace)?;
        ensure_dir(dir)?;
        remove_stale_partials(dir);
        Ok(RunFolder {
            dir: dir.to_path_buf(),
            staging: Staging::new(dir)?,
        })
    }

    /// Where the run writes its outputs until they are published.
    pub fn work(&self) -> &Path {
        self.staging.path()
    }

    /// Moves the staged outputs into the folder (run.json last) and removes those of
    /// [`RUN_OUTPUTS`] that this run did not write (`written(name)` is false), left by an
    /// earlier run.
    ///
    /// # Errors
    /// A file that cannot be moved into place.
    pub fn publish(self, written: impl Fn(&str) -> bool) -> Result<()> {
        self.staging.publish(&RUN_OUTPUTS)?;
        for name in RUN_OUTPUTS.iter().filter(|n| !written(n)) {
            let _ = std::fs::remove_file(self.dir.join(name));
        }
        Ok(())
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
            let _ = std::fs::remove_file(entry.path());
        }
        let own_staging = format!(".staging-{}", std::process::id());
        if name.starts_with(".staging-") && name != own_staging {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}
