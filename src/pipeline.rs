//! A run over a whole recording: resolving parameters (including the automatic diameter), the
//! first pass over the segmented frames ([`crate::frames`]), linking, and the outputs with
//! their run record. No per-pixel work happens here.

use crate::analyze::run::EarlyAnalysis;
use crate::analyze::{summarize_track, write_per_track, TrackSummary};
use crate::checkpoint::{CheckpointLog, Fingerprint, FrameRecord};
use crate::columns::{write_header, write_rows, Column};
use crate::error::{Error, Result};
use crate::frames::{progress_bar, with_segmented_frames, Keep};
use crate::link::divide::DivisionEvent;
use crate::link::estimate::MotionSource;
use crate::link::online::OnlineLinker;
use crate::link::{nearest_neighbour_distances, resolve_tracks, TrackResolution};
use crate::link::{LinkOptions, MaxStepSource, ResolvedLinking};
use crate::output::{crc32_file, write_atomic, AtomicFile, Commits, Removal};
use crate::params::{Length, SegmentParams};
use crate::qc::{count_jumps, linking_qc, warnings_for, RunWarning};
pub use crate::record::{DiameterSource, FrameSummary, LinkingQc};
use crate::record::{RunCounts, RunInput, RunParameters, RunRecord, Timings, RESEARCH_USE};
use crate::render::movie::{
    render_movie, MovieOptions, MovieOutputs, OutlineSpool, TrackOverlay, DOWNSCALED_BUDGET_BYTES,
};
use crate::render::review::{ReviewOptions, ReviewOutputs, ReviewWriter};
use crate::reports::RunAnalysis;
use crate::review::{offer_all_frames, read_linked_points_of, review_input, ReviewedTracks, RunView};
pub use crate::run_folder::{check_output_dir, RunFolder, RUN_OUTPUTS};
use crate::segment::diameter::{central_window, combine, examine_frames, sample_frames, Confidence, ESTIMATE_CROP_PX};
use crate::segment::masks::open_masks;
use crate::segment::FrameSegmentation;
use crate::stack::write::{write_stack, TiffCompression};
use crate::stack::Stack;
use crate::tracks::PathPoint;
use crate::tracks::{detection_columns, write_tracks, Detection, TrackedDetection};
use crate::verdict::{judge, RunFigures, RunVerdict};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// The nucleus diameter in pixels: the given length, or an estimate from up to five frames
/// spread over the recording (see [`crate::segment::diameter`]); `params_for(d)` gives the
/// segmentation parameters the run would use at diameter `d`, for the estimate's cross-check.
///
/// # Errors
/// A physical length without a pixel size, or a recording where no nucleus stands out from the
/// noise in any sampled frame (the message asks for `--diameter` rather than guessing).
pub fn resolve_diameter(
    stack: &mut Stack,
    given: Option<Length>,
    params_for: &(dyn Fn(f64) -> SegmentParams + Sync),
) -> Result<DiameterSource> {
    if let Some(len) = given {
        return Ok(DiameterSource::Given {
            px: len.to_pixels("--diameter", stack.info().calibration.pixel_size_um)?,
        });
    }
    // Read in order (one reader), keeping only the crop examined, while the crops read before
    // are examined in parallel.
    let crops = sample_frames(stack.info().frames).into_iter().map(|t| {
        let frame = stack.read_frame(t)?;
        let (y0, x0, rows, columns) = central_window((frame.height, frame.width), ESTIMATE_CROP_PX);
        Ok((t, frame.window_image((y0, x0), (rows, columns))))
    });
    let frames = examine_frames(crops, params_for)?;
    let noise: Vec<String> = frames.iter().map(|f| format!("{:.1}", f.noise_sigma)).collect();
    let sampled: Vec<String> = frames.iter().map(|f| f.frame.to_string()).collect();
    combine(frames).map(DiameterSource::Estimated).ok_or_else(|| {
        Error::input(
            &stack.info().path,
            format!(
                "no nucleus stands out from the noise (noise s.d. {} grey levels) in frames {}; give --diameter",
                noise.join("/"),
                sampled.join(", ")
            ),
        )
    })
}

