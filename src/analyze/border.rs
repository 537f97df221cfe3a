//! What cells do at a border they should not cross: every approach (a track coming within a
//! distance of the border from farther away) with its outcome, the time spent near the border
//! and the turn away; speed and approach speed against distance to the border; the share of
//! approaching cells that cross. Intervals from resampling tracks.

use super::geometry::Border;
use super::resample::{resample_copies, Interval};
use super::table::Track;
use rayon::prelude::*;
use serde::Serialize;

/// How an approach ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// A point of the approach lies inside the border's region.
    Crossed,
    /// The track left the zone again without crossing.
    TurnedBack,
    /// The track ended (or the recording did) within the zone without crossing.
    Stopped,
}

impl Outcome {
    /// Its name in the outputs.
    pub fn as_str(self) -> &'static str {
        match self {
            Outcome::Crossed => "crossed",
            Outcome::TurnedBack => "turned_back",
            Outcome::Stopped => "stopped",
        }
    }
}

/// One approach of one track.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Approach {
    /// Track.
    pub track_id: u32,
    /// First frame within the zone.
    pub first_frame: usize,
    /// Last frame within the zone.
    pub last_frame: usize,
    /// How it ended.
    pub outcome: Outcome,
    /// Time within the zone: frames observed there times the interval.
    pub dwell_time: f64,
    /// Closest signed distance reached (negative: inside the region).
    pub closest: f64,
    /// For a cell that turned back: the angle between the step into the zone and the step
    /// out of it, degrees in [0, 180] (180: straight back).
    pub turning_deg: Option<f64>,
}

/// Steps binned by the signed distance of their start to the border.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DistanceBin {
    /// Lower edge.
    pub from: f64,
    /// Upper edge.
    pub to: f64,
    /// Steps in the bin.
    pub steps: usize,
    /// Mean step speed.
    pub speed: Option<f64>,
    /// Its interval.
    pub speed_ci95: Option<Interval>,
    /// Mean speed toward the border (the fall of the signed distance per time).
    pub approach_speed: Option<f64>,
    /// Its interval.
    pub approach_speed_ci95: Option<Interval>,
    /// Mean heading toward the border: the cosine of the angle between a step and the
    /// direction in which the distance to the border falls fastest (1 straight at it, −1
    /// straight away), as the fall of the distance over the step length.
    pub heading_toward: Option<f64>,
    /// Its interval.
    pub heading_toward_ci95: Option<Interval>,
}

/// The response to a border.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BorderResponse {
    /// The distance that counts as near.
    pub zone: f64,
    /// Every approach, by track then frame.
    pub approaches: Vec<Approach>,
    /// Cells with at least one approach.
    pub approaching_cells: usize,
    /// Share of them with at least one crossing.
    pub share_crossing: Option<f64>,
    /// Its interval.
    pub share_crossing_ci95: Option<Interval>,
    /// Speed, approach speed and heading by distance.
    pub bins: Vec<DistanceBin>,
    /// The signed distance of every point of every track, `(track_id, frame, distance)`.
    pub distances: Vec<(u32, usize, f64)>,
}

/// Bins of half a zone from the border out to four zones.
const BINS: usize = 8;

/// The approaches of one track (signed distances `d` at its points): runs of points closer
/// than `zone`, each entered from a point at `zone` or farther.
pub fn approaches(track: &Track, d: &[f64], zone: f64, dt: f64) -> Vec<Approach> {
    let p = &track.path;
    let mut out = Vec::new();
    let mut i = 1;
    while i < p.len() {
        if !(d[i] < zone && d[i - 1] >= zone) {
            i += 1;
            continue;
        }
        let start = i;
        while i + 1 < p.len() && d[i + 1] < zone {
            i += 1;
        }
        let end = i;
        let crossed = d[start..=end].iter().any(|&v| v < 0.0);
        let left = end + 1 < p.len();
        let outcome = match (crossed, left) {
            (true, _) => Outcome::Crossed,
            (false, true) => Outcome::TurnedBack,
            (false, false) => Outcome::Stopped,
        };
        let heading = |a: usize, b: usize| [p[b].x - p[a].x, p[b].y - p[a].y];
        let turning = (outcome == Outcome::TurnedBack)
            .then(|| angle_between(heading(start - 1, start), heading(end, end + 1)))
            .flatten();
        out.push(Approach {
            track_id: track.id,
            first_frame: p[start].frame,
            last_frame: p[end].frame,
            outcome,
            dwell_time: (p[end].frame - p[start].frame + 1) as f64 * dt,
            closest: d[start..=end].iter().copied().fold(f64::INFINITY, f64::min),
            turning_deg: turning,
        });
        i += 1;
    }
    out
}

