//! The input of the analysis: tracks from a run folder or any CSV with at least
//! `track_id, frame, x, y`, in physical units when a calibration is known, and the filters
//! (minimum length, frame range, region of interest).

use crate::error::{Error, Result};
use crate::tracks::PathPoint;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The length unit of an analysis: micrometres when calibrated, else pixels. Written as `um`
/// and `px` in column names, summaries and pages.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum LengthUnit {
    /// Pixels.
    #[serde(rename = "px")]
    Pixel,
    /// Micrometres.
    #[serde(rename = "um")]
    Micrometre,
}

/// The time unit of an analysis: minutes when calibrated, else frames. Written as `min` and
/// `frame`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum TimeUnit {
    /// Frames.
    #[serde(rename = "frame")]
    Frame,
    /// Minutes.
    #[serde(rename = "min")]
    Minute,
}

impl LengthUnit {
    /// `px` or `um`.
    pub fn as_str(self) -> &'static str {
        match self {
            LengthUnit::Pixel => "px",
            LengthUnit::Micrometre => "um",
        }
    }
}

impl TimeUnit {
    /// `frame` or `min`.
    pub fn as_str(self) -> &'static str {
        match self {
            TimeUnit::Frame => "frame",
            TimeUnit::Minute => "min",
        }
    }
}

impl std::fmt::Display for LengthUnit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::fmt::Display for TimeUnit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Units of the analysis: µm and minutes when calibrated, otherwise pixels and frames.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Units {
    /// Length unit.
    pub length: LengthUnit,
    /// Time unit.
    pub time: TimeUnit,
    /// Length units per pixel (1 when uncalibrated).
    pub length_per_px: f64,
    /// Time units per frame (1 when uncalibrated).
    pub time_per_frame: f64,
    /// Where the calibration came from.
    pub source: String,
}

impl Units {
    /// Uncalibrated: pixels and frames.
    pub fn pixels() -> Self {
        Units {
            length: LengthUnit::Pixel,
            time: TimeUnit::Frame,
            length_per_px: 1.0,
            time_per_frame: 1.0,
            source: "none (pixels and frames)".into(),
        }
    }

    /// A speed unit such as `um_per_min`.
    pub fn speed(&self) -> String {
        format!("{}_per_{}", self.length, self.time)
    }
}

/// One track in analysis units: `(frame, x, y)`, frames ascending.
#[derive(Debug, Clone, PartialEq)]
pub struct Track {
    /// Track id.
    pub id: u32,
    /// Mother track, if any.
    pub parent: Option<u32>,
    /// Points.
    pub path: Vec<PathPoint>,
}

/// Tracks read for analysis.
#[derive(Debug, Clone)]
pub struct TrackTable {
    /// The CSV read.
    pub source: PathBuf,
    /// Units of `tracks`.
    pub units: Units,
    /// The tracks, ascending id.
    pub tracks: Vec<Track>,
    /// The run record beside the tracks, if any (QC summary for the report).
    pub run_record: Option<crate::record::RunRecord>,
}

/// Calibration given on the command line (wins over files).
#[derive(Debug, Clone, Copy, Default)]
pub struct CalibrationOverride {
    /// µm per pixel.
    pub pixel_size_um: Option<f64>,
    /// Seconds per frame.
    pub frame_interval_s: Option<f64>,
}

/// Reads `input`: a run folder (its `tracks.csv` and `run.json`) or a CSV. The calibration is
/// taken from the command line, else `run.json` beside the CSV, else the CSV's own `x_um` and
/// `time_s` columns (the interval from differences of `time_s` between frames, so that a
/// clock that does not start at 0, or frames numbered from 1, keep it); when neither pixel
/// size nor interval is known, pixels and frames are used, and when only one is known the
/// units say which one was left unused.
///
/// # Errors
/// Missing files, missing columns, unparsable or non-finite numbers, a track with two points in
/// one frame; each names the file (and line). A pixel size or interval given on the command
/// line whose partner is found nowhere (a silent fall back to px and frames would drop it).
pub fn read_tracks(input: &Path, given: CalibrationOverride) -> Result<TrackTable> {
    let csv = if input.is_dir() {
        input.join("tracks.csv")
    } else {
        input.to_path_buf()
    };
    let mut run_record = None;
    let (units, tracks) = read_table(&csv, |rows| {
        let (record, ignored) = read_run_record(&csv)?;
        let run_calibration = record.as_ref().map(|r| &r.input.stack.calibration);
        let mut units = resolve_units(given, run_calibration, rows)?;
        if let Some(why) = ignored {
            units.source = format!("{} (run.json beside the tracks not used: {why})", units.source);
        }
        run_record = record;
        Ok(units)
    })?;
    Ok(TrackTable {
        source: csv,
        units,
        tracks,
        run_record,
    })
}

