//! Checkpoints of a long run, so that a crash or a kill at frame 900 does not cost the night.
//!
//! While a run segments, every frame's detections are appended to a log in the run folder's
//! hidden `.checkpoint/` (with the movie's outlines beside it); every few frames the log is
//! flushed to disk and a small state file records how many frames and bytes are safe. A
//! resumed run truncates the log to that point, replays it (linking is fast and
//! deterministic, so replaying gives the same tracks bit for bit), and segments the rest.
//! Outputs are therefore byte-identical to those of an uninterrupted run.

use crate::error::{Error, Result};
use crate::stack::Stack;
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
    /// CRC-32 of the decoded frame (absent in logs of older versions), checked on resume.
    #[serde(default)]
    pub content_crc32: Option<u32>,
}

impl FrameRecord {
    /// A segmented frame as logged, and its labels (which the log does not keep).
    pub fn of(seg: crate::segment::FrameSegmentation) -> (FrameRecord, Vec<u32>) {
        let record = FrameRecord {
            frame: seg.frame,
            threshold: seg.threshold.is_finite().then_some(seg.threshold),
            detections: seg.detections,
            nonfinite_pixels: seg.nonfinite_pixels,
            size_filter: seg.size_filter,
            content_crc32: seg.content_crc32,
        };
        (record, seg.labels)
    }
}

/// What a checkpoint or a shard must match to be resumed or joined: the same recording, by
/// its size, shape and content, and the same parameters. Two recordings made with the same
/// settings have files of the same size; the content of their first and last frames tells
/// them apart at once, and every logged frame's own CRC-32 is checked on resume.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Fingerprint {
    /// Input path as given.
    pub input: String,
    /// Input bytes on disk.
    pub bytes: u64,
    /// Frames and frame size.
    pub shape: (usize, usize, usize),
    /// CRC-32 of the first and the last frame's decoded content
    /// ([`crate::stack::Frame::content_crc32`]); absent in fingerprints of older versions.
    #[serde(default)]
    pub content: Option<(u32, u32)>,
    /// Every parameter of the run, as JSON.
    pub parameters: String,
}

impl Fingerprint {
    /// The fingerprint of an open recording and the run's parameters (reads its first and last
    /// frames).
    ///
    /// # Errors
    /// A frame that cannot be read.
    pub fn of(stack: &mut Stack, parameters: serde_json::Value) -> Result<Fingerprint> {
        let info = stack.info().clone();
        let first = stack.read_frame(0)?.content_crc32();
        let last = stack.read_frame(info.frames.saturating_sub(1))?.content_crc32();
        Ok(Fingerprint {
            input: info.path.display().to_string(),
            bytes: info.bytes_on_disk,
            shape: (info.frames, info.height, info.width),
            content: Some((first, last)),
            parameters: parameters.to_string(),
        })
    }

    /// Why a checkpoint or shard with fingerprint `earlier` does not belong to a run with this
    /// one, in words; `None` when it does. The input's path may differ (a moved file is the same
    /// recording).
    pub fn mismatch(&self, earlier: &Fingerprint) -> Option<String> {
        if (self.bytes, self.shape) != (earlier.bytes, earlier.shape) {
            return Some(format!(
                "was made from another recording ({} bytes, {} frames of {}x{}; this one has {} bytes, {} frames of {}x{})",
                earlier.bytes, earlier.shape.0, earlier.shape.2, earlier.shape.1, self.bytes, self.shape.0, self.shape.2, self.shape.1
            ));
        }
        match (earlier.content, self.content) {
            (Some(a), Some(b)) if a.0 != b.0 => {
                return Some("was made from another recording of the same size (frame 0 differs)".into())
            }
            (Some(a), Some(b)) if a.1 != b.1 => {
                return Some(format!(
                    "was made from another recording of the same size (frame {} differs)",
                    self.shape.0.saturating_sub(1)
                ))
            }
            (None, _) | (_, None) => {
                return Some("was made by an older version that did not record the recording's content".into())
            }
            _ => {}
        }
        (self.parameters != earlier.parameters).then(|| "was made with other parameters".into())
    }
}

