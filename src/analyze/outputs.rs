//! Tidy CSV tables and `summary.json` of an analysis, with the unit in every column and key
//! name, numbers printed with fixed decimals so outputs are byte-identical between runs.

use super::models::{ModelFit, ModelParameters};
use super::motility::{Motility, Step};
use super::msd::{AutocorrelationPoint, MsdPoint};
use super::population::{Analysis, CorrelationBin, FrameOrder};
use super::resample::{Interval, ModelIntervals};
use super::stats::mean_sd;
use crate::columns::{write_table, write_table_in_parallel, Column};
use crate::numeric::median;
use serde_json::{json, Map, Value};
use std::io::{self, Write};

/// `track_stats.csv`: one row per track.
pub fn write_track_stats(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let n = a.options.fixed_elapsed_frames;
    let columns: Vec<Column<Motility>> = vec![
        Column::shown("track_id", |m: &Motility| Some(m.track_id)),
        Column::shown("points", |m: &Motility| Some(m.points)),
        Column::shown("first_frame", |m: &Motility| Some(m.first_frame)),
        Column::fixed(format!("duration_{t}"), 6, |m: &Motility| Some(m.duration)),
        Column::fixed(format!("path_length_{l}"), 6, |m: &Motility| Some(m.path_length)),
        Column::fixed(format!("net_displacement_{l}"), 6, |m: &Motility| {
            Some(m.net_displacement)
        }),
        Column::fixed(format!("mean_speed_{l}_per_{t}"), 6, |m: &Motility| m.mean_speed),
        Column::shown("gaps", |m: &Motility| Some(m.gaps)),
        Column::shown("missing_frames", |m: &Motility| Some(m.missing_frames)),
        Column::fixed("anomalous_exponent", 6, |m: &Motility| m.exponent),
        Column::fixed("directionality_ratio", 6, |m: &Motility| m.directionality_ratio),
        Column::fixed(format!("directionality_at_{n}_frames"), 6, |m: &Motility| {
            m.directionality_at_fixed_time
        }),
        Column::fixed("mean_direction_deg", 6, |m: &Motility| m.mean_direction_deg),
        Column::fixed("forward_migration_index", 6, |m: &Motility| m.forward_migration_index),
        Column::fixed("mean_abs_turning_deg", 6, |m: &Motility| m.mean_abs_turning_deg),
    ];
    write_table(out, &columns, &a.tracks)
}

/// `steps.csv`: one row per step between consecutive frames.
pub fn write_steps(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let columns: Vec<Column<Step>> = vec![
        Column::shown("track_id", |s: &Step| Some(s.track_id)),
        Column::shown("frame", |s: &Step| Some(s.frame)),
        Column::fixed(format!("speed_{}", a.units.speed()), 6, |s: &Step| Some(s.speed)),
        Column::fixed("heading_deg", 6, |s: &Step| s.heading_deg),
        Column::fixed("turning_deg", 6, |s: &Step| s.turning_deg),
    ];
    write_table_in_parallel(out, &columns, &a.steps)
}

/// One row of `msd.csv`: the pooled point, its interval and the per-cell mean at its lag.
struct MsdRow {
    point: MsdPoint,
    ci95: Option<Interval>,
    per_cell: Option<(f64, usize)>,
}

/// `msd.csv`: lag, pooled MSD with its 95% interval from resampling tracks, pairs, and the
/// per-cell mean MSD with the tracks behind it.
pub fn write_msd(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let rows: Vec<MsdRow> = a
        .msd
        .iter()
        .enumerate()
        .map(|(k, &point)| MsdRow {
            point,
            ci95: a.uncertainty.msd.get(k).copied().flatten(),
            per_cell: a
                .per_cell_msd
                .iter()
                .find(|c| c.0 == point.lag_frames)
                .map(|c| (c.1, c.2)),
        })
        .collect();
    let columns: Vec<Column<MsdRow>> = vec![
        Column::shown("lag_frames", |r: &MsdRow| Some(r.point.lag_frames)),
        Column::fixed(format!("lag_{t}"), 6, |r: &MsdRow| Some(r.point.lag)),
        Column::fixed(format!("msd_{l}2"), 6, |r: &MsdRow| Some(r.point.msd)),
        Column::fixed(format!("msd_ci95_low_{l}2"), 6, |r: &MsdRow| r.ci95.map(|i| i.low)),
        Column::fixed(format!("msd_ci95_high_{l}2"), 6, |r: &MsdRow| r.ci95.map(|i| i.high)),
        Column::shown("pairs", |r: &MsdRow| Some(r.point.pairs)),
        Column::fixed(format!("per_cell_mean_msd_{l}2"), 6, |r: &MsdRow| {
            r.per_cell.map(|c| c.0)
        }),
        Column::shown("cells", |r: &MsdRow| r.per_cell.map(|c| c.1)),
    ];
    write_table(out, &columns, &rows)
}

