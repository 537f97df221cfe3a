//! Tidy CSV tables and `summary.json` of an analysis, with the unit in every column and key
//! name, numbers printed with fixed decimals so outputs are byte-identical between runs.

use super::population::Analysis;
use super::stats::mean_sd;
use crate::numeric::median;
use serde_json::{json, Map, Value};
use std::io::{self, Write};

fn opt(v: Option<f64>) -> String {
    v.map(|x| format!("{x:.6}")).unwrap_or_default()
}

/// `track_stats.csv`: one row per track.
pub fn write_track_stats(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    let n = a.options.fixed_elapsed_frames;
    writeln!(
        out,
        "track_id,points,first_frame,duration_{t},path_length_{l},net_displacement_{l},mean_speed_{l}_per_{t},directionality_ratio,directionality_at_{n}_frames,mean_direction_deg,forward_migration_index,mean_abs_turning_deg"
    )?;
    for m in &a.tracks {
        writeln!(
            out,
            "{},{},{},{:.6},{:.6},{:.6},{},{},{},{},{},{}",
            m.track_id,
            m.points,
            m.first_frame,
            m.duration,
            m.path_length,
            m.net_displacement,
            opt(m.mean_speed),
            opt(m.directionality_ratio),
            opt(m.directionality_at_fixed_time),
            opt(m.mean_direction_deg),
            opt(m.forward_migration_index),
            opt(m.mean_abs_turning_deg)
        )?;
    }
    Ok(())
}

/// `steps.csv`: one row per step between consecutive frames.
pub fn write_steps(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    writeln!(out, "track_id,frame,speed_{},heading_deg,turning_deg", a.units.speed())?;
    for s in &a.steps {
        writeln!(
            out,
            "{},{},{:.6},{:.6},{}",
            s.track_id,
            s.frame,
            s.speed,
            s.heading_deg,
            opt(s.turning_deg)
        )?;
    }
    Ok(())
}

/// `msd.csv`: lag, MSD, pairs and standard error.
pub fn write_msd(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    writeln!(out, "lag_frames,lag_{t},msd_{l}2,pairs,standard_error_{l}2")?;
    for q in &a.msd {
        writeln!(
            out,
            "{},{:.6},{:.6},{},{:.6}",
            q.lag_frames, q.lag, q.msd, q.pairs, q.standard_error
        )?;
    }
    Ok(())
}

/// `autocorrelation.csv`: velocity and direction autocorrelation by lag.
pub fn write_autocorrelation(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let (l, t) = (a.units.length, a.units.time);
    writeln!(
        out,
        "lag_frames,lag_{t},velocity_autocorrelation_{l}2_per_{t}2,direction_autocorrelation,pairs"
    )?;
    for q in &a.autocorrelation {
        writeln!(
            out,
            "{},{:.6},{:.6},{:.6},{}",
            q.lag_frames,
            q.lag_frames as f64 * a.units.time_per_frame,
            q.velocity,
            q.direction,
            q.pairs
        )?;
    }
    Ok(())
}

/// `order.csv`: per-frame order parameter, neighbour distance and density.
pub fn write_order(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let l = a.units.length;
    writeln!(
        out,
        "frame,moving,order_parameter,mean_neighbour_distance_{l},median_density_per_{l}2"
    )?;
    for f in &a.frames {
        writeln!(
            out,
            "{},{},{},{},{}",
            f.frame,
            f.moving,
            opt(f.order_parameter),
            opt(f.mean_neighbour_distance),
            opt(f.median_density)
        )?;
    }
    Ok(())
}

/// `neighbour_correlation.csv`: correlation of velocity fluctuations by distance.
pub fn write_neighbour_correlation(out: &mut impl Write, a: &Analysis) -> io::Result<()> {
    let l = a.units.length;
    writeln!(out, "from_{l},to_{l},correlation,pairs")?;
    for b in &a.neighbour_correlation {
        writeln!(out, "{:.6},{:.6},{},{}", b.from, b.to, opt(b.correlation), b.pairs)?;
    }
    Ok(())
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
