//! Per-track motility measures in analysis units (µm and minutes when calibrated, else pixels
//! and frames): duration, path, net displacement, speeds, directionality, direction, forward
//! migration index and turning angles.

use super::msd::{anomalous_exponent, pool_msd, Path, TrackMsd};
use crate::tracks::PathPoint;
use serde::Serialize;

/// One track's motility.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Motility {
    /// Track id.
    pub track_id: u32,
    /// Points.
    pub points: usize,
    /// First frame.
    pub first_frame: usize,
    /// Time from first to last point.
    pub duration: f64,
    /// Sum of step lengths.
    pub path_length: f64,
    /// Distance from first to last point.
    pub net_displacement: f64,
    /// Mean speed over the steps between consecutive frames (a step across missing frames is
    /// a chord that cuts the corners the cell turned, so it would bias the speed low).
    pub mean_speed: Option<f64>,
    /// Runs of missing frames inside the track.
    pub gaps: usize,
    /// Frames missing inside the track.
    pub missing_frames: usize,
    /// This track's own anomalous exponent: the log-log slope of its time-averaged MSD over
    /// lags 1 to a quarter of its span (`None` below 12 frames of span: fewer than 3 lags).
    pub exponent: Option<f64>,
    /// Net displacement / path length.
    pub directionality_ratio: Option<f64>,
    /// The ratio over the first `fixed_elapsed_frames` frames only (comparable between tracks
    /// of different lengths); `None` for shorter tracks.
    pub directionality_at_fixed_time: Option<f64>,
    /// Direction of the net displacement, degrees from +x toward +y.
    pub mean_direction_deg: Option<f64>,
    /// Forward migration index: displacement along the axis / path length.
    pub forward_migration_index: Option<f64>,
    /// Mean absolute turning angle between consecutive steps, degrees.
    pub mean_abs_turning_deg: Option<f64>,
}

/// One step between consecutive frames of a track.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Step {
    /// Track id.
    pub track_id: u32,
    /// Frame the step starts at.
    pub frame: usize,
    /// Instantaneous speed (step length / frame interval).
    pub speed: f64,
    /// Heading, degrees from +x toward +y (`None` for a pause: a step of length 0 has none).
    pub heading_deg: Option<f64>,
    /// Turning angle from the previous step, degrees in (−180, 180] (`None` for the first, and
    /// where this step or the previous one is a pause).
    pub turning_deg: Option<f64>,
}

/// Per-track measures of `path` (frames ascending) with frames `frame_interval` apart; `msd`
/// is the track's own MSD sums ([`super::msd::track_msd`], to a quarter of its span at least),
/// for its exponent. Path
/// length, net displacement and directionality span gaps (a chord over missing frames);
/// the mean speed does not (see [`Motility::mean_speed`]).
///
/// # Method
/// Directionality ratio (straightness), speeds and turning angles as in R. Gorelik &
/// A. Gautreau (2014), Nat. Protoc. 9(8):1931–1943, doi:10.1038/nprot.2014.131; the forward
/// migration index as the net displacement along an axis over the path length (common practice
/// in chemotaxis assays). The ratio falls with track duration, so the ratio at a fixed elapsed
/// time is the one to compare.
pub fn motility(
    (track_id, path, msd): (u32, &Path, &TrackMsd),
    frame_interval: f64,
    axis_deg: f64,
    fixed_elapsed_frames: usize,
) -> Motility {
    let (first, last) = (path[0], path[path.len() - 1]);
    let length = path_length(path);
    let (dx, dy) = (last.x - first.x, last.y - first.y);
    let net = dx.hypot(dy);
    let duration = (last.frame - first.frame) as f64 * frame_interval;
    let axis = axis_deg.to_radians();
    let turns: Vec<f64> = steps(track_id, path, frame_interval)
        .iter()
        .filter_map(|s| s.turning_deg)
        .map(f64::abs)
        .collect();
    let early: Vec<PathPoint> = path
        .iter()
        .copied()
        .filter(|p| p.frame <= first.frame + fixed_elapsed_frames)
        .collect();
    let reaches = path.iter().any(|p| p.frame == first.frame + fixed_elapsed_frames);
    let consecutive: Vec<f64> = path
        .windows(2)
        .filter(|w| w[1].frame == w[0].frame + 1)
        .map(|w| (w[1].x - w[0].x).hypot(w[1].y - w[0].y))
        .collect();
    let gaps: Vec<usize> = path
        .windows(2)
        .map(|w| w[1].frame - w[0].frame - 1)
        .filter(|&m| m > 0)
        .collect();
    Motility {
        track_id,
        points: path.len(),
        first_frame: first.frame,
        duration,
        path_length: length,
        net_displacement: net,
        mean_speed: (!consecutive.is_empty())
            .then(|| consecutive.iter().sum::<f64>() / (consecutive.len() as f64 * frame_interval)),
        gaps: gaps.len(),
        missing_frames: gaps.iter().sum(),
        exponent: own_exponent(msd, last.frame - first.frame, frame_interval),
        directionality_ratio: (length > 0.0).then(|| net / length),
        directionality_at_fixed_time: reaches.then(|| straightness(&early)).flatten(),
        mean_direction_deg: (net > 0.0).then(|| dy.atan2(dx).to_degrees()),
        forward_migration_index: (length > 0.0).then(|| (dx * axis.cos() + dy * axis.sin()) / length),
        mean_abs_turning_deg: (!turns.is_empty()).then(|| turns.iter().sum::<f64>() / turns.len() as f64),
    }
}

