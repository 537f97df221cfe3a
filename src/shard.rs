//! Split stages for many machines: `segment --frames A..B` writes a shard (the detections and
//! movie outlines of frames A to B−1, in the checkpoint log format), and `join` joins the
//! shards of one recording into tracks, tables and the QC movie. Linking replays the frames
//! in order exactly as `track` does, so the outputs are byte-identical to one `track` run
//! (run.json differs only in its command name and timings).

use crate::checkpoint::{Fingerprint, FrameRecord};
use crate::error::{Error, Result};
use crate::frames::{progress_bar, with_segmented_frames, Keep};
use crate::output::write_atomic;
use crate::params::SegmentParams;
use crate::pipeline::{finish_run, DiameterSource, FirstPass, RunOptions, RunOutcome};
use crate::render::movie::OutlineSpool;
use crate::stack::Stack;
use serde::{Deserialize, Serialize};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// What a shard keeps of each frame: its outline for the movie, not its label image.
const OUTLINE_ONLY: Keep = Keep {
    labels: false,
    outline: true,
    downscale: None,
};

/// `shard.json`: what a shard holds, written last (its presence marks a complete shard).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ShardInfo {
    /// Tool version.
    pub caravan_version: String,
    /// Input and segmentation parameters.
    pub fingerprint: Fingerprint,
    /// Half-open frame range.
    pub frames: (usize, usize),
    /// Diameter used.
    pub diameter: DiameterSource,
    /// Segmentation parameters used.
    pub segment: SegmentParams,
    /// How the recording was opened (channel, Z, calibration given on the command line).
    pub open: crate::stack::OpenOptions,
}

fn fingerprint(stack: &mut Stack, diameter: &DiameterSource, params: &SegmentParams) -> Result<Fingerprint> {
    let parameters = crate::record::SegmentationParameters {
        diameter: diameter.clone(),
        segment: params.clone(),
    };
    Fingerprint::of(stack, serde_json::to_value(&parameters).expect("plain data"))
}

/// Segments frames `range` of `stack` into the shard folder `dir`.
///
/// # Errors
/// A range outside the recording, a folder holding another shard (unless `replace`), or
/// reading and writing failures.
pub fn write_shard(
    stack: &mut Stack,
    open: &crate::stack::OpenOptions,
    diameter: DiameterSource,
    params: &SegmentParams,
    range: (usize, usize),
    dir: &Path,
    replace: bool,
) -> Result<ShardInfo> {
    params.validate()?;
    let frames = stack.info().frames;
    if range.0 >= range.1 || range.1 > frames {
        return Err(Error::parameter(
            "--frames",
            format!("{}..{}", range.0, range.1),
            format!("must lie within the recording's {frames} frames (A..B, A < B)"),
        ));
    }
    if !replace && dir.join("shard.json").exists() {
        return Err(Error::input(
            dir,
            "holds a shard already (shard.json); choose another folder or give --force",
        ));
    }
    let _lock = crate::run_folder::FolderLock::take(dir)?;
    crate::run_folder::remove_stale_partials(dir);
    let info = ShardInfo {
        caravan_version: crate::VERSION.into(),
        fingerprint: fingerprint(stack, &diameter, params)?,
        frames: range,
        diameter,
        segment: params.clone(),
        open: open.clone(),
    };
    let pid = std::process::id();
    let log_temp = dir.join(format!(".frames.jsonl.partial-{pid}"));
    let outlines_temp = dir.join(format!(".outlines.bin.partial-{pid}"));
    let mut log = BufWriter::new(std::fs::File::create(&log_temp).map_err(|e| Error::output(&log_temp, e))?);
    let mut spool = OutlineSpool::durable(&outlines_temp, false)?;
    let progress = progress_bar((range.1 - range.0) as u64, "frames");
    with_segmented_frames(
        (stack, None, true),
        params,
        progress,
        // The outline is found on the worker that segmented the frame; the label image
        // stays there.
        (range.0..range.1, OUTLINE_ONLY),
        |segmented| -> Result<()> {
            for seg in segmented {
                let mut seg = seg?;
                let movie = seg.movie.take().expect("frame production keeps the outline when asked");
                spool.push_outline(&movie.outline)?;
                let (record, _) = FrameRecord::of(seg);
                writeln!(log, "{}", serde_json::to_string(&record).expect("serialisable"))
                    .map_err(|e| Error::output(&log_temp, e))?;
            }
            Ok(())
        },
    )?;
    let file = log.into_inner().map_err(|e| Error::output(&log_temp, e.into_error()))?;
    file.sync_all().map_err(|e| Error::output(&log_temp, e))?;
    spool.flushed_len()?;
    drop(spool);
    for (temp, name) in [(&log_temp, "frames.jsonl"), (&outlines_temp, "outlines.bin")] {
        std::fs::rename(temp, dir.join(name)).map_err(|e| Error::output(&dir.join(name), e))?;
    }
    write_atomic(
        &dir.join("shard.json"),
        &serde_json::to_vec_pretty(&info).expect("serialisable"),
    )?;
    Ok(info)
}

