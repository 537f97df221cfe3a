//! Scoring from files: a ground-truth folder (or CSV) and a run folder (or tracks CSV), with
//! the matching radius and border margin derived from the truth when not given.

use super::tracking::{score_tracks, TrackingScore};
use crate::error::{Error, Result};
use crate::link::nearest_neighbour_distances;
use crate::numeric::median;
use crate::tracks::{read_track_points, TrackPoint};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// What is known about the reference besides its points.
#[derive(Debug, Clone, Serialize)]
pub struct ScoreSetup {
    /// The reference CSV read.
    pub truth_csv: PathBuf,
    /// The result CSV read.
    pub tracks_csv: PathBuf,
    /// Matching radius, px, and where it came from.
    pub match_radius_px: f64,
    /// `given`, `half the synthetic diameter` or `half the median neighbour distance`.
    pub match_radius_source: &'static str,
    /// Points closer than this to the image border are left out on both sides, px.
    pub border_margin_px: f64,
    /// Frame size, when the truth folder says it (`scenario.json`).
    pub frame_size: Option<(usize, usize)>,
    /// How result and reference vertices are matched for TRA, DET and detection: `position
    /// within the radius`, or `mask overlap` when both are in the benchmark's layouts.
    pub vertex_matching: &'static str,
}

/// A folder holding `name`, or the file itself.
fn file_in(path: &Path, name: &str) -> PathBuf {
    if path.is_dir() {
        path.join(name)
    } else {
        path.to_path_buf()
    }
}

/// Reads a tracks-like CSV, naming the file in any error.
pub fn read_points(path: &Path) -> Result<Vec<TrackPoint>> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::input(path, e.to_string()))?;
    read_track_points(&text).map_err(|e| Error::input(path, e))
}

/// Scores the tracks in `tracks` (a CSV, or a run folder holding `tracks.csv`) against the
/// truth in `truth` (a CSV with `track_id, parent_id, frame, x, y`, or a folder holding
/// `truth.csv` and, from `caravan synth`, `scenario.json`).
///
/// Defaults: the matching radius is half the nucleus diameter of a synthetic truth, else half
/// the median nearest-neighbour distance of the truth points (so that a point can match only
/// its own nucleus); the border margin is half the synthetic diameter when the frame size is
/// known (a nucleus cut by the border has no well-defined centre), else 0.
///
/// # Errors
/// Missing or malformed files, a margin without a known frame size, non-positive radius.
pub fn score_files(
    truth: &Path,
    tracks: &Path,
    match_radius_px: Option<f64>,
    border_margin_px: Option<f64>,
) -> Result<(ScoreSetup, TrackingScore)> {
    if let Some(scored) = score_both_layouts(truth, tracks, match_radius_px)? {
        return Ok(scored);
    }
    let truth_csv = file_in(truth, "truth.csv");
    let tracks_csv = file_in(tracks, "tracks.csv");
    let reference = read_points(&truth_csv)?;
    let result = read_points(&tracks_csv)?;
    let (diameter, frame_size) = synthetic_facts(truth)?;
    let (radius, source) = match (match_radius_px, diameter) {
        (Some(r), _) => (r, "given"),
        (None, Some(d)) => (d / 2.0, "half the synthetic diameter"),
        (None, None) => (
            half_neighbour_distance(&reference),
            "half the median neighbour distance",
        ),
    };
    if !(radius > 0.0 && radius.is_finite()) {
        return Err(Error::parameter(
            "--match-radius",
            radius,
            "must be a positive number of px (give it when the truth has no two points in one frame)",
        ));
    }
    let margin = border_margin_px.unwrap_or(match (diameter, frame_size) {
        (Some(d), Some(_)) => d / 2.0,
        _ => 0.0,
    });
    if margin > 0.0 && frame_size.is_none() {
        return Err(Error::parameter(
            "--border-margin",
            margin,
            "needs the frame size, which only a synthetic truth folder (scenario.json) gives",
        ));
    }
    let keep = |v: Vec<TrackPoint>| inside(v, margin, frame_size);
    let score = score_tracks(&keep(reference), &keep(result), radius);
    let setup = ScoreSetup {
        truth_csv,
        tracks_csv,
        match_radius_px: radius,
        match_radius_source: source,
        border_margin_px: margin,
        frame_size,
        vertex_matching: "position within the radius",
    };
    Ok((setup, score))
}

