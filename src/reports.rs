//! Analysis and comparison folders as a user gets them: the tables and summaries from
//! [`crate::analyze`], then the pages from [`crate::render::report`]. It sits above both, so
//! neither imports the other's writer (statistics never call drawing code).

use crate::analyze::compare::{condition_curve, replicate_means, write_comparison_tables, Comparison, RecordingCurves};
use crate::analyze::models::ModelFit;
use crate::analyze::population::Analysis;
use crate::analyze::population::AnalysisOptions;
use crate::analyze::profiles::{Direction, ProfileBin};
use crate::analyze::resample::{Interval, ModelIntervals};
use crate::analyze::run::{write_tables, write_tables_of, AnalysisRun, EarlyAnalysis, ANALYSIS_TABLES};
use crate::analyze::table::{read_run_record, read_tracks, TrackTable};
use crate::analyze::table::{CalibrationOverride, Filters};
use crate::error::Result;
use crate::output::write_atomic;
use crate::render::plots::{Series, Strip};
use crate::render::report::{analysis_report, comparison_report, AnalysisPage, ChartSpec, ComparedStatistic};
use crate::render::report::{readable, unit_name};
use crate::report_text::model_name;
use crate::review::ReviewedTracks;
use std::path::Path;

/// Every file an analysis folder holds: the tables, `summary.json` and `report.html`.
pub const ANALYSIS_OUTPUTS: [&str; 8] = [
    ANALYSIS_TABLES[0],
    ANALYSIS_TABLES[1],
    ANALYSIS_TABLES[2],
    ANALYSIS_TABLES[3],
    ANALYSIS_TABLES[4],
    ANALYSIS_TABLES[5],
    ANALYSIS_TABLES[6],
    "report.html",
];

/// Reads, filters and analyses `input`, then writes the tables, `summary.json` and
/// `report.html` into `dir`.
///
/// # Errors
/// Unreadable or malformed input; no track left after filtering; outputs not writable.
pub fn run_analysis(
    input: &Path,
    calibration: CalibrationOverride,
    filters: &Filters,
    options: &AnalysisOptions,
    dir: &Path,
) -> Result<AnalysisRun> {
    let table = read_tracks(input, calibration)?;
    finish_analysis(table, None, filters, options, dir, None)
}

/// What a tracking run hands its analysis: the analysis worked out while the movie was drawn,
/// and the run's tracks and moments as its review page found them (when it made one), from
/// which the report's frames worth a look are made without reading tracks.csv again.
#[derive(Debug, Clone)]
pub struct RunAnalysis {
    /// The analysis.
    pub early: EarlyAnalysis,
    /// What the review page was made from.
    pub reviewed: Option<ReviewedTracks>,
}

/// [`run_analysis`] of the tracking run folder `run_dir` with the default filters and options,
/// from what the run hands over ([`RunAnalysis`]: its analysis worked out while it drew its
/// movie, whose tracks were read from the run's folder before it was put in place, and what
/// its review page was made from): the same folder, byte for byte. Falls back to reading the
/// folder when its `run.json` is not a record of this version.
///
/// # Errors
/// As [`run_analysis`].
pub fn run_early_analysis(handed: RunAnalysis, run_dir: &Path, dir: &Path) -> Result<AnalysisRun> {
    let RunAnalysis { early, reviewed } = handed;
    let EarlyAnalysis { mut table, analysis } = early;
    let (filters, options) = (Filters::default(), AnalysisOptions::default());
    table.source = run_dir.join("tracks.csv");
    match read_run_record(&table.source)? {
        (Some(record), None) => {
            table.run_record = Some(record);
            finish_analysis(table, Some(analysis), &filters, &options, dir, reviewed.as_ref())
        }
        _ => run_analysis(run_dir, CalibrationOverride::default(), &filters, &options, dir),
    }
}

