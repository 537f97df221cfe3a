//! Motion models of the mean squared displacement, fitted and chosen between: free diffusion,
//! diffusion with a drift, and the persistent random walk, each with or without a constant
//! offset for localisation noise. The choice is by the small-sample Akaike information
//! criterion, and every candidate's fit (or the reason it failed) is kept for the outputs.

use super::msd::{furth_msd, furth_msd_given, MsdPoint};
use serde::Serialize;

/// The shape of a model's MSD curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MotionKind {
    /// MSD = 4Dt (A. Einstein (1905), Ann. Phys. 17:549–560).
    Diffusion,
    /// MSD = 4Dt + v²t²: diffusion carried along by a constant velocity v (H. Qian, M. P.
    /// Sheetz & E. L. Elson (1991), Biophys. J. 60(4):910–921, doi:10.1016/S0006-3495(91)82125-7).
    DiffusionWithDrift,
    /// MSD = 4D[t − P(1 − e^{−t/P})] (R. Fürth (1920), Z. Physik 2:244–256; see
    /// [`super::msd::furth_msd`]).
    PersistentRandomWalk,
}

/// One candidate model: a shape, with or without the localisation-noise offset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct MotionModel {
    /// Shape of the curve.
    pub kind: MotionKind,
    /// Whether a constant 4σ² is added at every lag.
    pub noise_offset: bool,
}

impl MotionModel {
    /// The six candidates, simplest first.
    pub const ALL: [MotionModel; 6] = [
        MotionModel::new(MotionKind::Diffusion, false),
        MotionModel::new(MotionKind::Diffusion, true),
        MotionModel::new(MotionKind::DiffusionWithDrift, false),
        MotionModel::new(MotionKind::DiffusionWithDrift, true),
        MotionModel::new(MotionKind::PersistentRandomWalk, false),
        MotionModel::new(MotionKind::PersistentRandomWalk, true),
    ];

    /// A candidate.
    pub const fn new(kind: MotionKind, noise_offset: bool) -> Self {
        MotionModel { kind, noise_offset }
    }

    /// Its name in the outputs, e.g. `persistent_random_walk+noise`.
    pub fn name(&self) -> String {
        let shape = match self.kind {
            MotionKind::Diffusion => "diffusion",
            MotionKind::DiffusionWithDrift => "diffusion_with_drift",
            MotionKind::PersistentRandomWalk => "persistent_random_walk",
        };
        if self.noise_offset {
            format!("{shape}+noise")
        } else {
            shape.to_string()
        }
    }

    /// Number of fitted parameters.
    pub fn parameter_count(&self) -> usize {
        let shape = match self.kind {
            MotionKind::Diffusion => 1,
            MotionKind::DiffusionWithDrift | MotionKind::PersistentRandomWalk => 2,
        };
        shape + usize::from(self.noise_offset)
    }
}

/// Fitted parameters; those a model does not have are `None`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelParameters {
    /// Diffusion coefficient D (length² per time).
    pub diffusion: f64,
    /// Persistence time P (time).
    pub persistence: Option<f64>,
    /// Drift speed v (length per time).
    pub drift_speed: Option<f64>,
    /// The constant offset 4σ² (length²); σ is the localisation error per axis (X. Michalet
    /// (2010), "Mean square displacement analysis of single-particle trajectories with
    /// localization error", Phys. Rev. E 82:041914, doi:10.1103/PhysRevE.82.041914).
    pub noise_offset: Option<f64>,
}

impl ModelParameters {
    /// The model's MSD at time lag `t`.
    pub fn msd_at(&self, t: f64) -> f64 {
        let shape = match self.persistence {
            Some(p) => furth_msd(t, self.diffusion, p),
            None => 4.0 * self.diffusion * t,
        };
        shape + self.drift_speed.map_or(0.0, |v| v * v * t * t) + self.noise_offset.unwrap_or(0.0)
    }

    /// The persistent walk's speed S = √(2D/P), when it has a persistence time.
    pub fn walk_speed(&self) -> Option<f64> {
        self.persistence.map(|p| (2.0 * self.diffusion / p).sqrt())
    }

    /// The localisation error σ per axis, √(offset/4).
    pub fn localisation_error(&self) -> Option<f64> {
        self.noise_offset.map(|c| (c / 4.0).sqrt())
    }
}