/// [`read_tracks`] of a tracking run's `tracks.csv` (its `text`, as the run wrote it) before
/// its `run.json` is written, with the calibration that `run.json` will hold (as read back
/// from it) and no command-line override: the same table but for `run_record`, which is left
/// empty (see [`read_run_record`]).
///
/// # Errors
/// As [`read_tracks`], but for reading the file.
pub fn read_run_tracks(csv: &Path, text: &str, calibration: &crate::stack::Calibration) -> Result<TrackTable> {
    let calibration = as_read_back(calibration);
    let (units, tracks) = table_of(csv, text, |rows| {
        resolve_units(CalibrationOverride::default(), Some(&calibration), rows)
    })?;
    Ok(TrackTable {
        source: csv.to_path_buf(),
        units,
        tracks,
        run_record: None,
    })
}

/// The rows of the tracks CSV `csv`, and its tracks in the units `units_of` finds for them
/// (called once the rows are read, so a broken table is reported before anything else).
fn read_table(
    csv: &Path,
    units_of: impl FnOnce(&[crate::tracks::TrackRow]) -> Result<Units>,
) -> Result<(Units, Vec<Track>)> {
    let text = std::fs::read_to_string(csv).map_err(|e| Error::input(csv, e.to_string()))?;
    table_of(csv, &text, units_of)
}

/// [`read_table`] of the text of `csv`, already read.
fn table_of(
    csv: &Path,
    text: &str,
    units_of: impl FnOnce(&[crate::tracks::TrackRow]) -> Result<Units>,
) -> Result<(Units, Vec<Track>)> {
    let rows = crate::tracks::read_track_rows(text).map_err(|e| Error::input(csv, e))?;
    let units = units_of(&rows)?;
    let tracks = build_tracks(&rows, &units).map_err(|e| Error::input(csv, e))?;
    Ok((units, tracks))
}

/// `calibration` written as JSON and parsed again, as [`read_tracks`] gets it from `run.json`:
/// serde_json's reader is not guaranteed to return every written `f64` bit for bit, and the
/// analysis must not depend on whether it read the file.
fn as_read_back(calibration: &crate::stack::Calibration) -> crate::stack::Calibration {
    let text = serde_json::to_string(calibration).expect("a calibration is serialisable");
    serde_json::from_str(&text).expect("a calibration reads back")
}

/// The run record beside `csv`, if any. A file that is not JSON is an error; JSON that is not a
/// run record of this version (one written by an earlier version) is not used, and the reason
/// is returned so the analysis can say so.
pub fn read_run_record(csv: &Path) -> Result<(Option<crate::record::RunRecord>, Option<String>)> {
    let path = csv.with_file_name("run.json");
    if !path.exists() {
        return Ok((None, None));
    }
    let text = std::fs::read_to_string(&path).map_err(|e| Error::input(&path, e.to_string()))?;
    let value: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| Error::input(&path, format!("not valid JSON: {e}")))?;
    Ok(match serde_json::from_value(value) {
        Ok(record) => (Some(record), None),
        Err(e) => (
            None,
            Some(format!("not a run record of Caravan {}: {e}", crate::VERSION)),
        ),
    })
}