/// The log-log slope of one track's time-averaged MSD over lags 1 to a quarter of its span
/// (common practice: lags up to N/4, fixtures/methods/check_values.md §9), at least 3 lags.
/// `sums`: the track's own MSD sums ([`super::msd::track_msd`]); lags beyond them (the
/// population's at most 500) are not used.
fn own_exponent(sums: &TrackMsd, span: usize, frame_interval: f64) -> Option<f64> {
    if span < 12 {
        return None;
    }
    let lags = (span / 4).min(sums.len());
    let points = pool_msd(&[sums[..lags].to_vec()], None, frame_interval);
    anomalous_exponent(&points)
}

fn path_length(path: &Path) -> f64 {
    path.windows(2).map(|w| (w[1].x - w[0].x).hypot(w[1].y - w[0].y)).sum()
}

/// Net displacement over path length (`None` for a path of length 0).
pub(super) fn straightness(path: &Path) -> Option<f64> {
    let length = path_length(path);
    let (a, b) = (path[0], path[path.len() - 1]);
    (length > 0.0).then(|| (b.x - a.x).hypot(b.y - a.y) / length)
}

/// Steps between consecutive frames (steps across a gap are left out, and the turning angle
/// after a gap is undefined, as are the heading of a pause and the turning angles beside it:
/// `atan2(0, 0)` would report a pause as a step toward +x).
pub fn steps(track_id: u32, path: &Path, frame_interval: f64) -> Vec<Step> {
    let mut out: Vec<Step> = Vec::new();
    for w in path.windows(2).filter(|w| w[1].frame == w[0].frame + 1) {
        let (dx, dy) = (w[1].x - w[0].x, w[1].y - w[0].y);
        let heading = (dx != 0.0 || dy != 0.0).then(|| dy.atan2(dx).to_degrees());
        let turning = out
            .last()
            .filter(|prev| prev.frame + 1 == w[0].frame)
            .and_then(|prev| Some(wrap_degrees(heading? - prev.heading_deg?)));
        out.push(Step {
            track_id,
            frame: w[0].frame,
            speed: dx.hypot(dy) / frame_interval,
            heading_deg: heading,
            turning_deg: turning,
        });
    }
    out
}

