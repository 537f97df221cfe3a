//! Checkpoints of a long run, so that a crash or a kill at frame 900 does not cost the night.
//!
//! While a run segments, every frame's detections are appended to a log in the run folder's
//! hidden `.checkpoint/` (with the movie's outlines beside it); every few frames the log is
//! flushed to disk and a small state file records how many frames and bytes are safe. A
//! resumed run truncates the log to that point, replays it (linking is fast and
//! deterministic, so replaying gives the same tracks bit for bit), and segments the rest.
//! Outputs are therefore byte-identical to those of an uninterrupted run.

use crate::error::{Error, Result};
use crate::tracks::Detection;
use serde::{Deserialize, Serialize};
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, BufWriter, Write};
use std::path::{Path, PathBuf};

/// One segmented frame, as logged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FrameRecord {
    /// Frame number.
    pub frame: usize,
    /// Threshold used (`None` when the frame had no contrast).
    pub threshold: Option<f64>,
    /// The frame's detections, in label order.
    pub detections: Vec<Detection>,
    /// NaN or infinite pixels replaced before segmentation.
    #[serde(default)]
    pub nonfinite_pixels: usize,
    /// What the size filter dropped or cut.
    #[serde(default)]
    pub size_filter: crate::segment::SizeFilterCounts,
}

/// What a checkpoint must match to be resumed: the same input and the same parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Fingerprint {
    /// Input path as given.
    pub input: String,
    /// Input bytes on disk.
    pub bytes: u64,
    /// Frames and frame size.
    pub shape: (usize, usize, usize),
    /// Every parameter of the run, as JSON.
    pub parameters: String,
}

impl Fingerprint {
    /// The fingerprint of a recording (as described by `info`) and the run's parameters.
    pub fn of(info: &crate::stack::StackInfo, parameters: serde_json::Value) -> Fingerprint {
        Fingerprint {
            input: info.path.display().to_string(),
            bytes: info.bytes_on_disk,
            shape: (info.frames, info.height, info.width),
            parameters: parameters.to_string(),
        }
    }
}

#[derive(Debug, Serialize, Deserialize)]
struct State {
    caravan_version: String,
    fingerprint: Fingerprint,
    frames_done: usize,
    log_bytes: u64,
    outlines_bytes: u64,
}

/// The hidden checkpoint folder of a run folder.
pub fn checkpoint_dir(run_dir: &Path) -> PathBuf {
    run_dir.join(".checkpoint")
}

/// Where the movie's outlines are spooled while checkpointing.
pub fn outlines_path(run_dir: &Path) -> PathBuf {
    checkpoint_dir(run_dir).join("outlines.bin")
}

/// Appends frame records and writes the state every `every` frames.
pub struct CheckpointLog {
    dir: PathBuf,
    log: BufWriter<File>,
    fingerprint: Fingerprint,
    every: usize,
    frames_done: usize,
}