fn resolve_units(
    given: CalibrationOverride,
    run_cal: Option<&crate::stack::Calibration>,
    rows: &[crate::tracks::TrackRow],
) -> Result<Units> {
    let from_run = |pick: fn(&crate::stack::Calibration) -> Option<f64>| run_cal.and_then(pick);
    let from_csv_px = rows
        .iter()
        .find(|r| r.x.abs() > 1.0)
        .and_then(|r| r.x_um.map(|u| u / r.x));
    let from_csv_dt = interval_from_times(rows);
    let pick = |cli: Option<f64>, run: Option<f64>, csv: Option<f64>| {
        cli.map(|v| (v, "command line"))
            .or(run.map(|v| (v, "run.json")))
            .or(csv.map(|v| (v, "CSV columns")))
            .filter(|(v, _)| *v > 0.0 && v.is_finite())
    };
    let px = pick(given.pixel_size_um, from_run(|c| c.pixel_size_um), from_csv_px);
    let dt = pick(given.frame_interval_s, from_run(|c| c.frame_interval_s), from_csv_dt);
    match (px, dt) {
        (Some((p, ps)), Some((s, ss))) => Ok(Units {
            length: LengthUnit::Micrometre,
            time: TimeUnit::Minute,
            length_per_px: p,
            time_per_frame: s / 60.0,
            source: format!("pixel size from {ps}, interval from {ss}"),
        }),
        (Some((p, "command line")), None) => Err(Error::parameter(
            "--pixel-size",
            format!("{p}um"),
            "needs --interval too (neither run.json nor a time_s column gives the frame interval); give both, or neither to work in px and frames",
        )),
        (None, Some((s, "command line"))) => Err(Error::parameter(
            "--interval",
            format!("{s}s"),
            "needs --pixel-size too (neither run.json nor an x_um column gives the pixel size); give both, or neither to work in px and frames",
        )),
        (Some((_, ps)), None) => Ok(Units {
            source: format!("px and frames: a pixel size from {ps} but no frame interval"),
            ..Units::pixels()
        }),
        (None, Some((_, ss))) => Ok(Units {
            source: format!("px and frames: a frame interval from {ss} but no pixel size"),
            ..Units::pixels()
        }),
        (None, None) => Ok(Units::pixels()),
    }
}

/// Seconds per frame from the CSV's `time_s` column: the median over consecutive frames seen
/// of the time difference over the frame difference. Differences, not `time_s / frame`, so
/// that a clock that starts at 3600 s or frames numbered from 1 give the interval itself.
fn interval_from_times(rows: &[crate::tracks::TrackRow]) -> Option<f64> {
    let times: BTreeMap<usize, f64> = rows.iter().filter_map(|r| r.time_s.map(|t| (r.frame, t))).collect();
    let mut steps: Vec<f64> = times
        .iter()
        .zip(times.iter().skip(1))
        .map(|((f1, t1), (f2, t2))| (t2 - t1) / (f2 - f1) as f64)
        .collect();
    crate::numeric::median(&mut steps)
}

fn build_tracks(rows: &[crate::tracks::TrackRow], units: &Units) -> std::result::Result<Vec<Track>, String> {
    let mut by_id: BTreeMap<u32, (Option<u32>, Vec<&crate::tracks::TrackRow>)> = BTreeMap::new();
    for r in rows {
        let e = by_id.entry(r.track_id).or_insert((r.parent_id, Vec::new()));
        e.1.push(r);
    }
    let mut tracks = Vec::with_capacity(by_id.len());
    for (id, (parent, mut pts)) in by_id {
        pts.sort_by_key(|r| r.frame);
        if let Some(w) = pts.windows(2).find(|w| w[0].frame == w[1].frame) {
            return Err(format!(
                "line {}: track {id} has two points in frame {}",
                w[1].line, w[1].frame
            ));
        }
        let s = units.length_per_px;
        tracks.push(Track {
            id,
            parent,
            path: pts.iter().map(|r| PathPoint::new(r.frame, r.x * s, r.y * s)).collect(),
        });
    }
    Ok(tracks)
}

/// A region of interest in analysis units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Region {
    /// `x0, y0, x1, y1` (any corner order).
    Rectangle([f64; 4]),
    /// Vertices of a simple polygon.
    Polygon(Vec<[f64; 2]>),
}

impl Region {
    /// Parses `rect:x0,y0,x1,y1` or `poly:x,y;x,y;x,y;...` (coordinates in the unit given by
    /// `px_to_units`: pixels are multiplied by it, physical values are kept).
    pub fn parse(text: &str, scale: f64) -> std::result::Result<Region, String> {
        let numbers = |s: &str| -> std::result::Result<Vec<f64>, String> {
            s.split([',', ';'])
                .map(|v| {
                    v.trim()
                        .parse::<f64>()
                        .ok()
                        .filter(|v| v.is_finite())
                        .map(|v| v * scale)
                })
                .collect::<Option<Vec<f64>>>()
                .ok_or_else(|| format!("{text:?}: coordinates must be numbers"))
        };
        if let Some(r) = text.strip_prefix("rect:") {
            let v = numbers(r)?;
            if v.len() != 4 {
                return Err(format!("{text:?}: a rectangle needs x0,y0,x1,y1"));
            }
            Ok(Region::Rectangle([v[0], v[1], v[2], v[3]]))
        } else if let Some(p) = text.strip_prefix("poly:") {
            let v = numbers(p)?;
            if v.len() < 6 || v.len() % 2 != 0 {
                return Err(format!("{text:?}: a polygon needs at least three x,y vertices"));
            }
            Ok(Region::Polygon(v.chunks(2).map(|c| [c[0], c[1]]).collect()))
        } else {
            Err(format!("{text:?}: expected rect:x0,y0,x1,y1 or poly:x,y;x,y;x,y"))
        }
    }

