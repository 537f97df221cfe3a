//! Comparing conditions without pseudo-replication: per-replicate summaries (the replicate is
//! the embryo, dish or lane, not the cell), differences between conditions with a hierarchical
//! bootstrap confidence interval, a Mann–Whitney test on replicate means, effect sizes, and
//! warnings where the design cannot support a test.

use super::population::{Analysis, AnalysisOptions};
use super::run::{analyze_table, write_table};
use super::stats::{hedges_g, hierarchical_bootstrap, holm, mann_whitney, mean_sd, permutation_test, quantile};
use super::table::{read_tracks, CalibrationOverride, Filters, TrackTable};
use super::table::{LengthUnit, TimeUnit};
use crate::error::{Error, Result};
use crate::numeric::Rng;
use crate::output::{ensure_dir, write_atomic};
use serde::Serialize;
use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

/// One row of the manifest.
#[derive(Debug, Clone, Serialize)]
pub struct ManifestEntry {
    /// Line in the manifest (header = 1).
    pub line: usize,
    /// Run folder or tracks CSV, resolved against the manifest's folder.
    pub path: PathBuf,
    /// Condition name.
    pub condition: String,
    /// Biological replicate (embryo, dish, lane).
    pub replicate: String,
    /// Other columns, carried along.
    pub labels: BTreeMap<String, String>,
}

/// Reads a manifest with columns `path, condition, replicate` (others kept as labels) for a
/// comparison: every path must exist (checked before any work starts) and there must be two
/// conditions or more.
///
/// # Errors
/// Unreadable manifest, missing columns or values, a path that does not exist (naming the
/// line), fewer than two conditions.
pub fn read_manifest(path: &Path) -> Result<Vec<ManifestEntry>> {
    let entries = read_manifest_entries(path)?;
    let conditions: std::collections::BTreeSet<&str> = entries.iter().map(|e| e.condition.as_str()).collect();
    if conditions.len() < 2 {
        return Err(Error::input(
            path,
            format!("needs at least two conditions to compare, found {}", conditions.len()),
        ));
    }
    Ok(entries)
}

/// Reads a manifest's rows (any number of conditions), checking every path exists.
///
/// # Errors
/// As [`read_manifest`], but one condition is enough.
pub fn read_manifest_entries(path: &Path) -> Result<Vec<ManifestEntry>> {
    let bad = |problem: String| Error::input(path, problem);
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_path(path)
        .map_err(|e| bad(e.to_string()))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| bad(e.to_string()))?
        .iter()
        .map(String::from)
        .collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h.trim_start_matches('\u{feff}') == name)
            .ok_or_else(|| bad(format!("missing column {name} (needs path, condition, replicate)")))
    };
    let (pi, ci, ri) = (col("path")?, col("condition")?, col("replicate")?);
    let base = path.parent().unwrap_or(Path::new("."));
    let mut out = Vec::new();
    for (k, record) in reader.records().enumerate() {
        let line = k + 2;
        let record = record.map_err(|e| bad(format!("line {line}: {e}")))?;
        let get = |i: usize, what: &str| {
            record
                .get(i)
                .filter(|v| !v.is_empty())
                .map(String::from)
                .ok_or_else(|| bad(format!("line {line}: empty {what}")))
        };
        let target = base.join(get(pi, "path")?);
        if !target.exists() {
            return Err(bad(format!("line {line}: {} does not exist", target.display())));
        }
        let labels = header
            .iter()
            .enumerate()
            .filter(|(i, _)| ![pi, ci, ri].contains(i))
            .map(|(i, h)| (h.clone(), record.get(i).unwrap_or_default().to_string()))
            .collect();
        out.push(ManifestEntry {
            line,
            path: target,
            condition: get(ci, "condition")?,
            replicate: get(ri, "replicate")?,
            labels,
        });
    }
    Ok(out)
}

