//! Mean squared displacement with overlapping windows, the persistent-random-walk (Fürth) fit,
//! the anomalous exponent, and velocity and direction autocorrelations. Tracks are lists of
//! `(frame, x, y)` in analysis units; lags are whole frames.

use crate::tracks::PathPoint;
use serde::Serialize;
use std::collections::HashMap;

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
    /// Standard error of the mean over pairs (optimistic: overlapping windows are correlated).
    pub standard_error: f64,
}

/// MSD(n) = mean over all pairs of points n frames apart in one track of |r(t+n) − r(t)|²,
/// pooled over tracks, for lags 1..=`max_lag`; lags without pairs are left out.
///
/// # Method
/// Overlapping windows, as in H. Qian, M. P. Sheetz & E. L. Elson (1991), "Single particle
/// tracking: analysis of diffusion and flow in two-dimensional systems", Biophys. J.
/// 60(4):910–921, doi:10.1016/S0006-3495(91)82125-7.
pub fn msd(tracks: &[&Path], max_lag: usize, frame_interval: f64) -> Vec<MsdPoint> {
    let mut sums = vec![(0.0f64, 0.0f64, 0usize); max_lag + 1];
    for track in tracks {
        let at: HashMap<usize, (f64, f64)> = track.iter().map(|p| (p.frame, (p.x, p.y))).collect();
        for &PathPoint { frame: f, x, y } in track.iter() {
            for (lag, s) in sums.iter_mut().enumerate().skip(1) {
                if let Some(&(x2, y2)) = at.get(&(f + lag)) {
                    let d2 = (x2 - x).powi(2) + (y2 - y).powi(2);
                    s.0 += d2;
                    s.1 += d2 * d2;
                    s.2 += 1;
                }
            }
        }
    }
    sums.iter()
        .enumerate()
        .skip(1)
        .filter(|(_, s)| s.2 > 0)
        .map(|(lag, &(sum, sum2, n))| {
            let nf = n as f64;
            let mean = sum / nf;
            let var = if n > 1 {
                (sum2 - nf * mean * mean).max(0.0) / (nf - 1.0)
            } else {
                0.0
            };
            MsdPoint {
                lag_frames: lag,
                lag: lag as f64 * frame_interval,
                msd: mean,
                pairs: n,
                standard_error: (var / nf).sqrt(),
            }
        })
        .collect()
}

/// The 2D persistent random walk: MSD(t) = 4D[t − P(1 − e^{−t/P})].
pub fn furth_msd(t: f64, d: f64, p: f64) -> f64 {
    4.0 * d * (t - p * (1.0 - (-t / p).exp()))
}

/// Fitted persistent random walk.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FurthFit {
    /// Diffusion coefficient D (length² per time unit).
    pub diffusion: f64,
    /// Its standard error.
    pub diffusion_se: f64,
    /// Persistence time P (time units).
    pub persistence: f64,
    /// Its standard error.
    pub persistence_se: f64,
    /// Speed S = √(2D/P) (length per time unit).
    pub speed: f64,
    /// First and last lag fitted, frames.
    pub lag_range_frames: (usize, usize),
}

