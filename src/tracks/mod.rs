//! The records that flow between stages: a [`Detection`] is one segmented nucleus in one
//! frame. This module also owns their CSV form. No maths beyond bookkeeping.

use crate::stack::Calibration;
use std::io::{self, Write};

/// One segmented nucleus in one frame.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Detection {
    /// Frame number, from 0.
    pub frame: usize,
    /// Label of the object in that frame's label image (from 1).
    pub label: u32,
    /// Centroid column, px.
    pub x: f64,
    /// Centroid row, px.
    pub y: f64,
    /// Pixels in the object.
    pub area_px: f64,
    /// Diameter of the disc of the same area, px.
    pub equivalent_diameter_px: f64,
    /// Mean raw intensity.
    pub mean_intensity: f64,
    /// Sum of raw intensities.
    pub total_intensity: f64,
    /// Major axis of the moment-equivalent ellipse, px.
    pub major_axis_px: f64,
    /// Minor axis of the moment-equivalent ellipse, px.
    pub minor_axis_px: f64,
    /// Major-axis angle from +x toward +y, degrees in (−90, 90].
    pub orientation_deg: f64,
    /// Whether the object touches the image border (its measurements are cut).
    pub touches_border: bool,
}

/// A detection placed on a track.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackedDetection {
    /// Track identifier (from 1, in order of first appearance).
    pub track_id: u32,
    /// The track this one divided from, if any.
    pub parent_id: Option<u32>,
    /// The detection itself.
    pub detection: Detection,
    /// Squared displacement from the predicted position (px²); `None` where a track starts.
    pub link_cost_px2: Option<f64>,
    /// Confidence of the link into this point (see `link::online::confidence`).
    pub link_confidence: Option<f64>,
}

/// The header of `detections.csv`.
pub const DETECTIONS_HEADER: &str = "frame,object,x,y,x_um,y_um,time_s,area_px,equivalent_diameter_px,mean_intensity,total_intensity,major_axis_px,minor_axis_px,orientation_deg,touches_border";

/// Writes the header line of `detections.csv`.
pub fn write_detections_header(out: &mut impl Write) -> io::Result<()> {
    writeln!(out, "{DETECTIONS_HEADER}")
}

/// Writes detections as CSV rows; physical columns are empty when uncalibrated. Numbers are
/// printed with fixed decimals so that outputs are byte-identical between runs.
pub fn write_detections(out: &mut impl Write, detections: &[Detection], calibration: &Calibration) -> io::Result<()> {
    for d in detections {
        writeln!(out, "{},{},{}", d.frame, d.label, measurement_fields(d, calibration))?;
    }
    Ok(())
}

/// `x,y,x_um,y_um,time_s,area_px,...,touches_border` of one detection.
fn measurement_fields(d: &Detection, calibration: &Calibration) -> String {
    let (xu, yu) = match calibration.pixel_size_um {
        Some(s) => (format!("{:.4}", d.x * s), format!("{:.4}", d.y * s)),
        None => (String::new(), String::new()),
    };
    let t = calibration
        .frame_interval_s
        .map(|s| format!("{:.3}", d.frame as f64 * s))
        .unwrap_or_default();
    format!(
        "{:.4},{:.4},{xu},{yu},{t},{},{:.4},{:.4},{:.2},{:.4},{:.4},{:.3},{}",
        d.x,
        d.y,
        d.area_px,
        d.equivalent_diameter_px,
        d.mean_intensity,
        d.total_intensity,
        d.major_axis_px,
        d.minor_axis_px,
        d.orientation_deg,
        d.touches_border as u8
    )
}

/// The header of `tracks.csv`.
pub const TRACKS_HEADER: &str = "track_id,parent_id,frame,x,y,x_um,y_um,time_s,area_px,equivalent_diameter_px,mean_intensity,total_intensity,major_axis_px,minor_axis_px,orientation_deg,touches_border,object,link_cost_px2,link_confidence";