/// The per-track statistics compared, with the name they carry in the outputs (`fixed`: the
/// fixed time of the directionality ratio, e.g. `10_min` or `10_frames`).
///
/// The persistent walk's D and P are one value per recording, from the better-scoring walk
/// fit (with or without the noise offset) whichever model was chosen, so that every recording
/// contributes the same parameters; a recording whose walk could not be fitted contributes
/// none.
fn statistics(a: &Analysis, fixed: &str) -> Vec<(String, Vec<f64>)> {
    let walk = a.models.persistent_walk().map(|f| f.parameters);
    let col =
        |f: &dyn Fn(&super::motility::Motility) -> Option<f64>| a.tracks.iter().filter_map(f).collect::<Vec<f64>>();
    vec![
        (format!("mean_speed_{}", a.units.speed()), col(&|m| m.mean_speed)),
        (
            format!("directionality_ratio_at_{fixed}"),
            col(&|m| m.directionality_at_fixed_time),
        ),
        ("forward_migration_index".into(), col(&|m| m.forward_migration_index)),
        ("mean_abs_turning_angle_deg".into(), col(&|m| m.mean_abs_turning_deg)),
        (
            format!("walk_diffusion_coefficient_{}2_per_{}", a.units.length, a.units.time),
            walk.map(|p| p.diffusion).into_iter().collect(),
        ),
        (
            format!("walk_persistence_time_{}", a.units.time),
            walk.and_then(|p| p.persistence).into_iter().collect(),
        ),
    ]
}

/// One recording's MSD and direction autocorrelation, `(lag in time units, value)`.
#[derive(Debug, Clone, Serialize)]
pub struct RecordingCurves {
    /// Condition.
    pub condition: String,
    /// Replicate.
    pub replicate: String,
    /// Pooled MSD.
    pub msd: Vec<(f64, f64)>,
    /// Direction autocorrelation.
    pub direction_autocorrelation: Vec<(f64, f64)>,
}

impl RecordingCurves {
    fn of(e: &ManifestEntry, a: &Analysis) -> Self {
        let dt = a.units.time_per_frame;
        RecordingCurves {
            condition: e.condition.clone(),
            replicate: e.replicate.clone(),
            msd: a.msd.iter().map(|q| (q.lag, q.msd)).collect(),
            direction_autocorrelation: a
                .autocorrelation
                .iter()
                .map(|q| (q.lag_frames as f64 * dt, q.direction))
                .collect(),
        }
    }
}

/// A condition's curve: at each lag the mean over its replicates (each replicate the mean of
/// its recordings) and the lowest and highest replicate, `(lag, mean, low, high)`; only lags
/// every replicate has.
pub fn condition_curve(
    curves: &[RecordingCurves],
    condition: &str,
    pick: impl Fn(&RecordingCurves) -> &[(f64, f64)],
) -> Vec<(f64, f64, f64, f64)> {
    let key = |lag: f64| (lag * 1e6).round() as i64;
    let mut by_replicate: BTreeMap<&str, BTreeMap<i64, (f64, f64, usize)>> = BTreeMap::new();
    for c in curves.iter().filter(|c| c.condition == condition) {
        let rep = by_replicate.entry(c.replicate.as_str()).or_default();
        for &(lag, v) in pick(c) {
            let e = rep.entry(key(lag)).or_insert((lag, 0.0, 0));
            e.1 += v;
            e.2 += 1;
        }
    }
    let Some(first) = by_replicate.values().next() else {
        return Vec::new();
    };
    first
        .iter()
        .filter_map(|(k, &(lag, _, _))| {
            let values: Vec<f64> = by_replicate
                .values()
                .map(|rep| rep.get(k).map(|e| e.1 / e.2 as f64))
                .collect::<Option<Vec<f64>>>()?;
            let mean = values.iter().sum::<f64>() / values.len() as f64;
            let (lo, hi) = values
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
            Some((lag, mean, lo, hi))
        })
        .collect()
}

/// One replicate's values of one statistic.
#[derive(Debug, Clone, Serialize)]
pub struct ReplicateValues {
    /// Condition.
    pub condition: String,
    /// Replicate.
    pub replicate: String,
    /// Per-track values (all files of the replicate pooled).
    pub values: Vec<f64>,
}

