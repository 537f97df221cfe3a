//! Analysis and comparison folders as a user gets them: the tables and summaries from
//! [`crate::analyze`], then the pages from [`crate::render::report`]. It sits above both, so
//! neither imports the other's writer (statistics never call drawing code).

use crate::analyze::compare::{
    comparison_rows, replicate_means, write_comparison_tables, Comparison, COMPARISON_HEADER,
};
use crate::analyze::population::AnalysisOptions;
use crate::analyze::run::{write_analysis_tables, AnalysisRun, ANALYSIS_TABLES};
use crate::analyze::table::{CalibrationOverride, Filters};
use crate::error::Result;
use crate::output::write_atomic;
use crate::render::plots::Strip;
use crate::render::report::{analysis_report, comparison_report, ComparedStatistic};
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
    write_atomic(&dir.join("report.html"), analysis_report(&run).as_bytes())?;
    Ok(run)
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
        &COMPARISON_HEADER,
        &stats,
        &c.warnings,
    );
    write_atomic(&dir.join("report.html"), html.as_bytes())
}
