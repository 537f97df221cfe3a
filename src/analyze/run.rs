//! `analyze` end to end but for the page: read tracks, filter, compute, and write every table
//! and `summary.json` atomically into one folder (`crate::reports` adds `report.html`).

use super::outputs::{
    confinement_summary, summary, write_autocorrelation, write_border, write_border_distance, write_msd,
    write_neighbour_correlation, write_order, write_profiles, write_steps, write_stream, write_track_stats,
};
use super::population::{analyze_tracks_among, remove_common_drift, Analysis, AnalysisOptions};
use super::table::{apply_filters, Filters, Track, TrackTable};
use crate::error::{Error, Result};
use crate::output::{ensure_dir, write_atomic, AtomicFile, Commits};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Tables and summary an analysis writes (the report comes on top, from `crate::reports`).
pub const ANALYSIS_TABLES: [&str; 7] = [
    "track_stats.csv",
    "steps.csv",
    "msd.csv",
    "autocorrelation.csv",
    "order.csv",
    "neighbour_correlation.csv",
    "summary.json",
];

/// What an analysis run produced.
pub struct AnalysisRun {
    /// Output folder.
    pub dir: PathBuf,
    /// The tracks as read (before filtering).
    pub table: TrackTable,
    /// The tracks analysed: filtered (frames, region, length), and with the common drift
    /// removed when the options ask for it.
    pub analysed: Vec<Track>,
    /// The results.
    pub analysis: Analysis,
    /// `summary.json`'s population block.
    pub summary: serde_json::Value,
}

/// The default output folder: `analysis/` inside a run folder, else `<name>_analysis/` beside
/// a CSV.
pub fn default_output_dir(input: &Path) -> PathBuf {
    if input.is_dir() {
        input.join("analysis")
    } else {
        let stem = input
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        input.with_file_name(format!("{stem}_analysis"))
    }
}

/// Filters and analyses tracks already read ([`super::table::read_tracks`]), then writes the
/// tables and `summary.json` into `dir`.
///
/// # Errors
/// No track left after filtering; outputs not writable.
pub fn write_tables_of(
    table: TrackTable,
    filters: &Filters,
    options: &AnalysisOptions,
    dir: &Path,
) -> Result<AnalysisRun> {
    let analysis = analyze_table(&table, filters, options)?;
    write_tables(table, analysis, filters, options, dir)
}

/// A tracking run's analysis with the default filters and options, worked out before its
/// folder is complete (while the movie is drawn) and written once it is ([`write_tables`]).
#[derive(Debug, Clone)]
pub struct EarlyAnalysis {
    /// The tracks as read, `run_record` still empty.
    pub table: TrackTable,
    /// The figures, with the default filters and options.
    pub analysis: Analysis,
}

impl EarlyAnalysis {
    /// The default analysis of the run whose `tracks.csv` (at `tracks_csv`; its `text`, as
    /// written) has just been made, with the calibration its `run.json` will hold (the
    /// default options have no border, the one figure that needs the rest of the record);
    /// `None` when it cannot be made (too few tracks, an unreadable table): the analysis
    /// after the run then meets the same problem and says so.
    pub fn of_run(tracks_csv: &Path, text: &str, calibration: &crate::stack::Calibration) -> Option<EarlyAnalysis> {
        let table = super::table::read_run_tracks(tracks_csv, text, calibration).ok()?;
        let analysis = analyze_table(&table, &Filters::default(), &AnalysisOptions::default()).ok()?;
        Some(EarlyAnalysis { table, analysis })
    }
}

