//! The words of the reports: which statistics the analysis page shows and what each is called,
//! with its unit; the parameters as a reader reads them, with where each came from; the
//! frames of a tracking run worth a look. `summary.json` keeps every number under its key;
//! the page shows a chosen few under plain names.

use crate::analyze::population::{Analysis, AnalysisOptions};
use crate::analyze::table::{Filters, Units};
use crate::params::{BackgroundMethod, ThresholdMethod};
use crate::record::RunRecord;
use crate::render::report::{unit_name, FlaggedFrame, NumberKind, ParameterRow, StatisticRow};
use crate::render::review::MomentKind;
use crate::review::{read_linked_points, review_input, ReviewedTracks, RunView};
use serde_json::Value;
use std::path::Path;

/// Flagged frames shown on the analysis page at most.
const FLAGGED_FRAMES: usize = 6;

/// The title of an analysis page: the recording's file name for a run folder, else the
/// table's.
pub fn source_title(source: &Path, record: Option<&RunRecord>) -> String {
    let name = |p: &Path| {
        p.file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    };
    record.map_or_else(|| name(source), |r| name(&r.input.stack.path))
}

/// A statistic's name in words and its unit, from its key in `summary.json` or
/// `comparison.csv` (`mean_speed_um_per_min`, `walk_persistence_time_min`, ...); unknown keys
/// keep their words, with spaces.
pub fn statistic_label(key: &str, length_unit: &str, time_unit: &str) -> (String, String) {
    let (l, t) = (unit_name(length_unit), time_unit.to_string());
    let speed = format!("{l}/{t}");
    let named = |label: &str, unit: &str| (label.to_string(), unit.to_string());
    if key.starts_with("mean_speed_") {
        named("Mean speed per track", &speed)
    } else if key.starts_with("instantaneous_speed_") {
        named("Speed of single steps", &speed)
    } else if let Some(span) = key.strip_prefix("directionality_ratio_at_") {
        let span = span.replace('_', " ");
        named(&format!("Directionality over the first {span}"), "")
    } else if key == "directionality_ratio" {
        named("Directionality (net displacement / path length)", "")
    } else if key == "forward_migration_index" {
        named("Forward migration index", "")
    } else if key == "mean_abs_turning_angle_deg" {
        named("Mean turning angle between steps", "°")
    } else if key.starts_with("walk_diffusion_coefficient_") {
        named(
            "Diffusion coefficient D of the persistent random walk",
            &format!("{l}²/{t}"),
        )
    } else if key.starts_with("walk_persistence_time_") {
        named("Persistence time P of the persistent random walk", &t)
    } else if key.starts_with("mean_neighbour_distance_") {
        named("Distance to the nearest neighbour", &l)
    } else {
        named(&key.replace('_', " "), "")
    }
}