/// `autocorrelation.csv`: velocity and direction autocorrelation by lag, with 95% intervals
/// from resampling tracks.
pub fn write_autocorrelation(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let dt = a.units.time_per_frame;
    let u = &a.uncertainty;
    let rows: Vec<(AutocorrelationPoint, Option<Interval>, Option<Interval>)> = a
        .autocorrelation
        .iter()
        .enumerate()
        .map(|(k, &q)| {
            (
                q,
                u.velocity_autocorrelation.get(k).copied().flatten(),
                u.direction_autocorrelation.get(k).copied().flatten(),
            )
        })
        .collect();
    type Row = (AutocorrelationPoint, Option<Interval>, Option<Interval>);
    let v = format!("velocity_autocorrelation_{l}2_per_{t}2");
    let columns: Vec<Column<Row>> = vec![
        Column::shown("lag_frames", |r: &Row| Some(r.0.lag_frames)),
        Column::fixed(format!("lag_{t}"), 6, move |r: &Row| Some(r.0.lag_frames as f64 * dt)),
        Column::fixed(v.clone(), 6, |r: &Row| Some(r.0.velocity)),
        Column::fixed(format!("{v}_ci95_low"), 6, |r: &Row| r.1.map(|i| i.low)),
        Column::fixed(format!("{v}_ci95_high"), 6, |r: &Row| r.1.map(|i| i.high)),
        Column::fixed("direction_autocorrelation", 6, |r: &Row| Some(r.0.direction)),
        Column::fixed("direction_autocorrelation_ci95_low", 6, |r: &Row| r.2.map(|i| i.low)),
        Column::fixed("direction_autocorrelation_ci95_high", 6, |r: &Row| r.2.map(|i| i.high)),
        Column::shown("pairs", |r: &Row| Some(r.0.pairs)),
    ];
    write_table(out, &columns, &rows)
}

/// `order.csv`: per-frame order parameter, neighbour distance and density.
pub fn write_order(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let l = a.units.length;
    let columns: Vec<Column<FrameOrder>> = vec![
        Column::shown("frame", |f: &FrameOrder| Some(f.frame)),
        Column::shown("moving", |f: &FrameOrder| Some(f.moving)),
        Column::fixed("order_parameter", 6, |f: &FrameOrder| f.order_parameter),
        Column::fixed(format!("mean_neighbour_distance_{l}"), 6, |f: &FrameOrder| {
            f.mean_neighbour_distance
        }),
        Column::fixed(format!("median_density_per_{l}2"), 6, |f: &FrameOrder| f.median_density),
    ];
    write_table(out, &columns, &a.frames)
}

/// `neighbour_correlation.csv`: correlation of velocity fluctuations by distance.
pub fn write_neighbour_correlation(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let l = a.units.length;
    let columns: Vec<Column<CorrelationBin>> = vec![
        Column::fixed(format!("from_{l}"), 6, |b: &CorrelationBin| Some(b.from)),
        Column::fixed(format!("to_{l}"), 6, |b: &CorrelationBin| Some(b.to)),
        Column::fixed("correlation", 6, |b: &CorrelationBin| b.correlation),
        Column::shown("pairs", |b: &CorrelationBin| Some(b.pairs)),
    ];
    write_table(out, &columns, &a.neighbour_correlation)
}

/// Mean, median, standard deviation and count of the values present.
fn describe(values: impl Iterator<Item = Option<f64>>) -> Value {
    let mut v: Vec<f64> = values.flatten().collect();
    let (mean, sd) = mean_sd(&v).map(|(m, s)| (Some(m), s)).unwrap_or((None, None));
    json!({ "mean": mean, "median": median(&mut v), "standard_deviation": sd, "n": v.len() })
}

