//! A statistic against a numeric factor of the design (lane width, number of cells, a model
//! parameter): each replicate's mean against the replicate's factor value, a quadratic fit,
//! and where the fit peaks, with an interval from resampling replicates, so that an optimum
//! is claimed only when the data support it.

use super::compare::{replicate_means, Comparison, ReplicateValues};
use super::resample::Interval;
use crate::error::{Error, Result};
use crate::numeric::Rng;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::Path;

/// Resamples of replicates for the peak's interval.
pub const FACTOR_RESAMPLES: usize = 2000;

/// A peak counts as supported when at least this share of resamples has one inside the
/// factor's range (our own rule, the one-sided counterpart of a 95% interval).
pub const SUPPORTED_SHARE: f64 = 0.95;

/// One replicate's point.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FactorPoint {
    /// Condition.
    pub condition: String,
    /// Replicate.
    pub replicate: String,
    /// Its factor value.
    pub factor: f64,
    /// Its mean of the statistic.
    pub mean: f64,
}

/// The replicates at one factor value.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FactorLevel {
    /// The factor value.
    pub factor: f64,
    /// Replicates there.
    pub replicates: usize,
    /// Mean of their means.
    pub mean: f64,
    /// 95% percentile interval of that mean over resamples of the level's replicates.
    pub ci95: Option<Interval>,
}

/// One statistic against the factor.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FactorFit {
    /// Statistic name.
    pub statistic: String,
    /// One point per replicate.
    pub points: Vec<FactorPoint>,
    /// Per factor value, ascending.
    pub levels: Vec<FactorLevel>,
    /// Quadratic coefficients `[a, b, c]` of a + b·x + c·x² (`None` with fewer than three
    /// factor levels).
    pub quadratic: Option<[f64; 3]>,
    /// Where the fit peaks, when it is concave with its vertex inside the factor's range.
    pub peak: Option<f64>,
    /// 95% percentile interval of the peak over the resamples that have one inside the range.
    pub peak_ci95: Option<Interval>,
    /// Share of resamples with a peak inside the range.
    pub share_with_peak: f64,
    /// Whether the data support an optimum ([`SUPPORTED_SHARE`]).
    pub optimum_supported: bool,
}

/// Every compared statistic against the manifest column `column`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FactorAnalysis {
    /// The manifest column.
    pub column: String,
    /// Per statistic.
    pub fits: Vec<FactorFit>,
}

/// Each replicate's value of `column`, read from the manifest's labels; every row of a
/// replicate must give the same number.
///
/// # Errors
/// A missing or non-numeric value, or two values for one replicate, naming the manifest line.
pub fn factor_values(c: &Comparison, column: &str, manifest: &Path) -> Result<BTreeMap<(String, String), f64>> {
    let mut out: BTreeMap<(String, String), f64> = BTreeMap::new();
    for e in &c.entries {
        let text = e.labels.get(column).ok_or_else(|| {
            Error::input(
                manifest,
                format!("has no column {column} (--by names a numeric manifest column)"),
            )
        })?;
        let v: f64 = text
            .trim()
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite())
            .ok_or_else(|| {
                Error::input(
                    manifest,
                    format!("line {}: {column} = {text:?} is not a number", e.line),
                )
            })?;
        let key = (e.condition.clone(), e.replicate.clone());
        if let Some(&old) = out.get(&key) {
            if old != v {
                return Err(Error::input(
                    manifest,
                    format!(
                        "line {}: replicate {} of {} has {column} {old} and {v}",
                        e.line, e.replicate, e.condition
                    ),
                ));
            }
        }
        out.insert(key, v);
    }
    Ok(out)
}

