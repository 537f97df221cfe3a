//! Intervals by resampling whole tracks: the independent unit within a recording is the
//! track, not the displacement pair (pairs of one track, and overlapping windows of one
//! track, are correlated). Every statistic of the population (MSD points, autocorrelations,
//! every motion model's parameters, the anomalous exponent, the mean speed) is recomputed on
//! each resample, and its 2.5th and 97.5th percentiles are the 95% interval.
//!
//! # Method
//! The case-resampling (nonparametric) bootstrap and its percentile interval: B. Efron &
//! R. J. Tibshirani (1993), *An Introduction to the Bootstrap*, Chapman & Hall, ch. 6 and 13;
//! cases are whole tracks because MSD points of overlapping windows are correlated (H. Qian,
//! M. P. Sheetz & E. L. Elson (1991), Biophys. J. 60(4):910–921,
//! doi:10.1016/S0006-3495(91)82125-7).

use super::models::{fit_model_from, simplest_supported, ModelFit};
use super::msd::{anomalous_exponent, pool_autocorrelation, pool_msd, MsdPoint, TrackAutocorrelation, TrackMsd};
use crate::numeric::{quantile, Rng};
use rayon::prelude::*;
use serde::Serialize;

/// Resamples of tracks per analysis (Efron & Tibshirani 1993, §13.3: about 1000 for
/// percentile intervals).
pub const RESAMPLES: usize = 1000;

/// A 95% percentile interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// 2.5th percentile.
    pub low: f64,
    /// 97.5th percentile.
    pub high: f64,
}

impl Interval {
    /// The 2.5th and 97.5th percentiles of `values` (numpy's linear rule); `None` if empty.
    pub fn of(values: &[f64]) -> Option<Interval> {
        Some(Interval {
            low: quantile(values, 0.025)?,
            high: quantile(values, 0.975)?,
        })
    }

    /// The interval of one value over resampled results (values that are missing or not
    /// finite left out).
    pub fn over<T>(draws: &[T], get: impl Fn(&T) -> Option<f64>) -> Option<Interval> {
        let v: Vec<f64> = draws.iter().filter_map(get).filter(|x| x.is_finite()).collect();
        Interval::of(&v)
    }

    /// Whether `x` lies inside (ends included).
    pub fn contains(&self, x: f64) -> bool {
        self.low <= x && x <= self.high
    }
}

/// How many times each of `n` tracks is drawn in resample `b` (`n` draws with replacement),
/// from a generator seeded by `seed` and `b` alone, so that resamples can run on any
/// number of threads and give the same result.
pub fn resample_copies(n: usize, seed: u64, b: usize) -> Vec<u32> {
    let mut rng = Rng::new(seed ^ (b as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15));
    let mut copies = vec![0u32; n];
    for _ in 0..n {
        copies[((rng.uniform() * n as f64) as usize).min(n - 1)] += 1;
    }
    copies
}

/// What is resampled: one entry per track, all in the same order.
pub struct TrackSums<'a> {
    /// Each track's MSD sums.
    pub msd: &'a [TrackMsd],
    /// Each track's autocorrelation sums.
    pub autocorrelation: &'a [TrackAutocorrelation],
    /// Each track's mean speed (`None` without a step).
    pub speed: &'a [Option<f64>],
}

/// One model's parameter intervals.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelIntervals {
    /// The model's name.
    pub model: String,
    /// Diffusion coefficient.
    pub diffusion: Option<Interval>,
    /// Persistence time.
    pub persistence: Option<Interval>,
    /// Drift speed.
    pub drift_speed: Option<Interval>,
    /// Noise offset 4σ².
    pub noise_offset: Option<Interval>,
    /// Speed of the persistent walk.
    pub walk_speed: Option<Interval>,
    /// Resamples on which the model could be fitted (the interval rests on these).
    pub fitted_resamples: usize,
}

impl ModelIntervals {
    /// The interval of the localisation error σ = √(offset/4), from the offset's (the map is
    /// increasing, so percentiles carry over).
    pub fn localisation_error(&self) -> Option<Interval> {
        self.noise_offset.map(|c| Interval {
            low: (c.low.max(0.0) / 4.0).sqrt(),
            high: (c.high.max(0.0) / 4.0).sqrt(),
        })
    }
}

/// Intervals of everything a population analysis reports.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Uncertainty {
    /// Resamples drawn.
    pub resamples: usize,
    /// Per MSD point (same order as the analysis's points).
    pub msd: Vec<Option<Interval>>,
    /// Per autocorrelation point: velocity.
    pub velocity_autocorrelation: Vec<Option<Interval>>,
    /// Per autocorrelation point: direction.
    pub direction_autocorrelation: Vec<Option<Interval>>,
    /// Per fitted model, in the order of the fits given.
    pub models: Vec<ModelIntervals>,
    /// The diffusion coefficient of the model chosen anew on each resample: an interval that
    /// carries the uncertainty of the choice as well as of the fit (S. T. Buckland, K. P.
    /// Burnham & N. H. Augustin (1997), "Model selection: an integral part of inference",
    /// Biometrics 53(2):603–618, doi:10.2307/2533961); every model has a D, so it is the
    /// parameter that survives a change of model.
    pub chosen_diffusion: Option<Interval>,
    /// Anomalous exponent over the fitted lags.
    pub anomalous_exponent: Option<Interval>,
    /// Mean of the tracks' mean speeds.
    pub mean_speed: Option<Interval>,
}