    /// Whether a point lies inside (ray casting for polygons: W. R. Franklin's crossing test).
    pub fn contains(&self, x: f64, y: f64) -> bool {
        match self {
            Region::Rectangle([x0, y0, x1, y1]) => {
                x >= x0.min(*x1) && x <= x0.max(*x1) && y >= y0.min(*y1) && y <= y0.max(*y1)
            }
            Region::Polygon(v) => polygon_contains(v, x, y),
        }
    }
}

/// Whether a point lies inside a simple polygon (W. R. Franklin's crossing test).
pub fn polygon_contains(v: &[[f64; 2]], x: f64, y: f64) -> bool {
    let mut inside = false;
    let mut j = v.len() - 1;
    for i in 0..v.len() {
        let (a, b) = (v[i], v[j]);
        if (a[1] > y) != (b[1] > y) && x < (b[0] - a[0]) * (y - a[1]) / (b[1] - a[1]) + a[0] {
            inside = !inside;
        }
        j = i;
    }
    inside
}

/// Which tracks and points to analyse.
#[derive(Debug, Clone, Serialize)]
pub struct Filters {
    /// Tracks (after clipping) with fewer points are left out (common practice: ≥ 10).
    pub min_points: usize,
    /// Half-open frame range `[start, end)`.
    pub frames: Option<(usize, usize)>,
    /// Region of interest: a track keeps its longest run of consecutive points inside.
    pub region: Option<Region>,
}

impl Default for Filters {
    fn default() -> Self {
        Filters {
            min_points: 10,
            frames: None,
            region: None,
        }
    }
}

/// Applies the filters: points outside the frame range go; with a region, each track keeps its
/// longest run of points inside (a cell leaving and re-entering is not one continuous track
/// of the region); then tracks shorter than `min_points` go.
pub fn apply_filters(tracks: &[Track], f: &Filters) -> Vec<Track> {
    tracks
        .iter()
        .filter_map(|t| {
            let kept: Vec<PathPoint> = t
                .path
                .iter()
                .copied()
                .filter(|p| f.frames.is_none_or(|(a, b)| p.frame >= a && p.frame < b))
                .collect();
            let kept = match &f.region {
                Some(r) => longest_run_inside(&kept, r),
                None => kept,
            };
            (kept.len() >= f.min_points.max(1)).then_some(Track {
                id: t.id,
                parent: t.parent,
                path: kept,
            })
        })
        .collect()
}