/// Checks that every logged frame is the recording's frame of the same number, by content
/// (each is read again: only I/O); names the first that differs and ends with `hint` (what to
/// do instead).
///
/// # Errors
/// A frame whose content differs from the logged one, a log without content checks, or a
/// frame that cannot be read.
pub fn verify_logged_frames(stack: &mut Stack, records: &[FrameRecord], log: &Path, hint: &str) -> Result<()> {
    for r in records {
        let Some(logged) = r.content_crc32 else {
            return Err(Error::input(
                log,
                format!(
                    "frame {} was logged without its content check (an older version); {hint}",
                    r.frame
                ),
            ));
        };
        if stack.read_frame(r.frame)?.content_crc32() != logged {
            return Err(Error::input(
                &stack.info().path,
                format!(
                    "frame {} differs from the one logged in {} (the recording was replaced or changed); {hint}",
                    r.frame,
                    log.display()
                ),
            ));
        }
    }
    Ok(())
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
    /// The last checkpoint being made durable on a thread of its own
    /// ([`CheckpointLog::record`]).
    pending: Option<std::thread::JoinHandle<Result<()>>>,
}

/// A file written through but perhaps not yet on the disk, with its path for messages: what
/// a checkpoint makes durable before its state names it.
pub struct Unsynced {
    path: PathBuf,
    file: File,
}

impl Unsynced {
    /// `file` (at `path`).
    pub fn new(path: &Path, file: File) -> Unsynced {
        Unsynced {
            path: path.to_path_buf(),
            file,
        }
    }

    /// Waits until the disk holds what was written.
    pub fn sync(&self) -> Result<()> {
        self.file.sync_data().map_err(|e| Error::output(&self.path, e))
    }
}

impl Drop for CheckpointLog {
    fn drop(&mut self) {
        let _ = self.settle();
    }
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
            pending: None,
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
        if let Some(why) = fingerprint.mismatch(&state.fingerprint) {
            return Err(Error::input(
                run_dir,
                format!("its checkpoint {why}; resume with the same recording and parameters, or run without --resume"),
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
            pending: None,
        };
        Ok((log, records))
    }

    /// Frames safely logged.
    pub fn frames_done(&self) -> usize {
        self.frames_done
    }

    /// Appends one frame; every `every` frames, makes the log and `outlines` durable and
    /// records the state. `outlines` flushes the outline spool and returns its length (with
    /// its file to make durable, when there is one). The syncs and the state are written on a
    /// thread of their own (the disk takes 5-25 ms a file, which the first pass's last frame
    /// otherwise waited for with every core idle), the state only once both syncs are done, so
    /// that it never names bytes the disk may not hold; the checkpoint before is waited for
    /// first, so that states are written in order, and its error (if any) returned here.
    ///
    /// # Errors
    /// A write failure, here or in the checkpoint before.
    pub fn record(
        &mut self,
        record: &FrameRecord,
        outlines: impl FnOnce() -> Result<(u64, Option<Unsynced>)>,
    ) -> Result<()> {
        let line = serde_json::to_string(record).expect("serialisable");
        let path = self.dir.join("frames.jsonl");
        writeln!(self.log, "{line}").map_err(|e| Error::output(&path, e))?;
        self.frames_done += 1;
        if self.frames_done.is_multiple_of(self.every) {
            self.settle()?;
            self.log.flush().map_err(|e| Error::output(&path, e))?;
            let log = self.log.get_ref().try_clone().map_err(|e| Error::output(&path, e))?;
            let log_bytes = log.metadata().map_err(|e| Error::output(&path, e))?.len();
            let (outlines_bytes, outlines) = outlines()?;
            let state = State {
                caravan_version: crate::VERSION.into(),
                fingerprint: self.fingerprint.clone(),
                frames_done: self.frames_done,
                log_bytes,
                outlines_bytes,
            };
            let state_path = self.dir.join("state.json");
            let log = Unsynced::new(&path, log);
            self.pending = Some(std::thread::spawn(move || {
                log.sync()?;
                outlines.as_ref().map_or(Ok(()), Unsynced::sync)?;
                crate::output::write_atomic(&state_path, &serde_json::to_vec_pretty(&state).expect("serialisable"))
            }));
        }
        Ok(())
    }

    /// Waits for the last checkpoint to be on the disk.
    ///
    /// # Errors
    /// A sync or the state's write failed.
    pub fn settle(&mut self) -> Result<()> {
        match self.pending.take() {
            Some(pending) => pending.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic)),
            None => Ok(()),
        }
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
            content: Some((1, 2)),
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
            content_crc32: Some(frame as u32),
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
            log.record(&record(f), || Ok((0, None))).unwrap();
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