/// The unsigned angle between two vectors, degrees; `None` if either is zero.
fn angle_between(a: [f64; 2], b: [f64; 2]) -> Option<f64> {
    let (na, nb) = (a[0].hypot(a[1]), b[0].hypot(b[1]));
    (na > 0.0 && nb > 0.0).then(|| {
        ((a[0] * b[0] + a[1] * b[1]) / (na * nb))
            .clamp(-1.0, 1.0)
            .acos()
            .to_degrees()
    })
}

/// Per track: its signed distances, approaches, and steps as (start distance, speed,
/// approach speed, heading toward the border or `None` for a pause).
struct TrackBorder {
    distances: Vec<(u32, usize, f64)>,
    approaches: Vec<Approach>,
    steps: Vec<(f64, f64, f64, Option<f64>)>,
}

fn track_border(t: &Track, border: &Border, zone: f64, dt: f64) -> TrackBorder {
    let d: Vec<f64> = t.path.iter().map(|p| border.signed_distance(p.x, p.y)).collect();
    let steps = t
        .path
        .windows(2)
        .zip(d.windows(2))
        .filter(|(w, _)| w[1].frame == w[0].frame + 1)
        .map(|(w, dd)| {
            let length = (w[1].x - w[0].x).hypot(w[1].y - w[0].y);
            let heading = (length > 0.0).then(|| ((dd[0] - dd[1]) / length).clamp(-1.0, 1.0));
            (dd[0], length / dt, (dd[0] - dd[1]) / dt, heading)
        })
        .collect();
    TrackBorder {
        distances: t.path.iter().zip(&d).map(|(p, &v)| (t.id, p.frame, v)).collect(),
        approaches: approaches(t, &d, zone, dt),
        steps,
    }
}

/// Share of tracks with an approach that have a crossing one, tracks counted `copies` times.
fn share_crossing(per_track: &[TrackBorder], copies: Option<&[u32]>) -> Option<f64> {
    let (mut approaching, mut crossing) = (0u64, 0u64);
    for (i, t) in per_track.iter().enumerate() {
        let c = copies.map_or(1, |c| c[i]) as u64;
        if !t.approaches.is_empty() {
            approaching += c;
            crossing += c * u64::from(t.approaches.iter().any(|a| a.outcome == Outcome::Crossed));
        }
    }
    (approaching > 0).then(|| crossing as f64 / approaching as f64)
}

/// Sums of one distance bin: steps, speed, approach speed; headed steps, heading.
#[derive(Debug, Clone, Copy, Default)]
struct BinSums {
    steps: u64,
    speed: f64,
    toward: f64,
    headed: u64,
    heading: f64,
}

impl BinSums {
    fn speed(&self) -> Option<f64> {
        (self.steps > 0).then(|| self.speed / self.steps as f64)
    }
    fn toward(&self) -> Option<f64> {
        (self.steps > 0).then(|| self.toward / self.steps as f64)
    }
    fn heading(&self) -> Option<f64> {
        (self.headed > 0).then(|| self.heading / self.headed as f64)
    }
}

/// Per bin sums, tracks counted `copies` times.
fn bin_sums(per_track: &[TrackBorder], copies: Option<&[u32]>, zone: f64) -> Vec<BinSums> {
    let mut sums = vec![BinSums::default(); BINS];
    let width = zone / 2.0;
    for (i, t) in per_track.iter().enumerate() {
        let c = copies.map_or(1, |c| c[i]) as u64;
        for &(d, speed, toward, heading) in &t.steps {
            if d < 0.0 || d >= width * BINS as f64 {
                continue;
            }
            let s = &mut sums[(d / width) as usize];
            s.steps += c;
            s.speed += c as f64 * speed;
            s.toward += c as f64 * toward;
            if let Some(h) = heading {
                s.headed += c;
                s.heading += c as f64 * h;
            }
        }
    }
    sums
}