/// One candidate fitted to MSD points.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelFit {
    /// The candidate.
    pub model: MotionModel,
    /// Its parameters.
    pub parameters: ModelParameters,
    /// Weighted residual sum of squares (weights: pairs per lag over their mean).
    pub weighted_rss: f64,
    /// MSD points fitted.
    pub points: usize,
    /// Small-sample Akaike information criterion (see [`aicc`]).
    pub aicc: f64,
}

/// A candidate that could not be fitted, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FailedFit {
    /// The candidate.
    pub model: MotionModel,
    /// Why, in words.
    pub reason: String,
}

/// Every candidate's fit and the one chosen.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelChoice {
    /// Candidates fitted, in [`MotionModel::ALL`] order.
    pub fitted: Vec<ModelFit>,
    /// Candidates that failed.
    pub failed: Vec<FailedFit>,
    /// Index into `fitted` of the model chosen (`None` when nothing could be fitted).
    pub chosen: Option<usize>,
}

impl ModelChoice {
    /// The chosen fit.
    pub fn best(&self) -> Option<&ModelFit> {
        self.chosen.map(|k| &self.fitted[k])
    }

    /// The better-scoring persistent random walk (with or without offset): the fit whose D
    /// and P `compare` sets side by side across recordings, whichever model won here.
    pub fn persistent_walk(&self) -> Option<&ModelFit> {
        self.fitted
            .iter()
            .filter(|f| f.model.kind == MotionKind::PersistentRandomWalk)
            .min_by(|a, b| a.aicc.total_cmp(&b.aicc))
    }

    /// Each fit's AICc minus the lowest AICc (Burnham & Anderson's Δ), in `fitted` order.
    pub fn delta_aicc(&self) -> Vec<f64> {
        let lowest = self.fitted.iter().map(|f| f.aicc).fold(f64::INFINITY, f64::min);
        self.fitted.iter().map(|f| f.aicc - lowest).collect()
    }

    /// The fit of one candidate, if it succeeded.
    pub fn fit_of(&self, model: MotionModel) -> Option<&ModelFit> {
        self.fitted.iter().find(|f| f.model == model)
    }
}

/// Fits every candidate to `points` and chooses the simplest one the AICc supports (see
/// [`simplest_supported`]).
///
/// # Method
/// Model choice by an information criterion: K. P. Burnham & D. R. Anderson (2002), *Model
/// Selection and Multimodel Inference*, 2nd ed., Springer, §2.4 (AICc for least squares with
/// few points). MSD points of overlapping windows are correlated (Qian, Sheetz & Elson 1991),
/// so the criterion ranks the candidates, while the intervals of their parameters come from
/// resampling tracks ([`super::resample`]).
pub fn choose_model(points: &[MsdPoint]) -> ModelChoice {
    let mut fitted = Vec::new();
    let mut failed = Vec::new();
    for model in MotionModel::ALL {
        match fit_model(model, points) {
            Ok(f) => fitted.push(f),
            Err(reason) => failed.push(FailedFit { model, reason }),
        }
    }
    let chosen = simplest_supported(&fitted);
    ModelChoice { fitted, failed, chosen }
}

/// Models within this AICc of the lowest have substantial support (Burnham & Anderson 2002,
/// §2.6).
pub const SUPPORTED_DELTA_AICC: f64 = 2.0;

/// The fit with the fewest parameters among those within [`SUPPORTED_DELTA_AICC`] of the
/// lowest AICc (the lower AICc between equals): a richer model must earn its parameters, which
/// matters because correlated MSD points make every criterion favour extra terms.
pub fn simplest_supported(fitted: &[ModelFit]) -> Option<usize> {
    let lowest = fitted.iter().map(|f| f.aicc).fold(f64::INFINITY, f64::min);
    (0..fitted.len())
        .filter(|&k| fitted[k].aicc <= lowest + SUPPORTED_DELTA_AICC)
        .min_by(|&a, &b| {
            let (fa, fb) = (&fitted[a], &fitted[b]);
            (fa.model.parameter_count().cmp(&fb.model.parameter_count())).then(fa.aicc.total_cmp(&fb.aicc))
        })
}