/// The comparison of one statistic between a condition and the reference condition.
#[derive(Debug, Clone, Serialize)]
pub struct Difference {
    /// Statistic name (with unit).
    pub statistic: String,
    /// Reference condition (the manifest's first).
    pub reference: String,
    /// Compared condition.
    pub condition: String,
    /// Replicates in each.
    pub replicates: (usize, usize),
    /// Tracks in each.
    pub tracks: (usize, usize),
    /// Mean of replicate means in each.
    pub means: (f64, f64),
    /// condition − reference.
    pub difference: f64,
    /// 95% hierarchical bootstrap interval of the difference (an interval only: with few
    /// replicates a bootstrap p falls below what the design allows).
    pub ci95: (f64, f64),
    /// Two-sided permutation test of the replicate means (see [`permutation_test`]).
    pub permutation_p: Option<f64>,
    /// `exact` or `sampled`.
    pub permutation_method: Option<&'static str>,
    /// The permutation p adjusted by Holm's method over the statistics compared for this
    /// condition.
    pub permutation_p_holm: Option<f64>,
    /// Mann–Whitney test on replicate means.
    pub mann_whitney_u: Option<f64>,
    /// Its two-sided p.
    pub mann_whitney_p: Option<f64>,
    /// `exact` or `asymptotic`.
    pub mann_whitney_method: Option<&'static str>,
    /// Rank-biserial correlation (effect size of the test).
    pub rank_biserial: Option<f64>,
    /// Hedges' g of replicate means (Cohen's d with the small-sample correction).
    pub hedges_g: Option<f64>,
}

/// Everything `compare` found.
pub struct Comparison {
    /// The manifest read.
    pub entries: Vec<ManifestEntry>,
    /// Conditions in manifest order.
    pub conditions: Vec<String>,
    /// Per statistic, per replicate.
    pub replicates: BTreeMap<String, Vec<ReplicateValues>>,
    /// Statistic names in order.
    pub statistic_names: Vec<String>,
    /// Differences from the reference condition.
    pub differences: Vec<Difference>,
    /// Warnings about the design.
    pub warnings: Vec<String>,
    /// Each recording's MSD and direction autocorrelation, in manifest order.
    pub curves: Vec<RecordingCurves>,
    /// Length and time units of every recording.
    pub units: (LengthUnit, TimeUnit),
    /// Every statistic against a numeric manifest column, when asked for (`--by`).
    pub factor: Option<super::factor::FactorAnalysis>,
}

/// Bootstrap resamples per condition.
pub const BOOTSTRAP_RESAMPLES: usize = 10_000;

/// Analyses every entry of the manifest and compares the conditions.
///
/// # Errors
/// Any entry that cannot be analysed (naming its file), or entries with different units.
pub fn compare(
    entries: Vec<ManifestEntry>,
    calibration: CalibrationOverride,
    filters: &Filters,
    options: &AnalysisOptions,
    seed: u64,
) -> Result<Comparison> {
    let mut conditions: Vec<String> = Vec::new();
    let mut replicates: BTreeMap<String, Vec<ReplicateValues>> = BTreeMap::new();
    let mut names = Vec::new();
    let mut units: Option<(String, LengthUnit, TimeUnit)> = None;
    let mut fixed: Option<FixedTime> = None;
    let mut intervals: Vec<(&ManifestEntry, f64)> = Vec::with_capacity(entries.len());
    let mut curves = Vec::with_capacity(entries.len());
    let mut model_notes = Vec::new();
    for e in &entries {
        if !conditions.contains(&e.condition) {
            conditions.push(e.condition.clone());
        }
        let table = read_tracks(&e.path, calibration)?;
        let these = (table.source.display().to_string(), table.units.length, table.units.time);
        match &units {
            Some(u) if (u.1, u.2) != (these.1, these.2) => {
                return Err(Error::input(
                    &table.source,
                    format!(
                        "is in {} and {}, but {} is in {} and {}; give --pixel-size and --interval for all",
                        these.1, these.2, u.0, u.1, u.2
                    ),
                ))
            }
            Some(_) => {}
            None => units = Some(these),
        }
        let fixed = fixed.get_or_insert_with(|| FixedTime::of_first(&table, options.fixed_elapsed_frames));
        intervals.push((e, table.units.time_per_frame));
        let options = AnalysisOptions {
            fixed_elapsed_frames: fixed.frames_for(&table)?,
            ..options.clone()
        };
        let analysis = analyze_table(&table, filters, &options)?;
        curves.push(RecordingCurves::of(e, &analysis));
        model_notes.extend(
            analysis
                .warnings
                .iter()
                .map(|w| format!("{} {} ({}): {w}", e.condition, e.replicate, e.path.display())),
        );
        let label = fixed.label();
        names.clear();
        for (name, values) in statistics(&analysis, &label) {
            names.push(name.clone());
            let reps = replicates.entry(name).or_default();
            match reps
                .iter_mut()
                .find(|r| r.condition == e.condition && r.replicate == e.replicate)
            {
                Some(r) => r.values.extend(values),
                None => reps.push(ReplicateValues {
                    condition: e.condition.clone(),
                    replicate: e.replicate.clone(),
                    values,
                }),
            }
        }
    }
    let mut rng = Rng::new(seed);
    let mut differences = Vec::new();
    for name in &names {
        for other in &conditions[1..] {
            differences.push(difference(name, &replicates[name], &conditions[0], other, &mut rng));
        }
    }
    adjust_by_holm(&mut differences);
    let mut warnings = design_warnings(&conditions, &replicates, &names);
    warnings.extend(fixed.and_then(|f| f.intervals_warning(&intervals)));
    warnings.extend(model_notes);
    Ok(Comparison {
        entries,
        conditions,
        replicates,
        statistic_names: names,
        differences,
        warnings,
        curves,
        units: units.map_or((LengthUnit::Pixel, TimeUnit::Frame), |u| (u.1, u.2)),
        factor: None,
    })
}

