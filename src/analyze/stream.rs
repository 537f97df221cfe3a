//! The stream as a whole, frame by frame: how many cells, where their centroid is, how wide
//! the stream is across the axis of migration, where its front is along it and how fast the
//! front advances; the means over frames with intervals from resampling tracks.

use super::geometry::Axes;
use super::resample::{resample_copies, Interval};
use super::table::Track;
use crate::numeric::{median, quantile};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeMap;

/// Frames with fewer cells have no stream geometry (percentiles of two points say nothing).
pub const MIN_CELLS: usize = 3;

/// Resamples of tracks for the stream's intervals: fewer than for the MSD, as each re-sorts
/// every frame (Efron & Tibshirani 1993, §13.3: a few hundred give usable percentile
/// intervals).
pub const STREAM_RESAMPLES: usize = 200;

/// The stream in one frame (lengths in analysis units).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StreamFrame {
    /// Frame.
    pub frame: usize,
    /// Cells present.
    pub cells: usize,
    /// Centroid.
    pub centroid: [f64; 2],
    /// Width across the axis: the 95th minus the 5th percentile of the across coordinate.
    pub width: f64,
    /// Standard deviation of the across coordinate.
    pub width_sd: f64,
    /// Front: the 95th percentile of the along coordinate.
    pub front: f64,
    /// Rear: the 5th percentile.
    pub rear: f64,
    /// Cells per area of the occupied band: cells / (width × (front − rear)).
    pub density: Option<f64>,
    /// Cells per unit width.
    pub cells_per_width: Option<f64>,
}

/// The stream over the recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StreamGeometry {
    /// Per frame (frames with at least [`MIN_CELLS`] cells).
    pub frames: Vec<StreamFrame>,
    /// Front advance speed (length per time): the Theil–Sen slope of the front over time.
    pub front_speed: Option<f64>,
    /// Means over frames: width, density, cells per width, cells.
    pub means: StreamMeans,
    /// 95% intervals of the front speed and the means, from resampling tracks.
    pub intervals: StreamIntervals,
}

/// Means over frames.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
pub struct StreamMeans {
    /// Mean width.
    pub width: Option<f64>,
    /// Mean density.
    pub density: Option<f64>,
    /// Mean cells per width.
    pub cells_per_width: Option<f64>,
    /// Mean cells.
    pub cells: Option<f64>,
}

/// Intervals of the front speed and the means.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
pub struct StreamIntervals {
    /// Front speed.
    pub front_speed: Option<Interval>,
    /// Mean width.
    pub width: Option<Interval>,
    /// Mean density.
    pub density: Option<Interval>,
    /// Mean cells per width.
    pub cells_per_width: Option<Interval>,
}

/// The stream geometry of `tracks` (every tracked cell, each counted `copies[i]` times when
/// given), frames `dt` apart.
pub fn stream_frames(tracks: &[Track], copies: Option<&[u32]>, axes: Axes) -> Vec<StreamFrame> {
    let mut by_frame: BTreeMap<usize, Vec<[f64; 2]>> = BTreeMap::new();
    for (i, t) in tracks.iter().enumerate() {
        let c = copies.map_or(1, |c| c[i]) as usize;
        for p in &t.path {
            let e = by_frame.entry(p.frame).or_default();
            e.extend(std::iter::repeat_n([p.x, p.y], c));
        }
    }
    by_frame
        .into_iter()
        .filter(|(_, pts)| pts.len() >= MIN_CELLS)
        .map(|(frame, pts)| one_frame(frame, &pts, axes))
        .collect()
}