/// AICc = n·ln(RSS/n) + 2k + 2k(k + 1)/(n − k − 1) for a least-squares fit of `k` parameters
/// to `n` points (Burnham & Anderson 2002, §2.4); `None` when n ≤ k + 1.
pub fn aicc(rss: f64, n: usize, k: usize) -> Option<f64> {
    (n > k + 1).then(|| {
        let (nf, kf) = (n as f64, k as f64);
        nf * (rss.max(f64::MIN_POSITIVE) / nf).ln() + 2.0 * kf + 2.0 * kf * (kf + 1.0) / (nf - kf - 1.0)
    })
}

/// Fits one candidate to `points` by weighted least squares (weights: pairs per lag); a fit
/// with a negative coefficient (no physical meaning) or too few points fails with the reason.
///
/// # Errors
/// The reason the candidate has no fit, in words.
pub fn fit_model(model: MotionModel, points: &[MsdPoint]) -> Result<ModelFit, String> {
    fit_with(model, points, None)
}

/// As [`fit_model`], the persistent walk started from `start` alone (a resample's refit
/// starts from the full data's estimate; the linear models need no start).
///
/// # Errors
/// The reason the candidate has no fit, in words.
pub fn fit_model_from(model: MotionModel, points: &[MsdPoint], start: &ModelParameters) -> Result<ModelFit, String> {
    fit_with(model, points, Some(start))
}

fn fit_with(model: MotionModel, points: &[MsdPoint], start: Option<&ModelParameters>) -> Result<ModelFit, String> {
    let k = model.parameter_count();
    if points.len() < k + 2 {
        return Err(format!("{} MSD points are too few for {k} parameters", points.len()));
    }
    let mean_pairs = points.iter().map(|q| q.pairs as f64).sum::<f64>() / points.len() as f64;
    let weights: Vec<f64> = points.iter().map(|q| q.pairs as f64 / mean_pairs).collect();
    let parameters = match model.kind {
        MotionKind::PersistentRandomWalk => fit_persistent_walk(points, &weights, model.noise_offset, start)?,
        _ => fit_linear(model, points, &weights)?,
    };
    let rss: f64 = points
        .iter()
        .zip(&weights)
        .map(|(q, w)| w * (q.msd - parameters.msd_at(q.lag)).powi(2))
        .sum();
    if !rss.is_finite() {
        return Err("the fit did not converge".into());
    }
    Ok(ModelFit {
        model,
        parameters,
        weighted_rss: rss,
        points: points.len(),
        aicc: aicc(rss, points.len(), k).expect("enough points checked above"),
    })
}

/// Diffusion and drift models are linear in 4D, v² and 4σ²: weighted normal equations.
fn fit_linear(model: MotionModel, points: &[MsdPoint], weights: &[f64]) -> Result<ModelParameters, String> {
    let drift = model.kind == MotionKind::DiffusionWithDrift;
    let basis = |t: f64| {
        let mut row = vec![4.0 * t];
        if drift {
            row.push(t * t);
        }
        if model.noise_offset {
            row.push(1.0);
        }
        row
    };
    let rows: Vec<(Vec<f64>, f64, f64)> = points
        .iter()
        .zip(weights)
        .map(|(q, &w)| (basis(q.lag), q.msd, w))
        .collect();
    let coef = weighted_least_squares(&rows).ok_or("the lags fitted do not determine the parameters")?;
    let named = ["diffusion coefficient", "drift term v²", "noise offset"];
    let names: Vec<&str> = [true, drift, model.noise_offset]
        .iter()
        .zip(named)
        .filter(|(on, _)| **on)
        .map(|(_, n)| n)
        .collect();
    if let Some((name, value)) = names.iter().zip(&coef).find(|(_, &c)| c < 0.0) {
        return Err(format!(
            "the fitted {name} is negative ({value:.4}): the model does not describe these points"
        ));
    }
    let mut it = coef.iter().copied();
    let diffusion = it.next().expect("one coefficient at least");
    Ok(ModelParameters {
        diffusion,
        persistence: None,
        drift_speed: drift.then(|| it.next().expect("drift term").sqrt()),
        noise_offset: model.noise_offset.then(|| it.next().expect("offset term")),
    })
}

/// Solves min Σ w (y − x·β)² by the normal equations (Gaussian elimination with partial
/// pivoting), for up to three coefficients; `None` when singular or wider.
pub fn weighted_least_squares(rows: &[(Vec<f64>, f64, f64)]) -> Option<Vec<f64>> {
    let k = rows.first()?.0.len();
    if k > MAX_PARAMETERS {
        return None;
    }
    let mut a = [[0.0; MAX_PARAMETERS + 1]; MAX_PARAMETERS];
    for (x, y, w) in rows {
        for i in 0..k {
            for j in 0..k {
                a[i][j] += w * x[i] * x[j];
            }
            a[i][k] += w * x[i] * y;
        }
    }
    solve_augmented(&mut a[..k]).map(|x| x[..k].to_vec())
}

