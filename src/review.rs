//! The review page of a run (`RUN/review/`): gathers what the page shows from the run's tracks,
//! per-frame summaries and verdict, above all the moments worth a look, and hands the frames to
//! [`crate::render::review`], which draws nothing itself but stores and pages.
//!
//! `track` writes the page in the same pass over the frames as the QC movie; [`write_review`]
//! writes it for a finished run folder (`caravan review RUN`), from `tracks.csv`, `run.json`
//! and the recording.

use crate::analyze::summarize_track;
use crate::columns::read_named_columns_of;
use crate::error::{Error, Result};
use crate::record::{FrameSummary, RunRecord};
use crate::render::review::{
    Moment, MomentKind, ReviewInput, ReviewOptions, ReviewOutputs, ReviewPoint, ReviewTrack, ReviewWriter,
};
use crate::stack::{OpenOptions, Stack, StackInfo, ZMode};
use crate::tracks::PathPoint;
use crate::verdict::RunVerdict;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// A link whose confidence is below this is listed as uncertain: the best alternative cost at
/// most 25% more (our own limit, on the confidence of `link::online::confidence`).
pub const LOW_CONFIDENCE: f64 = 0.2;
/// At most this many moments of one kind are listed (the most telling first).
const MAX_PER_KIND: usize = 200;

/// One tracked object as the review needs it.
#[derive(Debug, Clone, PartialEq)]
pub struct LinkedPoint {
    /// Track id.
    pub track: u32,
    /// Mother track id.
    pub parent: Option<u32>,
    /// The object's label in its frame (two tracks sharing one object share it).
    pub object: u32,
    /// Position, shape and link confidence.
    pub point: ReviewPoint,
}

/// A run's tracks as its review page read them from `tracks.csv`, and the moments worth a
/// look found in them: what the report's frames worth a look are made of, handed over by the
/// run that made the page so that neither is made twice.
#[derive(Debug, Clone)]
pub struct ReviewedTracks {
    /// The linked points, as [`read_linked_points`] reads them.
    pub points: Vec<LinkedPoint>,
    /// The moments, as [`review_input`] finds them.
    pub moments: Vec<crate::render::review::Moment>,
}

/// What the review needs of a run besides its tracks.
pub struct RunView<'a> {
    /// The recording.
    pub info: &'a StackInfo,
    /// Per-frame summaries.
    pub per_frame: &'a [FrameSummary],
    /// Frames whose object count jumps (the verdict's check).
    pub count_jumps: &'a [usize],
    /// The verdict, when the run has one.
    pub verdict: Option<&'a RunVerdict>,
    /// Nucleus diameter, px.
    pub diameter_px: f64,
}

/// The page's content for a run: its tracks with their figures and the moments worth a look.
pub fn review_input(points: &[LinkedPoint], run: &RunView) -> ReviewInput {
    let tracks = review_tracks(points);
    let mut moments = Vec::new();
    moments.extend(count_jump_moments(run));
    moments.extend(division_moments(&tracks));
    moments.extend(merge_moments(points));
    moments.extend(border_moments(&tracks, run));
    moments.extend(gap_moments(&tracks));
    moments.extend(uncertain_link_moments(&tracks));
    ReviewInput {
        title: run
            .info
            .path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default(),
        size: (run.info.width, run.info.height),
        frames: run.info.frames,
        interval_s: run.info.calibration.frame_interval_s,
        pixel_size_um: run.info.calibration.pixel_size_um,
        verdict: verdict_lines(run.verdict),
        tracks,
        moments,
    }
}

/// Tracks in id order with their daughters, speed and directionality
/// ([`summarize_track`], as in `per_track.csv`).
fn review_tracks(points: &[LinkedPoint]) -> Vec<ReviewTrack> {
    let mut by_track: BTreeMap<u32, Vec<&LinkedPoint>> = BTreeMap::new();
    for p in points {
        by_track.entry(p.track).or_default().push(p);
    }
    let mut daughters: BTreeMap<u32, Vec<u32>> = BTreeMap::new();
    for (&id, pts) in &by_track {
        if let Some(mother) = pts[0].parent {
            daughters.entry(mother).or_default().push(id);
        }
    }
    by_track
        .into_iter()
        .map(|(id, mut pts)| {
            pts.sort_by_key(|p| p.point.frame);
            let path: Vec<PathPoint> = pts
                .iter()
                .map(|p| PathPoint::new(p.point.frame, p.point.x, p.point.y))
                .collect();
            let summary = summarize_track(id, pts[0].parent, &path);
            ReviewTrack {
                id,
                parent: pts[0].parent,
                daughters: daughters.remove(&id).unwrap_or_default(),
                speed_px_per_frame: summary.mean_speed_px_per_frame,
                directionality: summary.directionality_ratio,
                points: pts.iter().map(|p| p.point.clone()).collect(),
            }
        })
        .collect()
}