/// The population statistics under self-explanatory names with units.
pub fn summary(a: &Analysis) -> Value {
    let (l, t) = (a.units.length, a.units.time);
    let n = a.options.fixed_elapsed_frames;
    let mut s = Map::new();
    let mut put = |k: String, v: Value| {
        s.insert(k, v);
    };
    put("tracks".into(), json!(a.tracks.len()));
    let mut speed = describe(a.tracks.iter().map(|m| m.mean_speed));
    speed["ci95_of_mean"] = interval(a.uncertainty.mean_speed);
    put(format!("mean_speed_{l}_per_{t}"), speed);
    put(
        format!("instantaneous_speed_{l}_per_{t}"),
        describe(a.steps.iter().map(|s| Some(s.speed))),
    );
    put(
        "directionality_ratio".into(),
        describe(a.tracks.iter().map(|m| m.directionality_ratio)),
    );
    put(
        format!("directionality_ratio_at_{n}_frames"),
        describe(a.tracks.iter().map(|m| m.directionality_at_fixed_time)),
    );
    put(
        "forward_migration_index".into(),
        describe(a.tracks.iter().map(|m| m.forward_migration_index)),
    );
    put("forward_migration_axis_deg".into(), json!(a.options.axis_deg));
    put(
        "mean_abs_turning_angle_deg".into(),
        describe(a.tracks.iter().map(|m| m.mean_abs_turning_deg)),
    );
    put("motion_model".into(), motion_models(a));
    put("fit_lags_frames".into(), json!([a.fit_lags.0, a.fit_lags.1]));
    put(
        "anomalous_exponent".into(),
        json!({
            "value": a.anomalous_exponent,
            "ci95": interval(a.uncertainty.anomalous_exponent),
            "lags_frames": [a.fit_lags.0, a.fit_lags.1],
        }),
    );
    put(
        "anomalous_exponent_per_cell".into(),
        describe(a.tracks.iter().map(|m| m.exponent)),
    );
    put(
        "gaps".into(),
        json!({
            "tracks_with_gaps": a.tracks.iter().filter(|m| m.gaps > 0).count(),
            "gaps": a.tracks.iter().map(|m| m.gaps).sum::<usize>(),
            "missing_frames": a.tracks.iter().map(|m| m.missing_frames).sum::<usize>(),
        }),
    );
    if let Some(d) = &a.directions {
        put(
            "directions".into(),
            json!({
                "n": d.n,
                "mean_resultant_length": d.mean_resultant_length,
                "mean_direction_deg": d.mean_direction_deg,
                "rayleigh_test": { "statistic_z": d.rayleigh_z, "p_value": d.rayleigh_p },
            }),
        );
    }
    if let Some(v) = &a.v_test {
        put(
            "v_test".into(),
            json!({ "expected_direction_deg": v.expected_deg, "statistic_v": v.v, "statistic_u": v.u, "p_value": v.p }),
        );
    }
    put(
        "order_parameter".into(),
        describe(a.frames.iter().map(|f| f.order_parameter)),
    );
    put(
        format!("mean_neighbour_distance_{l}"),
        describe(a.frames.iter().map(|f| f.mean_neighbour_distance)),
    );
    Value::Object(s)
}

/// An interval as `[low, high]`, or `null`.
fn interval(i: Option<Interval>) -> Value {
    i.map_or(Value::Null, |i| json!([i.low, i.high]))
}

/// The model choice: the criterion, the chosen model, and every candidate with its parameters
/// (value and 95% interval from resampling tracks) and its criterion, or why it failed.
fn motion_models(a: &Analysis) -> Value {
    let m = &a.models;
    let mut candidates: Vec<Value> = m
        .fitted
        .iter()
        .zip(&a.uncertainty.models)
        .zip(m.delta_aicc())
        .map(|((f, i), delta)| {
            json!({
                "model": f.model.name(),
                "parameters": model_parameters(a, f, i),
                "aicc": f.aicc,
                "delta_aicc": delta,
                "weighted_rss": f.weighted_rss,
                "resamples_fitted": i.fitted_resamples,
            })
        })
        .collect();
    candidates.extend(
        m.failed
            .iter()
            .map(|f| json!({ "model": f.model.name(), "failed": f.reason })),
    );
    let chosen_d = m.best().map(|b| b.parameters.diffusion);
    json!({
        format!("diffusion_coefficient_{}2_per_{}", a.units.length, a.units.time): {
            "value": chosen_d,
            "ci95": interval(a.uncertainty.chosen_diffusion),
            "note": "D of the chosen model; the interval re-chooses the model on every resample (Buckland, Burnham & Augustin 1997)",
        },
        "criterion": "the fewest parameters within 2 of the lowest AICc (Burnham & Anderson 2002); weighted least squares on the MSD over fit_lags_frames, weights pairs per lag",
        "chosen": m.best().map(|b| b.model.name()),
        "intervals": format!("95% percentile intervals from {} resamples of whole tracks", a.uncertainty.resamples),
        "candidates": candidates,
    })
}