/// The most parameters a model has (D, v² or P, and the offset).
const MAX_PARAMETERS: usize = 3;

/// Gaussian elimination with partial pivoting on an augmented k × (k + 1) matrix (`k` rows,
/// each row's first k + 1 entries used; k ≤ [`MAX_PARAMETERS`]); the first k entries of the
/// result are the solution.
fn solve_augmented(a: &mut [[f64; MAX_PARAMETERS + 1]]) -> Option<[f64; MAX_PARAMETERS]> {
    let k = a.len();
    let scale = a.iter().flat_map(|r| r[..k].iter()).fold(0.0f64, |m, v| m.max(v.abs()));
    for col in 0..k {
        let pivot = (col..k).max_by(|&r, &s| a[r][col].abs().total_cmp(&a[s][col].abs()))?;
        if a[pivot][col].abs() <= 1e-13 * scale || !a[pivot][col].is_finite() {
            return None;
        }
        a.swap(col, pivot);
        let (upper, lower) = a.split_at_mut(col + 1);
        let pivot_row = &upper[col];
        for row in lower.iter_mut() {
            let f = row[col] / pivot_row[col];
            for (x, p) in row[col..=k].iter_mut().zip(&pivot_row[col..=k]) {
                *x -= f * p;
            }
        }
    }
    let mut x = [0.0; MAX_PARAMETERS];
    for r in (0..k).rev() {
        let s: f64 = (r + 1..k).map(|c| a[r][c] * x[c]).sum();
        x[r] = (a[r][k] - s) / a[r][r];
    }
    Some(x)
}