/// The response of `tracks` to `border` with `zone` as near, frames `dt` apart; intervals
/// from `resamples` resamples of whole tracks (generators seeded from `seed` and the index).
///
/// # Method
/// Our own event definitions, in the spirit of contact-inhibition assays that score what a
/// cell does on meeting an obstacle (collision outcomes as in R. Abercrombie & J. E. M.
/// Heaysman (1954), Exp. Cell Res. 6(2):293–306, doi:10.1016/0014-4827(54)90176-7): an
/// approach is a run of points within the zone entered from outside it; crossed if a point
/// lies inside the region, turned back if the track leaves the zone, stopped if it ends
/// there. Intervals: the case-resampling bootstrap over tracks (Efron & Tibshirani 1993).
pub fn border_response(
    tracks: &[Track],
    border: &Border,
    zone: f64,
    dt: f64,
    (resamples, seed): (usize, u64),
) -> BorderResponse {
    let per_track: Vec<TrackBorder> = tracks.iter().map(|t| track_border(t, border, zone, dt)).collect();
    let n = per_track.len();
    let draws: Vec<(Option<f64>, Vec<BinSums>)> = (0..resamples)
        .into_par_iter()
        .map(|b| {
            let copies = resample_copies(n, seed, b);
            (
                share_crossing(&per_track, Some(&copies)),
                bin_sums(&per_track, Some(&copies), zone),
            )
        })
        .collect();
    let bins = bin_sums(&per_track, None, zone)
        .iter()
        .enumerate()
        .map(|(b, s)| DistanceBin {
            from: b as f64 * zone / 2.0,
            to: (b + 1) as f64 * zone / 2.0,
            steps: s.steps as usize,
            speed: s.speed(),
            speed_ci95: Interval::over(&draws, |d| d.1[b].speed()),
            approach_speed: s.toward(),
            approach_speed_ci95: Interval::over(&draws, |d| d.1[b].toward()),
            heading_toward: s.heading(),
            heading_toward_ci95: Interval::over(&draws, |d| d.1[b].heading()),
        })
        .collect();
    BorderResponse {
        zone,
        approaching_cells: per_track.iter().filter(|t| !t.approaches.is_empty()).count(),
        share_crossing: share_crossing(&per_track, None),
        share_crossing_ci95: Interval::over(&draws, |d| d.0),
        approaches: per_track.iter().flat_map(|t| t.approaches.iter().copied()).collect(),
        distances: per_track.into_iter().flat_map(|t| t.distances).collect(),
        bins,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tracks::PathPoint;

    fn track(id: u32, xs: &[f64]) -> Track {
        Track {
            id,
            parent: None,
            path: xs.iter().enumerate().map(|(f, &x)| PathPoint::new(f, x, 5.0)).collect(),
        }
    }

    #[test]
    fn cells_that_bounce_cross_or_stop_at_a_straight_border() {
        // Construction: the region x >= 20 (a polygon far beyond the tracks in y), zone 5.
        // Track 1 comes in at 2 per frame to x = 18, turns straight back (turning 180°), three
        // frames within the zone (x = 16, 18, 16); track 2 walks through (x = 22 is inside: crossed); track 3
        // ends at x = 17 (stopped); track 4 stays far (no approach). Two of three approaching
        // cells did not cross: share 1/3.
        let border = Border::parse("poly:20,-100;1000,-100;1000,100;20,100", 1.0, 1.0).unwrap();
        let tracks = [
            track(1, &[10.0, 12.0, 14.0, 16.0, 18.0, 16.0, 14.0, 12.0]),
            track(2, &[10.0, 13.0, 16.0, 19.0, 22.0, 25.0]),
            track(3, &[10.0, 12.0, 14.0, 16.0, 17.0]),
            track(4, &[0.0, 1.0, 2.0, 3.0]),
        ];
        let r = border_response(&tracks, &border, 5.0, 1.0, (100, 3));
        let outcomes: Vec<(u32, Outcome)> = r.approaches.iter().map(|a| (a.track_id, a.outcome)).collect();
        assert_eq!(
            outcomes,
            vec![(1, Outcome::TurnedBack), (2, Outcome::Crossed), (3, Outcome::Stopped)]
        );
        let bounce = r.approaches[0];
        assert_eq!((bounce.first_frame, bounce.last_frame), (3, 5));
        assert!((bounce.turning_deg.unwrap() - 180.0).abs() < 1e-9 && (bounce.closest - 2.0).abs() < 1e-12);
        assert_eq!(r.approaching_cells, 3);
        assert!((r.share_crossing.unwrap() - 1.0 / 3.0).abs() < 1e-12);
        // Steps starting within 2.5 of the border (hand-derived): track 1 from x = 18 back to
        // 16 (speed 2, toward the border −2) and track 2 from 19 to 22 (speed 3, toward +3):
        // mean speed 2.5, mean approach speed 0.5.
        let near = r.bins[0];
        assert_eq!(near.steps, 2);
        assert!((near.speed.unwrap() - 2.5).abs() < 1e-12 && (near.approach_speed.unwrap() - 0.5).abs() < 1e-12);
        assert!(near.speed_ci95.unwrap().contains(2.5));
        // Headings: −1 (straight away) and +1 (straight at it): mean 0.
        assert_eq!(near.heading_toward, Some(0.0));
        assert!(
            (r.distances[4].2 - 2.0).abs() < 1e-12,
            "track 1 at x = 18: 2 from the border"
        );
    }
}