/// The values of each replicate of `condition` (replicates without values left out) and each
/// replicate's mean.
pub fn replicate_means(reps: &[ReplicateValues], condition: &str) -> (Vec<Vec<f64>>, Vec<f64>) {
    let groups: Vec<Vec<f64>> = reps
        .iter()
        .filter(|r| r.condition == condition && !r.values.is_empty())
        .map(|r| r.values.clone())
        .collect();
    let means = groups.iter().map(|g| g.iter().sum::<f64>() / g.len() as f64).collect();
    (groups, means)
}

fn difference(name: &str, reps: &[ReplicateValues], reference: &str, other: &str, rng: &mut Rng) -> Difference {
    let (ref_groups, ref_means) = replicate_means(reps, reference);
    let (oth_groups, oth_means) = replicate_means(reps, other);
    let mean = |v: &[f64]| mean_sd(v).map(|m| m.0).unwrap_or(f64::NAN);
    let boot_ref = hierarchical_bootstrap(&ref_groups, BOOTSTRAP_RESAMPLES, rng);
    let boot_oth = hierarchical_bootstrap(&oth_groups, BOOTSTRAP_RESAMPLES, rng);
    let diffs: Vec<f64> = boot_oth.iter().zip(&boot_ref).map(|(a, b)| a - b).collect();
    let mw = mann_whitney(&oth_means, &ref_means);
    let permutation = permutation_test(&oth_means, &ref_means, rng);
    Difference {
        statistic: name.to_string(),
        reference: reference.to_string(),
        condition: other.to_string(),
        replicates: (ref_means.len(), oth_means.len()),
        tracks: (
            ref_groups.iter().map(Vec::len).sum(),
            oth_groups.iter().map(Vec::len).sum(),
        ),
        means: (mean(&ref_means), mean(&oth_means)),
        difference: mean(&oth_means) - mean(&ref_means),
        ci95: (
            quantile(&diffs, 0.025).unwrap_or(f64::NAN),
            quantile(&diffs, 0.975).unwrap_or(f64::NAN),
        ),
        permutation_p: permutation.map(|t| t.p),
        permutation_method: permutation.map(|t| t.method),
        permutation_p_holm: None,
        mann_whitney_u: mw.map(|m| m.u1),
        mann_whitney_p: mw.map(|m| m.p),
        mann_whitney_method: mw.map(|m| m.method),
        rank_biserial: mw.map(|m| m.rank_biserial),
        hedges_g: hedges_g(&oth_means, &ref_means),
    }
}