/// The persistent random walk (and its noise-offset variant) by Levenberg–Marquardt steps in
/// log space (D, P and the offset stay positive), started from several persistence times
/// across the lags fitted, keeping the best.
///
/// # Method
/// K. Levenberg (1944), Q. Appl. Math. 2:164–168; D. W. Marquardt (1963), J. SIAM
/// 11(2):431–441.
fn fit_persistent_walk(
    points: &[MsdPoint],
    weights: &[f64],
    offset: bool,
    start: Option<&ModelParameters>,
) -> Result<ModelParameters, String> {
    let (first, last) = (points[0], points[points.len() - 1]);
    let starts: Vec<[f64; 3]> = match start {
        Some(s) => vec![[
            s.diffusion,
            s.persistence.unwrap_or(first.lag),
            s.noise_offset.unwrap_or(0.0),
        ]],
        None => {
            let d0 = last.msd / (4.0 * last.lag);
            [first.lag, (first.lag * last.lag).sqrt(), last.lag]
                .iter()
                .map(|&p0| [d0, p0, 0.1 * first.msd])
                .collect()
        }
    };
    let best = starts
        .iter()
        .filter_map(|s| {
            let theta: Vec<f64> = s[..2 + usize::from(offset)].iter().map(|v| v.max(1e-12)).collect();
            levenberg_marquardt(points, weights, theta)
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .ok_or("the persistent random walk fit did not converge")?;
    let theta = best.0;
    Ok(ModelParameters {
        diffusion: theta[0],
        persistence: Some(theta[1]),
        drift_speed: None,
        noise_offset: offset.then(|| theta[2]),
    })
}

/// Weighted residual sum of squares of the walk with parameters `theta` = (D, P[, offset]).
fn walk_rss(points: &[MsdPoint], weights: &[f64], theta: &[f64]) -> f64 {
    points
        .iter()
        .zip(weights)
        .map(|(q, w)| w * (q.msd - walk_msd(q.lag, theta)).powi(2))
        .sum()
}

fn walk_msd(t: f64, theta: &[f64]) -> f64 {
    furth_msd(t, theta[0], theta[1]) + theta.get(2).copied().unwrap_or(0.0)
}

/// Minimises [`walk_rss`] from `theta`; the parameters and their RSS, `None` if it never
/// became finite. Each step's normal equations are summed in fixed-size arrays (a resampled
/// analysis fits thousands of walks, and allocating per point and step cost a fifth of it),
/// and summed again only after a step is taken: a rejected step leaves `theta`, and so them,
/// as they were, and two steps in three are rejected (a fit ends with λ climbing tenfold per
/// step to its bound; 47,723 of 71,588 steps in the 2,006 fits of the benchmark recording's
/// analysis).
fn levenberg_marquardt(points: &[MsdPoint], weights: &[f64], mut theta: Vec<f64>) -> Option<(Vec<f64>, f64)> {
    let k = theta.len();
    let mut lambda = 1e-3;
    let mut current = walk_rss(points, weights, &theta);
    let mut at_theta = None;
    for _ in 0..500 {
        let mut a = *at_theta.get_or_insert_with(|| normal_equations(points, weights, &theta));
        for (i, row) in a.iter_mut().enumerate().take(k) {
            row[i] *= 1.0 + lambda;
        }
        let Some(step) = solve_augmented(&mut a[..k]) else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
            continue;
        };
        let trial: Vec<f64> = theta
            .iter()
            .zip(&step)
            .map(|(t, s)| t * (s / t).clamp(-5.0, 5.0).exp())
            .collect();
        // A step too small to move any parameter gives the same sum, not a smaller one: the
        // step is rejected without the sum (the last steps of a fit, as λ climbs to its bound).
        let unmoved = trial.iter().zip(&theta).all(|(a, b)| a.to_bits() == b.to_bits());
        let next = if unmoved {
            current
        } else {
            walk_rss(points, weights, &trial)
        };
        if next < current {
            let converged = (current - next) <= 1e-15 * current.max(1e-300);
            theta = trial;
            at_theta = None;
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
    (current.is_finite() && theta.iter().all(|t| t.is_finite())).then_some((theta, current))
}

/// The normal equations of a Gauss–Newton step of the walk from `theta` (`k` =
/// `theta.len()` parameters): row `i` holds Σ w·Jᵢ·J꜀ for each parameter `c`, then
/// Σ w·Jᵢ·r in column `k` (J the slopes of [`walk_slope_and_msd`], r the residuals).
fn normal_equations(
    points: &[MsdPoint],
    weights: &[f64],
    theta: &[f64],
) -> [[f64; MAX_PARAMETERS + 1]; MAX_PARAMETERS] {
    let k = theta.len();
    let mut a = [[0.0; MAX_PARAMETERS + 1]; MAX_PARAMETERS];
    for (q, &w) in points.iter().zip(weights) {
        let (j, msd) = walk_slope_and_msd(q.lag, theta);
        let r = q.msd - msd;
        for i in 0..k {
            for c in 0..k {
                a[i][c] += w * j[i] * j[c];
            }
            a[i][k] += w * j[i] * r;
        }
    }
    a
}

/// ∂MSD/∂(D, P[, offset]) of the walk at lag `t` (the offset's entry 1, unused without it),
/// and the walk's MSD there ([`walk_msd`], the same value: one `exp_m1` serves both).
fn walk_slope_and_msd(t: f64, theta: &[f64]) -> ([f64; MAX_PARAMETERS], f64) {
    let (d, p) = (theta[0], theta[1]);
    // In expm1 form for a persistence far beyond the lag (see `furth_msd`).
    let (x, em1) = (t / p, (-t / p).exp_m1());
    let msd = furth_msd_given(t, d, p, em1) + theta.get(2).copied().unwrap_or(0.0);
    ([4.0 * (t + p * em1), 4.0 * d * (em1 + x * (-x).exp()), 1.0], msd)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analyze::msd::model_points;

    #[test]
    fn drift_and_noise_check_values() {
        // Source: fixtures/methods/check_values.md §11 "MSD models": D = 0.5, v = 0.4 at
        // t = 5, 10, 15 gives 14, 36, 66; with σ² = 0.25 (offset 4σ² = 1) 15, 37, 67.
        let p = ModelParameters {
            diffusion: 0.5,
            persistence: None,
            drift_speed: Some(0.4),
            noise_offset: None,
        };
        let with_noise = ModelParameters {
            noise_offset: Some(1.0),
            ..p
        };
        for (t, want) in [(5.0, 14.0), (10.0, 36.0), (15.0, 66.0)] {
            assert!((p.msd_at(t) - want).abs() < 1e-12);
            assert!((with_noise.msd_at(t) - want - 1.0).abs() < 1e-12);
        }
        assert!((with_noise.localisation_error().unwrap() - 0.5).abs() < 1e-12);
    }

    #[test]
    fn the_normal_equations_are_those_of_the_walks_slopes_by_central_differences() {
        // Source: the persistent random walk's MSD, 4D(t − P(1 − e^(−t/P))) + offset (R. Fürth
        // (1920), Z. Phys. 2:244–256), differentiated numerically by central differences
        // here, and the Gauss–Newton normal equations JᵀWJ and JᵀWr by their definition.
        let walk = |t: f64, th: &[f64]| 4.0 * th[0] * (t - th[1] * (1.0 - (-t / th[1]).exp())) + th[2];
        let theta = [1.7, 4.2, 0.3];
        let points: Vec<MsdPoint> = (1..=9)
            .map(|lag| MsdPoint {
                lag_frames: lag,
                lag: lag as f64 * 0.5,
                msd: walk(lag as f64 * 0.5, &theta) * (1.0 + 0.05 * (lag as f64).sin()),
                pairs: 10,
            })
            .collect();
        let weights: Vec<f64> = (1..=9).map(|lag| 1.0 / lag as f64).collect();
        let got = normal_equations(&points, &weights, &theta);
        let slope = |t: f64, i: usize| {
            let h = 1e-6 * theta[i];
            let (mut up, mut down) = (theta, theta);
            up[i] += h;
            down[i] -= h;
            (walk(t, &up) - walk(t, &down)) / (2.0 * h)
        };
        for (i, row) in got.iter().enumerate() {
            for (c, &value) in row.iter().enumerate() {
                let want: f64 = (points.iter().zip(&weights))
                    .map(|(q, w)| {
                        let other = if c == 3 {
                            q.msd - walk(q.lag, &theta)
                        } else {
                            slope(q.lag, c)
                        };
                        w * slope(q.lag, i) * other
                    })
                    .sum();
                assert!(
                    (value - want).abs() <= 1e-6 * want.abs().max(1e-3),
                    "{i} {c}: {value} {want}"
                );
            }
        }
    }

    #[test]
    fn information_criterion_check_values() {
        // Source: fixtures/methods/check_values.md §11 "Choosing a model", recomputed by
        // check_values.py (numpy least squares on the rounded values): lags 5..50 step 5;
        // diffusion through the origin RSS 24665.947154, AICc 80.605938; drift + diffusion RSS
        // 4.109065, AICc −3.179610, D = 0.511906, v = 0.398472 (AICc = AIC + 2k(k+1)/(n−k−1),
        // Burnham & Anderson 2002, §2.4).
        let y = [
            14.12573, 35.867895, 66.640423, 104.1049, 149.464331, 204.361595, 267.304, 336.947081, 413.296265,
            498.734579,
        ];
        let pts = model_points(1..=10, 5.0, |t| y[(t / 5.0).round() as usize - 1]);
        let diffusion = fit_model(MotionModel::new(MotionKind::Diffusion, false), &pts).unwrap();
        assert!((diffusion.weighted_rss - 24665.947154).abs() < 1e-5, "{diffusion:?}");
        assert!((diffusion.aicc - 80.605938).abs() < 1e-5);
        let drift = fit_model(MotionModel::new(MotionKind::DiffusionWithDrift, false), &pts).unwrap();
        assert!((drift.weighted_rss - 4.109065).abs() < 1e-5, "{drift:?}");
        assert!((drift.aicc - -3.179610).abs() < 1e-5);
        assert!((drift.parameters.diffusion - 0.511906).abs() < 1e-6);
        assert!((drift.parameters.drift_speed.unwrap() - 0.398472).abs() < 1e-6);
        let choice = choose_model(&pts);
        assert_eq!(choice.best().unwrap().model.kind, MotionKind::DiffusionWithDrift);
    }

    #[test]
    fn a_walk_fit_reports_the_residual_sum_of_its_own_parameters() {
        // Source: definition (Σ w·(MSD − walk MSD at the returned parameters)², in lag order),
        // for the walk with and without an offset from several starts on a wavy curve: each
        // fit ends with λ climbing to its bound through steps too small to move a parameter,
        // whose sum is not computed again; the sum returned must still be that of the
        // parameters returned, to the last bit.
        let pts = model_points(1..=20, 1.0, |t| furth_msd(t, 2.0, 5.0) * (1.0 + 0.05 * (1.7 * t).sin()));
        let weights: Vec<f64> = pts.iter().map(|q| 1.0 / (q.msd * q.msd)).collect();
        for start in [
            vec![0.5, 1.0],
            vec![3.0, 20.0],
            vec![1.0, 2.0, 0.1],
            vec![2.0, 5.0, 1.0],
        ] {
            let (theta, rss) = levenberg_marquardt(&pts, &weights, start.clone()).expect("converges");
            let mut defined = 0.0;
            for (q, w) in pts.iter().zip(&weights) {
                let offset = theta.get(2).copied().unwrap_or(0.0);
                defined += w * (q.msd - (furth_msd(q.lag, theta[0], theta[1]) + offset)).powi(2);
            }
            assert_eq!(rss.to_bits(), defined.to_bits(), "from {start:?}: {rss} {defined}");
        }
    }

    #[test]
    fn the_noise_offset_removes_the_bias_of_the_walk() {
        // Source: fixtures/methods/check_values.md §11: exact PRW values D = 2, P = 5 plus
        // 4σ² with σ² = 0.25, lags 1–20: the walk with offset recovers D = 2, P = 5, σ² = 0.25
        // (scipy curve_fit); the plain walk gives D = 1.962134, P = 4.581874.
        let pts = model_points(1..=20, 1.0, |t| furth_msd(t, 2.0, 5.0) + 1.0);
        let plain = fit_model(MotionModel::new(MotionKind::PersistentRandomWalk, false), &pts).unwrap();
        assert!((plain.parameters.diffusion - 1.962134).abs() < 1e-5, "{plain:?}");
        assert!((plain.parameters.persistence.unwrap() - 4.581874).abs() < 1e-5);
        let offset = fit_model(MotionModel::new(MotionKind::PersistentRandomWalk, true), &pts).unwrap();
        let p = offset.parameters;
        assert!(
            (p.diffusion - 2.0).abs() < 1e-6 && (p.persistence.unwrap() - 5.0).abs() < 1e-6,
            "{p:?}"
        );
        assert!((p.localisation_error().unwrap().powi(2) - 0.25).abs() < 1e-6);
    }

    #[test]
    fn a_negative_coefficient_is_a_failed_fit_with_its_reason() {
        // Construction: points on MSD = 4t − 0.01t² (a curve bending down, as confinement
        // gives) make the drift term negative: no drift speed exists, so the drift model
        // fails and says why, and the others are still fitted.
        let pts = model_points(1..=10, 1.0, |t| 4.0 * t - 0.01 * t * t);
        let choice = choose_model(&pts);
        let failed: Vec<String> = choice.failed.iter().map(|f| f.model.name()).collect();
        assert!(
            failed.contains(&"diffusion_with_drift".to_string()),
            "{:?}",
            choice.failed
        );
        assert!(choice
            .failed
            .iter()
            .all(|f| f.reason.contains("negative") || f.reason.contains("converge")));
        assert!(choice.fit_of(MotionModel::new(MotionKind::Diffusion, false)).is_some());
    }

    #[test]
    fn the_simplest_model_within_two_of_the_lowest_aicc_is_chosen() {
        // Source: Burnham & Anderson (2002), §2.6: models within 2 of the lowest AICc have
        // substantial support; among them the fewest parameters (our parsimony rule). AICc
        // 10 (1 parameter), 9 and 8.5 (2): the 1-parameter model is within 1.5 and is chosen;
        // with the last at 5, nothing else is within 2 and it is chosen. Δ from the lowest.
        let fit = |model: MotionModel, aicc: f64| ModelFit {
            model,
            parameters: ModelParameters {
                diffusion: 1.0,
                persistence: None,
                drift_speed: None,
                noise_offset: None,
            },
            weighted_rss: 1.0,
            points: 10,
            aicc,
        };
        let [d, _, drift, _, walk, _] = MotionModel::ALL;
        let close = vec![fit(d, 10.0), fit(drift, 9.0), fit(walk, 8.5)];
        assert_eq!(simplest_supported(&close), Some(0));
        let far = vec![fit(d, 10.0), fit(drift, 9.0), fit(walk, 5.0)];
        assert_eq!(simplest_supported(&far), Some(2));
        let choice = ModelChoice {
            fitted: far,
            failed: Vec::new(),
            chosen: Some(2),
        };
        assert_eq!(choice.delta_aicc(), vec![5.0, 4.0, 0.0]);
    }
}