fn longest_run_inside(path: &[PathPoint], r: &Region) -> Vec<PathPoint> {
    let mut best: &[PathPoint] = &[];
    let mut start = 0;
    for i in 0..=path.len() {
        let inside = i < path.len() && r.contains(path[i].x, path[i].y);
        if !inside {
            if i - start > best.len() {
                best = &path[start..i];
            }
            start = i + 1;
        }
    }
    best.to_vec()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_a_hand_written_csv_with_its_own_calibration() {
        // Hand-written: columns in another order, physical columns giving 0.5 µm/px and 60 s
        // per frame; a second file with a duplicate frame is refused naming the line.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("mine.csv");
        std::fs::write(
            &p,
            "frame,track_id,y,x,x_um,time_s\n0,3,0,0,0,0\n1,3,0,4,2,60\n2,3,2,4,2,120\n",
        )
        .unwrap();
        let t = read_tracks(&p, CalibrationOverride::default()).unwrap();
        assert_eq!(
            (t.units.length, t.units.time),
            (LengthUnit::Micrometre, TimeUnit::Minute)
        );
        assert_eq!(t.units.time_per_frame, 1.0);
        assert_eq!(
            t.tracks[0].path,
            vec![
                PathPoint::new(0, 0.0, 0.0),
                PathPoint::new(1, 2.0, 0.0),
                PathPoint::new(2, 2.0, 1.0)
            ]
        );
        std::fs::write(&p, "track_id,frame,x,y\n1,0,0,0\n1,0,1,1\n").unwrap();
        let e = read_tracks(&p, CalibrationOverride::default()).unwrap_err().to_string();
        assert!(
            e.contains("mine.csv") && e.contains("line 3") && e.contains("two points in frame 0"),
            "{e}"
        );
        std::fs::write(&p, "track_id,frame,x\n1,0,0\n").unwrap();
        let e = read_tracks(&p, CalibrationOverride::default()).unwrap_err().to_string();
        assert!(e.contains("missing column y"), "{e}");
    }

    #[test]
    fn the_interval_comes_from_time_differences_and_half_a_calibration_is_refused() {
        // Construction: 60 s between frames whatever the clock's start or the first frame's
        // number (a clock at 3600 s read as time_s / frame gave 61 min per frame); 0.5 µm/px
        // from x_um / x.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        let read = |csv: &str, given: CalibrationOverride| {
            std::fs::write(&p, csv).unwrap();
            read_tracks(&p, given)
        };
        let none = CalibrationOverride::default();
        let late_clock = "track_id,frame,x,y,x_um,time_s\n1,0,2,0,1,3600\n1,1,4,0,2,3660\n1,2,6,0,3,3720\n";
        let u = read(late_clock, none).unwrap().units;
        assert_eq!((u.length_per_px, u.time_per_frame), (0.5, 1.0));
        let from_one = "track_id,frame,x,y,x_um,time_s\n1,1,2,0,1,0\n1,2,4,0,2,60\n1,4,6,0,3,180\n";
        let u = read(from_one, none).unwrap().units;
        assert_eq!((u.length_per_px, u.time_per_frame), (0.5, 1.0));
        // One half on the command line, the other nowhere: refused, naming what is missing.
        let bare = "track_id,frame,x,y\n1,0,2,0\n1,1,4,0\n";
        let pixel_only = CalibrationOverride {
            pixel_size_um: Some(0.5),
            frame_interval_s: None,
        };
        let e = read(bare, pixel_only).unwrap_err().to_string();
        assert!(e.contains("--pixel-size") && e.contains("needs --interval too"), "{e}");
        let interval_only = CalibrationOverride {
            pixel_size_um: None,
            frame_interval_s: Some(60.0),
        };
        let e = read(bare, interval_only).unwrap_err().to_string();
        assert!(e.contains("--interval") && e.contains("needs --pixel-size too"), "{e}");
        // The other half from the CSV: calibrated, each half's source named.
        let timed = "track_id,frame,x,y,time_s\n1,0,2,0,0\n1,1,4,0,30\n";
        let u = read(timed, pixel_only).unwrap().units;
        assert_eq!((u.length_per_px, u.time_per_frame), (0.5, 0.5));
        assert_eq!(u.source, "pixel size from command line, interval from CSV columns");
        // Half a calibration in the file alone: px and frames, saying which half was unused.
        let u = read(timed, none).unwrap().units;
        assert_eq!(u.length, LengthUnit::Pixel);
        assert_eq!(
            u.source,
            "px and frames: a frame interval from CSV columns but no pixel size"
        );
    }

    #[test]
    fn regions_and_filters() {
        // Geometry by hand: a triangle (0,0),(10,0),(0,10) contains (2,2), not (6,6); a track
        // leaving a rectangle keeps its longest inside run.
        let tri = Region::parse("poly:0,0;10,0;0,10", 1.0).unwrap();
        assert!(tri.contains(2.0, 2.0) && !tri.contains(6.0, 6.0));
        let rect = Region::parse("rect:0,0,5,5", 1.0).unwrap();
        let path: Vec<PathPoint> = (0..10)
            .map(|i| PathPoint::new(i, if (3..5).contains(&i) { 9.0 } else { 1.0 }, 1.0))
            .collect();
        let t = Track {
            id: 1,
            parent: None,
            path,
        };
        let f = Filters {
            min_points: 3,
            frames: None,
            region: Some(rect),
        };
        let kept = apply_filters(std::slice::from_ref(&t), &f);
        assert_eq!(
            kept[0].path.iter().map(|p| p.frame).collect::<Vec<_>>(),
            vec![5, 6, 7, 8, 9]
        );
        let f = Filters {
            min_points: 3,
            frames: Some((0, 2)),
            region: None,
        };
        assert!(apply_filters(&[t], &f).is_empty());
        assert!(Region::parse("rect:1,2,3", 1.0).is_err() && Region::parse("circle:1", 1.0).is_err());
    }
}