fn moment(frame: usize, kind: MomentKind, track: Option<u32>, note: String) -> Moment {
    Moment {
        frame,
        kind,
        track,
        note,
    }
}

fn count_jump_moments(run: &RunView) -> Vec<Moment> {
    let objects = |t: usize| run.per_frame.get(t).map_or(0, |f| f.objects);
    run.count_jumps
        .iter()
        .take(MAX_PER_KIND)
        .map(|&t| {
            let note = format!("{} objects after {}", objects(t), objects(t.saturating_sub(1)));
            moment(t, MomentKind::CountJump, None, note)
        })
        .collect()
}

fn division_moments(tracks: &[ReviewTrack]) -> Vec<Moment> {
    let first_frame: BTreeMap<u32, usize> = tracks.iter().map(|t| (t.id, t.points[0].frame)).collect();
    tracks
        .iter()
        .filter(|t| !t.daughters.is_empty())
        .take(MAX_PER_KIND)
        .map(|t| {
            let frame = t.daughters.iter().filter_map(|d| first_frame.get(d)).min().copied();
            let names: Vec<String> = t.daughters.iter().map(u32::to_string).collect();
            let note = format!("into tracks {}", names.join(" and "));
            let last = t.points.last().map_or(0, |p| p.frame);
            moment(frame.unwrap_or(last), MomentKind::Division, Some(t.id), note)
        })
        .collect()
}

/// Objects two or more tracks share: one moment per run of consecutive frames of the same
/// tracks.
fn merge_moments(points: &[LinkedPoint]) -> Vec<Moment> {
    let mut sharing: BTreeMap<(usize, u32), Vec<u32>> = BTreeMap::new();
    for p in points {
        sharing.entry((p.point.frame, p.object)).or_default().push(p.track);
    }
    let mut runs: BTreeMap<Vec<u32>, Vec<usize>> = BTreeMap::new();
    for ((frame, _), mut ids) in sharing.into_iter().filter(|(_, ids)| ids.len() > 1) {
        ids.sort_unstable();
        runs.entry(ids).or_default().push(frame);
    }
    let mut moments: Vec<Moment> = Vec::new();
    for (ids, frames) in runs {
        let names: Vec<String> = ids.iter().map(u32::to_string).collect();
        for run in frames.chunk_by(|a, b| b == &(a + 1)) {
            let note = format!("tracks {} in one object for {} frame(s)", names.join(", "), run.len());
            moments.push(moment(run[0], MomentKind::TransientMerge, Some(ids[0]), note));
        }
    }
    moments.sort_by_key(|m| m.frame);
    moments.truncate(MAX_PER_KIND);
    moments
}

/// Tracks that start after the first frame, not as a daughter, or end before the last, not
/// as a mother, farther than one diameter from every edge: a nucleus should not appear or
/// vanish there.
fn border_moments(tracks: &[ReviewTrack], run: &RunView) -> Vec<Moment> {
    let (w, h) = (run.info.width as f64, run.info.height as f64);
    let inside = |p: &ReviewPoint| p.x.min(p.y).min(w - 1.0 - p.x).min(h - 1.0 - p.y) > run.diameter_px;
    let last_frame = run.info.frames.saturating_sub(1);
    let mut starts = Vec::new();
    let mut ends = Vec::new();
    for t in tracks {
        let (first, last) = (&t.points[0], &t.points[t.points.len() - 1]);
        if first.frame > 0 && t.parent.is_none() && inside(first) {
            starts.push(moment(first.frame, MomentKind::StartsInside, Some(t.id), String::new()));
        }
        if last.frame < last_frame && t.daughters.is_empty() && inside(last) {
            ends.push(moment(last.frame, MomentKind::EndsInside, Some(t.id), String::new()));
        }
    }
    starts.truncate(MAX_PER_KIND);
    ends.truncate(MAX_PER_KIND);
    starts.into_iter().chain(ends).collect()
}

fn gap_moments(tracks: &[ReviewTrack]) -> Vec<Moment> {
    let mut moments: Vec<Moment> = tracks
        .iter()
        .flat_map(|t| {
            t.points.windows(2).filter(|w| w[1].frame > w[0].frame + 1).map(|w| {
                let note = format!("{} missing frame(s) bridged", w[1].frame - w[0].frame - 1);
                moment(w[1].frame, MomentKind::ClosedGap, Some(t.id), note)
            })
        })
        .collect();
    moments.sort_by_key(|m| m.frame);
    moments.truncate(MAX_PER_KIND);
    moments
}

/// Links below [`LOW_CONFIDENCE`], the least confident first.
fn uncertain_link_moments(tracks: &[ReviewTrack]) -> Vec<Moment> {
    let mut links: Vec<(f64, usize, u32)> = tracks
        .iter()
        .flat_map(|t| {
            t.points.iter().filter_map(move |p| {
                p.link_confidence
                    .filter(|&c| c < LOW_CONFIDENCE)
                    .map(|c| (c, p.frame, t.id))
            })
        })
        .collect();
    links.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
    links
        .into_iter()
        .take(MAX_PER_KIND)
        .map(|(c, frame, id)| {
            moment(
                frame,
                MomentKind::LowConfidenceLink,
                Some(id),
                format!("confidence {c:.2}"),
            )
        })
        .collect()
}