/// Writes the tables (analysing `table` unless `analysis` is given) and the page; `reviewed`
/// is what the run's review page was made from, where the run hands it over.
fn finish_analysis(
    table: TrackTable,
    analysis: Option<Analysis>,
    filters: &Filters,
    options: &AnalysisOptions,
    dir: &Path,
    reviewed: Option<&ReviewedTracks>,
) -> Result<AnalysisRun> {
    // The frames worth a look (the review page's moments, from the run folder's tracks.csv)
    // are found while the analysis runs: they need only the run's record.
    let run_folder = table
        .run_record
        .clone()
        .zip(table.source.parent().map(Path::to_path_buf));
    let (run, flagged) = rayon::join(
        || match analysis {
            Some(analysis) => write_tables(table, analysis, filters, options, dir),
            None => write_tables_of(table, filters, options, dir),
        },
        || {
            run_folder
                .as_ref()
                .map(|(record, run_dir)| crate::report_text::flagged_frames(run_dir, record, reviewed))
        },
    );
    let run = run?;
    let page = analysis_page(&run, filters, dir, flagged.unwrap_or_default());
    write_atomic(&dir.join("report.html"), analysis_report(&page).as_bytes())?;
    Ok(run)
}

/// The review page's address from the report's folder: `../review/index.html` for the usual
/// `RUN/analysis/`, else the page's full path.
fn relative_review_link(report_dir: &Path, run_dir: &Path) -> String {
    let page = run_dir.join("review").join("index.html");
    let same = |a: &Path, b: &Path| match (a.canonicalize(), b.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    };
    match report_dir.parent() {
        Some(parent) if same(parent, run_dir) => "../review/index.html".into(),
        _ => page.canonicalize().unwrap_or(page).to_string_lossy().into_owned(),
    }
}

/// What the tracking run's folder adds to the page, when the tracks came from one: its
/// parameters, its frames worth a look, the expected accuracy of its look-alikes and the link
/// to its review page.
struct FromRunFolder {
    tracking_parameters: Vec<crate::render::report::ParameterRow>,
    flagged: Vec<crate::render::report::FlaggedFrame>,
    expected_accuracy: Vec<Vec<String>>,
    review_page: Option<String>,
}

fn from_run_folder(
    run: &AnalysisRun,
    report_dir: &Path,
    flagged: Vec<crate::render::report::FlaggedFrame>,
) -> FromRunFolder {
    let none = FromRunFolder {
        tracking_parameters: Vec::new(),
        flagged: Vec::new(),
        expected_accuracy: Vec::new(),
        review_page: None,
    };
    let (Some(record), Some(run_dir)) = (&run.table.run_record, run.table.source.parent()) else {
        return none;
    };
    FromRunFolder {
        tracking_parameters: crate::report_text::tracking_parameters(record),
        flagged,
        expected_accuracy: crate::report_text::expected_accuracy(&run_dir.join("lookalike").join("summary.json")),
        review_page: run_dir
            .join("review")
            .join("index.html")
            .exists()
            .then(|| relative_review_link(report_dir, run_dir)),
    }
}