/// What a `segment` or `track` run produced.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    /// Output folder.
    pub dir: PathBuf,
    /// Diameter used and where it came from.
    pub diameter: DiameterSource,
    /// One entry per frame.
    pub frames: Vec<FrameSummary>,
    /// One entry per track (empty without linking).
    pub tracks: Vec<TrackSummary>,
    /// Quality figures of the linking (absent without linking).
    pub linking_qc: Option<LinkingQc>,
    /// Gaps closed and divisions found (absent without linking).
    pub resolution: Option<TrackResolution>,
    /// The QC movie, when rendered.
    pub movie: Option<MovieOutputs>,
    /// The review page, when written.
    pub review: Option<ReviewOutputs>,
    /// Warnings for the user (their messages are in run.json).
    pub warnings: Vec<RunWarning>,
    /// Whether the run can be trusted, with the reasons.
    pub verdict: RunVerdict,
    /// The default migration analysis when [`RunOptions::analysis`] asked for it and it
    /// could be made (nothing of it is written yet), with what the review page was made from.
    pub analysis: Option<RunAnalysis>,
    /// What is being removed in the background once the run is published: an earlier run's
    /// outputs in this folder that this run replaced, and this run's spool and checkpoint;
    /// the last clone dropped waits until they are gone.
    pub removal: Option<std::sync::Arc<Removal>>,
}

impl RunOutcome {
    /// Total detections.
    pub fn detections(&self) -> usize {
        self.frames.iter().map(|f| f.objects).sum()
    }
}

/// Options of a run beyond the segmentation parameters.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Also write `labels.tif` (one 32-bit label image per frame).
    pub labels: bool,
    /// Link detections into tracks (`tracks.csv`, `per_track.csv`) with these choices.
    pub linking: Option<LinkOptions>,
    /// With linking: render the QC movie and contact sheet.
    pub movie: Option<MovieOptions>,
    /// With linking: write the review page (`review/`).
    pub review: Option<ReviewOptions>,
    /// Replace the outputs of an earlier run in the same folder (otherwise refused).
    pub replace: bool,
    /// Keep a checkpoint every this many frames (not with `labels`).
    pub checkpoint_every: Option<usize>,
    /// Continue from the folder's checkpoint.
    pub resume: bool,
    /// Label masks that replace segmentation (see [`crate::segment::masks`]); such a run
    /// keeps no checkpoint.
    pub masks: Option<PathBuf>,
    /// The masks are the recording too: objects are measured without intensities.
    pub masks_without_intensities: bool,
    /// With linking: work out the default migration analysis of the tracks while the movie
    /// and the review page are drawn ([`RunOutcome::analysis`]), for a caller that writes
    /// it once the run is complete ([`crate::reports::run_early_analysis`]).
    pub analysis: bool,
}