fn verdict_lines(verdict: Option<&RunVerdict>) -> Vec<String> {
    let Some(v) = verdict else { return Vec::new() };
    std::iter::once(format!("Verdict: {}.", v.verdict.word()))
        .chain(v.findings.iter().map(|f| format!("{} {}", f.reason, f.fix)))
        .collect()
}

/// Hands every frame of `stack` to `writer` (when there is no movie to share the pass with).
///
/// # Errors
/// A frame that cannot be read or written.
pub fn offer_all_frames(stack: &mut Stack, writer: &mut ReviewWriter) -> Result<()> {
    for t in 0..stack.info().frames {
        writer.offer(t, &stack.read_frame(t)?.pixels.to_f32())?;
    }
    Ok(())
}

/// Writes `RUN/review/` for a finished run folder: its `run.json`, its `tracks.csv` and the
/// recording it names (or `recording`, when it has moved).
///
/// # Errors
/// A folder without a linked run, a recording that cannot be found or no longer matches the
/// run, or an output that cannot be written.
pub fn write_review(run_dir: &Path, recording: Option<&Path>, options: &ReviewOptions) -> Result<ReviewOutputs> {
    let record = RunRecord::read(&run_dir.join("run.json"))?;
    let tracks_path = run_dir.join("tracks.csv");
    if !tracks_path.exists() {
        return Err(Error::input(
            run_dir,
            "holds no tracks.csv: a review needs a run of `caravan track`",
        ));
    }
    let points = read_linked_points(&tracks_path)?;
    let mut stack = open_recording(&record, recording)?;
    let view = RunView {
        info: stack.info(),
        per_frame: &record.per_frame,
        count_jumps: &record.count_jumps,
        verdict: record.verdict.as_ref(),
        diameter_px: record.parameters.diameter.px(),
    };
    let input = review_input(&points, &view);
    let mut writer = ReviewWriter::new(&run_dir.join("review"), input, options)?;
    offer_all_frames(&mut stack, &mut writer)?;
    writer.finish()
}

/// Opens the run's recording as the run read it (channel, projection), checking that it still
/// has the run's size.
pub(crate) fn open_recording(record: &RunRecord, given: Option<&Path>) -> Result<Stack> {
    let info = &record.input.stack;
    let path: PathBuf = given.map_or_else(|| info.path.clone(), Path::to_path_buf);
    if !path.exists() {
        return Err(Error::input(
            &path,
            "the run's recording is not there (moved?); give its path with --recording",
        ));
    }
    let options = OpenOptions {
        channel: Some(info.channel),
        z: if info.z_planes > 1 { ZMode::Max } else { ZMode::Refuse },
        pixel_size_um: info.calibration.pixel_size_um,
        frame_interval_s: info.calibration.frame_interval_s,
        ..OpenOptions::default()
    };
    let stack = Stack::open(&path, &options)?;
    let now = stack.info();
    if (now.width, now.height, now.frames) != (info.width, info.height, info.frames) {
        return Err(Error::input(
            &path,
            format!(
                "is {}x{} px with {} frames, but the run read {}x{} px with {} frames",
                now.width, now.height, now.frames, info.width, info.height, info.frames
            ),
        ));
    }
    Ok(stack)
}

/// Reads the columns the review needs from a run's `tracks.csv`.
///
/// # Errors
/// A missing column or a cell that is not a number, naming the file and line.
pub fn read_linked_points(path: &Path) -> Result<Vec<LinkedPoint>> {
    let bytes = std::fs::read(path).map_err(|e| Error::input(path, e.to_string()))?;
    read_linked_points_of(path, &bytes)
}

/// [`read_linked_points`] of the bytes of `tracks.csv` at `path`, already in memory (as a
/// run has just written them).
///
/// # Errors
/// As [`read_linked_points`], but for reading the file.
pub fn read_linked_points_of(path: &Path, bytes: &[u8]) -> Result<Vec<LinkedPoint>> {
    let names = [
        "track_id",
        "parent_id",
        "frame",
        "x",
        "y",
        "major_axis_px",
        "minor_axis_px",
        "orientation_deg",
        "object",
        "link_confidence",
    ];
    read_named_columns_of(path, bytes, &names, |row| {
        Ok(LinkedPoint {
            track: row.whole(0)?,
            parent: row.optional_whole(1)?,
            object: row.whole(8)?,
            point: ReviewPoint {
                frame: row.whole(2)? as usize,
                x: row.number(3)?,
                y: row.number(4)?,
                axes: (row.number(5)?, row.number(6)?),
                angle_deg: row.number(7)?,
                link_confidence: row.optional_number(9)?,
            },
        })
    })
}
