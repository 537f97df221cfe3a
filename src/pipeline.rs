//! Orchestration over a whole recording: resolving parameters (including the automatic
//! diameter), segmenting frames in parallel batches while keeping frame order, progress on a
//! terminal, and the `segment` run with its outputs. No per-pixel work happens here.

use crate::error::{Error, Result};
use crate::output::{ensure_dir, fnv1a64_file, write_atomic, AtomicFile};
use crate::params::{Length, SegmentParams};
use crate::segment::{diameter::estimate_diameter, segment_frame, FrameSegmentation};
use crate::stack::write::{write_stack, TiffCompression};
use crate::stack::Stack;
use crate::tracks::{write_detections, write_detections_header};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::VecDeque;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// How the nucleus diameter was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "source", content = "px")]
pub enum DiameterSource {
    /// Given with `--diameter`.
    Given(f64),
    /// Estimated by scale selection (median over sampled frames).
    Estimated(f64),
}

/// The nucleus diameter in pixels: the given length, or an estimate from the first, middle and
/// last frames (median) when none is given.
///
/// # Errors
/// A physical length without a pixel size, or a recording where no nucleus-like blob stands out.
pub fn resolve_diameter(stack: &mut Stack, given: Option<Length>) -> Result<DiameterSource> {
    if let Some(len) = given {
        return Ok(DiameterSource::Given(
            len.to_pixels("--diameter", stack.info().calibration.pixel_size_um)?,
        ));
    }
    let n = stack.info().frames;
    let mut picks = vec![0, n / 2, n - 1];
    picks.dedup();
    let mut estimates = Vec::new();
    for t in picks {
        if let Some(d) = estimate_diameter(&stack.read_frame(t)?.to_image()) {
            estimates.push(d);
        }
    }
    if estimates.is_empty() {
        return Err(Error::input(
            &stack.info().path,
            "no nucleus-like objects stand out in the sampled frames; give --diameter",
        ));
    }
    estimates.sort_by(f64::total_cmp);
    Ok(DiameterSource::Estimated(estimates[estimates.len() / 2]))
}

/// A progress bar on stderr when it is a terminal; hidden (silent) otherwise, e.g. in logs.
pub fn progress_bar(len: u64, what: &str) -> ProgressBar {
    if !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(len);
    let template = format!("{{elapsed_precise}} [{{bar:40}}] {{pos}}/{{len}} {what} {{per_sec}} ETA {{eta}}");
    bar.set_style(
        ProgressStyle::with_template(&template)
            .expect("valid template")
            .progress_chars("=> "),
    );
    bar
}

/// Segmented frames of a recording, in frame order. Frames are decoded in batches of a few per
/// worker thread and segmented in parallel, so memory is bounded by the batch, not the length.
pub struct SegmentedFrames<'a> {
    stack: &'a mut Stack,
    params: &'a SegmentParams,
    range: std::ops::Range<usize>,
    ready: VecDeque<FrameSegmentation>,
    batch: usize,
    progress: ProgressBar,
}

impl<'a> SegmentedFrames<'a> {
    /// Iterates over all frames of `stack`.
    pub fn new(stack: &'a mut Stack, params: &'a SegmentParams, progress: ProgressBar) -> Self {
        let frames = stack.info().frames;
        let batch = 2 * rayon::current_num_threads().max(1);
        SegmentedFrames {
            stack,
            params,
            range: 0..frames,
            ready: VecDeque::new(),
            batch,
            progress,
        }
    }

    fn fill(&mut self) -> Result<()> {
        let end = (self.range.start + self.batch).min(self.range.end);
        let mut decoded = Vec::with_capacity(end - self.range.start);
        for t in self.range.start..end {
            decoded.push(self.stack.read_frame(t)?);
        }
        self.range.start = end;
        let params = self.params;
        let done: Vec<FrameSegmentation> = decoded
            .par_iter()
            .map(|f| segment_frame(&f.to_image(), f.index, params))
            .collect();
        self.progress.inc(done.len() as u64);
        self.ready.extend(done);
        Ok(())
    }
}

impl Iterator for SegmentedFrames<'_> {
    type Item = Result<FrameSegmentation>;
    fn next(&mut self) -> Option<Self::Item> {
        if self.ready.is_empty() && !self.range.is_empty() {
            if let Err(e) = self.fill() {
                self.range.start = self.range.end;
                return Some(Err(e));
            }
        }
        let item = self.ready.pop_front().map(Ok);
        if item.is_none() {
            self.progress.finish_and_clear();
        }
        item
    }
}