/// Every statistic of `c` against the factor values (see [`factor_values`]).
///
/// # Method
/// Ordinary least squares of a quadratic in the factor over replicate means (the replicate
/// is the unit, as in `compare`); the vertex −b/(2c) of a concave fit as the peak; its
/// uncertainty by resampling replicates within each factor level (a stratified case
/// bootstrap, Efron & Tibshirani 1993, so every level stays in the design), refitting each
/// time.
pub fn against_factor(
    c: &Comparison,
    column: &str,
    values: &BTreeMap<(String, String), f64>,
    seed: u64,
) -> FactorAnalysis {
    let mut rng = Rng::new(seed);
    let fits = c
        .statistic_names
        .iter()
        .map(|name| fit_statistic(name, &c.replicates[name], values, &mut rng))
        .collect();
    FactorAnalysis {
        column: column.to_string(),
        fits,
    }
}

fn fit_statistic(
    name: &str,
    reps: &[ReplicateValues],
    values: &BTreeMap<(String, String), f64>,
    rng: &mut Rng,
) -> FactorFit {
    let points: Vec<FactorPoint> = reps
        .iter()
        .filter(|r| !r.values.is_empty())
        .filter_map(|r| {
            let factor = *values.get(&(r.condition.clone(), r.replicate.clone()))?;
            let (_, means) = replicate_means(std::slice::from_ref(r), &r.condition);
            Some(FactorPoint {
                condition: r.condition.clone(),
                replicate: r.replicate.clone(),
                factor,
                mean: means[0],
            })
        })
        .collect();
    let xy: Vec<(f64, f64)> = points.iter().map(|p| (p.factor, p.mean)).collect();
    let quadratic = quadratic_fit(&xy);
    let range = xy
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| (a.min(p.0), b.max(p.0)));
    let peak = quadratic.and_then(|q| interior_peak(q, range));
    let mut levels: BTreeMap<i64, Vec<(f64, f64)>> = BTreeMap::new();
    for &(x, y) in &xy {
        levels.entry((x * 1e9).round() as i64).or_default().push((x, y));
    }
    let mut level_means: Vec<Vec<f64>> = vec![Vec::with_capacity(FACTOR_RESAMPLES); levels.len()];
    let peaks: Vec<Option<f64>> = (0..FACTOR_RESAMPLES)
        .map(|_| {
            let mut sample: Vec<(f64, f64)> = Vec::with_capacity(xy.len());
            for (k, level) in levels.values().enumerate() {
                let drawn: Vec<(f64, f64)> = (0..level.len())
                    .map(|_| level[((rng.uniform() * level.len() as f64) as usize).min(level.len() - 1)])
                    .collect();
                level_means[k].push(drawn.iter().map(|p| p.1).sum::<f64>() / drawn.len() as f64);
                sample.extend(drawn);
            }
            quadratic_fit(&sample).and_then(|q| interior_peak(q, range))
        })
        .collect();
    let found: Vec<f64> = peaks.iter().flatten().copied().collect();
    let levels: Vec<FactorLevel> = levels
        .values()
        .zip(&level_means)
        .map(|(level, means)| FactorLevel {
            factor: level[0].0,
            replicates: level.len(),
            mean: level.iter().map(|p| p.1).sum::<f64>() / level.len() as f64,
            ci95: Interval::of(means),
        })
        .collect();
    let share = found.len() as f64 / FACTOR_RESAMPLES as f64;
    FactorFit {
        statistic: name.to_string(),
        points,
        levels,
        quadratic,
        peak,
        peak_ci95: Interval::of(&found),
        share_with_peak: share,
        optimum_supported: peak.is_some() && share >= SUPPORTED_SHARE,
    }
}

/// Least-squares `[a, b, c]` of y = a + b·x + c·x²; `None` with fewer than three distinct x.
pub fn quadratic_fit(xy: &[(f64, f64)]) -> Option<[f64; 3]> {
    let mut distinct: Vec<f64> = xy.iter().map(|p| p.0).collect();
    distinct.sort_by(f64::total_cmp);
    distinct.dedup();
    if distinct.len() < 3 {
        return None;
    }
    let rows: Vec<(Vec<f64>, f64, f64)> = xy.iter().map(|&(x, y)| (vec![1.0, x, x * x], y, 1.0)).collect();
    let c = super::models::weighted_least_squares(&rows)?;
    Some([c[0], c[1], c[2]])
}

