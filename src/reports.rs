//! Analysis and comparison folders as a user gets them: the tables and summaries from
//! [`crate::analyze`], then the pages from [`crate::render::report`]. It sits above both, so
//! neither imports the other's writer (statistics never call drawing code).

use crate::analyze::compare::{
    comparison_header, comparison_rows, replicate_means, write_comparison_tables, Comparison,
};
use crate::analyze::msd::furth_msd;
use crate::analyze::population::AnalysisOptions;
use crate::analyze::run::{write_analysis_tables, AnalysisRun, ANALYSIS_TABLES};
use crate::analyze::table::{CalibrationOverride, Filters};
use crate::error::Result;
use crate::output::write_atomic;
use crate::render::plots::Strip;
use crate::render::report::{analysis_report, comparison_report, AnalysisPage, ComparedStatistic};
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
    let run = write_analysis_tables(input, calibration, filters, options, dir)?;
    write_atomic(
        &dir.join("report.html"),
        analysis_report(&analysis_page(&run)).as_bytes(),
    )?;
    Ok(run)
}

/// What the analysis page shows, taken from the analysis.
fn analysis_page(run: &AnalysisRun) -> AnalysisPage<'_> {
    let a = &run.analysis;
    let (l, t) = (a.units.length.as_str(), a.units.time.as_str());
    let dt = a.units.time_per_frame;
    let paths = run
        .table
        .tracks
        .iter()
        .filter(|tr| a.tracks.iter().any(|m| m.track_id == tr.id))
        .map(|tr| tr.path.iter().map(|p| (p.x, p.y)).collect())
        .collect();
    let msd_fit = a.furth.as_ref().map(|f| {
        let (lo, hi) = (f.lag_range_frames.0 as f64, f.lag_range_frames.1 as f64);
        let fit = (0..=40)
            .map(|k| lo * dt * (hi / lo).powf(k as f64 / 40.0))
            .map(|lag| (lag, furth_msd(lag, f.diffusion, f.persistence)))
            .collect();
        let label = format!("fit D = {:.3} {l}²/{t}, P = {:.2} {t}", f.diffusion, f.persistence);
        (label, fit)
    });
    AnalysisPage {
        source: run.table.source.display().to_string(),
        tracks_read: run.table.tracks.len(),
        tracks_analysed: a.tracks.len(),
        length_unit: l,
        time_unit: t,
        units_source: &a.units.source,
        run_record: run.table.run_record.as_ref(),
        summary: &run.summary,
        paths,
        directions_deg: a.tracks.iter().filter_map(|m| m.mean_direction_deg).collect(),
        msd: a.msd.iter().map(|q| (q.lag, q.msd)).collect(),
        msd_fit,
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
        neighbour_correlation: a
            .neighbour_correlation
            .iter()
            .filter_map(|b| b.correlation.map(|c| ((b.from + b.to) / 2.0, c)))
            .collect(),
        parameters: serde_json::json!({ "options": a.options, "units": a.units }),
    }
}

/// Writes `replicates.csv`, `comparison.csv`, `summary.json` and `report.html` into `dir`.
///
/// # Errors
/// Outputs not writable.
pub fn write_comparison(c: &Comparison, manifest: &Path, dir: &Path) -> Result<()> {
    write_comparison_tables(c, manifest, dir)?;
    let stats: Vec<ComparedStatistic> = c
        .statistic_names
        .iter()
        .map(|name| ComparedStatistic {
            name: name.clone(),
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
        &comparison_rows(c),
        &comparison_header(),
        &stats,
        &c.warnings,
    );
    write_atomic(&dir.join("report.html"), html.as_bytes())
}