/// Scoring when the truth is a folder in the ground-truth layout and the tracks a folder in
/// the result layout (see [`super::layout`]); `None` otherwise.
fn score_both_layouts(truth: &Path, tracks: &Path, radius: Option<f64>) -> Result<Option<(ScoreSetup, TrackingScore)>> {
    let layout = |p: &Path, kind: &str| -> Result<Option<crate::export::Layout>> {
        if !p.is_dir() {
            return Ok(None);
        }
        Ok(crate::export::recognise_layout(p)?.filter(|l| l.kind == kind))
    };
    let (Some(t), Some(r)) = (layout(truth, "ground truth")?, layout(tracks, "result")?) else {
        return Ok(None);
    };
    let (reference, result) = (super::layout::read_sequence(&t)?, super::layout::read_sequence(&r)?);
    let (radius_px, score) = super::layout::score_layouts(&reference, &result, radius);
    let setup = ScoreSetup {
        truth_csv: truth.join("TRA/man_track.txt"),
        tracks_csv: tracks.join("res_track.txt"),
        match_radius_px: radius_px,
        match_radius_source: if radius.is_some() {
            "given"
        } else {
            "half the median reference diameter"
        },
        border_margin_px: 0.0,
        frame_size: Some(reference.size),
        vertex_matching: "mask overlap (a result object matches the reference object it covers more than half of)",
    };
    Ok(Some((setup, score)))
}

/// Nucleus diameter (px) and frame size of a synthetic truth.
type SyntheticFacts = (Option<f64>, Option<(usize, usize)>);

/// Diameter and frame size from a synthetic truth folder's `scenario.json`, if there is one.
fn synthetic_facts(truth: &Path) -> Result<SyntheticFacts> {
    let path = truth.join("scenario.json");
    if !truth.is_dir() || !path.exists() {
        return Ok((None, None));
    }
    let text = std::fs::read_to_string(&path).map_err(|e| Error::input(&path, e.to_string()))?;
    let v: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| Error::input(&path, format!("not valid JSON: {e}")))?;
    let s = &v["synth"];
    let size = s["width"].as_u64().zip(s["height"].as_u64());
    Ok((s["diameter_px"].as_f64(), size.map(|(w, h)| (w as usize, h as usize))))
}

fn half_neighbour_distance(points: &[TrackPoint]) -> f64 {
    let mut frames: std::collections::BTreeMap<usize, Vec<[f64; 2]>> = Default::default();
    for p in points {
        frames.entry(p.frame).or_default().push([p.x, p.y]);
    }
    let mut d: Vec<f64> = frames
        .values()
        .flat_map(|f| nearest_neighbour_distances(f).into_iter().flatten())
        .collect();
    median(&mut d).map(|m| m / 2.0).unwrap_or(f64::NAN)
}

/// Points at least `margin` px inside the frame (all points when the size is unknown).
fn inside(points: Vec<TrackPoint>, margin: f64, size: Option<(usize, usize)>) -> Vec<TrackPoint> {
    let Some((w, h)) = size else { return points };
    let (w, h) = (w as f64, h as f64);
    points
        .into_iter()
        .filter(|q| q.x >= margin && q.y >= margin && q.x <= w - 1.0 - margin && q.y <= h - 1.0 - margin)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(x: f64, y: f64) -> TrackPoint {
        TrackPoint {
            track_id: 1,
            parent_id: None,
            frame: 0,
            x,
            y,
        }
    }

    #[test]
    fn points_count_only_at_least_the_margin_inside_the_frame() {
        // Source: definition (pixel centres run from 0 to w − 1): in a 100 x 80 frame with a
        // 5 px margin, x and y from 5 to 94 and 74 are inside; 94.5 and 74.5 are not.
        let kept = |x, y| inside(vec![point(x, y)], 5.0, Some((100, 80))).len();
        assert_eq!(kept(5.0, 5.0), 1);
        assert_eq!(kept(94.0, 74.0), 1);
        assert_eq!(kept(94.5, 40.0), 0);
        assert_eq!(kept(40.0, 74.5), 0);
        assert_eq!(kept(4.9, 40.0), 0);
        assert_eq!(inside(vec![point(-3.0, 0.0)], 5.0, None).len(), 1);
    }

    #[test]
    fn a_synthetic_truth_gives_the_radius_and_margin_from_its_diameter() {
        // Source: the documented defaults of `caravan score` (README, "Scoring tracks against
        // ground truth"): half the synthetic diameter as the match radius and as the border
        // margin, from the truth folder's scenario.json; without it, half the median
        // nearest-neighbour distance (20 px apart: 10) and no margin.
        let dir = tempfile::tempdir().unwrap();
        let csv = "track_id,parent_id,frame,x,y\n1,,0,20,20\n2,,0,40,20\n";
        std::fs::write(dir.path().join("truth.csv"), csv).unwrap();
        std::fs::write(dir.path().join("tracks.csv"), csv).unwrap();
        let (setup, _) = score_files(dir.path(), dir.path(), None, None).unwrap();
        assert_eq!((setup.match_radius_px, setup.border_margin_px), (10.0, 0.0));
        let scenario = r#"{"synth": {"diameter_px": 12.0, "width": 64, "height": 48}}"#;
        std::fs::write(dir.path().join("scenario.json"), scenario).unwrap();
        let (setup, _) = score_files(dir.path(), dir.path(), None, None).unwrap();
        assert_eq!((setup.match_radius_px, setup.border_margin_px), (6.0, 6.0));
        assert_eq!(setup.frame_size, Some((64, 48)));
    }
}