/// Fills each difference's Holm-adjusted permutation p, over the statistics compared for its
/// condition (one family per condition against the reference).
fn adjust_by_holm(differences: &mut [Difference]) {
    let conditions: std::collections::BTreeSet<String> = differences.iter().map(|d| d.condition.clone()).collect();
    for condition in &conditions {
        let family: Vec<usize> = (0..differences.len())
            .filter(|&k| &differences[k].condition == condition && differences[k].permutation_p.is_some())
            .collect();
        let p: Vec<f64> = family.iter().filter_map(|&k| differences[k].permutation_p).collect();
        for (&k, adjusted) in family.iter().zip(holm(&p)) {
            differences[k].permutation_p_holm = Some(adjusted);
        }
    }
}

/// The smallest two-sided p a Mann–Whitney test can give for n₁ vs n₂ replicates without
/// ties: 2 / C(n₁+n₂, n₁) (complete separation).
pub fn smallest_possible_p(n1: usize, n2: usize) -> f64 {
    let mut c = 1.0;
    for k in 0..n1.min(n2) {
        c = c * (n1 + n2 - k) as f64 / (k + 1) as f64;
    }
    (2.0 / c).min(1.0)
}

fn design_warnings(
    conditions: &[String],
    replicates: &BTreeMap<String, Vec<ReplicateValues>>,
    names: &[String],
) -> Vec<String> {
    let Some(first) = names.first().and_then(|n| replicates.get(n)) else {
        return Vec::new();
    };
    let mut w = Vec::new();
    let count = |c: &str| first.iter().filter(|r| r.condition == c).count();
    for other in &conditions[1..] {
        let (a, b) = (count(&conditions[0]), count(other));
        let p = smallest_possible_p(a, b);
        if p >= 0.05 {
            w.push(format!(
                "{} vs {}: with {a} and {b} replicates no Mann-Whitney test can reach p < 0.05 (smallest possible p = {p:.3}); plan at least 5-6 replicates per condition",
                conditions[0], other
            ));
        }
    }
    for c in conditions {
        if count(c) == 1 {
            w.push(format!("{c}: one replicate only; its cells are not independent, so no test between conditions can rest on them"));
        }
    }
    let mut sizes: Vec<f64> = first.iter().map(|r| r.values.len() as f64).collect();
    if crate::numeric::median(&mut sizes).is_some_and(|m| m <= 1.0) {
        w.push("most replicates hold a single track: cells seem to be listed as replicates; the replicate is the embryo, dish or lane".into());
    }
    w
}

/// The fixed time of the directionality ratio: with calibrated tracks it is physical
/// (`fixed_elapsed_frames` times the first recording's interval, e.g. 10 frames of 1 min =
/// 10 min) and each recording gets the frames that span it, so recordings filmed at different
/// intervals are compared over the same minutes; otherwise the frames as given.
enum FixedTime {
    Frames(usize),
    Minutes {
        minutes: f64,
        shown: String,
        frames_of_first: usize,
    },
}

impl FixedTime {
    fn of_first(table: &TrackTable, frames: usize) -> FixedTime {
        if table.units.time != TimeUnit::Minute {
            return FixedTime::Frames(frames);
        }
        let minutes = frames as f64 * table.units.time_per_frame;
        let t = format!("{minutes:.6}");
        FixedTime::Minutes {
            minutes,
            shown: t.trim_end_matches('0').trim_end_matches('.').to_string(),
            frames_of_first: frames,
        }
    }

    /// `10_min` or `10_frames`, for the statistic's name.
    fn label(&self) -> String {
        match self {
            FixedTime::Frames(n) => format!("{n}_frames"),
            FixedTime::Minutes { shown, .. } => format!("{shown}_min"),
        }
    }

    /// The frames of `table` that span the fixed time; an error naming the file where its
    /// interval does not divide it.
    fn frames_for(&self, table: &TrackTable) -> Result<usize> {
        let (minutes, shown, n) = match self {
            FixedTime::Frames(n) => return Ok(*n),
            FixedTime::Minutes {
                minutes,
                shown,
                frames_of_first,
            } => (*minutes, shown, frames_of_first),
        };
        let dt = table.units.time_per_frame;
        let k = minutes / dt;
        if (k - k.round()).abs() > 1e-6 * k.max(1.0) || k.round() < 1.0 {
            return Err(Error::input(
                &table.source,
                format!(
                    "is filmed every {dt} min, which does not divide the {shown} min of the directionality ratio at a fixed time ({n} frames of the first recording); give --fixed-time-frames so that it spans whole frames of every recording"
                ),
            ));
        }
        Ok(k.round() as usize)
    }