/// One candidate's parameters under names with units.
fn model_parameters(a: &Analysis, f: &ModelFit, i: &ModelIntervals) -> Value {
    let (l, t) = (a.units.length, a.units.time);
    let p: &ModelParameters = &f.parameters;
    let entry = |v: Option<f64>, ci: Option<Interval>| json!({ "value": v, "ci95": interval(ci) });
    let mut out = Map::new();
    out.insert(
        format!("diffusion_coefficient_{l}2_per_{t}"),
        entry(Some(p.diffusion), i.diffusion),
    );
    if p.persistence.is_some() {
        out.insert(format!("persistence_time_{t}"), entry(p.persistence, i.persistence));
        out.insert(format!("walk_speed_{l}_per_{t}"), entry(p.walk_speed(), i.walk_speed));
    }
    if p.drift_speed.is_some() {
        out.insert(format!("drift_speed_{l}_per_{t}"), entry(p.drift_speed, i.drift_speed));
    }
    if p.noise_offset.is_some() {
        out.insert(
            format!("localisation_error_{l}"),
            entry(p.localisation_error(), i.localisation_error()),
        );
    }
    Value::Object(out)
}

/// `stream.csv`: the stream per frame (see [`super::stream`]).
pub fn write_stream(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    use super::stream::StreamFrame;
    let (l, t) = (a.units.length, a.units.time);
    let dt = a.units.time_per_frame;
    let frames = a.stream.as_ref().map_or(&[][..], |s| &s.frames);
    let columns: Vec<Column<StreamFrame>> = vec![
        Column::shown("frame", |f: &StreamFrame| Some(f.frame)),
        Column::fixed(format!("time_{t}"), 6, move |f: &StreamFrame| Some(f.frame as f64 * dt)),
        Column::shown("cells", |f: &StreamFrame| Some(f.cells)),
        Column::fixed(format!("centroid_x_{l}"), 6, |f: &StreamFrame| Some(f.centroid[0])),
        Column::fixed(format!("centroid_y_{l}"), 6, |f: &StreamFrame| Some(f.centroid[1])),
        Column::fixed(format!("width_p5_p95_{l}"), 6, |f: &StreamFrame| Some(f.width)),
        Column::fixed(format!("width_sd_{l}"), 6, |f: &StreamFrame| Some(f.width_sd)),
        Column::fixed(format!("front_p95_{l}"), 6, |f: &StreamFrame| Some(f.front)),
        Column::fixed(format!("rear_p5_{l}"), 6, |f: &StreamFrame| Some(f.rear)),
        Column::fixed(format!("density_per_{l}2"), 6, |f: &StreamFrame| f.density),
        Column::fixed(format!("cells_per_{l}_width"), 6, |f: &StreamFrame| f.cells_per_width),
    ];
    write_table(out, &columns, frames)
}

/// `border.csv`: one row per approach to the border (see [`super::border`]).
pub fn write_border(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    use super::border::Approach;
    let (l, t) = (a.units.length, a.units.time);
    let rows = a.border.as_ref().map_or(&[][..], |b| &b.approaches);
    let columns: Vec<Column<Approach>> = vec![
        Column::shown("track_id", |r: &Approach| Some(r.track_id)),
        Column::shown("first_frame", |r: &Approach| Some(r.first_frame)),
        Column::shown("last_frame", |r: &Approach| Some(r.last_frame)),
        Column::shown("outcome", |r: &Approach| Some(r.outcome.as_str())),
        Column::fixed(format!("dwell_time_{t}"), 6, |r: &Approach| Some(r.dwell_time)),
        Column::fixed(format!("closest_signed_distance_{l}"), 6, |r: &Approach| {
            Some(r.closest)
        }),
        Column::fixed("turning_away_deg", 6, |r: &Approach| r.turning_deg),
    ];
    write_table(out, &columns, rows)
}