/// Segments every frame of an open recording and writes `detections.csv` (and optionally
/// `labels.tif`, and with linking `tracks.csv` and `per_track.csv`) plus `run.json` into `dir`,
/// each atomically.
pub fn run_recording(
    stack: &mut Stack,
    diameter: DiameterSource,
    params: &SegmentParams,
    dir: &Path,
    outputs: &RunOptions,
    command: &str,
) -> Result<RunOutcome> {
    params.validate()?;
    let info = stack.info().clone();
    let mut masks = match &outputs.masks {
        Some(p) if outputs.resume => {
            return Err(Error::input(
                p,
                "a run with --masks keeps no checkpoint, so it cannot be resumed",
            ))
        }
        Some(p) => Some(open_masks(p, &info)?),
        None => None,
    };
    let without_checkpoint;
    let outputs = if masks.is_some() {
        without_checkpoint = RunOptions {
            checkpoint_every: None,
            ..outputs.clone()
        };
        &without_checkpoint
    } else {
        outputs
    };
    let folder = RunFolder::open(dir, outputs.replace)?;
    let started = Instant::now();
    let work = folder.work().to_path_buf();
    let mut pass = FirstPass::new(&work, outputs, &info, params)?;
    let (mut checkpoint, replayed) = start_checkpoint(stack, dir, outputs, params, &diameter)?;
    for record in replayed {
        pass.take(record)?;
    }
    let mut spool = pass.spool(dir, &work, outputs, checkpoint.is_some())?;
    let first = checkpoint.as_ref().map_or(0, |c| c.frames_done());
    let keep = Keep {
        labels: outputs.labels,
        outline: spool.is_some(),
        downscale: keep_downscaled(spool.as_mut(), outputs, &info, &work, first)?,
    };
    let progress = progress_bar(info.frames as u64, "frames");
    progress.set_position(first as u64);
    let mut handle = |mut seg: FrameSegmentation| -> Result<Vec<u32>> {
        let movie = seg.movie.take();
        let (record, labels) = FrameRecord::of(seg);
        if let Some(s) = spool.as_mut() {
            let movie = movie.expect("frame production keeps the movie's share when a spool is kept");
            s.push_outline(&movie.outline)?;
            if let Some(values) = movie.downscaled {
                s.push_downscaled(record.frame, &values)?;
            }
        }
        if let Some(c) = checkpoint.as_mut() {
            c.record(&record, || match spool.as_mut() {
                Some(s) => s.flushed().map(|(len, file)| (len, Some(file))),
                None => Ok((0, None)),
            })?;
        }
        pass.take(record)?;
        Ok(labels)
    };
    let frames = first..info.frames;
    let source = (&mut *stack, masks.as_mut(), !outputs.masks_without_intensities);
    with_segmented_frames(source, params, progress, (frames, keep), |segmented| {
        if outputs.labels {
            write_stack::<u32, _>(
                &work.join("labels.tif"),
                info.width,
                info.height,
                info.frames,
                TiffCompression::Deflate,
                None,
                |_| {
                    let seg = segmented.next().expect("one result per frame")?;
                    handle(seg)
                },
            )
        } else {
            for seg in segmented {
                handle(seg?)?;
            }
            Ok(())
        }
    })?;
    let mut run = finish_run(
        stack,
        pass,
        spool.as_mut(),
        diameter,
        params,
        &work,
        outputs,
        command,
        started,
    )?;
    // The last checkpoint was made durable while the run went on; its failure fails the run,
    // as it did when it was waited for at once.
    if let Some(c) = checkpoint.as_mut() {
        c.settle()?;
    }
    let removal = folder.publish(|name| outputs.writes(name))?;
    // The spool's files and the checkpoint are removed on the removal's thread: the file
    // system frees a 100-frame run's 100 MB of downscaled frames as the spool closes, and
    // removing the checkpoint beside the removal of a replaced run's outputs took the main
    // thread ~40 ms before the analysis could start.
    let removal = removal.also(move || {
        drop(spool);
        if let Some(c) = checkpoint {
            c.finish();
        }
    });
    run.removal = Some(std::sync::Arc::new(removal));
    run.dir = dir.to_path_buf();
    Ok(run)
}

/// Has `spool` keep the frames from `first` on downscaled for the movie, when a movie is made
/// and the recording is larger than it; returns the factor frame production should
/// downscale by.
fn keep_downscaled(
    spool: Option<&mut OutlineSpool>,
    outputs: &RunOptions,
    info: &crate::stack::StackInfo,
    work: &Path,
    first: usize,
) -> Result<Option<usize>> {
    let (Some(spool), Some(movie)) = (spool, outputs.movie) else {
        return Ok(None);
    };
    let factor = movie.factor(info.width, info.height);
    if factor < 2 {
        // Not downscaled: the spool would hold more bytes than the frames it spares decoding.
        return Ok(None);
    }
    let values = info.width.div_ceil(factor) * info.height.div_ceil(factor);
    spool.keep_downscaled(work, first, values, DOWNSCALED_BUDGET_BYTES)?;
    Ok(Some(factor))
}