/// What the analysis page shows, taken from the analysis, its filters and the tracking run's
/// folder.
fn analysis_page<'a>(
    run: &'a AnalysisRun,
    filters: &Filters,
    report_dir: &Path,
    flagged: Vec<crate::render::report::FlaggedFrame>,
) -> AnalysisPage<'a> {
    let folder = from_run_folder(run, report_dir, flagged);
    let a = &run.analysis;
    let (l, t) = (a.units.length.as_str(), a.units.time.as_str());
    let dt = a.units.time_per_frame;
    let paths = run
        .analysed
        .iter()
        .map(|tr| tr.path.iter().map(|p| (p.x, p.y)).collect())
        .collect();
    let msd_fit = a.models.best().map(|f| {
        let (lo, hi) = (a.fit_lags.0 as f64, a.fit_lags.1 as f64);
        let fit = (0..=40)
            .map(|k| lo * dt * (hi / lo).powf(k as f64 / 40.0))
            .map(|lag| (lag, f.parameters.msd_at(lag)))
            .collect();
        (format!("{} (chosen)", model_name(&f.model.name())), fit)
    });
    let band = |points: &mut dyn Iterator<Item = (f64, Option<Interval>)>| -> Vec<(f64, f64, f64)> {
        points.filter_map(|(x, i)| i.map(|i| (x, i.low, i.high))).collect()
    };
    AnalysisPage {
        title: crate::report_text::source_title(&run.table.source, run.table.run_record.as_ref()),
        source: run.table.source.display().to_string(),
        tracks_read: run.table.tracks.len(),
        tracks_analysed: a.tracks.len(),
        length_unit: l,
        time_unit: t,
        units_source: &a.units.source,
        run_record: run.table.run_record.as_ref(),
        statistics: crate::report_text::curated_statistics(&run.summary, &a.units, a.options.axis_deg),
        paths,
        directions_deg: a.tracks.iter().filter_map(|m| m.mean_direction_deg).collect(),
        msd: a.msd.iter().map(|q| (q.lag, q.msd)).collect(),
        msd_band: band(&mut a.msd.iter().zip(&a.uncertainty.msd).map(|(q, i)| (q.lag, *i))),
        per_cell_msd: a.per_cell_msd.iter().map(|c| (c.0 as f64 * dt, c.1)).collect(),
        msd_fit,
        model_criterion: format!(
            "Fitted to the pooled MSD over lags {}-{} frames by weighted least squares (weights: pairs per lag); the model chosen is the one with the fewest parameters among those within 2 of the lowest small-sample Akaike information criterion, AICc (Burnham & Anderson 2002). Intervals: 2.5th-97.5th percentiles over {} resamples of whole tracks.",
            a.fit_lags.0, a.fit_lags.1, a.uncertainty.resamples
        ),
        models: model_rows(a),
        model_warnings: &a.warnings,
        speeds: a.tracks.iter().filter_map(|m| m.mean_speed).collect(),
        directionality: a.tracks.iter().filter_map(|m| m.directionality_ratio).collect(),
        order: a
            .frames
            .iter()
            .filter_map(|f| f.order_parameter.map(|o| (f.frame as f64 * dt, o)))
            .collect(),
        direction_autocorrelation: a
            .autocorrelation
            .iter()
            .map(|q| (q.lag_frames as f64 * dt, q.direction))
            .collect(),
        direction_autocorrelation_band: band(
            &mut a
                .autocorrelation
                .iter()
                .zip(&a.uncertainty.direction_autocorrelation)
                .map(|(q, i)| (q.lag_frames as f64 * dt, *i)),
        ),
        neighbour_correlation: a
            .neighbour_correlation
            .iter()
            .filter_map(|b| b.correlation.map(|c| ((b.from + b.to) / 2.0, c)))
            .collect(),
        parameters: crate::report_text::analysis_parameters(a, filters),
        tracking_parameters: folder.tracking_parameters,
        flagged: folder.flagged,
        review_page: folder.review_page,
        expected_accuracy: folder.expected_accuracy,
        confinement: confinement_charts(a),
    }
}