    /// Said when the recordings' intervals (minutes per frame) differ.
    fn intervals_warning(&self, intervals: &[(&ManifestEntry, f64)]) -> Option<String> {
        let FixedTime::Minutes { shown, .. } = self else {
            return None;
        };
        let first = intervals.first()?.1;
        intervals.iter().any(|&(_, dt)| (dt - first).abs() > 1e-9 * first).then(|| {
            let list: Vec<String> = intervals
                .iter()
                .map(|(e, dt)| format!("{} {} every {dt} min", e.condition, e.replicate))
                .collect();
            format!(
                "frame intervals differ ({}): the directionality ratio is compared over the same {shown} min, but path lengths, speeds and turning angles are measured between frames and shrink with coarser sampling, so they are not comparable across these recordings",
                list.join(", ")
            )
        })
    }
}

/// Writes `replicates.csv`, `comparison.csv` and `summary.json` into `dir` (`crate::reports`
/// adds `report.html`).
///
/// # Errors
/// Outputs not writable.
pub fn write_comparison_tables(c: &Comparison, manifest: &Path, dir: &Path) -> Result<()> {
    ensure_dir(dir)?;
    write_table(dir, "replicates.csv", |w| write_replicates(w, c))?;
    write_table(dir, "comparison.csv", |w| {
        write_csv_rows(w, &comparison_header(), &comparison_rows(c))
    })?;
    let record = serde_json::json!({
        "caravan_version": crate::VERSION,
        "research_use": "Caravan is research software; statistics are only as good as the segmentation they rest on.",
        "manifest": manifest,
        "entries": c.entries,
        "conditions": c.conditions,
        "bootstrap_resamples": BOOTSTRAP_RESAMPLES,
        "differences": c.differences,
        "factor": c.factor,
        "warnings": c.warnings,
    });
    if let Some(f) = &c.factor {
        write_table(dir, "factor.csv", |w| write_factor(w, f))?;
    }
    write_atomic(
        &dir.join("summary.json"),
        &serde_json::to_vec_pretty(&record).expect("serialisable"),
    )?;
    Ok(())
}

/// `factor.csv`: each replicate's mean of each statistic against its factor value.
fn write_factor(w: &mut impl Write, f: &super::factor::FactorAnalysis) -> std::io::Result<()> {
    let header = ["statistic", f.column.as_str(), "condition", "replicate", "mean"];
    let rows: Vec<Vec<String>> = f
        .fits
        .iter()
        .flat_map(|fit| {
            fit.points.iter().map(|p| {
                vec![
                    fit.statistic.clone(),
                    six(p.factor),
                    p.condition.clone(),
                    p.replicate.clone(),
                    six(p.mean),
                ]
            })
        })
        .collect();
    write_csv_rows(w, &header, &rows)
}

/// A number with 6 decimals, empty where not finite.
fn six(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.6}")
    } else {
        String::new()
    }
}

/// [`six`] of a value that may be absent.
fn six_or_empty(v: Option<f64>) -> String {
    v.map(six).unwrap_or_default()
}

/// A text column of a table of rows `R`: header name and cell.
type TextColumn<R> = (&'static str, fn(&R) -> String);

/// The columns of `comparison.csv` (and the report's table): name and cell, one list for
/// header and rows.
const COMPARISON_COLUMNS: [TextColumn<Difference>; 17] = [
    ("statistic", |d| d.statistic.clone()),
    ("reference", |d| d.reference.clone()),
    ("condition", |d| d.condition.clone()),
    ("replicates_reference", |d| d.replicates.0.to_string()),
    ("replicates_condition", |d| d.replicates.1.to_string()),
    ("tracks_reference", |d| d.tracks.0.to_string()),
    ("tracks_condition", |d| d.tracks.1.to_string()),
    ("mean_reference", |d| six(d.means.0)),
    ("mean_condition", |d| six(d.means.1)),
    ("difference", |d| six(d.difference)),
    ("ci95_low", |d| six(d.ci95.0)),
    ("ci95_high", |d| six(d.ci95.1)),
    ("permutation_p", |d| six_or_empty(d.permutation_p)),
    ("permutation_p_holm", |d| six_or_empty(d.permutation_p_holm)),
    ("mann_whitney_p", |d| six_or_empty(d.mann_whitney_p)),
    ("rank_biserial", |d| six_or_empty(d.rank_biserial)),
    ("hedges_g", |d| six_or_empty(d.hedges_g)),
];

/// The header of `comparison.csv`.
fn comparison_header() -> Vec<&'static str> {
    COMPARISON_COLUMNS.iter().map(|c| c.0).collect()
}