/// After the first pass (segmented or replayed): resolves tracks, writes the track tables,
/// renders the movie from the outline spool, and writes `run.json`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn finish_run(
    stack: &mut Stack,
    pass: FirstPass,
    spool: Option<&mut OutlineSpool>,
    diameter: DiameterSource,
    params: &SegmentParams,
    dir: &Path,
    outputs: &RunOptions,
    command: &str,
    started: Instant,
) -> Result<RunOutcome> {
    let info = stack.info().clone();
    let calibration = info.calibration;
    let small_object_share = (pass.object_count > 0).then(|| pass.small_objects as f64 / pass.object_count as f64);
    let FirstPass {
        csv,
        frames,
        detections,
        mut neighbour_distances,
        ..
    } = pass;
    // detections.csv is waited for on the disk while linking goes on (before run.json).
    let mut commits = Commits::default();
    commits.start(csv);
    let first_pass_s = started.elapsed().as_secs_f64();
    let mut tracked = Vec::new();
    let linking = outputs
        .linking
        .map(|options| resolve_linking(&detections, &options, diameter.px()));
    // The input's checksum (a whole read of the file) on a thread of its own, started once the
    // motion estimate (on every core) is done, so that it fills the other core while the
    // linker works frame by frame on one.
    let checksum = {
        let path = info.path.clone();
        std::thread::spawn(move || crc32_file(&path).ok().map(|h| format!("{h:08x}")))
    };
    // The track tables too (their text kept for the review page and the analysis, which read
    // it from memory rather than from the file being committed).
    let mut tracks_csv_text = Vec::new();
    let (tracks, linking_qc, resolution, linking) = match linking {
        Some(linking) => {
            let (points, shared_objects_split) = link_detections(detections, &linking);
            tracked = points;
            let mut resolution = resolve_tracks(&mut tracked, &linking.params);
            resolution.shared_objects_split += shared_objects_split;
            let (tracks, text) = write_track_outputs(dir, &mut tracked, &calibration, &mut commits)?;
            tracks_csv_text = text;
            let qc = linking_qc(&tracked, &tracks, &mut neighbour_distances, linking.params.max_step_px);
            (tracks, Some(qc), Some(resolution), Some(linking))
        }
        None => (Vec::new(), None, None, None),
    };
    let warnings = warnings_for(&frames, &info);
    let figures = run_figures(
        &frames,
        &info,
        &diameter,
        params,
        small_object_share,
        linking.as_ref(),
        linking_qc.as_ref(),
    );
    let verdict = judge(&figures);
    let movie_started = Instant::now();
    let view = RunView {
        info: &info,
        per_frame: &frames,
        count_jumps: &figures.count_jumps,
        verdict: Some(&verdict),
        diameter_px: diameter.px(),
    };
    let divisions = resolution.as_ref().map(|r| r.divisions.as_slice()).unwrap_or_default();
    // The analysis needs only tracks.csv and the calibration: it is worked out on a thread of
    // its own while the movie is drawn, so that its one-core stretches (reading the table,
    // the pooled fits) fill the gaps of the movie pass instead of following it on their own.
    let early = outputs.analysis && linking.is_some();
    let tracks_csv = dir.join("tracks.csv");
    let (passed, analysis) = std::thread::scope(|scope| {
        let analysis = early.then(|| {
            scope.spawn(|| {
                let text = std::str::from_utf8(&tracks_csv_text).ok()?;
                EarlyAnalysis::of_run(&tracks_csv, text, &calibration)
            })
        });
        let passed = second_pass(
            stack,
            spool,
            outputs,
            linking.is_some().then_some(&tracks_csv_text[..]),
            &view,
            (&tracked, divisions),
            dir,
        );
        let analysis = analysis.and_then(|h| h.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic)));
        (passed, analysis)
    });
    let (movie, review, reviewed) = passed?;
    let analysis = analysis.map(|early| RunAnalysis { early, reviewed });
    let run = RunOutcome {
        dir: dir.to_path_buf(),
        diameter: diameter.clone(),
        frames,
        tracks,
        linking_qc,
        resolution,
        movie,
        review,
        warnings,
        verdict,
        analysis,
        removal: None,
    };
    commits.wait()?;
    let checksum = checksum.join().expect("the checksum thread only reads a file");
    let record = RunRecord {
        caravan_version: crate::VERSION.to_string(),
        command: command.to_string(),
        verdict: Some(run.verdict.clone()),
        input: RunInput {
            modified_unix_s: crate::output::modified_unix_s(&info.path),
            stack: info,
            crc32: checksum,
            masks: outputs.masks.clone(),
        },
        parameters: RunParameters {
            diameter,
            segment: params.clone(),
            link: linking,
            movie: outputs.movie,
            review: outputs.review.filter(|_| run.review.is_some()),
        },
        counts: RunCounts {
            frames: run.frames.len(),
            detections: run.detections(),
            tracks: run.tracks.len(),
        },
        linking_qc: run.linking_qc.clone(),
        gaps_closed: run.resolution.as_ref().map(|r| r.gaps_closed),
        shared_objects_split: run.resolution.as_ref().map(|r| r.shared_objects_split),
        divisions: run.resolution.as_ref().map(|r| r.divisions.clone()),
        count_jumps: count_jumps(&run.frames),
        per_frame: run.frames.clone(),
        warnings: run.warnings.iter().map(RunWarning::message).collect(),
        timings_s: Timings {
            read_segment_link: first_pass_s,
            movie: movie_started.elapsed().as_secs_f64(),
            total: started.elapsed().as_secs_f64(),
        },
        research_use: RESEARCH_USE.to_string(),
    };
    write_atomic(&dir.join("run.json"), &record.to_bytes())?;
    Ok(run)
}