/// Where a curated statistic is found in the population block: the first key with a prefix
/// (its name and unit from [`statistic_label`]), or a path of keys with its own name and unit.
enum Found {
    Prefix(&'static str),
    Path(Vec<String>, String, String),
}

/// The population statistics a reader looks for, in groups by the question each answers, from
/// `summary.json`'s population block.
pub fn curated_statistics(summary: &Value, units: &Units, axis_deg: f64) -> Vec<StatisticRow> {
    let (l, t) = (unit_name(units.length.as_str()), units.time.as_str());
    let path = |keys: &[&str], label: &str, unit: &str| {
        Found::Path(
            keys.iter().map(|k| k.to_string()).collect(),
            label.to_string(),
            unit.to_string(),
        )
    };
    let model = summary
        .pointer("/motion_model/chosen")
        .and_then(Value::as_str)
        .unwrap_or("");
    let d_key = summary
        .get("motion_model")
        .and_then(Value::as_object)
        .and_then(|m| m.keys().find(|k| k.starts_with("diffusion_coefficient_")).cloned())
        .unwrap_or_default();
    let measure = NumberKind::Measure;
    let entries = [
        ("How fast", Found::Prefix("mean_speed_"), "tracks", measure),
        ("How fast", Found::Prefix("instantaneous_speed_"), "steps", measure),
        (
            "How fast",
            path(
                &["motion_model", &d_key],
                &format!("Diffusion coefficient D ({})", model_name(model)),
                &format!("{l}²/{t}"),
            ),
            "",
            measure,
        ),
        (
            "How fast",
            path(&["anomalous_exponent"], "MSD exponent α (1 diffusive, 2 straight)", ""),
            "",
            measure,
        ),
        (
            "How fast",
            path(&["anomalous_exponent_per_cell"], "MSD exponent α, per track", ""),
            "tracks",
            measure,
        ),
        (
            "How straight",
            path(
                &["directionality_ratio"],
                "Directionality (net displacement / path length)",
                "",
            ),
            "tracks",
            measure,
        ),
        (
            "How straight",
            Found::Prefix("directionality_ratio_at_"),
            "tracks",
            measure,
        ),
        (
            "How straight",
            Found::Prefix("mean_abs_turning_angle_deg"),
            "tracks",
            measure,
        ),
        ("Which way", Found::Prefix("forward_migration_index"), "tracks", measure),
        (
            "Which way",
            path(
                &["directions", "mean_direction_deg"],
                "Mean direction of net displacement",
                "°",
            ),
            "",
            measure,
        ),
        (
            "Which way",
            path(
                &["directions", "mean_resultant_length"],
                "Mean resultant length of directions (0 uniform, 1 all alike)",
                "",
            ),
            "",
            measure,
        ),
        (
            "Which way",
            path(
                &["directions", "rayleigh_test", "p_value"],
                "Rayleigh test of uniform directions: p",
                "",
            ),
            "",
            NumberKind::PValue,
        ),
        (
            "Which way",
            path(
                &["v_test", "p_value"],
                &format!(
                    "V test of motion toward {}°: p",
                    crate::render::report::readable(axis_deg)
                ),
                "",
            ),
            "",
            NumberKind::PValue,
        ),
        (
            "How together",
            path(&["order_parameter"], "Order parameter φ per frame (1 all aligned)", ""),
            "frames",
            measure,
        ),
        (
            "How together",
            Found::Prefix("mean_neighbour_distance_"),
            "frames",
            measure,
        ),
        ("Data", path(&["tracks"], "Tracks analysed", ""), "", measure),
        (
            "Data",
            path(
                &["gaps", "missing_frames"],
                "Frames missing inside tracks (gaps closed)",
                "",
            ),
            "",
            measure,
        ),
    ];
    entries
        .into_iter()
        .filter_map(|(group, found, n, kind)| {
            let (label, unit, v) = match found {
                Found::Prefix(prefix) => {
                    let (key, v) = summary.as_object()?.iter().find(|(k, _)| k.starts_with(prefix))?;
                    let (label, unit) = statistic_label(key, units.length.as_str(), units.time.as_str());
                    (label, unit, v)
                }
                Found::Path(keys, label, unit) => (label, unit, keys.iter().try_fold(summary, |v, k| v.get(k))?),
            };
            Some(row(group, label, unit, v, n, kind))
        })
        .collect()
}

/// A model's name in words.
pub fn model_name(key: &str) -> String {
    let (shape, noise) = match key.strip_suffix("+noise") {
        Some(s) => (s, " with localisation error"),
        None => (key, ""),
    };
    let shape = match shape {
        "diffusion" => "diffusion",
        "diffusion_with_drift" => "diffusion with drift",
        "persistent_random_walk" => "persistent random walk",
        other => other,
    };
    format!("{shape}{noise}")
}

/// One table row from a statistic's block: `{mean, median, standard_deviation, n,
/// ci95_of_mean}`, `{value, ci95}`, or a bare number.
fn row(group: &'static str, label: String, unit: String, v: &Value, n: &str, kind: NumberKind) -> StatisticRow {
    let num = |k: &str| v.get(k).and_then(Value::as_f64);
    let pair = |k: &str| {
        v.get(k)
            .and_then(Value::as_array)
            .filter(|a| a.len() == 2)
            .and_then(|a| Some((a[0].as_f64()?, a[1].as_f64()?)))
    };
    let count = v.get("n").and_then(Value::as_u64);
    StatisticRow {
        group,
        label,
        unit,
        value: num("mean").or(num("value")).or(v.as_f64()),
        interval: pair("ci95_of_mean").or(pair("ci95")),
        median: num("median"),
        spread: num("standard_deviation"),
        n: match (count, n) {
            (Some(c), "") => c.to_string(),
            (Some(c), noun) => format!("{c} {noun}"),
            (None, _) => String::new(),
        },
        kind,
    }
}

/// The analysis's options, units and filters, each with whether it was given or is the
/// default.
pub fn analysis_parameters(a: &Analysis, filters: &Filters) -> Vec<ParameterRow> {
    let defaults = AnalysisOptions::default();
    let default_filters = Filters::default();
    let o = &a.options;
    let source = |is_default: bool| if is_default { "default" } else { "given" }.to_string();
    let units = &a.units;
    let p = |name: &str, value: String, source: String| ParameterRow {
        name: name.into(),
        value,
        source,
    };
    let (l, t) = (unit_name(units.length.as_str()), units.time.as_str());
    vec![
        p(
            "Calibration",
            format!(
                "1 px = {} {l}; 1 frame = {} {t}",
                crate::render::report::readable(units.length_per_px),
                crate::render::report::readable(units.time_per_frame)
            ),
            units.source.clone(),
        ),
        p(
            "Shortest track analysed",
            format!("{} points", filters.min_points),
            source(filters.min_points == default_filters.min_points),
        ),
        p(
            "Frames analysed",
            filters
                .frames
                .map_or("all".into(), |(a, b)| format!("{a} to {}", b.saturating_sub(1))),
            source(filters.frames.is_none()),
        ),
        p(
            "Region analysed",
            if filters.region.is_some() {
                "a region of interest"
            } else {
                "the whole field"
            }
            .into(),
            source(filters.region.is_none()),
        ),
        p(
            "Direction of interest (forward index, V test)",
            format!("{}° from +x toward +y", crate::render::report::readable(o.axis_deg)),
            source(o.axis_deg == defaults.axis_deg),
        ),
        p(
            "Directionality over a fixed time",
            format!("the first {} frames", o.fixed_elapsed_frames),
            source(o.fixed_elapsed_frames == defaults.fixed_elapsed_frames),
        ),
        p(
            "Lags fitted (motion models, MSD exponent)",
            format!("{} to {} frames", a.fit_lags.0, a.fit_lags.1),
            if o.fit_lags.is_some() {
                "given".into()
            } else {
                "1 to a quarter of the median track span (common practice)".into()
            },
        ),
        p(
            "Common drift removed",
            if o.remove_drift { "yes" } else { "no" }.into(),
            source(o.remove_drift == defaults.remove_drift),
        ),
        p(
            "Resamples of tracks for the intervals",
            o.resamples.to_string(),
            source(o.resamples == defaults.resamples),
        ),
        p(
            "Neighbours for the local density",
            o.density_neighbours.to_string(),
            source(o.density_neighbours == defaults.density_neighbours),
        ),
    ]
}

/// The tracking run's parameters that decide its tracks, with their sources.
pub fn tracking_parameters(record: &RunRecord) -> Vec<ParameterRow> {
    let p = |name: &str, value: String, source: &str| ParameterRow {
        name: name.into(),
        value,
        source: source.into(),
    };
    let params = &record.parameters;
    let diameter_source = match &params.diameter {
        crate::record::DiameterSource::Given { .. } => "given",
        crate::record::DiameterSource::Masks { .. } => "the median of the masks' objects",
        crate::record::DiameterSource::Estimated(_) => "measured from the recording",
    };
    let s = &params.segment;
    let threshold = match s.threshold {
        ThresholdMethod::Otsu => ("Otsu (1979)".to_string(), "default"),
        ThresholdMethod::Triangle => ("triangle (Zack, Rogers & Latt 1977)".to_string(), "given"),
        ThresholdMethod::Li => ("minimum cross-entropy (Li & Lee 1993)".to_string(), "given"),
        ThresholdMethod::Fixed(v) => (format!("fixed at {}", crate::render::report::readable(v)), "given"),
    };
    let background = match s.background {
        BackgroundMethod::Tophat => ("white top-hat larger than a nucleus", "default"),
        BackgroundMethod::None => ("none", "given"),
    };
    let on_off = |on: bool| if on { "on" } else { "off" }.to_string();
    let px = |v: f64| format!("{} px", crate::render::report::readable(v));
    let mut rows = vec![
        p("Nucleus diameter", px(params.diameter.px()), diameter_source),
        p("Threshold", threshold.0, threshold.1),
        p("Background removal", background.0.into(), background.1),
        p(
            "Smallest object",
            format!("{} px²", crate::render::report::readable(s.min_area_px)),
            "from the diameter",
        ),
        p(
            "Largest object before it is cut",
            format!("{} px²", crate::render::report::readable(s.max_area_px)),
            "from the diameter",
        ),
    ];
    if let Some(link) = &params.link {
        let step_source = match link.max_step_source {
            crate::link::MaxStepSource::Given => "given",
            _ => "measured from the recording's confident links",
        };
        rows.push(p(
            "Longest step between frames",
            px(link.params.max_step_px),
            step_source,
        ));
        rows.push(p(
            "Longest gap bridged",
            format!("{} frames", link.params.max_gap_frames),
            "default or given",
        ));
        rows.push(p(
            "Motion prediction",
            on_off(link.params.prediction == crate::link::Prediction::On),
            "default or given",
        ));
        rows.push(p(
            "Division detection",
            on_off(link.params.divisions == crate::link::Divisions::On),
            "default or given",
        ));
    }
    rows
}

/// Up to six frames worth a look (the review page's moments, most telling kind
/// first), each with the run's objects, when the run folder has its review page's frames.
/// `reviewed` is what the run that wrote the folder found for its review page, where the
/// caller has it; otherwise the folder's `tracks.csv` is read and its moments found again.
pub fn flagged_frames(run_dir: &Path, record: &RunRecord, reviewed: Option<&ReviewedTracks>) -> Vec<FlaggedFrame> {
    let found;
    let reviewed = match reviewed {
        Some(reviewed) => reviewed,
        None => {
            let Ok(points) = read_linked_points(&run_dir.join("tracks.csv")) else {
                return Vec::new();
            };
            let view = RunView {
                info: &record.input.stack,
                per_frame: &record.per_frame,
                count_jumps: &record.count_jumps,
                verdict: record.verdict.as_ref(),
                diameter_px: record.parameters.diameter.px(),
            };
            let moments = review_input(&points, &view).moments;
            found = ReviewedTracks { points, moments };
            &found
        }
    };
    let (points, size) = (&reviewed.points, (record.input.stack.width, record.input.stack.height));
    let mut chosen: Vec<(usize, String)> = Vec::new();
    for kind in MomentKind::ALL {
        for m in reviewed.moments.iter().filter(|m| m.kind == kind) {
            if chosen.len() < FLAGGED_FRAMES && !chosen.iter().any(|c| c.0 == m.frame) {
                let track = m.track.map_or(String::new(), |t| format!(", track {t}"));
                let note = if m.note.is_empty() {
                    String::new()
                } else {
                    format!(": {}", m.note)
                };
                chosen.push((m.frame, format!("{}{track}{note}", kind.label())));
            }
        }
    }
    chosen.sort_by_key(|c| c.0);
    chosen
        .into_iter()
        .filter_map(|(frame, note)| {
            let jpeg = std::fs::read(run_dir.join(format!("review/frames/{frame:06}.jpg"))).ok()?;
            let ellipses = points
                .iter()
                .filter(|p| p.point.frame == frame)
                .map(|p| {
                    let q = &p.point;
                    [p.track as f64, q.x, q.y, q.axes.0, q.axes.1, q.angle_deg]
                })
                .collect();
            Some(FlaggedFrame {
                frame,
                note,
                jpeg,
                size,
                ellipses,
            })
        })
        .collect()
}

/// The expected accuracy of a run's look-alikes (`lookalike/summary.json`), one row per
/// measure: name, mean, lowest to highest; empty when there is no such file.
pub fn expected_accuracy(summary: &Path) -> Vec<Vec<String>> {
    let Some(value) = std::fs::read(summary)
        .ok()
        .and_then(|b| serde_json::from_slice::<Value>(&b).ok())
    else {
        return Vec::new();
    };
    let show = crate::render::report::readable;
    [
        ("detection_f1", "Detection F1"),
        ("mota", "MOTA (CLEAR-MOT accuracy)"),
        ("link_recall", "Links found (recall)"),
        ("mostly_tracked", "True tracks mostly tracked"),
        ("divisions_recovered", "Divisions recovered"),
    ]
    .iter()
    .filter_map(|(key, name)| {
        let s = value.get("expected")?.get(key)?;
        let get = |k: &str| s.get(k).and_then(Value::as_f64);
        Some(vec![
            name.to_string(),
            show(get("mean")?),
            format!("{} to {}", show(get("min")?), show(get("max")?)),
        ])
    })
    .collect()
}