/// Per-frame facts kept for the run record.
#[derive(Debug, Clone, Serialize)]
pub struct FrameSummary {
    /// Frame number.
    pub frame: usize,
    /// Threshold used (null when the frame had no contrast).
    pub threshold: Option<f64>,
    /// Objects found.
    pub objects: usize,
}

/// What `segment` produced.
#[derive(Debug, Clone)]
pub struct SegmentRun {
    /// Output folder.
    pub dir: PathBuf,
    /// Diameter used and where it came from.
    pub diameter: DiameterSource,
    /// One entry per frame.
    pub frames: Vec<FrameSummary>,
    /// Human-readable warnings (also in run.json).
    pub warnings: Vec<String>,
}

impl SegmentRun {
    /// Total detections.
    pub fn detections(&self) -> usize {
        self.frames.iter().map(|f| f.objects).sum()
    }
}

/// Options of a `segment` run beyond the segmentation parameters.
#[derive(Debug, Clone, Default)]
pub struct SegmentOutputs {
    /// Also write `labels.tif` (one 32-bit label image per frame).
    pub labels: bool,
}

/// Segments every frame of an open recording and writes `detections.csv` (and optionally
/// `labels.tif`) plus `run.json` into `dir`, each atomically.
pub fn run_segment(
    stack: &mut Stack,
    diameter: DiameterSource,
    params: &SegmentParams,
    dir: &Path,
    outputs: &SegmentOutputs,
    command: &str,
) -> Result<SegmentRun> {
    params.validate()?;
    ensure_dir(dir)?;
    let started = Instant::now();
    let info = stack.info().clone();
    let calibration = info.calibration;
    let mut csv = AtomicFile::create(&dir.join("detections.csv"))?;
    write_detections_header(&mut csv).map_err(|e| csv.error(e))?;
    let mut frames = Vec::with_capacity(info.frames);
    let mut handle = |seg: &FrameSegmentation, csv: &mut AtomicFile| -> Result<()> {
        write_detections(csv, &seg.detections, &calibration).map_err(|e| csv.error(e))?;
        frames.push(FrameSummary {
            frame: seg.frame,
            threshold: seg.threshold.is_finite().then_some(seg.threshold),
            objects: seg.detections.len(),
        });
        Ok(())
    };
    let mut segmented = SegmentedFrames::new(stack, params, progress_bar(info.frames as u64, "frames"));
    if outputs.labels {
        write_stack::<u32, _>(
            &dir.join("labels.tif"),
            info.width,
            info.height,
            info.frames,
            TiffCompression::Deflate,
            None,
            |_| {
                let seg = segmented.next().expect("one result per frame")?;
                handle(&seg, &mut csv)?;
                Ok(seg.labels)
            },
        )?;
    } else {
        for seg in segmented {
            handle(&seg?, &mut csv)?;
        }
    }
    csv.commit()?;
    let warnings = warnings_for(&frames, &info);
    let run = SegmentRun {
        dir: dir.to_path_buf(),
        diameter,
        frames,
        warnings,
    };
    let checksum = fnv1a64_file(&info.path).ok().map(|h| format!("{h:016x}"));
    let record = serde_json::json!({
        "caravan_version": crate::VERSION,
        "command": command,
        "research_use": "Caravan is research software; statistics are only as good as the segmentation they rest on.",
        "input": { "stack": info, "fnv1a64": checksum },
        "parameters": { "diameter": diameter, "segment": params },
        "counts": { "frames": run.frames.len(), "detections": run.detections() },
        "per_frame": run.frames,
        "warnings": run.warnings,
        "timings_s": { "segment": started.elapsed().as_secs_f64() },
    });
    write_atomic(
        &dir.join("run.json"),
        &serde_json::to_vec_pretty(&record).expect("serialisable"),
    )?;
    Ok(run)
}

fn warnings_for(frames: &[FrameSummary], info: &crate::stack::StackInfo) -> Vec<String> {
    let mut w = Vec::new();
    let empty: Vec<String> = frames
        .iter()
        .filter(|f| f.objects == 0)
        .map(|f| f.frame.to_string())
        .collect();
    if !empty.is_empty() {
        w.push(format!(
            "no objects found in {} frame(s): {}",
            empty.len(),
            empty.join(" ")
        ));
    }
    if info.calibration.pixel_size_um.is_none() {
        w.push("no pixel size in the metadata or on the command line: physical columns are empty".into());
    }
    if info.calibration.frame_interval_s.is_none() {
        w.push("no frame interval in the metadata or on the command line: time_s is empty".into());
    }
    w
}