/// The second pass over the frames, after linking: the QC movie and the review page, each
/// frame read once for both (from the spool of downscaled frames where the first pass kept
/// them, otherwise decoded again). The review page is made from `tracks.csv` as written (its
/// bytes `tracks_csv`, `None` without linking), so that `caravan review` on the folder gives
/// the same page byte for byte; the points read for it and the moments found in them are
/// returned for the report.
fn second_pass(
    stack: &mut Stack,
    spool: Option<&mut OutlineSpool>,
    outputs: &RunOptions,
    tracks_csv: Option<&[u8]>,
    view: &RunView,
    (tracked, divisions): (&[TrackedDetection], &[DivisionEvent]),
    dir: &Path,
) -> Result<SecondPass> {
    let mut reviewed = None;
    let mut review = match (outputs.review, tracks_csv) {
        (Some(options), Some(text)) => {
            let points = read_linked_points_of(&dir.join("tracks.csv"), text)?;
            let input = review_input(&points, view);
            let moments = input.moments.clone();
            reviewed = Some(ReviewedTracks { points, moments });
            Some(ReviewWriter::new(&dir.join("review"), input, &options)?)
        }
        _ => None,
    };
    match (spool, outputs.movie) {
        (Some(s), Some(options)) => {
            let overlay = overlay(tracked, view.per_frame, divisions);
            let (movie, review) = render_movie(stack, s, &overlay, &options, dir, review)?;
            Ok((Some(movie), review, reviewed))
        }
        _ => {
            if let Some(r) = review.as_mut() {
                offer_all_frames(stack, r)?;
            }
            Ok((None, review.map(ReviewWriter::finish).transpose()?, reviewed))
        }
    }
}

/// What [`second_pass`] made: the movie, the review page, and what the page was made from.
type SecondPass = (Option<MovieOutputs>, Option<ReviewOutputs>, Option<ReviewedTracks>);

/// The figures the verdict is judged from.
fn run_figures(
    frames: &[FrameSummary],
    info: &crate::stack::StackInfo,
    diameter: &DiameterSource,
    params: &SegmentParams,
    small_object_share: Option<f64>,
    linking: Option<&ResolvedLinking>,
    qc: Option<&LinkingQc>,
) -> RunFigures {
    let low_diameter_confidence = match diameter {
        DiameterSource::Estimated(e) if e.confidence == Confidence::Low => Some(e.reasons.clone()),
        _ => None,
    };
    let with_next: usize = frames.iter().rev().skip(1).map(|f| f.objects).sum();
    RunFigures {
        objects_per_frame: frames.iter().map(|f| f.objects).collect(),
        frame_area_px: (info.width * info.height) as f64,
        diameter_px: diameter.px(),
        min_area_px: params.min_area_px,
        small_object_share,
        low_diameter_confidence,
        count_jumps: count_jumps(frames),
        persistence: linking
            .filter(|_| with_next >= 20)
            .map(|l| l.motion.confident_steps as f64 / with_next as f64),
        ambiguity_ratio: qc.and_then(|q| q.ambiguity_ratio),
        near_max_step_fraction: qc.and_then(|q| q.near_max_step_fraction),
        max_step: linking.map(|l| (l.params.max_step_px, l.max_step_source == MaxStepSource::Given)),
        short_track_fraction: qc.and_then(|q| q.short_track_fraction),
        motion_unmeasured: linking
            .is_some_and(|l| l.motion.source == MotionSource::Diameter && l.max_step_source != MaxStepSource::Given),
    }
}