/// Writes `tracks.csv`: the header, then `points` in the order given (callers sort by track,
/// then frame). Link columns are empty where a track starts.
pub fn write_tracks(out: &mut impl Write, points: &[TrackedDetection], calibration: &Calibration) -> io::Result<()> {
    writeln!(out, "{TRACKS_HEADER}")?;
    for p in points {
        let parent = p.parent_id.map(|v| v.to_string()).unwrap_or_default();
        let cost = p.link_cost_px2.map(|c| format!("{c:.4}")).unwrap_or_default();
        let confidence = p.link_confidence.map(|c| format!("{c:.4}")).unwrap_or_default();
        let d = &p.detection;
        writeln!(
            out,
            "{},{parent},{},{},{},{cost},{confidence}",
            p.track_id,
            d.frame,
            measurement_fields(d, calibration),
            d.label
        )?;
    }
    Ok(())
}

/// A point of a ground-truth or result track, as in `truth.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackPoint {
    /// Track identifier (from 1).
    pub track_id: u32,
    /// Track this one divided from, if any.
    pub parent_id: Option<u32>,
    /// Frame number.
    pub frame: usize,
    /// Column, px.
    pub x: f64,
    /// Row, px.
    pub y: f64,
}

/// The header of a tracks-like CSV (`truth.csv`).
pub const TRACK_POINTS_HEADER: &str = "track_id,parent_id,frame,x,y";

/// Writes track points; `parent_id` is empty for tracks without a parent.
pub fn write_track_points(out: &mut impl Write, points: &[TrackPoint]) -> io::Result<()> {
    writeln!(out, "{TRACK_POINTS_HEADER}")?;
    for p in points {
        let parent = p.parent_id.map(|v| v.to_string()).unwrap_or_default();
        writeln!(out, "{},{parent},{},{:.4},{:.4}", p.track_id, p.frame, p.x, p.y)?;
    }
    Ok(())
}

/// Reads track points written by [`write_track_points`] (or by hand with the same columns, in
/// any order; extra columns ignored).
pub fn read_track_points(text: &str) -> Result<Vec<TrackPoint>, String> {
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().ok_or("empty file")?.split(',').map(str::trim).collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| *h == name)
            .ok_or(format!("missing column {name}"))
    };
    let (ti, pi, fi, xi, yi) = (
        col("track_id")?,
        col("parent_id").ok(),
        col("frame")?,
        col("x")?,
        col("y")?,
    );
    let mut points = Vec::new();
    for (n, line) in lines.enumerate().filter(|(_, l)| !l.trim().is_empty()) {
        let cells: Vec<&str> = line.split(',').map(str::trim).collect();
        let get = |i: usize| cells.get(i).copied().ok_or(format!("line {}: too few columns", n + 2));
        let bad = |what: &str| format!("line {}: {what} is not a finite number", n + 2);
        points.push(TrackPoint {
            track_id: get(ti)?.parse().map_err(|_| bad("track_id"))?,
            parent_id: match pi.map(get).transpose()? {
                Some("") | None => None,
                Some(v) => Some(v.parse().map_err(|_| bad("parent_id"))?),
            },
            frame: get(fi)?.parse().map_err(|_| bad("frame"))?,
            x: finite(get(xi)?).ok_or_else(|| bad("x"))?,
            y: finite(get(yi)?).ok_or_else(|| bad("y"))?,
        });
    }
    Ok(points)
}

fn finite(cell: &str) -> Option<f64> {
    cell.parse::<f64>().ok().filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn track_points_round_trip() {
        let pts = vec![
            TrackPoint {
                track_id: 1,
                parent_id: None,
                frame: 0,
                x: 1.5,
                y: 2.25,
            },
            TrackPoint {
                track_id: 2,
                parent_id: Some(1),
                frame: 3,
                x: 10.0,
                y: 0.0,
            },
        ];
        let mut buf = Vec::new();
        write_track_points(&mut buf, &pts).unwrap();
        assert_eq!(read_track_points(std::str::from_utf8(&buf).unwrap()).unwrap(), pts);
        assert!(read_track_points("track_id,frame\n1,2\n")
            .unwrap_err()
            .contains("missing column x"));
    }
}