fn one_frame(frame: usize, pts: &[[f64; 2]], axes: Axes) -> StreamFrame {
    let n = pts.len() as f64;
    let (along, across): (Vec<f64>, Vec<f64>) = pts.iter().map(|p| axes.project(p[0], p[1])).unzip();
    let q = |v: &[f64], p: f64| quantile(v, p).unwrap_or(f64::NAN);
    let width = q(&across, 0.95) - q(&across, 0.05);
    let mean_across = across.iter().sum::<f64>() / n;
    let width_sd = (across.iter().map(|a| (a - mean_across).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let (front, rear) = (q(&along, 0.95), q(&along, 0.05));
    let band = width * (front - rear);
    StreamFrame {
        frame,
        cells: pts.len(),
        centroid: [
            pts.iter().map(|p| p[0]).sum::<f64>() / n,
            pts.iter().map(|p| p[1]).sum::<f64>() / n,
        ],
        width,
        width_sd,
        front,
        rear,
        density: (band > 0.0).then(|| n / band),
        cells_per_width: (width > 0.0).then(|| n / width),
    }
}

/// The Theil–Sen slope of `(t, y)`: the median of the slopes between all pairs of points
/// with different `t`; `None` with fewer than two.
///
/// # Method
/// H. Theil (1950), "A rank-invariant method of linear and polynomial regression analysis",
/// Proc. K. Ned. Akad. Wet. 53:386–392; P. K. Sen (1968), "Estimates of the regression
/// coefficient based on Kendall's tau", J. Am. Stat. Assoc. 63(324):1379–1389,
/// doi:10.1080/01621459.1968.10480934. Robust to the front's jumps when a cell leads for a
/// few frames.
pub fn theil_sen(points: &[(f64, f64)]) -> Option<f64> {
    let mut slopes = Vec::with_capacity(points.len() * points.len() / 2);
    for (i, a) in points.iter().enumerate() {
        for b in &points[i + 1..] {
            if b.0 != a.0 {
                slopes.push((b.1 - a.1) / (b.0 - a.0));
            }
        }
    }
    median(&mut slopes)
}

fn mean_of(frames: &[StreamFrame], get: impl Fn(&StreamFrame) -> Option<f64>) -> Option<f64> {
    let v: Vec<f64> = frames.iter().filter_map(get).collect();
    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
}

fn front_speed(frames: &[StreamFrame], dt: f64) -> Option<f64> {
    let pts: Vec<(f64, f64)> = frames.iter().map(|f| (f.frame as f64 * dt, f.front)).collect();
    theil_sen(&pts)
}

fn means(frames: &[StreamFrame]) -> StreamMeans {
    StreamMeans {
        width: mean_of(frames, |f| Some(f.width)),
        density: mean_of(frames, |f| f.density),
        cells_per_width: mean_of(frames, |f| f.cells_per_width),
        cells: mean_of(frames, |f| Some(f.cells as f64)),
    }
}

/// The stream geometry of `tracks` with its intervals (`resamples` resamples of whole tracks,
/// each with its own generator from `seed`).
pub fn stream_geometry(tracks: &[Track], axes: Axes, dt: f64, resamples: usize, seed: u64) -> StreamGeometry {
    let frames = stream_frames(tracks, None, axes);
    let n = tracks.len();
    let draws: Vec<(Option<f64>, StreamMeans)> = (0..resamples)
        .into_par_iter()
        .map(|b| {
            let copies = resample_copies(n, seed, b);
            let f = stream_frames(tracks, Some(&copies), axes);
            (front_speed(&f, dt), means(&f))
        })
        .collect();
    StreamGeometry {
        front_speed: front_speed(&frames, dt),
        means: means(&frames),
        intervals: StreamIntervals {
            front_speed: Interval::over(&draws, |d| d.0),
            width: Interval::over(&draws, |d| d.1.width),
            density: Interval::over(&draws, |d| d.1.density),
            cells_per_width: Interval::over(&draws, |d| d.1.cells_per_width),
        },
        frames,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tracks::PathPoint;

    #[test]
    fn theil_sen_ignores_an_outlier() {
        // Source: the definition (median of pairwise slopes), hand-derived: points on y = 2t
        // with one point moved far off; 6 of the 10 pairwise slopes are exactly 2, so the
        // median is 2 (a least-squares line would tilt).
        let pts = [(0.0, 0.0), (1.0, 2.0), (2.0, 4.0), (3.0, 60.0), (4.0, 8.0)];
        assert_eq!(theil_sen(&pts), Some(2.0));
    }

    #[test]
    fn a_stream_of_known_width_and_front_speed() {
        // Construction: 21 cells spread evenly across 0..20 (across = y for an axis along +x),
        // all moving along +x at 1.5 per frame, the i-th starting at x = i mod 5. Width: the
        // 95th minus the 5th percentile of 0..20 in steps of 1 (numpy's linear rule) = 19 − 1 =
        // 18; front speed 1.5 per frame (every cell's speed); the front is the 95th percentile
        // of x; cells per width 21/18.
        let tracks: Vec<Track> = (0..21)
            .map(|i| Track {
                id: i as u32,
                parent: None,
                path: (0..10)
                    .map(|f| PathPoint::new(f, (i % 5) as f64 + 1.5 * f as f64, i as f64))
                    .collect(),
            })
            .collect();
        let s = stream_geometry(&tracks, Axes { axis_deg: 0.0 }, 1.0, 50, 1);
        assert_eq!(s.frames.len(), 10);
        assert!((s.frames[0].width - 18.0).abs() < 1e-12, "{:?}", s.frames[0]);
        assert!((s.front_speed.unwrap() - 1.5).abs() < 1e-12);
        assert!((s.means.cells_per_width.unwrap() - 21.0 / 18.0).abs() < 1e-12);
        let ci = s.intervals.front_speed.unwrap();
        assert!(ci.contains(1.5), "{ci:?}");
    }
}