/// Measures the recording's motion from the detections' positions and resolves the linking
/// parameters from it and the user's options.
fn resolve_linking(
    detections: &[Vec<crate::tracks::Detection>],
    options: &LinkOptions,
    diameter_px: f64,
) -> ResolvedLinking {
    let positions: Vec<Vec<[f64; 2]>> = detections
        .iter()
        .map(|frame| frame.iter().map(|d| [d.x, d.y]).collect())
        .collect();
    options.resolve(diameter_px, &positions)
}

/// Links every frame in order with `linking`'s parameters; also returns how many objects were
/// split because two tracks entered them.
fn link_detections(
    detections: Vec<Vec<crate::tracks::Detection>>,
    linking: &ResolvedLinking,
) -> (Vec<TrackedDetection>, usize) {
    let mut linker = OnlineLinker::new(linking.params);
    let tracked = detections.into_iter().flat_map(|frame| linker.push(frame)).collect();
    (tracked, linker.shared_objects_split())
}

impl RunOptions {
    /// Whether a run with these outputs writes the file `name` (one of [`RUN_OUTPUTS`]).
    pub fn writes(&self, name: &str) -> bool {
        let linked = self.linking.is_some();
        match name {
            "labels.tif" => self.labels,
            "tracks.csv" | "per_track.csv" => linked,
            "qc_movie.gif" | "qc_sheet.png" => linked && self.movie.is_some(),
            "review" => linked && self.review.is_some(),
            // Made after publishing, from the run's outputs (if asked for).
            "analysis" | "lookalike" => false,
            _ => true,
        }
    }
}

/// The first pass's accumulators: detections.csv, per-frame summaries, the online linker and
/// its output. Frames come in from segmentation or from a checkpoint's log alike.
pub(crate) struct FirstPass {
    csv: AtomicFile,
    /// The columns of `detections.csv`.
    columns: Vec<Column<Detection>>,
    frames: Vec<FrameSummary>,
    /// Each frame's detections, kept for linking (empty without linking).
    detections: Vec<Vec<crate::tracks::Detection>>,
    linking: bool,
    neighbour_distances: Vec<f64>,
    /// Detections at most this large count as barely above the minimum area, px.
    small_object_limit_px: f64,
    /// Detections seen, and those barely above the minimum area.
    object_count: usize,
    small_objects: usize,
}

impl FirstPass {
    pub(crate) fn new(
        dir: &Path,
        outputs: &RunOptions,
        info: &crate::stack::StackInfo,
        params: &SegmentParams,
    ) -> Result<FirstPass> {
        let mut csv = AtomicFile::create(&dir.join("detections.csv"))?;
        let columns = detection_columns(&info.calibration);
        write_header(&mut csv, &columns).map_err(|e| csv.error(e))?;
        Ok(FirstPass {
            csv,
            columns,
            frames: Vec::with_capacity(info.frames),
            detections: Vec::new(),
            linking: outputs.linking.is_some(),
            small_object_limit_px: 1.5 * params.min_area_px,
            object_count: 0,
            small_objects: 0,
            neighbour_distances: Vec::new(),
        })
    }

    /// The outline spool of the movie (durable inside the checkpoint when checkpointing).
    fn spool(
        &self,
        dir: &Path,
        work: &Path,
        outputs: &RunOptions,
        checkpointing: bool,
    ) -> Result<Option<OutlineSpool>> {
        if outputs.linking.is_none() || outputs.movie.is_none() {
            return Ok(None);
        }
        Ok(Some(if checkpointing {
            let path = crate::checkpoint::outlines_path(dir);
            let resuming = !self.frames.is_empty();
            OutlineSpool::durable(&path, resuming)?
        } else {
            OutlineSpool::create(work)?
        }))
    }