/// Fits the Fürth formula to MSD points by weighted least squares (weights = pairs), with
/// Levenberg–Marquardt steps; standard errors from the weighted residual variance and the
/// inverse normal matrix (optimistic, as overlapping windows are correlated).
///
/// # Method
/// R. Fürth (1920), "Die Brownsche Bewegung bei Berücksichtigung einer Persistenz der
/// Bewegungsrichtung", Z. Physik 2:244–256, doi:10.1007/BF01328731; in 2D as in G. A. Dunn
/// (1983), Agents Actions Suppl. 12:14–33, and H. G. Othmer, S. R. Dunbar & W. Alt (1988),
/// J. Math. Biol. 26:263–298, doi:10.1007/BF00277392. Fitting: K. Levenberg (1944), Q. Appl.
/// Math. 2:164–168; D. W. Marquardt (1963), J. SIAM 11(2):431–441.
pub fn fit_furth(points: &[MsdPoint]) -> Option<FurthFit> {
    if points.len() < 3 {
        return None;
    }
    let last = points[points.len() - 1];
    let mut theta = [(last.msd / (4.0 * last.lag)).max(1e-12), points[0].lag.max(1e-12)];
    let sse = |th: [f64; 2]| -> f64 {
        points
            .iter()
            .map(|q| q.pairs as f64 * (q.msd - furth_msd(q.lag, th[0], th[1])).powi(2))
            .sum()
    };
    let mut lambda = 1e-3;
    let mut current = sse(theta);
    for _ in 0..500 {
        let (jtj, jtr) = normal_equations(points, theta);
        let step = solve2(
            [
                [jtj[0][0] * (1.0 + lambda), jtj[0][1]],
                [jtj[1][0], jtj[1][1] * (1.0 + lambda)],
            ],
            jtr,
        )?;
        // Steps in log space keep D and P positive.
        let trial = [
            theta[0] * (step[0] / theta[0]).clamp(-5.0, 5.0).exp(),
            theta[1] * (step[1] / theta[1]).clamp(-5.0, 5.0).exp(),
        ];
        let next = sse(trial);
        if next < current {
            let converged = (current - next) <= 1e-15 * current.max(1e-300);
            theta = trial;
            current = next;
            lambda = (lambda / 10.0).max(1e-12);
            if converged {
                break;
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    // Relative weights: cov = s²(JᵀWJ)⁻¹ with s² = Σw·r²/(n − 2).
    let (jtj, _) = normal_equations(points, theta);
    let s2 = current / (points.len() as f64 - 2.0).max(1.0);
    let cov = invert2(jtj)?;
    Some(FurthFit {
        diffusion: theta[0],
        diffusion_se: (cov[0][0] * s2).max(0.0).sqrt(),
        persistence: theta[1],
        persistence_se: (cov[1][1] * s2).max(0.0).sqrt(),
        speed: (2.0 * theta[0] / theta[1]).sqrt(),
        lag_range_frames: (points[0].lag_frames, last.lag_frames),
    })
}

/// JᵀWJ and JᵀW r of the Fürth model at `theta`.
fn normal_equations(points: &[MsdPoint], theta: [f64; 2]) -> ([[f64; 2]; 2], [f64; 2]) {
    let (d, p) = (theta[0], theta[1]);
    let mut jtj = [[0.0; 2]; 2];
    let mut jtr = [0.0; 2];
    for q in points {
        let e = (-q.lag / p).exp();
        let jd = 4.0 * (q.lag - p * (1.0 - e));
        let jp = -4.0 * d * ((1.0 - e) - q.lag / p * e);
        let w = q.pairs as f64;
        let r = q.msd - furth_msd(q.lag, d, p);
        let j = [jd, jp];
        for a in 0..2 {
            jtr[a] += w * j[a] * r;
            for b in 0..2 {
                jtj[a][b] += w * j[a] * j[b];
            }
        }
    }
    (jtj, jtr)
}

fn invert2(m: [[f64; 2]; 2]) -> Option<[[f64; 2]; 2]> {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    (det.abs() > 0.0 && det.is_finite()).then(|| [[m[1][1] / det, -m[0][1] / det], [-m[1][0] / det, m[0][0] / det]])
}

fn solve2(m: [[f64; 2]; 2], b: [f64; 2]) -> Option<[f64; 2]> {
    let inv = invert2(m)?;
    Some([inv[0][0] * b[0] + inv[0][1] * b[1], inv[1][0] * b[0] + inv[1][1] * b[1]])
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

/// Velocity and direction autocorrelation over steps between consecutive frames, pooled over
/// tracks, lags 0..=`max_lag` (the direction autocorrelation at lag 0 is 1 by definition).
///
/// # Method
/// R. Gorelik & A. Gautreau (2014), "Quantitative and unbiased analysis of directional
/// persistence in cell migration", Nat. Protoc. 9(8):1931–1943, doi:10.1038/nprot.2014.131;
/// the direction autocorrelation is unbiased by speed.
pub fn autocorrelation(tracks: &[&Path], max_lag: usize, frame_interval: f64) -> Vec<AutocorrelationPoint> {
    let mut sums = vec![(0.0f64, 0.0f64, 0usize); max_lag + 1];
    for track in tracks {
        // Frame order (a BTreeMap), so that sums are added in the same order on every run.
        let steps: std::collections::BTreeMap<usize, (f64, f64)> = track
            .windows(2)
            .filter(|w| w[1].frame == w[0].frame + 1)
            .map(|w| {
                (
                    w[0].frame,
                    ((w[1].x - w[0].x) / frame_interval, (w[1].y - w[0].y) / frame_interval),
                )
            })
            .collect();
        for (&f, &(vx, vy)) in &steps {
            for (lag, s) in sums.iter_mut().enumerate() {
                if let Some(&(wx, wy)) = steps.get(&(f + lag)) {
                    let dot = vx * wx + vy * wy;
                    let norms = vx.hypot(vy) * wx.hypot(wy);
                    if norms > 0.0 {
                        s.0 += dot;
                        s.1 += dot / norms;
                        s.2 += 1;
                    }
                }
            }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::Rng;

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
            standard_error: 0.0,
        };
        let mut points: Vec<MsdPoint> = (1..=4).map(|k| point(k as f64, 3.0 * (k * k) as f64)).collect();
        points.push(point(5.0, 0.0));
        let alpha = anomalous_exponent(&points).unwrap();
        assert!((alpha - 2.0).abs() < 1e-12, "{alpha}");
    }

    #[test]
    fn the_msd_standard_error_is_the_sample_one_over_pairs() {
        // Source: numpy 2 (`v.std(ddof=1) / sqrt(len(v))`) on the worked track's squared
        // displacements: lag 1 [1, 2, 1, 1, 4] gives 0.58309518948453, lag 2 [5, 5, 2, 9]
        // gives 1.4361406616345072 (the column is the optimistic one its doc names).
        let m = msd(&[&worked_track()], 2, 1.0);
        assert_eq!(m.len(), 2);
        assert!((m[0].standard_error - 0.58309518948453).abs() < 1e-12, "{:?}", m[0]);
        assert!((m[1].standard_error - 1.4361406616345072).abs() < 1e-12, "{:?}", m[1]);
    }

    #[test]
    fn methods_furth_check() {
        // Source: fixtures/methods/check_values.md §9: D = 2, P = 5 gives MSD(1, 5, 20) = 0.74923, 14.715178,
        // 120.732626; a fit over lags 1–20 of exact values recovers D = 2, P = 5 (scipy
        // curve_fit); log-log slope 1.853275 over lags 1–5 and 1.393237 over lags 11–20.
        assert!((furth_msd(1.0, 2.0, 5.0) - 0.74923).abs() < 1e-5);
        assert!((furth_msd(5.0, 2.0, 5.0) - 14.715178).abs() < 1e-6);
        assert!((furth_msd(20.0, 2.0, 5.0) - 120.732626).abs() < 1e-6);
        let pts: Vec<MsdPoint> = (1..=20)
            .map(|k| MsdPoint {
                lag_frames: k,
                lag: k as f64,
                msd: furth_msd(k as f64, 2.0, 5.0),
                pairs: 1,
                standard_error: 0.0,
            })
            .collect();
        let f = fit_furth(&pts).unwrap();
        assert!(
            (f.diffusion - 2.0).abs() < 1e-6 && (f.persistence - 5.0).abs() < 1e-6,
            "{f:?}"
        );
        assert!((f.speed.powi(2) - 0.8).abs() < 1e-6);
        assert!((anomalous_exponent(&pts[..5]).unwrap() - 1.853275).abs() < 1e-6);
        assert!((anomalous_exponent(&pts[10..]).unwrap() - 1.393237).abs() < 1e-6);
    }

    /// Tracks of a 2D random walk whose velocity is an Ornstein–Uhlenbeck process (persistence
    /// `p` frames, speed² `s2` so that D = s2·p/2), integrated in fine sub-steps; `p = 0` gives
    /// Brownian steps of variance 2D per axis and frame.
    fn simulate(tracks: usize, frames: usize, d: f64, p: f64, seed: u64) -> Vec<Vec<PathPoint>> {
        let mut rng = Rng::new(seed);
        let sub = 50;
        let dt = 1.0 / sub as f64;
        (0..tracks)
            .map(|_| {
                let (mut x, mut y) = (0.0, 0.0);
                let axis_var = if p > 0.0 { d / p } else { 0.0 };
                let (mut vx, mut vy) = (axis_var.sqrt() * rng.normal(), axis_var.sqrt() * rng.normal());
                let mut out = vec![PathPoint::new(0, 0.0, 0.0)];
                for f in 1..frames {
                    if p > 0.0 {
                        let decay = (-dt / p).exp();
                        let kick = (axis_var * (1.0 - decay * decay)).sqrt();
                        for _ in 0..sub {
                            x += vx * dt;
                            y += vy * dt;
                            vx = vx * decay + kick * rng.normal();
                            vy = vy * decay + kick * rng.normal();
                        }
                    } else {
                        x += (2.0 * d).sqrt() * rng.normal();
                        y += (2.0 * d).sqrt() * rng.normal();
                    }
                    out.push(PathPoint::new(f, x, y));
                }
                out
            })
            .collect()
    }

    #[test]
    fn brownian_tracks_obey_the_einstein_relation() {
        // Physical law: for 2D Brownian motion MSD(t) = 4Dt (A. Einstein 1905, Ann. Phys.
        // 17:549–560); D = 0.1 µm²/min set in the simulation, 1-minute frames; slope within 5%.
        let tracks = simulate(400, 60, 0.1, 0.0, 11);
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
        let tracks = simulate(300, 200, 2.0, 5.0, 12);
        let refs: Vec<&Path> = tracks.iter().map(|t| t.as_slice()).collect();
        let m = msd(&refs, 25, 1.0);
        let f = fit_furth(&m).unwrap();
        assert!((f.diffusion / 2.0 - 1.0).abs() < 0.1, "{f:?}");
        assert!((f.persistence / 5.0 - 1.0).abs() < 0.1, "{f:?}");
        assert!(f.diffusion_se > 0.0 && f.persistence_se > 0.0);
    }
}