/// The stream over time, the response to the border and the lane profiles, as charts.
fn confinement_charts(a: &Analysis) -> Vec<ChartSpec> {
    let (l, t) = (unit_name(a.units.length.as_str()), unit_name(a.units.time.as_str()));
    let dt = a.units.time_per_frame;
    let mut out = Vec::new();
    if let Some(s) = &a.stream {
        let over_time = |get: fn(&crate::analyze::stream::StreamFrame) -> f64| -> Vec<(f64, f64)> {
            s.frames.iter().map(|f| (f.frame as f64 * dt, get(f))).collect()
        };
        out.push(ChartSpec {
            title: "Stream front and rear along the axis".into(),
            axes: (format!("time ({t})"), format!("position along the axis ({l})")),
            log: false,
            series: vec![
                Series::new("front (95th percentile)", over_time(|f| f.front), false),
                Series::new("rear (5th percentile)", over_time(|f| f.rear), false),
            ],
            caption: "Where the stream's leading and trailing cells are; the front's advance speed (Theil-Sen slope) is in the table.".into(),
        });
        out.push(ChartSpec {
            title: "Stream width across the axis".into(),
            axes: (format!("time ({t})"), format!("width ({l})")),
            log: false,
            series: vec![
                Series::new("5th-95th percentile span", over_time(|f| f.width), false),
                Series::new("standard deviation", over_time(|f| f.width_sd), false),
            ],
            caption: "How wide the stream is, frame by frame, from the positions of every tracked cell.".into(),
        });
    }
    if let Some(b) = &a.border {
        let mid = |x: &crate::analyze::border::DistanceBin| (x.from + x.to) / 2.0;
        let band = |get: fn(&crate::analyze::border::DistanceBin) -> Option<Interval>| -> Vec<(f64, f64, f64)> {
            b.bins
                .iter()
                .filter_map(|x| get(x).map(|i| (mid(x), i.low, i.high)))
                .collect()
        };
        let line = |get: fn(&crate::analyze::border::DistanceBin) -> Option<f64>| -> Vec<(f64, f64)> {
            b.bins.iter().filter_map(|x| get(x).map(|v| (mid(x), v))).collect()
        };
        out.push(ChartSpec {
            title: "Speed against distance to the border".into(),
            axes: (format!("distance to the border ({l})"), format!("speed ({l}/{})", a.units.time.as_str())),
            log: false,
            series: vec![
                Series {
                    band: band(|x| x.speed_ci95),
                    ..Series::new("speed", line(|x| x.speed), true)
                },
                Series {
                    band: band(|x| x.approach_speed_ci95),
                    ..Series::new("speed toward the border", line(|x| x.approach_speed), true)
                },
            ],
            caption: "Steps binned by how far from the border they start; shaded: 95% intervals from resampling tracks. Approaches and their outcomes are in border.csv.".into(),
        });
        out.push(ChartSpec {
            title: "Heading against distance to the border".into(),
            axes: (format!("distance to the border ({l})"), "cosine toward the border".into()),
            log: false,
            series: vec![Series {
                band: band(|x| x.heading_toward_ci95),
                ..Series::new("heading toward the border", line(|x| x.heading_toward), true)
            }],
            caption: "1: straight at the border, 0: along it, -1: straight away; shaded: 95% intervals from resampling tracks.".into(),
        });
    }
    for direction in [Direction::Across, Direction::Along] {
        let bins: Vec<&ProfileBin> = a.profiles.iter().filter(|b| b.direction == direction).collect();
        if bins.is_empty() {
            continue;
        }
        let line = |get: fn(&ProfileBin) -> Option<f64>| -> Vec<(f64, f64)> {
            bins.iter()
                .filter_map(|b| get(b).map(|v| ((b.from + b.to) / 2.0, v)))
                .collect()
        };
        let (title, x) = match direction {
            Direction::Across => ("Across the lane", format!("position across the axis ({l})")),
            Direction::Along => ("Along the axis", format!("position along the axis ({l})")),
        };
        out.push(ChartSpec {
            title: format!("{title}: forward index, straightness, alignment"),
            axes: (x.clone(), "index".into()),
            log: false,
            series: vec![
                Series::new("forward index of steps", line(|b| b.forward_index), true),
                Series::new("directionality ratio", line(|b| b.directionality), true),
                Series::new("order parameter", line(|b| b.order_parameter), true),
            ],
            caption: "Binned by where each step starts (tracks by their mean position; the order parameter per frame and bin, averaged).".into(),
        });
        out.push(ChartSpec {
            title: format!("{title}: speed"),
            axes: (x, format!("speed ({l}/{})", a.units.time.as_str())),
            log: false,
            series: vec![Series::new("mean step speed", line(|b| b.speed), true)],
            caption: "Mean speed of the steps starting in each bin.".into(),
        });
    }
    out
}

/// The models table: each candidate's parameters with intervals, its ΔAICc (from the lowest)
/// and whether it was chosen; failed candidates with their reason.
fn model_rows(a: &Analysis) -> Vec<Vec<String>> {
    let mut rows: Vec<Vec<String>> = a
        .models
        .fitted
        .iter()
        .zip(&a.uncertainty.models)
        .zip(a.models.delta_aicc())
        .enumerate()
        .map(|(k, ((f, i), delta))| {
            vec![
                model_name(&f.model.name()),
                parameter_text(a, f, i),
                format!("{delta:.2}"),
                if a.models.chosen == Some(k) {
                    "chosen".into()
                } else {
                    String::new()
                },
            ]
        })
        .collect();
    rows.extend(a.models.failed.iter().map(|f| {
        vec![
            model_name(&f.model.name()),
            String::new(),
            String::new(),
            format!("failed: {}", f.reason),
        ]
    }));
    rows
}

