//! Statistics of tracks: the per-track summary written with every run (`per_track.csv`, in
//! pixels and frames), and the migration analysis of `caravan analyze` and `compare` in
//! physical units (reading, filters, motility, MSD and its fits, circular statistics,
//! collective order, condition comparison). No drawing here.

pub mod border;
pub mod circular;
pub mod collective;
pub mod compare;
pub mod factor;
pub mod geometry;
pub mod models;
pub mod motility;
pub mod msd;
pub mod outputs;
pub mod population;
pub mod profiles;
pub mod resample;
pub mod run;
pub mod stats;
pub mod stream;
pub mod table;

use crate::columns::{write_table, Column};
use crate::stack::Calibration;
use crate::tracks::PathPoint;
use serde::Serialize;
use std::io::{self, Write};

/// One track's summary, in pixels and frames (physical units are derived when writing).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrackSummary {
    /// Track identifier.
    pub track_id: u32,
    /// The track it divided from, if any.
    pub parent_id: Option<u32>,
    /// First frame.
    pub first_frame: usize,
    /// Last frame.
    pub last_frame: usize,
    /// Points on the track.
    pub points: usize,
    /// Sum of step lengths, px.
    pub path_length_px: f64,
    /// Distance from the first to the last point, px.
    pub net_displacement_px: f64,
    /// Net displacement / path length (`None` for a track that never moved).
    pub directionality_ratio: Option<f64>,
    /// Mean length of the steps between consecutive frames, px per frame (`None` without
    /// one): a step across missing frames is a chord and would bias the speed low.
    pub mean_speed_px_per_frame: Option<f64>,
    /// Frames missing inside the track (closed gaps).
    pub missing_frames: usize,
    /// Direction of the net displacement, degrees from +x toward +y (`None` if zero).
    pub mean_direction_deg: Option<f64>,
}

/// Summarises a track from its `(frame, x, y)` points in frame order.
///
/// # Method
/// Straightness (directionality ratio) and speed as in D. M. Gorelik & A. Gautreau (2014),
/// "Quantitative and unbiased analysis of directional persistence in cell migration", Nat.
/// Protoc. 9(8):1931–1943, doi:10.1038/nprot.2014.131. The ratio falls with track duration, so
/// compare it only between tracks of equal span and frame interval.
pub fn summarize_track(track_id: u32, parent_id: Option<u32>, points: &[PathPoint]) -> TrackSummary {
    let path: f64 = points
        .windows(2)
        .map(|w| (w[1].x - w[0].x).hypot(w[1].y - w[0].y))
        .sum();
    let (first, last) = (points[0], points[points.len() - 1]);
    let (dx, dy) = (last.x - first.x, last.y - first.y);
    let net = dx.hypot(dy);
    let consecutive: Vec<f64> = points
        .windows(2)
        .filter(|w| w[1].frame == w[0].frame + 1)
        .map(|w| (w[1].x - w[0].x).hypot(w[1].y - w[0].y))
        .collect();
    TrackSummary {
        track_id,
        parent_id,
        first_frame: first.frame,
        last_frame: last.frame,
        points: points.len(),
        path_length_px: path,
        net_displacement_px: net,
        directionality_ratio: (path > 0.0).then(|| net / path),
        mean_speed_px_per_frame: (!consecutive.is_empty())
            .then(|| consecutive.iter().sum::<f64>() / consecutive.len() as f64),
        missing_frames: last.frame - first.frame + 1 - points.len(),
        mean_direction_deg: (net > 0.0).then(|| dy.atan2(dx).to_degrees()),
    }
}

/// The columns of `per_track.csv`; physical columns are empty when uncalibrated, and
/// undefined values (a single point, a track that never moved) are empty.
pub fn per_track_columns(calibration: &Calibration) -> Vec<Column<TrackSummary>> {
    let um = calibration.pixel_size_um;
    let dt = calibration.frame_interval_s;
    vec![
        Column::shown("track_id", |t: &TrackSummary| Some(t.track_id)),
        Column::shown("parent_id", |t: &TrackSummary| t.parent_id),
        Column::shown("first_frame", |t: &TrackSummary| Some(t.first_frame)),
        Column::shown("last_frame", |t: &TrackSummary| Some(t.last_frame)),
        Column::shown("points", |t: &TrackSummary| Some(t.points)),
        Column::shown("missing_frames", |t: &TrackSummary| Some(t.missing_frames)),
        Column::fixed("duration_s", 3, move |t: &TrackSummary| {
            dt.map(|s| s * (t.last_frame - t.first_frame) as f64)
        }),
        Column::fixed("path_length_px", 4, |t: &TrackSummary| Some(t.path_length_px)),
        Column::fixed("net_displacement_px", 4, |t: &TrackSummary| Some(t.net_displacement_px)),
        Column::fixed("path_length_um", 4, move |t: &TrackSummary| {
            um.map(|p| p * t.path_length_px)
        }),
        Column::fixed("net_displacement_um", 4, move |t: &TrackSummary| {
            um.map(|p| p * t.net_displacement_px)
        }),
        Column::fixed("directionality_ratio", 6, |t: &TrackSummary| t.directionality_ratio),
        Column::fixed("mean_speed_px_per_frame", 6, |t: &TrackSummary| {
            t.mean_speed_px_per_frame
        }),
        Column::fixed("mean_speed_um_per_min", 6, move |t: &TrackSummary| {
            match (t.mean_speed_px_per_frame, um, dt) {
                (Some(v), Some(p), Some(s)) => Some(v * p / (s / 60.0)),
                _ => None,
            }
        }),
        Column::fixed("mean_direction_deg", 3, |t: &TrackSummary| t.mean_direction_deg),
    ]
}

/// Writes `per_track.csv` (see [`per_track_columns`]).
pub fn write_per_track(out: &mut impl Write, tracks: &[TrackSummary], calibration: &Calibration) -> io::Result<()> {
    write_table(out, &per_track_columns(calibration), tracks)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn worked_track_from_methods() {
        // Source: fixtures/methods/check_values.md §9 worked track (µm), (0,0),(1,0),(2,1),(2,2),(3,2),(5,2), Δt = 2 min:
        // path 6.414214, net 5.385165, ratio 0.839567, mean speed 0.641421 µm/min.
        let pts: Vec<PathPoint> = [(0., 0.), (1., 0.), (2., 1.), (2., 2.), (3., 2.), (5., 2.)]
            .iter()
            .enumerate()
            .map(|(i, p)| PathPoint::new(i, p.0, p.1))
            .collect();
        let s = summarize_track(1, None, &pts);
        assert!((s.path_length_px - 6.414214).abs() < 1e-6);
        assert!((s.net_displacement_px - 5.385165).abs() < 1e-6);
        assert!((s.directionality_ratio.unwrap() - 0.839567).abs() < 1e-6);
        let cal = Calibration {
            pixel_size_um: Some(1.0),
            frame_interval_s: Some(120.0),
            ..Calibration::unknown()
        };
        let mut buf = Vec::new();
        write_per_track(&mut buf, &[s], &cal).unwrap();
        let row: Vec<String> = String::from_utf8(buf)
            .unwrap()
            .lines()
            .nth(1)
            .unwrap()
            .split(',')
            .map(String::from)
            .collect();
        assert_eq!(row[13], "0.641421");
        assert_eq!(row[5], "0");
        assert_eq!(row[6], "600.000");
        // atan2(2, 5) = 21.801° (trigonometry).
        assert_eq!(row[14], "21.801");
    }
}
