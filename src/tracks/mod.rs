//! The records that flow between stages: a [`Detection`] is one segmented nucleus in one
//! frame. This module also owns their CSV form. No maths beyond bookkeeping.

use crate::columns::{write_table, write_table_in_parallel, Column};
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

/// One point of a track's path: the frame and the position (px, or the analysis's length
/// unit once calibrated).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PathPoint {
    /// Frame number.
    pub frame: usize,
    /// Column (x).
    pub x: f64,
    /// Row (y).
    pub y: f64,
}

impl PathPoint {
    /// The point at `(x, y)` in `frame`.
    pub fn new(frame: usize, x: f64, y: f64) -> Self {
        PathPoint { frame, x, y }
    }
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

/// The measurement columns of a detection (`x` to `touches_border`), shared by
/// `detections.csv` and `tracks.csv`; physical columns are empty when uncalibrated.
fn measurement_columns(calibration: &Calibration) -> Vec<Column<Detection>> {
    let size = calibration.pixel_size_um;
    let interval = calibration.frame_interval_s;
    vec![
        Column::fixed("x", 4, |d: &Detection| Some(d.x)),
        Column::fixed("y", 4, |d: &Detection| Some(d.y)),
        Column::fixed("x_um", 4, move |d: &Detection| size.map(|s| d.x * s)),
        Column::fixed("y_um", 4, move |d: &Detection| size.map(|s| d.y * s)),
        Column::fixed("time_s", 3, move |d: &Detection| interval.map(|s| d.frame as f64 * s)),
        // Areas are whole pixel counts, printed as Rust prints an `f64`.
        Column::shown("area_px", |d: &Detection| Some(d.area_px)),
        Column::fixed("equivalent_diameter_px", 4, |d: &Detection| {
            Some(d.equivalent_diameter_px)
        }),
        Column::fixed("mean_intensity", 4, |d: &Detection| {
            Some(d.mean_intensity).filter(|v| v.is_finite())
        }),
        Column::fixed("total_intensity", 2, |d: &Detection| {
            Some(d.total_intensity).filter(|v| v.is_finite())
        }),
        Column::fixed("major_axis_px", 4, |d: &Detection| Some(d.major_axis_px)),
        Column::fixed("minor_axis_px", 4, |d: &Detection| Some(d.minor_axis_px)),
        Column::fixed("orientation_deg", 3, |d: &Detection| Some(d.orientation_deg)),
        Column::shown("touches_border", |d: &Detection| Some(u8::from(d.touches_border))),
    ]
}

/// The columns of `detections.csv`: frame, object label, then the measurements.
pub fn detection_columns(calibration: &Calibration) -> Vec<Column<Detection>> {
    let mut columns = vec![
        Column::shown("frame", |d: &Detection| Some(d.frame)),
        Column::shown("object", |d: &Detection| Some(d.label)),
    ];
    columns.extend(measurement_columns(calibration));
    columns
}

/// The columns of `tracks.csv`: track and parent, frame, the measurements, the object label,
/// and the link into the point (empty where a track starts).
pub fn track_columns(calibration: &Calibration) -> Vec<Column<TrackedDetection>> {
    let mut columns = vec![
        Column::shown("track_id", |p: &TrackedDetection| Some(p.track_id)),
        Column::shown("parent_id", |p: &TrackedDetection| p.parent_id),
        Column::shown("frame", |p: &TrackedDetection| Some(p.detection.frame)),
    ];
    columns.extend(
        measurement_columns(calibration)
            .into_iter()
            .map(|c| c.within(|p: &TrackedDetection| &p.detection)),
    );
    columns.extend([
        Column::shown("object", |p: &TrackedDetection| Some(p.detection.label)),
        Column::fixed("distance_from_prediction_px", 4, |p: &TrackedDetection| {
            p.distance_from_prediction_px
        }),
        Column::fixed("link_confidence", 4, |p: &TrackedDetection| p.link_confidence),
    ]);
    columns
}

/// Writes `tracks.csv`: the header, then `points` in the order given (callers sort by track,
/// then frame).
pub fn write_tracks(out: &mut impl Write, points: &[TrackedDetection], calibration: &Calibration) -> io::Result<()> {
    write_table_in_parallel(out, &track_columns(calibration), points)
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

/// The columns of a tracks-like CSV (`truth.csv`); `parent_id` is empty for tracks without
/// a parent.
pub fn track_point_columns() -> Vec<Column<TrackPoint>> {
    vec![
        Column::shown("track_id", |p: &TrackPoint| Some(p.track_id)),
        Column::shown("parent_id", |p: &TrackPoint| p.parent_id),
        Column::shown("frame", |p: &TrackPoint| Some(p.frame)),
        Column::fixed("x", 4, |p: &TrackPoint| Some(p.x)),
        Column::fixed("y", 4, |p: &TrackPoint| Some(p.y)),
    ]
}

/// Writes track points (see [`track_point_columns`]).
pub fn write_track_points(out: &mut impl Write, points: &[TrackPoint]) -> io::Result<()> {
    write_table(out, &track_point_columns(), points)
}

/// One row of a tracks table as read: the columns every tracks CSV has (`track_id, frame, x,
/// y`, optionally `parent_id`), the optional calibrated ones (`x_um`, `time_s`), and the line
/// it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackRow {
    /// Line number in the file (the header is line 1).
    pub line: usize,
    /// Track id.
    pub track_id: u32,
    /// Mother track id, if any.
    pub parent_id: Option<u32>,
    /// Frame number.
    pub frame: usize,
    /// Column, px.
    pub x: f64,
    /// Row, px.
    pub y: f64,
    /// Column in µm, when the table has it and the cell is a finite number.
    pub x_um: Option<f64>,
    /// Time in s, when the table has it and the cell is a finite number.
    pub time_s: Option<f64>,
}

/// Reads any tracks CSV (ours, a truth table, a model's output): through the `csv` crate, so
/// quoted fields and a byte-order mark are read as a spreadsheet writes them; columns found by
/// name, in any order, extra columns ignored; blank lines skipped.
///
/// # Errors
/// An empty file, a missing column (`track_id, frame, x, y`), a short row, an id or frame that
/// is not a whole number, or a position that is not a finite number, each with its line.
pub fn read_track_rows(text: &str) -> Result<Vec<TrackRow>, String> {
    let text = text.trim_start_matches('\u{feff}');
    // Line numbers from byte offsets: the reader's own count skips blank lines, and a record's
    // position may point at the line ends before it, so start at its first other byte.
    // Records come in order, so the count carries on from the previous record (linear time).
    let bytes = text.as_bytes();
    let (mut counted_to, mut newlines) = (0usize, 0usize);
    let mut line_of = |byte: u64| {
        let start = (byte as usize..bytes.len())
            .find(|&i| bytes[i] != b'\r' && bytes[i] != b'\n')
            .unwrap_or(bytes.len());
        if start >= counted_to {
            newlines += bytes[counted_to..start].iter().filter(|&&b| b == b'\n').count();
            counted_to = start;
        }
        1 + newlines
    };
    // Cells are trimmed as they are read (as the reader's own `Trim::All` would, Unicode
    // whitespace included), and one record is reused: trimming by the reader allocated two new
    // records per row, most of the time of reading a large table.
    let mut reader = csv::ReaderBuilder::new().flexible(true).from_reader(text.as_bytes());
    let header: Vec<String> = (reader.headers().map_err(|e| e.to_string())?.iter())
        .map(|h| h.trim().to_string())
        .collect();
    if header.is_empty() || header.iter().all(String::is_empty) {
        return Err("empty file".into());
    }
    let col = |name: &str| header.iter().position(|h| h == name);
    let need = |name: &str| col(name).ok_or_else(|| format!("missing column {name} (needs track_id, frame, x, y)"));
    let (ti, fi, xi, yi) = (need("track_id")?, need("frame")?, need("x")?, need("y")?);
    let (pi, xu, ts) = (col("parent_id"), col("x_um"), col("time_s"));
    let mut rows = Vec::new();
    let mut record = csv::StringRecord::new();
    while reader.read_record(&mut record).map_err(|e| e.to_string())? {
        if record.iter().all(|c| c.trim().is_empty()) {
            continue;
        }
        let line = record.position().map_or(0, |p| line_of(p.byte()));
        let cell = |i: usize| {
            record
                .get(i)
                .map(str::trim)
                .ok_or_else(|| format!("line {line}: too few columns"))
        };
        let whole = |i: usize, what: &str| -> Result<u64, String> {
            cell(i)?
                .parse()
                .map_err(|_| format!("line {line}: {what} is not a whole number"))
        };
        let number = |i: usize, what: &str| -> Result<f64, String> {
            finite(cell(i)?).ok_or_else(|| format!("line {line}: {what} is not a finite number"))
        };
        let optional = |i: Option<usize>| i.and_then(|i| record.get(i)).map(str::trim).and_then(finite);
        let id = |v: u64, what: &str| u32::try_from(v).map_err(|_| format!("line {line}: {what} is too large"));
        rows.push(TrackRow {
            line,
            track_id: id(whole(ti, "track_id")?, "track_id")?,
            parent_id: match pi.map(cell).transpose()? {
                None | Some("") => None,
                Some(_) => Some(id(whole(pi.expect("present"), "parent_id")?, "parent_id")?),
            },
            frame: whole(fi, "frame")? as usize,
            x: number(xi, "x")?,
            y: number(yi, "y")?,
            x_um: optional(xu),
            time_s: optional(ts),
        });
    }
    Ok(rows)
}

/// Reads a tracks table's points ([`read_track_rows`]).
///
/// # Errors
/// As [`read_track_rows`].
pub fn read_track_points(text: &str) -> Result<Vec<TrackPoint>, String> {
    Ok(read_track_rows(text)?
        .into_iter()
        .map(|r| TrackPoint {
            track_id: r.track_id,
            parent_id: r.parent_id,
            frame: r.frame,
            x: r.x,
            y: r.y,
        })
        .collect())
}

fn finite(cell: &str) -> Option<f64> {
    cell.parse::<f64>().ok().filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_are_trimmed_as_the_csv_readers_own_trimming_does() {
        // Reference: the `csv` crate reading the same text with `Trim::All` (ASCII and Unicode
        // whitespace around cells and header names; rows of blank cells skipped).
        let text = " track_id ,frame\t,x, y\u{2003}\n 1 ,\t0, 2.5 ,\u{2003}3\u{2003}\n  ,  , , \n\u{a0}2,\u{a0}1\u{a0},\u{2009}4, 5e0 \n";
        let rows = read_track_rows(text).unwrap();
        let mut reader = csv::ReaderBuilder::new()
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(text.as_bytes());
        let want: Vec<(u32, usize, f64, f64)> = (reader.records())
            .map(|r| r.unwrap())
            .filter(|r| !r.iter().all(str::is_empty))
            .map(|r| {
                (
                    r[0].parse().unwrap(),
                    r[1].parse().unwrap(),
                    r[2].parse().unwrap(),
                    r[3].parse().unwrap(),
                )
            })
            .collect();
        let got: Vec<(u32, usize, f64, f64)> = rows.iter().map(|r| (r.track_id, r.frame, r.x, r.y)).collect();
        assert_eq!(got, want);
        assert_eq!(got.len(), 2);
    }

    #[test]
    fn quoted_fields_a_byte_order_mark_and_blank_lines_are_read() {
        // Source: RFC 4180 (quoted fields may hold commas) and what spreadsheets write: a
        // byte-order mark, quoted cells, CRLF line ends, a blank line. Hand-made table.
        let text = "\u{feff}\"note\",\"track_id\",\"frame\",\"x\",\"y\",\"parent_id\"\r\n\"a, b\",\"3\",\"0\",\"1.5\",\"2\",\"\"\r\n\r\n\"c\",4,1,2.5,3,3\r\n";
        let rows = read_track_rows(text).unwrap();
        assert_eq!(rows.len(), 2);
        assert_eq!(
            (rows[0].track_id, rows[0].parent_id, rows[0].frame, rows[0].x, rows[0].y),
            (3, None, 0, 1.5, 2.0)
        );
        assert_eq!(rows[0].line, 2);
        assert_eq!((rows[1].track_id, rows[1].parent_id, rows[1].line), (4, Some(3), 4));
        assert!(read_track_rows("track_id,frame,x\n1,0,2\n")
            .unwrap_err()
            .contains("missing column y"));
        assert!(read_track_rows("track_id,frame,x,y\n1,0,nan,2\n")
            .unwrap_err()
            .contains("line 2: x is not a finite number"));
        assert!(read_track_rows("track_id,frame,x,y\n1.5,0,1,2\n")
            .unwrap_err()
            .contains("line 2: track_id is not a whole number"));
        assert!(read_track_rows("track_id,frame,x,y\n1,0\n")
            .unwrap_err()
            .contains("line 2: too few columns"));
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

    #[test]
    fn quoted_fields_are_read_as_one_cell() {
        // Source: RFC 4180 (a quoted field may hold commas, doubled quotes and line breaks; a
        // quoted number is the number). A table from a spreadsheet with a free-text column:
        // the rows keep their values and their line numbers (the third row is on line 5, after
        // a note spanning lines 3 and 4).
        let text = "track_id,note,frame,x,y\n\
                    1,\"moved, then \"\"stopped\"\"\",0,\"1.5\",2\n\
                    1,\"two\nlines\",1,2.5,3\n\
                    2,,0,10,20\n";
        let rows = read_track_rows(text).unwrap();
        assert_eq!(rows.len(), 3);
        assert_eq!(
            (rows[0].track_id, rows[0].frame, rows[0].x, rows[0].y),
            (1, 0, 1.5, 2.0)
        );
        assert_eq!((rows[1].frame, rows[1].x, rows[1].line), (1, 2.5, 3));
        assert_eq!((rows[2].track_id, rows[2].x, rows[2].line), (2, 10.0, 5));
    }
}