    /// A 5-frame 8x8 16-bit stack whose frame `t` is filled with `value(t)`.
    fn stack_of(dir: &Path, name: &str, value: impl Fn(usize) -> u16) -> Stack {
        use crate::stack::write::{write_stack, TiffCompression};
        let path = dir.join(name);
        write_stack::<u16, _>(&path, 8, 8, 5, TiffCompression::None, None, |t| Ok(vec![value(t); 64])).unwrap();
        Stack::open(&path, &crate::stack::OpenOptions::default()).unwrap()
    }

    #[test]
    fn a_replayed_frame_whose_content_changed_is_named() {
        // Construction: two recordings alike but in frame 2; frames logged from the first are
        // checked against the second: frame 2 is named (its CRC-32 differs), frames 0-1 pass.
        let dir = tempfile::tempdir().unwrap();
        let mut first = stack_of(dir.path(), "a.tif", |t| t as u16);
        let mut second = stack_of(dir.path(), "b.tif", |t| if t == 2 { 99 } else { t as u16 });
        let records: Vec<FrameRecord> = (0..5)
            .map(|t| FrameRecord {
                content_crc32: Some(first.read_frame(t).unwrap().content_crc32()),
                ..record(t)
            })
            .collect();
        let log = dir.path().join("frames.jsonl");
        verify_logged_frames(&mut first, &records, &log, "hint").unwrap();
        verify_logged_frames(&mut second, &records[..2], &log, "hint").unwrap();
        let e = verify_logged_frames(&mut second, &records, &log, "hint")
            .unwrap_err()
            .to_string();
        assert!(e.contains("frame 2 differs") && e.ends_with("hint"), "{e}");
    }

    #[test]
    fn frame_content_checksum_is_zlib_crc32_of_the_little_endian_samples() {
        // Source: the CRC-32 check value of "123456789" is cbf43926 (CRC catalogue; zlib.crc32).
        // A 9x1 8-bit frame of those ASCII codes must give it; a 16-bit frame of the same
        // values gives the CRC of the interleaved bytes "1\02\0...9\0", computed here by crc32fast
        // on the bytes written out by hand.
        let digits: Vec<u8> = b"123456789".to_vec();
        let frame = |pixels| crate::stack::Frame {
            index: 0,
            width: 9,
            height: 1,
            pixels,
        };
        assert_eq!(
            frame(crate::stack::Pixels::U8(digits.clone())).content_crc32(),
            0xcbf4_3926
        );
        let wide: Vec<u16> = digits.iter().map(|&d| d as u16).collect();
        let bytes: Vec<u8> = digits.iter().flat_map(|&d| [d, 0]).collect();
        assert_eq!(
            frame(crate::stack::Pixels::U16(wide)).content_crc32(),
            crc32fast::hash(&bytes)
        );
    }

    #[test]
    fn a_damaged_or_reordered_log_is_refused_naming_the_line() {
        // Construction: frames 0, 2, 1 (reordered), and a line cut in half (a crash mid-write
        // outside the checkpointed part, or damage): each refused with the line it is on.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("frames.jsonl");
        let line = |f: usize| serde_json::to_string(&record(f)).unwrap();
        std::fs::write(&path, format!("{}\n{}\n{}\n", line(0), line(2), line(1))).unwrap();
        let e = read_frame_log(&path, 0).unwrap_err().to_string();
        assert!(e.contains("line 2: frames out of order"), "{e}");
        let cut = line(1);
        std::fs::write(&path, format!("{}\n{}\n", line(0), &cut[..cut.len() / 2])).unwrap();
        let e = read_frame_log(&path, 0).unwrap_err().to_string();
        assert!(e.contains("line 2: damaged frame log"), "{e}");
        // A shard's log starts at its first frame.
        std::fs::write(&path, format!("{}\n{}\n", line(5), line(6))).unwrap();
        assert_eq!(read_frame_log(&path, 5).unwrap().len(), 2);
        assert!(read_frame_log(&path, 0).is_err());
    }
}