/// Reads the `shard.json` of each folder and orders the shards by first frame.
///
/// # Errors
/// A folder without a complete shard, shards of different inputs or parameters, or frame
/// ranges that do not cover the recording exactly once.
pub fn read_shards(dirs: &[PathBuf]) -> Result<Vec<(PathBuf, ShardInfo)>> {
    let mut shards = Vec::with_capacity(dirs.len());
    for d in dirs {
        let path = d.join("shard.json");
        let text = std::fs::read_to_string(&path).map_err(|_| {
            Error::input(
                d,
                "is not a complete shard (no shard.json); run segment --frames for it",
            )
        })?;
        let info: ShardInfo =
            serde_json::from_str(&text).map_err(|e| Error::input(&path, format!("damaged shard description: {e}")))?;
        shards.push((d.clone(), info));
    }
    shards.sort_by_key(|s| s.1.frames.0);
    let Some(first) = shards.first() else {
        return Err(Error::parameter("SHARD", "", "give at least one shard folder"));
    };
    let total = first.1.fingerprint.shape.0;
    let mut next = 0;
    for (d, s) in &shards {
        if let Some(why) = first.1.fingerprint.mismatch(&s.fingerprint) {
            return Err(Error::input(
                d,
                format!("does not fit the shard in {}: it {why}", first.0.display()),
            ));
        }
        if s.frames.0 != next {
            return Err(Error::input(
                d,
                format!(
                    "starts at frame {} but frame {next} is the next one needed (gap or overlap)",
                    s.frames.0
                ),
            ));
        }
        next = s.frames.1;
    }
    if next != total {
        return Err(Error::input(
            &shards[shards.len() - 1].0,
            format!("the shards end at frame {next}, the recording has {total}"),
        ));
    }
    Ok(shards)
}

/// Links the shards of one recording (opened as `stack`, for the movie) into `dir`.
///
/// # Errors
/// Shards that do not fit together or do not belong to `stack`, unreadable logs, outputs not
/// writable.
pub fn join_shards(stack: &mut Stack, dirs: &[PathBuf], dir: &Path, outputs: &RunOptions) -> Result<RunOutcome> {
    let shards = read_shards(dirs)?;
    let first = &shards[0].1;
    let info = stack.info().clone();
    let expected = fingerprint(stack, &first.diameter, &first.segment)?;
    if let Some(why) = expected.mismatch(&first.fingerprint) {
        return Err(Error::input(
            &shards[0].0,
            format!(
                "does not fit {}, the recording given to join: it {why}",
                info.path.display()
            ),
        ));
    }
    // Each shard's log is read once: its first and last frames checked against the recording
    // before anything is written, then replayed.
    let mut logs = Vec::with_capacity(shards.len());
    for (d, shard) in &shards {
        let log = d.join("frames.jsonl");
        let records = crate::checkpoint::read_frame_log(&log, shard.frames.0)?;
        let ends: Vec<FrameRecord> = [records.first(), records.last()]
            .into_iter()
            .flatten()
            .cloned()
            .collect();
        crate::checkpoint::verify_logged_frames(stack, &ends, &log, "segment the shard again from this recording")?;
        logs.push(records);
    }
    let folder = crate::run_folder::RunFolder::open(dir, outputs.replace)?;
    let started = Instant::now();
    let work = folder.work().to_path_buf();
    let mut pass = FirstPass::new(&work, outputs, &info, &first.segment)?;
    let mut spool = match (outputs.linking, outputs.movie) {
        (Some(_), Some(_)) => Some(OutlineSpool::create(&work)?),
        _ => None,
    };
    for ((d, _), records) in shards.iter().zip(logs) {
        for record in records {
            pass.take(record)?;
        }
        if let Some(s) = spool.as_mut() {
            let path = d.join("outlines.bin");
            let bytes = std::fs::read(&path).map_err(|e| Error::input(&path, e.to_string()))?;
            s.append_raw(&bytes)?;
        }
    }
    let mut run = finish_run(
        stack,
        pass,
        spool.as_mut(),
        first.diameter.clone(),
        &first.segment,
        &work,
        outputs,
        "join",
        started,
    )?;
    // The spool is closed (its blocks freed) on the removal's thread, as a run's is.
    let removal = folder.publish(|name| outputs.writes(name))?.also(move || drop(spool));
    run.removal = Some(std::sync::Arc::new(removal));
    run.dir = dir.to_path_buf();
    Ok(run)
}