/// `border_distance.csv`: the signed distance of every analysed point to the border
/// (negative inside the region cells should not enter).
pub fn write_border_distance(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    type Row = (u32, usize, f64);
    let l = a.units.length;
    let rows = a.border.as_ref().map_or(&[][..], |b| &b.distances);
    let columns: Vec<Column<Row>> = vec![
        Column::shown("track_id", |r: &Row| Some(r.0)),
        Column::shown("frame", |r: &Row| Some(r.1)),
        Column::fixed(format!("signed_distance_{l}"), 6, |r: &Row| Some(r.2)),
    ];
    write_table(out, &columns, rows)
}

/// `profiles.csv`: the lane profiles (see [`super::profiles`]).
pub fn write_profiles(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    use super::profiles::{Direction, ProfileBin};
    let (l, t) = (a.units.length, a.units.time);
    let columns: Vec<Column<ProfileBin>> = vec![
        Column::shown("profile", |b: &ProfileBin| {
            Some(match b.direction {
                Direction::Across => "across",
                Direction::Along => "along",
            })
        }),
        Column::fixed(format!("from_{l}"), 6, |b: &ProfileBin| Some(b.from)),
        Column::fixed(format!("to_{l}"), 6, |b: &ProfileBin| Some(b.to)),
        Column::shown("steps", |b: &ProfileBin| Some(b.steps)),
        Column::fixed(format!("mean_speed_{l}_per_{t}"), 6, |b: &ProfileBin| b.speed),
        Column::fixed("forward_index", 6, |b: &ProfileBin| b.forward_index),
        Column::shown("tracks", |b: &ProfileBin| Some(b.tracks)),
        Column::fixed("directionality_ratio", 6, |b: &ProfileBin| b.directionality),
        Column::fixed("order_parameter", 6, |b: &ProfileBin| b.order_parameter),
    ];
    write_table(out, &columns, &a.profiles)
}

/// The stream and border blocks of `summary.json` (`None` when not asked for).
pub fn confinement_summary(a: &Analysis) -> Value {
    let (l, t) = (a.units.length, a.units.time);
    let entry = |v: Option<f64>, ci: Option<Interval>| json!({ "value": v, "ci95": interval(ci) });
    let stream = a.stream.as_ref().map(|s| {
        json!({
            "frames": s.frames.len(),
            format!("front_speed_{l}_per_{t}"): entry(s.front_speed, s.intervals.front_speed),
            format!("mean_width_p5_p95_{l}"): entry(s.means.width, s.intervals.width),
            format!("mean_density_per_{l}2"): entry(s.means.density, s.intervals.density),
            format!("mean_cells_per_{l}_width"): entry(s.means.cells_per_width, s.intervals.cells_per_width),
            "mean_cells": s.means.cells,
            "intervals": "95% percentile intervals from resampling whole tracks",
        })
    });
    let border = a.border.as_ref().map(|b| {
        let count = |o: super::border::Outcome| b.approaches.iter().filter(|a| a.outcome == o).count();
        let mut dwell: Vec<f64> = b.approaches.iter().map(|a| a.dwell_time).collect();
        let turns: Vec<f64> = b.approaches.iter().filter_map(|a| a.turning_deg).collect();
        json!({
            format!("zone_{l}"): b.zone,
            "approaches": b.approaches.len(),
            "crossed": count(super::border::Outcome::Crossed),
            "turned_back": count(super::border::Outcome::TurnedBack),
            "stopped": count(super::border::Outcome::Stopped),
            "approaching_cells": b.approaching_cells,
            "share_of_approaching_cells_crossing": entry(b.share_crossing, b.share_crossing_ci95),
            format!("median_dwell_time_{t}"): median(&mut dwell),
            "mean_turning_away_deg": (!turns.is_empty()).then(|| turns.iter().sum::<f64>() / turns.len() as f64),
            "by_distance": b.bins.iter().map(|x| json!({
                format!("from_{l}"): x.from,
                format!("to_{l}"): x.to,
                "steps": x.steps,
                format!("speed_{l}_per_{t}"): entry(x.speed, x.speed_ci95),
                format!("speed_toward_border_{l}_per_{t}"): entry(x.approach_speed, x.approach_speed_ci95),
                "heading_toward_border_cosine": entry(x.heading_toward, x.heading_toward_ci95),
            })).collect::<Vec<Value>>(),
        })
    });
    json!({ "stream": stream, "border": border, "lane": a.options.confinement.lane })
}