/// Writes an analysis's tables and `summary.json` into `dir` (see [`write_tables_of`]).
///
/// # Errors
/// Outputs not writable.
pub fn write_tables(
    table: TrackTable,
    analysis: Analysis,
    filters: &Filters,
    options: &AnalysisOptions,
    dir: &Path,
) -> Result<AnalysisRun> {
    ensure_dir(dir)?;
    // Each table's commit waits on the disk on a thread of its own while the next is made.
    let mut commits = Commits::default();
    let mut write_table = |name: &str, fill: &dyn Fn(&mut AtomicFile) -> std::io::Result<()>| {
        commits.start(filled_table(dir, name, fill)?);
        Ok::<(), crate::error::Error>(())
    };
    write_table("track_stats.csv", &|w| write_track_stats(w, &analysis))?;
    write_table("steps.csv", &|w| write_steps(w, &analysis))?;
    write_table("msd.csv", &|w| write_msd(w, &analysis))?;
    write_table("autocorrelation.csv", &|w| write_autocorrelation(w, &analysis))?;
    write_table("order.csv", &|w| write_order(w, &analysis))?;
    write_table("neighbour_correlation.csv", &|w| {
        write_neighbour_correlation(w, &analysis)
    })?;
    let c = &options.confinement;
    if analysis.stream.is_some() {
        write_table("stream.csv", &|w| write_stream(w, &analysis))?;
    }
    if c.border.is_some() {
        write_table("border.csv", &|w| write_border(w, &analysis))?;
        write_table("border_distance.csv", &|w| write_border_distance(w, &analysis))?;
    }
    if c.lane.is_some() {
        write_table("profiles.csv", &|w| write_profiles(w, &analysis))?;
    }
    commits.wait()?;
    let population = summary(&analysis);
    let record = serde_json::json!({
        "caravan_version": crate::VERSION,
        "research_use": "Caravan is research software; statistics are only as good as the segmentation they rest on.",
        "input": table.source,
        "tracks_read": table.tracks.len(),
        "units": table.units,
        "filters": filters,
        "options": options,
        "population": population,
        "confinement": confinement_summary(&analysis),
        "warnings": analysis.warnings,
    });
    write_atomic(
        &dir.join("summary.json"),
        &serde_json::to_vec_pretty(&record).expect("serialisable"),
    )?;
    Ok(AnalysisRun {
        dir: dir.to_path_buf(),
        analysed: analysed_tracks(&table, filters, options),
        table,
        analysis,
        summary: population,
    })
}

/// Filters and analyses tracks already read.
///
/// # Errors
/// No track left after filtering.
pub fn analyze_table(table: &TrackTable, filters: &Filters, options: &AnalysisOptions) -> Result<Analysis> {
    let kept = apply_filters(&table.tracks, filters);
    if kept.is_empty() {
        return Err(Error::input(
            &table.source,
            format!(
                "no track left after filtering ({} tracks read; at least {} points each required, --min-points)",
                table.tracks.len(),
                filters.min_points
            ),
        ));
    }
    // Every tracked point of the frames analysed is a neighbour, whatever the length and
    // region filters keep for the per-track figures.
    let frames_only = Filters {
        min_points: 1,
        frames: filters.frames,
        region: None,
    };
    let everyone = apply_filters(&table.tracks, &frames_only);
    let options = with_border_zone(table, options);
    Ok(analyze_tracks_among(&kept, &everyone, &table.units, &options))
}

/// The options with the border's zone filled in where it was not given: one nucleus diameter
/// of the tracking run (from its run.json), in analysis units.
fn with_border_zone(table: &TrackTable, options: &AnalysisOptions) -> AnalysisOptions {
    let mut options = options.clone();
    let c = &mut options.confinement;
    if c.border.is_some() && c.border_zone.is_none() {
        c.border_zone = table
            .run_record
            .as_ref()
            .map(|r| r.parameters.diameter.px() * table.units.length_per_px);
    }
    options
}

/// The tracks an analysis describes: `table`'s tracks after the filters, with the common
/// drift removed when `options` ask for it (what the report's trajectories show).
pub fn analysed_tracks(table: &TrackTable, filters: &Filters, options: &AnalysisOptions) -> Vec<Track> {
    let kept = apply_filters(&table.tracks, filters);
    if options.remove_drift {
        remove_common_drift(&kept)
    } else {
        kept
    }
}

/// Writes one table atomically.
pub fn write_table(dir: &Path, name: &str, fill: impl FnOnce(&mut AtomicFile) -> std::io::Result<()>) -> Result<()> {
    filled_table(dir, name, fill)?.commit()
}

/// A table written and flushed, still to be committed.
fn filled_table(
    dir: &Path,
    name: &str,
    fill: impl FnOnce(&mut AtomicFile) -> std::io::Result<()>,
) -> Result<AtomicFile> {
    let mut file = AtomicFile::create(&dir.join(name))?;
    fill(&mut file).and_then(|_| file.flush()).map_err(|e| file.error(e))?;
    Ok(file)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analyze::table::Units;
    use crate::tracks::PathPoint;

    #[test]
    fn the_paths_shown_are_those_the_frame_range_keeps() {
        // Construction: one track over frames 0-19; with --frames 5..15 the analysis (and so
        // the report's trajectory plot) sees frames 5-14 only.
        let table = TrackTable {
            source: "t.csv".into(),
            tracks: vec![Track {
                id: 1,
                parent: None,
                path: (0..20).map(|f| PathPoint::new(f, f as f64, 0.0)).collect(),
            }],
            units: Units::pixels(),
            run_record: None,
        };
        let filters = Filters {
            frames: Some((5, 15)),
            ..Filters::default()
        };
        let shown = analysed_tracks(&table, &filters, &AnalysisOptions::default());
        let frames: Vec<usize> = shown[0].path.iter().map(|p| p.frame).collect();
        assert_eq!(frames, (5..15).collect::<Vec<_>>());
    }
}
