//! Mean squared displacement with overlapping windows, the persistent-random-walk (Fürth) fit,
//! the anomalous exponent, and velocity and direction autocorrelations. Tracks are lists of
//! `(frame, x, y)` in analysis units; lags are whole frames.

use crate::tracks::PathPoint;
use serde::Serialize;

/// A track as `(frame, x, y)`, ascending frames (gaps allowed).
pub type Path = [PathPoint];

/// One lag of the population MSD.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MsdPoint {
    /// Lag, frames.
    pub lag_frames: usize,
    /// Lag in time units.
    pub lag: f64,
    /// Mean squared displacement.
    pub msd: f64,
    /// Displacement pairs averaged.
    pub pairs: usize,
}

/// One track's squared displacements per lag: `(sum, pairs)` at index `lag − 1`, for lags
/// 1..=`max_lag` (shorter when the track spans fewer frames).
pub type TrackMsd = Vec<(f64, u32)>;

/// The sums of squared displacements of one track, pairs of points `lag` frames apart
/// (frames ascending; gaps give no pair at the lags they break).
pub fn track_msd(track: &Path, max_lag: usize) -> TrackMsd {
    let span = track.last().map_or(0, |l| l.frame - track[0].frame);
    let mut sums = vec![(0.0, 0u32); span.min(max_lag)];
    for (i, a) in track.iter().enumerate() {
        for b in &track[i + 1..] {
            let lag = b.frame - a.frame;
            if lag > max_lag {
                break;
            }
            let s = &mut sums[lag - 1];
            s.0 += (b.x - a.x).powi(2) + (b.y - a.y).powi(2);
            s.1 += 1;
        }
    }
    sums
}

/// Pools tracks' sums into MSD points, each track counted `copies[i]` times (1 each when
/// `None`; a resample of tracks gives other counts); lags without pairs are left out.
pub fn pool_msd(per_track: &[TrackMsd], copies: Option<&[u32]>, frame_interval: f64) -> Vec<MsdPoint> {
    let longest = per_track.iter().map(Vec::len).max().unwrap_or(0);
    let mut sums = vec![(0.0f64, 0usize); longest];
    for (i, track) in per_track.iter().enumerate() {
        let c = copies.map_or(1, |c| c[i]);
        if c == 0 {
            continue;
        }
        for (s, &(sum, n)) in sums.iter_mut().zip(track) {
            s.0 += c as f64 * sum;
            s.1 += c as usize * n as usize;
        }
    }
    sums.iter()
        .enumerate()
        .filter(|(_, s)| s.1 > 0)
        .map(|(k, &(sum, n))| MsdPoint {
            lag_frames: k + 1,
            lag: (k + 1) as f64 * frame_interval,
            msd: sum / n as f64,
            pairs: n,
        })
        .collect()
}

/// The per-cell (time-averaged) MSD averaged over cells: at each lag, the mean over tracks of
/// each track's own MSD, so that every cell weighs the same however long it was tracked
/// (the pooled MSD weighs each by its pairs). `(lag_frames, mean, tracks)`.
pub fn per_cell_mean_msd(per_track: &[TrackMsd]) -> Vec<(usize, f64, usize)> {
    let longest = per_track.iter().map(Vec::len).max().unwrap_or(0);
    (0..longest)
        .filter_map(|k| {
            let own: Vec<f64> = per_track
                .iter()
                .filter_map(|t| t.get(k).filter(|s| s.1 > 0).map(|s| s.0 / s.1 as f64))
                .collect();
            (!own.is_empty()).then(|| (k + 1, own.iter().sum::<f64>() / own.len() as f64, own.len()))
        })
        .collect()
}

/// MSD(n) = mean over all pairs of points n frames apart in one track of |r(t+n) − r(t)|²,
/// pooled over tracks, for lags 1..=`max_lag`; lags without pairs are left out.
///
/// # Method
/// Overlapping windows, as in H. Qian, M. P. Sheetz & E. L. Elson (1991), "Single particle
/// tracking: analysis of diffusion and flow in two-dimensional systems", Biophys. J.
/// 60(4):910–921, doi:10.1016/S0006-3495(91)82125-7. Their windows are correlated, so no
/// standard error over pairs is given: intervals come from resampling whole tracks
/// ([`super::resample`]).
pub fn msd(tracks: &[&Path], max_lag: usize, frame_interval: f64) -> Vec<MsdPoint> {
    let per_track: Vec<TrackMsd> = tracks.iter().map(|t| track_msd(t, max_lag)).collect();
    pool_msd(&per_track, None, frame_interval)
}