/// `D = 1.93 [1.61, 2.30] um²/min; P = …` for one candidate.
fn parameter_text(a: &Analysis, f: &ModelFit, i: &ModelIntervals) -> String {
    let (l, t) = (unit_name(a.units.length.as_str()), a.units.time.as_str());
    let one = |name: &str, v: f64, ci: Option<Interval>, unit: String| match ci {
        Some(c) => format!(
            "{name} = {} [{}, {}] {unit}",
            readable(v),
            readable(c.low),
            readable(c.high)
        ),
        None => format!("{name} = {} {unit}", readable(v)),
    };
    let p = &f.parameters;
    let mut parts = vec![one("D", p.diffusion, i.diffusion, format!("{l}²/{t}"))];
    if let Some(pt) = p.persistence {
        parts.push(one("P", pt, i.persistence, t.to_string()));
    }
    if let Some(v) = p.drift_speed {
        parts.push(one("v", v, i.drift_speed, format!("{l}/{t}")));
    }
    if let Some(sigma) = p.localisation_error() {
        parts.push(one("σ", sigma, i.localisation_error(), l.clone()));
    }
    parts.join("; ")
}

/// Writes `replicates.csv`, `comparison.csv`, `summary.json` and `report.html` into `dir`.
///
/// # Errors
/// Outputs not writable.
pub fn write_comparison(c: &Comparison, manifest: &Path, dir: &Path) -> Result<()> {
    write_comparison_tables(c, manifest, dir)?;
    let (l, t) = (c.units.0.as_str(), c.units.1.as_str());
    let stats: Vec<ComparedStatistic> = c
        .statistic_names
        .iter()
        .map(|name| ComparedStatistic {
            name: labelled(name, l, t),
            strips: c
                .conditions
                .iter()
                .map(|cond| {
                    let (groups, means) = replicate_means(&c.replicates[name], cond);
                    Strip {
                        name: cond.clone(),
                        values: groups.concat(),
                        replicate_means: means,
                    }
                })
                .collect(),
        })
        .collect();
    let entries: Vec<Vec<String>> = c
        .entries
        .iter()
        .map(|e| {
            let labels: Vec<String> = e.labels.iter().map(|(k, v)| format!("{k}: {v}")).collect();
            vec![
                e.path.display().to_string(),
                e.condition.clone(),
                e.replicate.clone(),
                labels.join("; "),
            ]
        })
        .collect();
    let html = comparison_report(
        &manifest.display().to_string(),
        &entries,
        &difference_rows(c),
        &DIFFERENCE_HEADER,
        (&stats, &compared_curves(c)),
        &c.warnings,
    );
    write_atomic(&dir.join("report.html"), html.as_bytes())
}

/// A statistic's name in words with its unit in brackets.
fn labelled(key: &str, l: &str, t: &str) -> String {
    let (label, unit) = crate::report_text::statistic_label(key, l, t);
    if unit.is_empty() {
        label
    } else {
        format!("{label} ({unit})")
    }
}

/// The columns of the page's differences table (`comparison.csv` has them all, by key).
const DIFFERENCE_HEADER: [&str; 9] = [
    "statistic",
    "reference → condition",
    "replicates",
    "tracks",
    "means",
    "difference (95% interval)",
    "p, permutation (Holm-adjusted)",
    "p, Mann-Whitney",
    "effect size (Hedges' g)",
];

/// The differences between conditions in words and readable numbers.
fn difference_rows(c: &Comparison) -> Vec<Vec<String>> {
    use crate::render::report::p_value;
    let (l, t) = (c.units.0.as_str(), c.units.1.as_str());
    let p = |v: Option<f64>| v.map_or("–".into(), p_value);
    c.differences
        .iter()
        .map(|d| {
            vec![
                labelled(&d.statistic, l, t),
                format!("{} → {}", d.reference, d.condition),
                format!("{} / {}", d.replicates.0, d.replicates.1),
                format!("{} / {}", d.tracks.0, d.tracks.1),
                format!("{} / {}", readable(d.means.0), readable(d.means.1)),
                format!(
                    "{} ({} to {})",
                    readable(d.difference),
                    readable(d.ci95.0),
                    readable(d.ci95.1)
                ),
                format!("{} ({})", p(d.permutation_p), p(d.permutation_p_holm)),
                p(d.mann_whitney_p),
                d.hedges_g.map_or("–".into(), readable),
            ]
        })
        .collect()
}