/// An angle in degrees wrapped to (−180, 180].
fn wrap_degrees(a: f64) -> f64 {
    let r = a.rem_euclid(360.0);
    if r > 180.0 {
        r - 360.0
    } else {
        r
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sums(path: &Path) -> TrackMsd {
        super::super::msd::track_msd(path, path.len())
    }

    #[test]
    fn methods_worked_track() {
        // Source: fixtures/methods/check_values.md §9 worked track (µm), Δt = 2 min: path 6.414214, net 5.385165,
        // ratio 0.839567, mean speed 0.641421 µm/min, FMI_x 0.779519, FMI_y 0.311808, turning
        // angles 45, 45, −90, 0.
        let t: Vec<PathPoint> = [(0., 0.), (1., 0.), (2., 1.), (2., 2.), (3., 2.), (5., 2.)]
            .iter()
            .enumerate()
            .map(|(i, p)| PathPoint::new(i, p.0, p.1))
            .collect();
        let m = motility((1, &t, &sums(&t)), 2.0, 0.0, 3);
        assert!((m.path_length - 6.414214).abs() < 1e-6 && (m.net_displacement - 5.385165).abs() < 1e-6);
        assert!((m.directionality_ratio.unwrap() - 0.839567).abs() < 1e-6);
        assert!((m.mean_speed.unwrap() - 0.641421).abs() < 1e-6);
        assert!((m.forward_migration_index.unwrap() - 0.779519).abs() < 1e-6);
        let y = motility((1, &t, &sums(&t)), 2.0, 90.0, 3);
        assert!((y.forward_migration_index.unwrap() - 0.311808).abs() < 1e-6);
        let turns: Vec<f64> = steps(1, &t, 2.0).iter().filter_map(|s| s.turning_deg).collect();
        let want = [45.0, 45.0, -90.0, 0.0];
        assert_eq!(turns.len(), want.len(), "{turns:?}");
        assert!(turns.iter().zip(want).all(|(a, b)| (a - b).abs() < 1e-9), "{turns:?}");
        // Over the first 3 frames: (0,0)→(2,2), path 1 + √2 + 1 (hand-derived).
        let early = 8f64.sqrt() / (2.0 + 2f64.sqrt());
        assert!((m.directionality_at_fixed_time.unwrap() - early).abs() < 1e-12);
    }

    #[test]
    fn a_pause_has_no_heading_and_no_turn_beside_it() {
        // Source: construction (trigonometry): steps (1,0), pause, (0,1), (0,1): headings 0°,
        // none, 90°, 90°; the turning angle needs two headed steps in a row, so only the last
        // step has one (0°). Read as atan2(0, 0) = 0°, the pause would add turns of 0° and 90°.
        let t: Vec<PathPoint> = [(0., 0.), (1., 0.), (1., 0.), (1., 1.), (1., 2.)]
            .iter()
            .enumerate()
            .map(|(i, p)| PathPoint::new(i, p.0, p.1))
            .collect();
        let s = steps(1, &t, 1.0);
        let headings: Vec<Option<f64>> = s.iter().map(|s| s.heading_deg).collect();
        assert_eq!(headings, [Some(0.0), None, Some(90.0), Some(90.0)]);
        let turns: Vec<Option<f64>> = s.iter().map(|s| s.turning_deg).collect();
        assert_eq!(turns, [None, None, None, Some(0.0)]);
        assert_eq!(
            motility((1, &t, &sums(&t)), 1.0, 0.0, 3).mean_abs_turning_deg,
            Some(0.0)
        );
    }

    #[test]
    fn a_gap_is_counted_and_does_not_slow_the_track() {
        // Construction: the zig-zag (i, ±0.5) moves √2 per frame (trigonometry). Without
        // frame 3, the chord from (2, 0.5) to (4, 0.5) is 2 over 2 frames, 1 per frame: path
        // length over duration would give (6√2 + 2)/8 = 1.31; the mean over consecutive steps
        // stays √2. One gap of one frame.
        let z: Vec<PathPoint> = (0..=8)
            .filter(|&i| i != 3)
            .map(|i| PathPoint::new(i, i as f64, if i % 2 == 0 { 0.5 } else { -0.5 }))
            .collect();
        let m = motility((1, &z, &sums(&z)), 1.0, 0.0, 4);
        assert!((m.mean_speed.unwrap() - 2f64.sqrt()).abs() < 1e-12, "{m:?}");
        assert_eq!((m.gaps, m.missing_frames), (1, 1));
        assert!((m.path_length / m.duration - (6.0 * 2f64.sqrt() + 2.0) / 8.0).abs() < 1e-12);
    }

    #[test]
    fn methods_zigzag_sampling_bias() {
        // Source: fixtures/methods/check_values.md §9: a zig-zag (i, ±0.5), i = 0..8, has directionality 0.707107
        // (= 1/√2) sampled every frame and 1.0 every second frame.
        let z: Vec<PathPoint> = (0..=8)
            .map(|i| PathPoint::new(i, i as f64, if i % 2 == 0 { 0.5 } else { -0.5 }))
            .collect();
        assert!(
            (motility((1, &z, &sums(&z)), 1.0, 0.0, 4).directionality_ratio.unwrap() - std::f64::consts::FRAC_1_SQRT_2)
                .abs()
                < 1e-6
        );
        let every2: Vec<PathPoint> = z
            .iter()
            .step_by(2)
            .map(|p| PathPoint::new(p.frame / 2, p.x, p.y))
            .collect();
        assert!(
            (motility((1, &every2, &sums(&every2)), 2.0, 0.0, 2)
                .directionality_ratio
                .unwrap()
                - 1.0)
                .abs()
                < 1e-12
        );
    }
}
