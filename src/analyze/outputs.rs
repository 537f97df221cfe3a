//! Tidy CSV tables and `summary.json` of an analysis, with the unit in every column and key
//! name, numbers printed with fixed decimals so outputs are byte-identical between runs.

use super::motility::{Motility, Step};
use super::msd::{AutocorrelationPoint, MsdPoint};
use super::population::{Analysis, CorrelationBin, FrameOrder};
use super::stats::mean_sd;
use crate::columns::{write_table, Column};
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
    write_table(out, &columns, &a.steps)
}

/// `msd.csv`: lag, MSD, pairs and standard error.
pub fn write_msd(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let columns: Vec<Column<MsdPoint>> = vec![
        Column::shown("lag_frames", |q: &MsdPoint| Some(q.lag_frames)),
        Column::fixed(format!("lag_{t}"), 6, |q: &MsdPoint| Some(q.lag)),
        Column::fixed(format!("msd_{l}2"), 6, |q: &MsdPoint| Some(q.msd)),
        Column::shown("pairs", |q: &MsdPoint| Some(q.pairs)),
        Column::fixed(format!("standard_error_{l}2"), 6, |q: &MsdPoint| Some(q.standard_error)),
    ];
    write_table(out, &columns, &a.msd)
}

/// `autocorrelation.csv`: velocity and direction autocorrelation by lag.
pub fn write_autocorrelation(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let dt = a.units.time_per_frame;
    let columns: Vec<Column<AutocorrelationPoint>> = vec![
        Column::shown("lag_frames", |q: &AutocorrelationPoint| Some(q.lag_frames)),
        Column::fixed(format!("lag_{t}"), 6, move |q: &AutocorrelationPoint| {
            Some(q.lag_frames as f64 * dt)
        }),
        Column::fixed(
            format!("velocity_autocorrelation_{l}2_per_{t}2"),
            6,
            |q: &AutocorrelationPoint| Some(q.velocity),
        ),
        Column::fixed("direction_autocorrelation", 6, |q: &AutocorrelationPoint| {
            Some(q.direction)
        }),
        Column::shown("pairs", |q: &AutocorrelationPoint| Some(q.pairs)),
    ];
    write_table(out, &columns, &a.autocorrelation)
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
    put(
        format!("mean_speed_{l}_per_{t}"),
        describe(a.tracks.iter().map(|m| m.mean_speed)),
    );
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
    if let Some(f) = &a.furth {
        put(
            format!("diffusion_coefficient_{l}2_per_{t}"),
            json!({ "value": f.diffusion, "standard_error": f.diffusion_se }),
        );
        put(
            format!("persistence_time_{t}"),
            json!({ "value": f.persistence, "standard_error": f.persistence_se }),
        );
        put(format!("random_walk_speed_{l}_per_{t}"), json!(f.speed));
    }
    put("fit_lags_frames".into(), json!([a.fit_lags.0, a.fit_lags.1]));
    put(
        "anomalous_exponent".into(),
        json!({ "value": a.anomalous_exponent, "lags_frames": [a.fit_lags.0, a.fit_lags.1] }),
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