/// The MSD points a model predicts at `lags` (frames, `frame_interval` apart), one pair each:
/// exact curves to check fits and exponents against.
pub fn model_points(
    lags: impl Iterator<Item = usize>,
    frame_interval: f64,
    msd_at: impl Fn(f64) -> f64,
) -> Vec<MsdPoint> {
    lags.map(|k| {
        let lag = k as f64 * frame_interval;
        MsdPoint {
            lag_frames: k,
            lag,
            msd: msd_at(lag),
            pairs: 1,
        }
    })
    .collect()
}

/// The 2D persistent random walk: MSD(t) = 4D[t − P(1 − e^{−t/P})].
///
/// # Method
/// R. Fürth (1920), "Die Brownsche Bewegung bei Berücksichtigung einer Persistenz der
/// Bewegungsrichtung", Z. Physik 2:244–256, doi:10.1007/BF01328731; in 2D as in G. A. Dunn
/// (1983), Agents Actions Suppl. 12:14–33, and H. G. Othmer, S. R. Dunbar & W. Alt (1988),
/// J. Math. Biol. 26:263–298, doi:10.1007/BF00277392. Fitted in [`super::models`].
///
/// Written as 4D[t + P·expm1(−t/P)]: with P thousands of times the lag (a walk straight over
/// the lags fitted) 1 − e^{−t/P} computed as written loses all but a few digits and the
/// fitted D and P drift on rounding noise.
pub fn furth_msd(t: f64, d: f64, p: f64) -> f64 {
    furth_msd_given(t, d, p, (-t / p).exp_m1())
}

/// [`furth_msd`] with `expm1(−t/P)` already computed (a fit's slope needs it too).
pub fn furth_msd_given(t: f64, d: f64, p: f64, expm1: f64) -> f64 {
    4.0 * d * (t + p * expm1)
}

/// Slope of ln MSD against ln lag (ordinary least squares) over the given points: the
/// anomalous exponent α (1 diffusive, 2 ballistic); `None` for fewer than two usable points.
pub fn anomalous_exponent(points: &[MsdPoint]) -> Option<f64> {
    let xy: Vec<(f64, f64)> = points
        .iter()
        .filter(|q| q.msd > 0.0 && q.lag > 0.0)
        .map(|q| (q.lag.ln(), q.msd.ln()))
        .collect();
    linear_slope(&xy)
}

/// Least-squares slope of a line through the origin: Σxy/Σx², MSD against lag; `None` if
/// empty. For free diffusion in 2D, MSD = 4Dt, so D = slope/4 (Einstein 1905).
pub fn slope_through_origin(points: &[MsdPoint]) -> Option<f64> {
    let sxx: f64 = points.iter().map(|q| q.lag * q.lag).sum();
    (sxx > 0.0).then(|| points.iter().map(|q| q.lag * q.msd).sum::<f64>() / sxx)
}

fn linear_slope(xy: &[(f64, f64)]) -> Option<f64> {
    if xy.len() < 2 {
        return None;
    }
    let n = xy.len() as f64;
    let (mx, my) = (
        xy.iter().map(|p| p.0).sum::<f64>() / n,
        xy.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let sxx: f64 = xy.iter().map(|p| (p.0 - mx).powi(2)).sum();
    (sxx > 0.0).then(|| xy.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum::<f64>() / sxx)
}

/// One lag of an autocorrelation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AutocorrelationPoint {
    /// Lag, frames.
    pub lag_frames: usize,
    /// Velocity autocorrelation ⟨v(t)·v(t+n)⟩ (length² per time²).
    pub velocity: f64,
    /// Direction autocorrelation ⟨û(t)·û(t+n)⟩ of unit steps (dimensionless).
    pub direction: f64,
    /// Pairs of steps averaged.
    pub pairs: usize,
}

/// One track's autocorrelation sums per lag 0..=max_lag: `(velocity, direction, pairs)`.
pub type TrackAutocorrelation = Vec<(f64, f64, u32)>;

/// The autocorrelation sums of one track over steps between consecutive frames (a step of
/// length 0 has no direction and is left out).
pub fn track_autocorrelation(track: &Path, max_lag: usize, frame_interval: f64) -> TrackAutocorrelation {
    let steps: Vec<(usize, f64, f64)> = track
        .windows(2)
        .filter(|w| w[1].frame == w[0].frame + 1)
        .map(|w| {
            (
                w[0].frame,
                (w[1].x - w[0].x) / frame_interval,
                (w[1].y - w[0].y) / frame_interval,
            )
        })
        .filter(|s| s.1 != 0.0 || s.2 != 0.0)
        .collect();
    // Each step's length once, not once per pair it is in.
    let lengths: Vec<f64> = steps.iter().map(|&(_, vx, vy)| vx.hypot(vy)).collect();
    let mut sums = vec![(0.0, 0.0, 0u32); max_lag + 1];
    for (i, &(f, vx, vy)) in steps.iter().enumerate() {
        for (&(g, wx, wy), &length) in steps[i..].iter().zip(&lengths[i..]) {
            let lag = g - f;
            if lag > max_lag {
                break;
            }
            let dot = vx * wx + vy * wy;
            let s = &mut sums[lag];
            s.0 += dot;
            s.1 += dot / (lengths[i] * length);
            s.2 += 1;
        }
    }
    sums
}