/// The MSD and direction autocorrelation of every condition, overlaid.
fn compared_curves(c: &Comparison) -> Vec<ChartSpec> {
    let (l, t) = (unit_name(c.units.0.as_str()), unit_name(c.units.1.as_str()));
    let series = |pick: fn(&RecordingCurves) -> &[(f64, f64)]| -> Vec<Series> {
        c.conditions
            .iter()
            .map(|cond| {
                let curve = condition_curve(&c.curves, cond, pick);
                Series {
                    band: curve.iter().map(|p| (p.0, p.2, p.3)).collect(),
                    ..Series::new(cond.clone(), curve.iter().map(|p| (p.0, p.1)).collect(), true)
                }
            })
            .collect()
    };
    let caption = "Points: the mean over the condition's replicates (each replicate the mean of its recordings); shaded: from the lowest to the highest replicate, lags every replicate has.";
    let factor = c.factor.iter().flat_map(|f| {
        f.fits
            .iter()
            .map(move |fit| factor_chart(&f.column, fit, (c.units.0.as_str(), c.units.1.as_str())))
    });
    let mut charts = vec![
        ChartSpec {
            title: "Mean squared displacement per condition".into(),
            axes: (format!("lag ({t})"), format!("MSD ({l}²)")),
            log: true,
            series: series(|r| &r.msd),
            caption: caption.into(),
        },
        ChartSpec {
            title: "Direction autocorrelation per condition".into(),
            axes: (format!("lag ({t})"), "⟨û(t)·û(t+lag)⟩".into()),
            log: false,
            series: series(|r| &r.direction_autocorrelation),
            caption: caption.into(),
        },
    ];
    charts.extend(factor);
    charts
}

/// One statistic against the manifest's numeric column: replicate means and the quadratic.
fn factor_chart(column: &str, fit: &crate::analyze::factor::FactorFit, (l, t): (&str, &str)) -> ChartSpec {
    let mut series = vec![
        Series::new(
            "replicate means",
            fit.points.iter().map(|p| (p.factor, p.mean)).collect(),
            true,
        ),
        Series {
            band: fit
                .levels
                .iter()
                .filter_map(|l| l.ci95.map(|i| (l.factor, i.low, i.high)))
                .collect(),
            ..Series::new(
                "mean per value",
                fit.levels.iter().map(|l| (l.factor, l.mean)).collect(),
                false,
            )
        },
    ];
    let (lo, hi) = fit.points.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
        (a.min(p.factor), b.max(p.factor))
    });
    if let Some(q) = fit.quadratic.filter(|_| lo < hi) {
        let curve = (0..=40)
            .map(|k| lo + (hi - lo) * k as f64 / 40.0)
            .map(|x| (x, q[0] + q[1] * x + q[2] * x * x))
            .collect();
        series.push(Series::new("quadratic fit", curve, false));
    }
    let verdict = match (fit.peak, fit.peak_ci95, fit.optimum_supported) {
        (Some(p), Some(i), true) => format!("peaks at {p:.3} (95% interval {:.3} to {:.3}), inside the range in {:.0}% of resamples of replicates: an optimum the data support.", i.low, i.high, 100.0 * fit.share_with_peak),
        _ => format!("inside the range in {:.0}% of resamples of replicates: no optimum claimed.", 100.0 * fit.share_with_peak),
    };
    let name = labelled(&fit.statistic, l, t);
    ChartSpec {
        title: format!("{name} against {column}"),
        axes: (column.to_string(), name.clone()),
        log: false,
        series,
        caption: format!("One point per replicate; the line joins the means per value, shaded: their 95% intervals from resampling replicates; the quadratic {verdict}"),
    }
}