impl CheckpointLog {
    /// Starts a fresh checkpoint (an earlier one in the folder is discarded).
    ///
    /// # Errors
    /// The folder cannot be written.
    pub fn start(run_dir: &Path, fingerprint: Fingerprint, every: usize) -> Result<CheckpointLog> {
        let dir = checkpoint_dir(run_dir);
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).map_err(|e| Error::output(&dir, e))?;
        let path = dir.join("frames.jsonl");
        let file = File::create(&path).map_err(|e| Error::output(&path, e))?;
        Ok(CheckpointLog {
            dir,
            log: BufWriter::new(file),
            fingerprint,
            every: every.max(1),
            frames_done: 0,
        })
    }

    /// Opens the checkpoint of `run_dir` for resuming: checks that it belongs to this input and
    /// these parameters, truncates the log and the outlines to the last safe point, and returns
    /// the logged frames with the outline bytes to keep.
    ///
    /// # Errors
    /// No checkpoint, one for another input or other parameters, or an unreadable log.
    pub fn resume(run_dir: &Path, fingerprint: Fingerprint, every: usize) -> Result<(CheckpointLog, Vec<FrameRecord>)> {
        let dir = checkpoint_dir(run_dir);
        let state_path = dir.join("state.json");
        let text = std::fs::read_to_string(&state_path)
            .map_err(|_| Error::input(run_dir, "has no checkpoint to resume (run without --resume)"))?;
        let state: State = serde_json::from_str(&text)
            .map_err(|e| Error::input(&state_path, format!("damaged checkpoint state: {e}")))?;
        if state.fingerprint != fingerprint {
            return Err(Error::input(
                run_dir,
                "its checkpoint was made from another input or with other parameters; resume with the same ones, or run without --resume",
            ));
        }
        let log_path = dir.join("frames.jsonl");
        truncate(&log_path, state.log_bytes)?;
        let outlines = outlines_path(run_dir);
        if outlines.exists() {
            truncate(&outlines, state.outlines_bytes)?;
        }
        let records = read_frame_log(&log_path, 0)?;
        if records.len() != state.frames_done {
            return Err(Error::input(
                &log_path,
                format!(
                    "damaged checkpoint: {} frames logged, {} expected",
                    records.len(),
                    state.frames_done
                ),
            ));
        }
        let file = OpenOptions::new()
            .append(true)
            .open(&log_path)
            .map_err(|e| Error::output(&log_path, e))?;
        let log = CheckpointLog {
            dir,
            log: BufWriter::new(file),
            fingerprint,
            every: every.max(1),
            frames_done: state.frames_done,
        };
        Ok((log, records))
    }

    /// Frames safely logged.
    pub fn frames_done(&self) -> usize {
        self.frames_done
    }

    /// Appends one frame; every `every` frames, makes the log and `outlines` durable and
    /// records the state. `outlines` flushes the outline spool and returns its length.
    ///
    /// # Errors
    /// A write failure.
    pub fn record(&mut self, record: &FrameRecord, outlines: impl FnOnce() -> Result<u64>) -> Result<()> {
        let line = serde_json::to_string(record).expect("serialisable");
        let path = self.dir.join("frames.jsonl");
        writeln!(self.log, "{line}").map_err(|e| Error::output(&path, e))?;
        self.frames_done += 1;
        if self.frames_done % self.every == 0 {
            self.log.flush().map_err(|e| Error::output(&path, e))?;
            self.log.get_ref().sync_data().map_err(|e| Error::output(&path, e))?;
            let log_bytes = self
                .log
                .get_ref()
                .metadata()
                .map_err(|e| Error::output(&path, e))?
                .len();
            let state = State {
                caravan_version: crate::VERSION.into(),
                fingerprint: self.fingerprint.clone(),
                frames_done: self.frames_done,
                log_bytes,
                outlines_bytes: outlines()?,
            };
            crate::output::write_atomic(
                &self.dir.join("state.json"),
                &serde_json::to_vec_pretty(&state).expect("serialisable"),
            )?;
        }
        Ok(())
    }

    /// Removes the checkpoint after a complete run.
    pub fn finish(self) {
        let dir = self.dir.clone();
        drop(self);
        let _ = std::fs::remove_dir_all(dir);
    }
}

fn truncate(path: &Path, bytes: u64) -> Result<()> {
    let f = OpenOptions::new()
        .write(true)
        .open(path)
        .map_err(|e| Error::output(path, e))?;
    f.set_len(bytes).map_err(|e| Error::output(path, e))
}

/// Reads a frame log (one JSON record per line) whose frames must run from `first` on, one
/// after another; shared by checkpoints (from frame 0) and shards (from their first frame).
///
/// # Errors
/// An unreadable file, a damaged line, or frames out of order (naming the line).
pub fn read_frame_log(path: &Path, first: usize) -> Result<Vec<FrameRecord>> {
    let file = File::open(path).map_err(|e| Error::input(path, e.to_string()))?;
    let mut records = Vec::new();
    for (k, line) in BufReader::new(file).lines().enumerate() {
        let line = line.map_err(|e| Error::input(path, e.to_string()))?;
        let record: FrameRecord = serde_json::from_str(&line)
            .map_err(|e| Error::input(path, format!("line {}: damaged frame log: {e}", k + 1)))?;
        if record.frame != first + k {
            return Err(Error::input(path, format!("line {}: frames out of order", k + 1)));
        }
        records.push(record);
    }
    Ok(records)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fingerprint(parameters: &str) -> Fingerprint {
        Fingerprint {
            input: "movie.tif".into(),
            bytes: 10,
            shape: (5, 4, 4),
            parameters: parameters.into(),
        }
    }

    fn record(frame: usize) -> FrameRecord {
        FrameRecord {
            frame,
            threshold: Some(0.1 + frame as f64 / 3.0),
            detections: Vec::new(),
            nonfinite_pixels: frame,
            size_filter: Default::default(),
        }
    }

    #[test]
    fn resume_keeps_only_checkpointed_frames_and_checks_the_fingerprint() {
        // Hand-built: 5 frames logged with a checkpoint every 2 frames; a resume gets the 4
        // checkpointed frames back bit for bit (f64 through JSON round-trips exactly), not the
        // fifth; other parameters are refused.
        let dir = tempfile::tempdir().unwrap();
        let mut log = CheckpointLog::start(dir.path(), fingerprint("a"), 2).unwrap();
        for f in 0..5 {
            log.record(&record(f), || Ok(0)).unwrap();
        }
        drop(log);
        let (log, back) = CheckpointLog::resume(dir.path(), fingerprint("a"), 2).unwrap();
        assert_eq!(back, (0..4).map(record).collect::<Vec<_>>());
        assert_eq!(log.frames_done(), 4);
        drop(log);
        let e = CheckpointLog::resume(dir.path(), fingerprint("b"), 2)
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("other parameters"), "{e}");
        let e = CheckpointLog::resume(&dir.path().join("none"), fingerprint("a"), 2)
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("no checkpoint"), "{e}");
    }
}