    /// Writes one frame's detections, records its summary and links it.
    pub(crate) fn take(&mut self, record: FrameRecord) -> Result<()> {
        write_rows(&mut self.csv, &self.columns, &record.detections).map_err(|e| self.csv.error(e))?;
        self.object_count += record.detections.len();
        self.small_objects += record
            .detections
            .iter()
            .filter(|d| d.area_px <= self.small_object_limit_px)
            .count();
        self.frames.push(FrameSummary {
            frame: record.frame,
            threshold: record.threshold,
            objects: record.detections.len(),
            nonfinite_pixels: record.nonfinite_pixels,
            size_filter: record.size_filter,
        });
        if self.linking {
            let points: Vec<[f64; 2]> = record.detections.iter().map(|d| [d.x, d.y]).collect();
            self.neighbour_distances
                .extend(nearest_neighbour_distances(&points).into_iter().flatten());
            self.detections.push(record.detections);
        }
        Ok(())
    }
}

/// Starts checkpointing (or resumes, returning the logged frames) as the options say.
/// Checkpoints are not kept with `labels.tif`, whose pages cannot be continued.
fn start_checkpoint(
    stack: &mut Stack,
    dir: &Path,
    outputs: &RunOptions,
    params: &SegmentParams,
    diameter: &DiameterSource,
) -> Result<(Option<CheckpointLog>, Vec<FrameRecord>)> {
    let every = match outputs.checkpoint_every {
        Some(k) if !outputs.labels => k,
        _ if outputs.resume => {
            return Err(Error::parameter(
                "--resume",
                "",
                "needs checkpoints, which are not kept with --labels",
            ))
        }
        _ => return Ok((None, Vec::new())),
    };
    let parameters = RunParameters {
        diameter: diameter.clone(),
        segment: params.clone(),
        link: outputs.linking,
        movie: outputs.movie,
        review: outputs.review,
    };
    let fingerprint = Fingerprint::of(stack, serde_json::to_value(&parameters).expect("plain data"))?;
    if outputs.resume {
        let (log, records) = CheckpointLog::resume(dir, fingerprint, every)?;
        let log_path = crate::checkpoint::checkpoint_dir(dir).join("frames.jsonl");
        crate::checkpoint::verify_logged_frames(stack, &records, &log_path, "run without --resume")?;
        Ok((Some(log), records))
    } else {
        Ok((Some(CheckpointLog::start(dir, fingerprint, every)?), Vec::new()))
    }
}

/// Sorts tracked detections by track then frame, writes `tracks.csv` and `per_track.csv`, and
/// returns the per-track summaries.
fn write_track_outputs(
    dir: &Path,
    tracked: &mut [TrackedDetection],
    calibration: &crate::stack::Calibration,
    commits: &mut Commits,
) -> Result<(Vec<TrackSummary>, Vec<u8>)> {
    tracked.sort_by_key(|p| (p.track_id, p.detection.frame));
    let mut file = AtomicFile::create(&dir.join("tracks.csv"))?;
    let mut table = Vec::new();
    write_tracks(&mut table, tracked, calibration).map_err(|e| file.error(e))?;
    std::io::Write::write_all(&mut file, &table).map_err(|e| file.error(e))?;
    commits.start(file);
    let summaries: Vec<TrackSummary> = tracked
        .chunk_by(|a, b| a.track_id == b.track_id)
        .map(|run| {
            let pts: Vec<PathPoint> = run
                .iter()
                .map(|p| PathPoint::new(p.detection.frame, p.detection.x, p.detection.y))
                .collect();
            summarize_track(run[0].track_id, run[0].parent_id, &pts)
        })
        .collect();
    let mut file = AtomicFile::create(&dir.join("per_track.csv"))?;
    write_per_track(&mut file, &summaries, calibration).map_err(|e| file.error(e))?;
    commits.start(file);
    Ok((summaries, table))
}

/// Per-frame track ids of labels, track positions and division marks, for the movie.
fn overlay(tracked: &[TrackedDetection], frames: &[FrameSummary], divisions: &[DivisionEvent]) -> TrackOverlay {
    let mut track_of_label: Vec<Vec<u32>> = frames.iter().map(|f| vec![0; f.objects]).collect();
    let mut points: Vec<Vec<(u32, f64, f64)>> = vec![Vec::new(); frames.len()];
    for p in tracked {
        let d = &p.detection;
        track_of_label[d.frame][d.label as usize - 1] = p.track_id;
        points[d.frame].push((p.track_id, d.x, d.y));
    }
    let divisions = divisions.iter().map(|e| (e.frame, e.x, e.y)).collect();
    TrackOverlay {
        track_of_label,
        points,
        divisions,
    }
}
