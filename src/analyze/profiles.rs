//! How motion varies across a lane and along the axis: speed, forward migration, straightness
//! and alignment binned by position.

use super::collective::order_parameter;
use super::geometry::{Axes, Lane};
use super::motility::straightness;
use super::table::Track;
use serde::Serialize;
use std::collections::BTreeMap;

/// Bins of each profile.
pub const PROFILE_BINS: usize = 10;

/// Which way a profile runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Direction {
    /// Across the lane, from its lower edge to its upper one.
    Across,
    /// Along the axis, over the range the steps cover.
    Along,
}

/// One bin of a profile.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ProfileBin {
    /// Which profile.
    pub direction: Direction,
    /// Lower edge (analysis units, along or across the axis).
    pub from: f64,
    /// Upper edge.
    pub to: f64,
    /// Steps starting in the bin.
    pub steps: usize,
    /// Their mean speed.
    pub speed: Option<f64>,
    /// Their mean forward index: displacement along the axis over step length (a step's own
    /// forward migration index).
    pub forward_index: Option<f64>,
    /// Tracks whose mean position lies in the bin.
    pub tracks: usize,
    /// Their mean directionality ratio.
    pub directionality: Option<f64>,
    /// Mean over frames of the order parameter of the velocities in the bin (frames with two
    /// moving cells there or more).
    pub order_parameter: Option<f64>,
}

/// A step with where it starts: `(along, across, frame, velocity)`.
type Located = (f64, f64, usize, [f64; 2]);

/// Profiles across `lane` and along the axis of `tracks` (frames `dt` apart).
///
/// # Method
/// Binned averages of step speed, the per-step forward index (after the forward migration
/// index, common practice in chemotaxis assays), track straightness (Gorelik & Gautreau 2014)
/// and the order parameter (Vicsek et al. 1995), by position; our own layout.
pub fn lane_profiles(tracks: &[Track], lane: Lane, axes: Axes, dt: f64) -> Vec<ProfileBin> {
    let steps: Vec<Located> = tracks
        .iter()
        .flat_map(|t| {
            t.path
                .windows(2)
                .filter(|w| w[1].frame == w[0].frame + 1)
                .map(move |w| {
                    let (along, across) = axes.project(w[0].x, w[0].y);
                    (
                        along,
                        across,
                        w[0].frame,
                        [(w[1].x - w[0].x) / dt, (w[1].y - w[0].y) / dt],
                    )
                })
        })
        .collect();
    let straightness: Vec<(f64, f64, Option<f64>)> = tracks.iter().map(|t| track_position(t, axes)).collect();
    let (lo, hi) = steps
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), s| (a.min(s.0), b.max(s.0)));
    let mut out = profile(Direction::Across, (lane.from, lane.to), &steps, &straightness, axes);
    if lo < hi {
        out.extend(profile(Direction::Along, (lo, hi), &steps, &straightness, axes));
    }
    out
}

/// A track's mean `(along, across)` and its directionality ratio.
fn track_position(t: &Track, axes: Axes) -> (f64, f64, Option<f64>) {
    let n = t.path.len() as f64;
    let (a, c) = t
        .path
        .iter()
        .map(|p| axes.project(p.x, p.y))
        .fold((0.0, 0.0), |s, v| (s.0 + v.0, s.1 + v.1));
    (a / n, c / n, straightness(&t.path))
}

fn profile(
    direction: Direction,
    (from, to): (f64, f64),
    steps: &[Located],
    tracks: &[(f64, f64, Option<f64>)],
    axes: Axes,
) -> Vec<ProfileBin> {
    let width = (to - from) / PROFILE_BINS as f64;
    let bin_of = |v: f64| {
        let b = ((v - from) / width).floor();
        (b >= 0.0 && v <= to).then(|| (b as usize).min(PROFILE_BINS - 1))
    };
    let coordinate = |along: f64, across: f64| match direction {
        Direction::Across => across,
        Direction::Along => along,
    };
    let (sin, cos) = axes.axis_deg.to_radians().sin_cos();
    let mut speed = vec![(0usize, 0.0, 0.0, 0usize); PROFILE_BINS];
    let mut by_frame: BTreeMap<(usize, usize), Vec<[f64; 2]>> = BTreeMap::new();
    for &(along, across, frame, v) in steps {
        let Some(b) = bin_of(coordinate(along, across)) else {
            continue;
        };
        let length = v[0].hypot(v[1]);
        let s = &mut speed[b];
        s.0 += 1;
        s.1 += length;
        if length > 0.0 {
            s.2 += (v[0] * cos + v[1] * sin) / length;
            s.3 += 1;
        }
        by_frame.entry((b, frame)).or_default().push(v);
    }
    let mut straight = vec![(0usize, 0.0, 0usize); PROFILE_BINS];
    for &(along, across, ratio) in tracks {
        if let Some(b) = bin_of(coordinate(along, across)) {
            straight[b].0 += 1;
            if let Some(r) = ratio {
                straight[b].1 += r;
                straight[b].2 += 1;
            }
        }
    }
    let mut order = [(0.0, 0usize); PROFILE_BINS];
    for ((b, _), v) in &by_frame {
        if let Some(phi) = (v.len() >= 2).then(|| order_parameter(v)).flatten() {
            order[*b].0 += phi;
            order[*b].1 += 1;
        }
    }
    let mean = |sum: f64, n: usize| (n > 0).then(|| sum / n as f64);
    (0..PROFILE_BINS)
        .map(|b| ProfileBin {
            direction,
            from: from + b as f64 * width,
            to: from + (b + 1) as f64 * width,
            steps: speed[b].0,
            speed: mean(speed[b].1, speed[b].0),
            forward_index: mean(speed[b].2, speed[b].3),
            tracks: straight[b].0,
            directionality: mean(straight[b].1, straight[b].2),
            order_parameter: mean(order[b].0, order[b].1),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tracks::PathPoint;

    #[test]
    fn a_lane_fast_in_its_middle_and_slow_at_its_edges() {
        // Construction: a lane 0..10 across (y) with cells in its middle (y = 5) moving +x at
        // 3 per frame and cells near its edges (y = 0.5, 9.5) moving +x at 1: the middle bin
        // (5-6) has speed 3 and forward index 1; the edge bins speed 1; all aligned
        // (order 1); bins without cells are empty.
        let cell = |id: u32, y: f64, v: f64| Track {
            id,
            parent: None,
            path: (0..6).map(|f| PathPoint::new(f, v * f as f64 + id as f64, y)).collect(),
        };
        let tracks = [
            cell(1, 5.0, 3.0),
            cell(2, 5.2, 3.0),
            cell(3, 0.5, 1.0),
            cell(4, 9.5, 1.0),
            cell(5, 0.6, 1.0),
        ];
        let p = lane_profiles(&tracks, Lane { from: 0.0, to: 10.0 }, Axes { axis_deg: 0.0 }, 1.0);
        let across: Vec<&ProfileBin> = p.iter().filter(|b| b.direction == Direction::Across).collect();
        assert_eq!(across.len(), PROFILE_BINS);
        assert_eq!((across[5].speed, across[5].forward_index), (Some(3.0), Some(1.0)));
        assert_eq!((across[0].speed, across[9].speed), (Some(1.0), Some(1.0)));
        assert_eq!(across[5].order_parameter, Some(1.0));
        assert_eq!(across[9].order_parameter, None, "one cell: no alignment to measure");
        assert_eq!((across[3].steps, across[3].speed), (0, None));
        assert_eq!(across[5].tracks, 2);
        assert!(p.iter().any(|b| b.direction == Direction::Along));
    }
}