/// The vertex of a concave quadratic when it lies within `range`.
fn interior_peak(q: [f64; 3], (lo, hi): (f64, f64)) -> Option<f64> {
    (q[2] < 0.0)
        .then(|| -q[1] / (2.0 * q[2]))
        .filter(|&x| x >= lo && x <= hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_quadratic_through_exact_points_and_its_vertex() {
        // Algebra: y = 1 + 4x − x² has its vertex at x = 2 (−b/2c); five exact points give
        // the coefficients back; a convex curve or a vertex outside the range has no peak.
        let xy: Vec<(f64, f64)> = (0..5)
            .map(|k| (k as f64, 1.0 + 4.0 * k as f64 - (k * k) as f64))
            .collect();
        let q = quadratic_fit(&xy).unwrap();
        assert!((q[0] - 1.0).abs() < 1e-9 && (q[1] - 4.0).abs() < 1e-9 && (q[2] + 1.0).abs() < 1e-9);
        assert!((interior_peak(q, (0.0, 4.0)).unwrap() - 2.0).abs() < 1e-9);
        assert_eq!(interior_peak(q, (3.0, 4.0)), None);
        assert_eq!(interior_peak([0.0, 0.0, 1.0], (-1.0, 1.0)), None);
        assert!(quadratic_fit(&[(1.0, 1.0), (1.0, 2.0), (2.0, 3.0)]).is_none());
    }

    fn reps(points: &[(f64, f64)]) -> (Vec<ReplicateValues>, BTreeMap<(String, String), f64>) {
        let mut values = BTreeMap::new();
        let reps = points
            .iter()
            .enumerate()
            .map(|(k, &(x, y))| {
                values.insert(("lanes".to_string(), k.to_string()), x);
                ReplicateValues {
                    condition: "lanes".into(),
                    replicate: k.to_string(),
                    values: vec![y],
                }
            })
            .collect();
        (reps, values)
    }

    #[test]
    fn an_optimum_over_width_is_found_only_where_the_data_hold_one() {
        // Construction: efficiency 1 − ((w − 40)/30)² + noise at widths 10-70 µm, four
        // replicates each: the optimum at 40 (the construction) lies in the peak's interval
        // and is supported; a monotone rise over the same widths supports none.
        let mut rng = Rng::new(9);
        let widths = [10.0, 20.0, 30.0, 40.0, 50.0, 60.0, 70.0];
        let peaked: Vec<(f64, f64)> = widths
            .iter()
            .flat_map(|&w| (0..4).map(move |_| w))
            .map(|w| (w, 1.0 - ((w - 40.0) / 30.0f64).powi(2) + 0.05 * rng.normal()))
            .collect();
        let (r, v) = reps(&peaked);
        let fit = fit_statistic("efficiency", &r, &v, &mut Rng::new(1));
        assert!(fit.optimum_supported, "{fit:?}");
        let ci = fit.peak_ci95.unwrap();
        assert!(ci.contains(40.0) && ci.high - ci.low < 10.0, "{ci:?}");
        assert_eq!(fit.levels.len(), 7);
        assert!(fit
            .levels
            .iter()
            .all(|l| l.replicates == 4 && l.ci95.is_some_and(|i| i.contains(l.mean))));
        let rising: Vec<(f64, f64)> = peaked
            .iter()
            .map(|&(w, _)| (w, w / 70.0 + 0.05 * rng.normal()))
            .collect();
        let (r, v) = reps(&rising);
        let fit = fit_statistic("efficiency", &r, &v, &mut Rng::new(1));
        assert!(!fit.optimum_supported, "{fit:?}");
    }
}