/// Everything computed on one resample (`None` where it could not be).
struct Replicate {
    msd: Vec<Option<f64>>,
    velocity: Vec<Option<f64>>,
    direction: Vec<Option<f64>>,
    models: Vec<Option<ModelFit>>,
    exponent: Option<f64>,
    mean_speed: Option<f64>,
}

/// Resamples the tracks `resamples` times and returns the intervals of the statistics
/// computed on the full set: the MSD at the lags of `msd_lags`, the autocorrelations at
/// `acf_lags`, each fit of `fits` refitted on the lags `fit_lags` (frames, inclusive) from its
/// full-data parameters, the anomalous exponent there and the mean speed. Each resample has
/// its own generator seeded from `seed` and its index, so the result does not depend on the
/// number of threads.
pub fn resample_tracks(
    sums: &TrackSums,
    msd_lags: &[usize],
    acf_lags: &[usize],
    (fit_lags, frame_interval): ((usize, usize), f64),
    fits: &[ModelFit],
    resamples: usize,
    seed: u64,
) -> Uncertainty {
    let n = sums.msd.len();
    let draws: Vec<Replicate> = (0..resamples)
        .into_par_iter()
        .map(|b| {
            let copies = resample_copies(n, seed, b);
            one_replicate(sums, &copies, msd_lags, acf_lags, (fit_lags, frame_interval), fits)
        })
        .collect();
    summarise(&draws, fits)
}

fn one_replicate(
    sums: &TrackSums,
    copies: &[u32],
    msd_lags: &[usize],
    acf_lags: &[usize],
    (fit_lags, frame_interval): ((usize, usize), f64),
    fits: &[ModelFit],
) -> Replicate {
    let points = pool_msd(sums.msd, Some(copies), frame_interval);
    let mut by_lag = vec![None; points.last().map_or(0, |q| q.lag_frames + 1)];
    for q in &points {
        by_lag[q.lag_frames] = Some(q.msd);
    }
    let at = |lag: usize| by_lag.get(lag).copied().flatten();
    let fitted: Vec<MsdPoint> = points
        .iter()
        .copied()
        .filter(|q| q.lag_frames >= fit_lags.0 && q.lag_frames <= fit_lags.1)
        .collect();
    let acf = pool_autocorrelation(sums.autocorrelation, Some(copies));
    let acf_at = |lag: usize| acf.iter().find(|q| q.lag_frames == lag); // at most 21 lags
    let (mut speed_sum, mut speed_n) = (0.0, 0u32);
    for (s, &c) in sums.speed.iter().zip(copies) {
        if let Some(v) = s {
            speed_sum += c as f64 * v;
            speed_n += c;
        }
    }
    Replicate {
        msd: msd_lags.iter().map(|&l| at(l)).collect(),
        velocity: acf_lags.iter().map(|&l| acf_at(l).map(|q| q.velocity)).collect(),
        direction: acf_lags.iter().map(|&l| acf_at(l).map(|q| q.direction)).collect(),
        models: fits
            .iter()
            .map(|f| fit_model_from(f.model, &fitted, &f.parameters).ok())
            .collect(),
        exponent: anomalous_exponent(&fitted),
        mean_speed: (speed_n > 0).then(|| speed_sum / speed_n as f64),
    }
}

fn summarise(draws: &[Replicate], fits: &[ModelFit]) -> Uncertainty {
    let column = |get: &dyn Fn(&Replicate) -> Option<f64>| Interval::over(draws, get);
    let per_point = |len: usize, get: &dyn Fn(&Replicate, usize) -> Option<f64>| -> Vec<Option<Interval>> {
        (0..len).map(|k| column(&|r| get(r, k))).collect()
    };
    let first = draws.first();
    let models = fits
        .iter()
        .enumerate()
        .map(|(k, f)| {
            let param = |get: &dyn Fn(&ModelFit) -> Option<f64>| column(&|r| r.models[k].as_ref().and_then(get));
            ModelIntervals {
                model: f.model.name(),
                diffusion: param(&|m| Some(m.parameters.diffusion)),
                persistence: param(&|m| m.parameters.persistence),
                drift_speed: param(&|m| m.parameters.drift_speed),
                noise_offset: param(&|m| m.parameters.noise_offset),
                walk_speed: param(&|m| m.parameters.walk_speed()),
                fitted_resamples: draws.iter().filter(|r| r.models[k].is_some()).count(),
            }
        })
        .collect();
    Uncertainty {
        resamples: draws.len(),
        msd: per_point(first.map_or(0, |r| r.msd.len()), &|r, k| r.msd[k]),
        velocity_autocorrelation: per_point(first.map_or(0, |r| r.velocity.len()), &|r, k| r.velocity[k]),
        direction_autocorrelation: per_point(first.map_or(0, |r| r.direction.len()), &|r, k| r.direction[k]),
        models,
        chosen_diffusion: column(&|r| {
            let fitted: Vec<ModelFit> = r.models.iter().flatten().copied().collect();
            simplest_supported(&fitted).map(|k| fitted[k].parameters.diffusion)
        }),
        anomalous_exponent: column(&|r| r.exponent),
        mean_speed: column(&|r| r.mean_speed),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn percentile_interval_follows_numpy() {
        // Source: numpy 2 `np.percentile(np.arange(1, 101), [2.5, 97.5])` = [3.475, 97.525]
        // (linear interpolation between order statistics).
        let v: Vec<f64> = (1..=100).map(f64::from).collect();
        let i = Interval::of(&v).unwrap();
        assert!(
            (i.low - 3.475).abs() < 1e-12 && (i.high - 97.525).abs() < 1e-12,
            "{i:?}"
        );
        assert!(i.contains(50.0) && !i.contains(2.0));
    }
}