/// Pools tracks' autocorrelation sums, each track counted `copies[i]` times (1 when `None`);
/// lags without pairs are left out.
pub fn pool_autocorrelation(per_track: &[TrackAutocorrelation], copies: Option<&[u32]>) -> Vec<AutocorrelationPoint> {
    let lags = per_track.first().map_or(0, Vec::len);
    let mut sums = vec![(0.0f64, 0.0f64, 0usize); lags];
    for (i, track) in per_track.iter().enumerate() {
        let c = copies.map_or(1, |c| c[i]);
        if c == 0 {
            continue;
        }
        for (s, &(v, d, n)) in sums.iter_mut().zip(track) {
            s.0 += c as f64 * v;
            s.1 += c as f64 * d;
            s.2 += c as usize * n as usize;
        }
    }
    sums.iter()
        .enumerate()
        .filter(|(_, s)| s.2 > 0)
        .map(|(lag, &(v, d, n))| AutocorrelationPoint {
            lag_frames: lag,
            velocity: v / n as f64,
            direction: d / n as f64,
            pairs: n,
        })
        .collect()
}

/// Velocity and direction autocorrelation over steps between consecutive frames, pooled over
/// tracks, lags 0..=`max_lag` (the direction autocorrelation at lag 0 is 1 by definition).
///
/// # Method
/// R. Gorelik & A. Gautreau (2014), "Quantitative and unbiased analysis of directional
/// persistence in cell migration", Nat. Protoc. 9(8):1931–1943, doi:10.1038/nprot.2014.131.
/// Unit steps make the direction autocorrelation independent of speed.
pub fn autocorrelation(tracks: &[&Path], max_lag: usize, frame_interval: f64) -> Vec<AutocorrelationPoint> {
    let per_track: Vec<TrackAutocorrelation> = tracks
        .iter()
        .map(|t| track_autocorrelation(t, max_lag, frame_interval))
        .collect();
    pool_autocorrelation(&per_track, None)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analyze::models::{fit_model, ModelParameters, MotionKind, MotionModel};
    use crate::synth::walks::{walks, WalkSettings};

    fn walk_fit(points: &[MsdPoint]) -> ModelParameters {
        fit_model(MotionModel::new(MotionKind::PersistentRandomWalk, false), points)
            .unwrap()
            .parameters
    }

    fn worked_track() -> Vec<PathPoint> {
        [(0., 0.), (1., 0.), (2., 1.), (2., 2.), (3., 2.), (5., 2.)]
            .iter()
            .enumerate()
            .map(|(i, p)| PathPoint::new(i, p.0, p.1))
            .collect()
    }

    #[test]
    fn methods_worked_track_msd_and_autocorrelation() {
        // Source: fixtures/methods/check_values.md §9 worked track (µm, Δt = 2 min): MSD lags 1–5 = 1.8, 5.25,
        // 8.666667, 16.5, 29.0 from 5, 4, 3, 2, 1 pairs; VACF lags 0–4 = 0.45, 0.25, 0.083333,
        // 0.375, 0.5 µm²/min²; direction autocorrelation lags 1–4 = 0.603553, 0.235702,
        // 0.853553, 1.0.
        let t = worked_track();
        let m = msd(&[&t], 5, 2.0);
        let want = [1.8, 5.25, 8.666667, 16.5, 29.0];
        assert_eq!(m.len(), want.len(), "one MSD point per lag");
        for (k, q) in m.iter().enumerate() {
            assert!((q.msd - want[k]).abs() < 1e-6 && q.pairs == 5 - k, "{q:?}");
            assert_eq!(q.lag, 2.0 * (k + 1) as f64);
        }
        let a = autocorrelation(&[&t], 4, 2.0);
        let vacf = [0.45, 0.25, 0.083333, 0.375, 0.5];
        let dacf = [1.0, 0.603553, 0.235702, 0.853553, 1.0];
        assert_eq!(a.len(), vacf.len(), "one autocorrelation point per lag");
        for (k, q) in a.iter().enumerate() {
            assert!(
                (q.velocity - vacf[k]).abs() < 1e-6 && (q.direction - dacf[k]).abs() < 1e-6,
                "{q:?}"
            );
        }
    }

    #[test]
    fn the_anomalous_exponent_leaves_out_points_without_a_logarithm() {
        // Source: construction: ballistic motion has MSD ∝ t² (α = 2); a lag whose MSD is 0
        // (only stationary pairs) has no logarithm and is left out rather than making α
        // infinite.
        let point = |lag: f64, msd: f64| MsdPoint {
            lag_frames: lag as usize,
            lag,
            msd,
            pairs: 1,
        };
        let mut points: Vec<MsdPoint> = (1..=4).map(|k| point(k as f64, 3.0 * (k * k) as f64)).collect();
        points.push(point(5.0, 0.0));
        let alpha = anomalous_exponent(&points).unwrap();
        assert!((alpha - 2.0).abs() < 1e-12, "{alpha}");
    }

    #[test]
    fn each_cell_weighs_the_same_in_the_per_cell_mean() {
        // Hand-derived: the worked track's lag-1 MSD is 1.8 (5 pairs); a second track of two
        // points 3 apart has lag-1 MSD 9 (1 pair). Pooled over pairs: (9 + 9)/6 = 3; the mean
        // of the two cells' own MSDs: (1.8 + 9)/2 = 5.4.
        let short = vec![PathPoint::new(0, 0.0, 0.0), PathPoint::new(1, 3.0, 0.0)];
        let (a, b) = (worked_track(), short);
        let pooled = msd(&[&a, &b], 1, 1.0);
        assert!((pooled[0].msd - 3.0).abs() < 1e-12 && pooled[0].pairs == 6);
        let per_track = [track_msd(&a, 1), track_msd(&b, 1)];
        assert_eq!(per_cell_mean_msd(&per_track), vec![(1, 5.4, 2)]);
        // Counting the short track twice (as a resample may) gives (9 + 18)/7.
        let twice = pool_msd(&per_track, Some(&[1, 2]), 1.0);
        assert!((twice[0].msd - 27.0 / 7.0).abs() < 1e-12 && twice[0].pairs == 7);
    }

    #[test]
    fn methods_furth_check() {
        // Source: fixtures/methods/check_values.md §9: D = 2, P = 5 gives MSD(1, 5, 20) = 0.74923, 14.715178,
        // 120.732626; a fit over lags 1–20 of exact values recovers D = 2, P = 5 (scipy
        // curve_fit); log-log slope 1.853275 over lags 1–5 and 1.393237 over lags 11–20.
        assert!((furth_msd(1.0, 2.0, 5.0) - 0.74923).abs() < 1e-5);
        assert!((furth_msd(5.0, 2.0, 5.0) - 14.715178).abs() < 1e-6);
        assert!((furth_msd(20.0, 2.0, 5.0) - 120.732626).abs() < 1e-6);
        let pts = model_points(1..=20, 1.0, |t| furth_msd(t, 2.0, 5.0));
        let f = walk_fit(&pts);
        assert!(
            (f.diffusion - 2.0).abs() < 1e-6 && (f.persistence.unwrap() - 5.0).abs() < 1e-6,
            "{f:?}"
        );
        assert!((f.walk_speed().unwrap().powi(2) - 0.8).abs() < 1e-6);
        assert!((anomalous_exponent(&pts[..5]).unwrap() - 1.853275).abs() < 1e-6);
        assert!((anomalous_exponent(&pts[10..]).unwrap() - 1.393237).abs() < 1e-6);
    }

    #[test]
    fn brownian_tracks_obey_the_einstein_relation() {
        // Physical law: for 2D Brownian motion MSD(t) = 4Dt (A. Einstein 1905, Ann. Phys.
        // 17:549–560); D = 0.1 µm²/min set in the simulation, 1-minute frames; slope within 5%.
        let tracks = walks(&WalkSettings::persistent(400, 60, 1.0, 0.1, 0.0), 11);
        let refs: Vec<&Path> = tracks.iter().map(|t| t.as_slice()).collect();
        let m = msd(&refs, 10, 1.0);
        let slope = slope_through_origin(&m).unwrap();
        assert!((slope / 4.0 - 0.1).abs() < 0.005, "D = {}", slope / 4.0);
        assert!((anomalous_exponent(&m).unwrap() - 1.0).abs() < 0.05);
    }

    #[test]
    fn persistent_walks_recover_d_and_p() {
        // Physical law: the Ornstein–Uhlenbeck velocity process has exactly the Fürth MSD;
        // D = 2 and P = 5 frames set in the simulation, recovered within 10% from lags 1–25.
        let tracks = walks(&WalkSettings::persistent(300, 200, 1.0, 2.0, 5.0), 12);
        let refs: Vec<&Path> = tracks.iter().map(|t| t.as_slice()).collect();
        let m = msd(&refs, 25, 1.0);
        let f = walk_fit(&m);
        assert!((f.diffusion / 2.0 - 1.0).abs() < 0.1, "{f:?}");
        assert!((f.persistence.unwrap() / 5.0 - 1.0).abs() < 0.1, "{f:?}");
    }
}
