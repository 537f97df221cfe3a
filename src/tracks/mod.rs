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
    /// Distance from the position the track was predicted at, px; `None` where a track starts.
    pub distance_from_prediction_px: Option<f64>,
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
    let mut out = String::with_capacity(128);
    let o = &mut out;
    push_field(o, Some(d.x), 4);
    push_field(o, Some(d.y), 4);
    let size = calibration.pixel_size_um;
    push_field(o, size.map(|s| d.x * s), 4);
    push_field(o, size.map(|s| d.y * s), 4);
    push_field(o, calibration.frame_interval_s.map(|s| d.frame as f64 * s), 3);
    // Areas are whole pixel counts, printed as Rust prints an `f64`.
    o.push_str(&d.area_px.to_string());
    o.push(',');
    push_field(o, Some(d.equivalent_diameter_px), 4);
    push_field(o, Some(d.mean_intensity), 4);
    push_field(o, Some(d.total_intensity), 2);
    push_field(o, Some(d.major_axis_px), 4);
    push_field(o, Some(d.minor_axis_px), 4);
    push_field(o, Some(d.orientation_deg), 3);
    o.push(if d.touches_border { '1' } else { '0' });
    out
}

/// One CSV field and its comma: `v` with fixed decimals, or nothing when absent.
fn push_field(out: &mut String, v: Option<f64>, decimals: usize) {
    if let Some(v) = v {
        push_fixed(out, v, decimals);
    }
    out.push(',');
}

/// Appends `v` with `decimals` digits after the point, exactly as `format!("{v:.decimals$}")`
/// would (the nearest decimal to the exact binary value), without the formatter's slow exact
/// path in the common case: the value is scaled and rounded in integers when it is small
/// enough that the scaling error (half a unit in the last place, at most 2⁻¹³ below 2⁴⁰)
/// cannot move it across a rounding boundary, i.e. when it is not within 10⁻³ of a tie.
/// Ties, large values and non-finite values go through the formatter.
pub fn push_fixed(out: &mut String, v: f64, decimals: usize) {
    const POWERS: [f64; 7] = [1.0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6];
    const LIMIT: f64 = (1u64 << 40) as f64;
    let scaled = v.abs() * POWERS.get(decimals).copied().unwrap_or(f64::NAN);
    let fraction = scaled - scaled.floor();
    let small = scaled < LIMIT; // false for NaN and infinity too
    if !small || (fraction - 0.5).abs() < 1e-3 {
        use std::fmt::Write;
        write!(out, "{v:.decimals$}").expect("writing to a String");
        return;
    }
    let digits = (scaled.round() as u64).to_string();
    if v.is_sign_negative() {
        out.push('-');
    }
    if digits.len() <= decimals {
        out.push('0');
        if decimals > 0 {
            out.push('.');
            (digits.len()..decimals).for_each(|_| out.push('0'));
            out.push_str(&digits);
        }
    } else {
        let (whole, part) = digits.split_at(digits.len() - decimals);
        out.push_str(whole);
        if decimals > 0 {
            out.push('.');
            out.push_str(part);
        }
    }
}

/// The header of `tracks.csv`.
pub const TRACKS_HEADER: &str = "track_id,parent_id,frame,x,y,x_um,y_um,time_s,area_px,equivalent_diameter_px,mean_intensity,total_intensity,major_axis_px,minor_axis_px,orientation_deg,touches_border,object,distance_from_prediction_px,link_confidence";

/// Writes `tracks.csv`: the header, then `points` in the order given (callers sort by track,
/// then frame). Link columns are empty where a track starts.
pub fn write_tracks(out: &mut impl Write, points: &[TrackedDetection], calibration: &Calibration) -> io::Result<()> {
    writeln!(out, "{TRACKS_HEADER}")?;
    for p in points {
        let parent = p.parent_id.map(|v| v.to_string()).unwrap_or_default();
        let cost = p
            .distance_from_prediction_px
            .map(|c| format!("{c:.4}"))
            .unwrap_or_default();
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
    fn fixed_decimals_match_the_standard_formatter() {
        // Reference: Rust's own `{:.N}` formatting (correctly rounded), on values around
        // every magnitude the tables print, exact ties, negative zero and non-finite values.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut values = vec![
            0.0,
            -0.0,
            0.5,
            1.5,
            2.5,
            0.125,
            0.0005,
            -0.00004,
            1e12,
            1e-9,
            f64::NAN,
            f64::INFINITY,
        ];
        for _ in 0..200_000 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let mantissa = (state >> 11) as f64 / (1u64 << 53) as f64;
            let exponent = (state % 17) as i32 - 6;
            let sign = if state & 1 == 0 { 1.0 } else { -1.0 };
            values.push(sign * mantissa * 10f64.powi(exponent));
        }
        for &v in &values {
            for decimals in 0..=6 {
                let mut ours = String::new();
                push_fixed(&mut ours, v, decimals);
                assert_eq!(ours, format!("{v:.decimals$}"), "{v:e} to {decimals} decimals");
            }
        }
    }

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