/// The rows of `comparison.csv`, numbers with 6 decimals, empty where not finite.
fn comparison_rows(c: &Comparison) -> Vec<Vec<String>> {
    c.differences
        .iter()
        .map(|d| COMPARISON_COLUMNS.iter().map(|col| (col.1)(d)).collect())
        .collect()
}

/// Writes a header and rows as CSV (the csv crate quotes cells that need it, RFC 4180).
fn write_csv_rows(w: &mut impl Write, header: &[&str], rows: &[Vec<String>]) -> std::io::Result<()> {
    let mut out = csv::Writer::from_writer(w);
    out.write_record(header)?;
    for row in rows {
        out.write_record(row)?;
    }
    out.flush()
}

/// The cell of one column of `replicates.csv` for a row: statistic name and the replicate's
/// values.
type ReplicateCell = fn(&(&str, &ReplicateValues)) -> String;

/// The columns of `replicates.csv`: name and cell, one list for header and rows.
const REPLICATE_COLUMNS: [(&str, ReplicateCell); 6] = [
    ("statistic", |r| r.0.to_string()),
    ("condition", |r| r.1.condition.clone()),
    ("replicate", |r| r.1.replicate.clone()),
    ("tracks", |r| r.1.values.len().to_string()),
    ("mean", |r| six(mean_sd(&r.1.values).map_or(f64::NAN, |m| m.0))),
    ("standard_deviation", |r| {
        six_or_empty(mean_sd(&r.1.values).and_then(|m| m.1))
    }),
];

fn write_replicates(w: &mut impl Write, c: &Comparison) -> std::io::Result<()> {
    let rows: Vec<Vec<String>> = c
        .statistic_names
        .iter()
        .flat_map(|name| c.replicates[name].iter().map(move |r| (name.as_str(), r)))
        .map(|row| REPLICATE_COLUMNS.iter().map(|col| (col.1)(&row)).collect())
        .collect();
    let header: Vec<&str> = REPLICATE_COLUMNS.iter().map(|col| col.0).collect();
    write_csv_rows(w, &header, &rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replicate_means_are_each_replicate_s_own_mean() {
        // Source: the arithmetic mean of each replicate's values (hand-computed): condition
        // "a" holds [1, 2, 3] and [10]; an empty replicate and condition "b" are left out.
        let rep = |condition: &str, replicate: &str, values: &[f64]| ReplicateValues {
            condition: condition.into(),
            replicate: replicate.into(),
            values: values.to_vec(),
        };
        let reps = [
            rep("a", "1", &[1.0, 2.0, 3.0]),
            rep("b", "1", &[7.0]),
            rep("a", "2", &[]),
            rep("a", "3", &[10.0]),
        ];
        let (groups, means) = replicate_means(&reps, "a");
        assert_eq!(groups, vec![vec![1.0, 2.0, 3.0], vec![10.0]]);
        assert_eq!(means, vec![2.0, 10.0]);
    }

    #[test]
    fn smallest_p_for_few_replicates() {
        // Source: fixtures/methods/check_values.md §9: 3 vs 3 embryos, smallest possible two-sided MWU p = 0.1;
        // 5 vs 5: 2/252 = 0.0079 (binomial coefficient C(10,5) = 252).
        assert!((smallest_possible_p(3, 3) - 0.1).abs() < 1e-12);
        assert!((smallest_possible_p(5, 5) - 2.0 / 252.0).abs() < 1e-12);
        assert!(smallest_possible_p(2, 2) >= 0.05 && smallest_possible_p(4, 4) < 0.05);
    }
}
