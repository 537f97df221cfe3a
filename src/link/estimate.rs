//! How nuclei move in this recording, measured before linking: from links that no linker
//! could get wrong (a nucleus whose nearest detection in the next frame is much nearer than
//! any other, and which is in turn that detection's nearest), the distribution of steps and
//! the error of a constant-velocity prediction; from those, the search radius and the noise
//! levels of the motion models. So the defaults follow the recording, not a guess from the
//! nucleus size: fast persistent movers get a long reach and a predictive model, slow
//! wanderers a short reach.

use super::motion::MotionNoise;
use crate::numeric::PointGrid;
use serde::{Deserialize, Serialize};

/// A link counts as confident when its length is at most this share of the distance to the
/// runner-up on both sides (a ratio test in the manner of D. G. Lowe (2004), "Distinctive
/// image features from scale-invariant keypoints", IJCV 60(2):91–110, which uses 0.8 for
/// descriptors; 0.6 here, our own stricter choice, since a wrong step would widen the gate:
/// at 0.5 the step spread of fast movers came out 17% low, at 0.7 pure noise found 30% of
/// its detections a confident partner).
pub const CONFIDENT_RATIO: f64 = 0.6;

/// Refinements of the confident links by prediction (each extends confident runs by about
/// one frame in either direction, so fast, persistent movers that a positional test misses
/// are reached from the frames where they were slow).
const REFINEMENTS: usize = 2;

/// Fewer confident steps than this and the recording cannot tell: the diameter decides.
pub const MIN_CONFIDENT_STEPS: usize = 30;

/// How the motion parameters were obtained, with the evidence.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MotionEstimate {
    /// `recording` when measured from confident links, `diameter` when too few were found.
    pub source: MotionSource,
    /// Confident single steps found.
    pub confident_steps: usize,
    /// Confident three-point runs (for the constant-velocity prediction error).
    pub confident_triplets: usize,
    /// Median, 90th and 99th percentile of the confident step lengths, px.
    pub step_quantiles_px: Option<[f64; 3]>,
    /// Per-axis standard deviation of a step (robust, from the median squared step), px.
    pub step_sd_px: Option<f64>,
    /// Per-axis standard deviation of the error of predicting the next position by the last
    /// step repeated (robust), px.
    pub velocity_prediction_sd_px: Option<f64>,
    /// The longest step a link may take, px, from the step distribution (at least 0.6
    /// diameters, at most 4).
    pub max_step_px: f64,
    /// The noise levels of the motion models.
    pub noise: MotionNoise,
}

/// Where the motion parameters came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum MotionSource {
    /// Measured from confident links of the recording.
    Recording,
    /// Derived from the nucleus diameter (too few confident links to measure).
    Diameter,
}

/// Confident links from `sources` (with the positions they are predicted at in the next
/// frame) to `targets`: `(source, target)` pairs where each is the other's nearest (source
/// by predicted position) and the link is at most [`CONFIDENT_RATIO`] of the runner-up
/// distance on both sides.
pub fn confident_links(predicted: &[[f64; 2]], targets: &[[f64; 2]]) -> Vec<(usize, usize)> {
    if predicted.len() < 2 || targets.len() < 2 {
        return Vec::new();
    }
    let forward = nearest_two(predicted, targets);
    let backward = nearest_two(targets, predicted);
    let ratio2 = CONFIDENT_RATIO * CONFIDENT_RATIO;
    forward
        .iter()
        .enumerate()
        .filter_map(|(i, &(j, d1, d2))| {
            let (back, b1, b2) = backward[j];
            (back == i && d1 <= ratio2 * d2 && b1 <= ratio2 * b2).then_some((i, j))
        })
        .collect()
}

/// For each query point: the index of its nearest point in `points`, and the squared
/// distances to the nearest and the second nearest (ties for the nearest go to the lower
/// index).
///
/// The points are sorted into a uniform grid of about one point per cell, and each query
/// looks at rings of cells around its own until no unseen cell can hold a point nearer than
/// its second nearest: exact, and a few cells per query instead of a tree's descent and a
/// result list. A k-d tree (kiddo's `nearest_n`) took ~0.4 µs per query, ~55 ms of a
/// 100-frame recording's motion estimate on one core after the last frame; see
/// `benches/SPEED.md`.
fn nearest_two(queries: &[[f64; 2]], points: &[[f64; 2]]) -> Vec<(usize, f64, f64)> {
    let grid = PointGrid::new(points);
    queries.iter().map(|q| grid.nearest_two(q)).collect()
}

/// Measures the motion of a recording from its detections' positions, frame by frame.
///
/// First pass: confident links by position alone. Then, twice, a refinement: a nucleus with a
/// confident link from the previous frame is searched for at its position plus its last step
/// (so that fast, persistent movers, whose steps a positional test truncates, are found too),
/// the others at their position. From the final links: the step lengths (the per-axis step s.d.
/// `σ_s` from the median squared step, `median(|s|²) = 2 ln 2 · σ_s²` for a 2D Gaussian step),
/// and from confident three-point runs the per-axis error `σ_e` of predicting by the last step.
///
/// Resulting parameters (`d` = diameter): maximum step = the largest of 0.6 d (so slow nuclei
/// can still follow a merged neighbour's centroid), 3.72 σ_s (the 99.9% point of a 2D Gaussian
/// step's length) and 1.2 x the 99th percentile of confident steps, at most 4 d. Measurement
/// variance `r` and white-acceleration density `q` from the variance and the lag-one
/// covariance of the prediction errors (`split_prediction_error`; without enough four-point
/// runs, `r` = (0.05 d)², at most a twelfth of `σ_e²`, and `q = 1.5 (σ_e² − 6r)`); `r` at least
/// (0.01 d)²; random-walk step s.d. `√(σ_s² − 2r)`; a new track's velocity variance `σ_s²`.
///
/// # Method
/// Confident links by mutual nearest neighbours with a ratio test (Lowe 2004, see
/// [`CONFIDENT_RATIO`]); robust scales from medians (Hampel 1974); model noise from the
/// spread of steps and step changes, as suggested for per-track search radii by Jaqaman et al.
/// (2008), Nat. Methods 5(8):695–702, doi:10.1038/nmeth.1237.
pub fn estimate_motion(frames: &[Vec<[f64; 2]>], diameter_px: f64) -> MotionEstimate {
    let links = refined_links(frames);
    let mut steps = Vec::new();
    // Per link t -> t+1 ending at target j: the repeated-step prediction error, when the
    // source had a confident link from frame t-1.
    let mut residual_into: Vec<Vec<Option<[f64; 2]>>> = frames.iter().map(|f| vec![None; f.len()]).collect();
    let mut errors = Vec::new();
    let mut error_pairs = Vec::new();
    // source_of[j]: the source in frame t - 1 of the link into detection j of frame t (links
    // are one to one: each side is the other's nearest).
    let mut source_of: Vec<Option<usize>> = Vec::new();
    for t in 0..links.len() {
        let mut next_source_of = vec![None; frames[t + 1].len()];
        for &(i, j) in &links[t] {
            next_source_of[j] = Some(i);
            let (a, b) = (frames[t][i], frames[t + 1][j]);
            steps.push((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2));
            let Some(k) = source_of.get(i).copied().flatten() else {
                continue;
            };
            let p = frames[t - 1][k];
            let e = [b[0] - (2.0 * a[0] - p[0]), b[1] - (2.0 * a[1] - p[1])];
            errors.push(e[0] * e[0] + e[1] * e[1]);
            if let Some(before) = residual_into[t][i] {
                error_pairs.push((before, e));
            }
            residual_into[t + 1][j] = Some(e);
        }
        source_of = next_source_of;
    }
    from_steps(&mut steps, &mut errors, &error_pairs, diameter_px)
}

/// Splits the variance `V` of repeated-step prediction errors into measurement variance `r`
/// and white-acceleration density `q`, from `V` and the covariance `C` of consecutive errors
/// of one track (per axis): the error is the second difference of the true positions plus
/// `ε(t+1) − 2ε(t) + ε(t−1)` of the measurements, so `V = 2q/3 + 6r` and `C = q/6 − 4r`, which
/// give `r = (V/4 − C) / 5.5` and `q = 1.5 (V − 6r)`. Pairs with an error beyond four robust
/// standard deviations (a wrong confident link, a merge) are left out of both. Returns
/// `(r, q)`, or `None` with too few pairs.
fn split_prediction_error(pairs: &[([f64; 2], [f64; 2])], robust_var: f64) -> Option<(f64, f64)> {
    let limit2 = 16.0 * 2.0 * robust_var;
    let kept: Vec<&([f64; 2], [f64; 2])> = pairs
        .iter()
        .filter(|(a, b)| a[0] * a[0] + a[1] * a[1] <= limit2 && b[0] * b[0] + b[1] * b[1] <= limit2)
        .collect();
    if kept.len() < MIN_CONFIDENT_STEPS {
        return None;
    }
    let n = 2.0 * kept.len() as f64;
    let v = kept
        .iter()
        .map(|(a, b)| 0.5 * (a[0] * a[0] + a[1] * a[1] + b[0] * b[0] + b[1] * b[1]))
        .sum::<f64>()
        / n;
    let c = kept.iter().map(|(a, b)| a[0] * b[0] + a[1] * b[1]).sum::<f64>() / n;
    let r = ((0.25 * v - c) / 5.5).clamp(0.0, v / 6.0);
    Some((r, 1.5 * (v - 6.0 * r)))
}
/// The parameters from squared step lengths, squared prediction errors and consecutive pairs
/// of prediction errors (see [`estimate_motion`]).
fn from_steps(steps: &mut [f64], errors: &mut [f64], pairs: &[([f64; 2], [f64; 2])], d: f64) -> MotionEstimate {
    let fallback = MotionNoise::for_diameter(d);
    let two_ln2 = 2.0 * std::f64::consts::LN_2;
    if steps.len() < MIN_CONFIDENT_STEPS {
        return MotionEstimate {
            source: MotionSource::Diameter,
            confident_steps: steps.len(),
            confident_triplets: errors.len(),
            step_quantiles_px: None,
            step_sd_px: None,
            velocity_prediction_sd_px: None,
            max_step_px: 0.6 * d,
            noise: fallback,
        };
    }
    steps.sort_by(f64::total_cmp);
    let quantile = |v: &[f64], f: f64| v[((v.len() - 1) as f64 * f).round() as usize];
    let q = [0.5, 0.9, 0.99].map(|f| quantile(steps, f).sqrt());
    let step_var = quantile(steps, 0.5) / two_ln2;
    let error_var = (errors.len() >= MIN_CONFIDENT_STEPS).then(|| {
        errors.sort_by(f64::total_cmp);
        quantile(errors, 0.5) / two_ln2
    });
    // Without runs of three, a repeated step is predicted as badly as if steps were
    // independent: its error variance is twice the step variance.
    let e_var = error_var.unwrap_or(2.0 * step_var);
    let (r, q_acc) = split_prediction_error(pairs, e_var).unwrap_or_else(|| {
        let r = fallback.measurement_r.min(e_var / 12.0);
        (r, 1.5 * (e_var - 6.0 * r))
    });
    let r = r.max((0.01 * d).powi(2));
    let noise = MotionNoise {
        random_walk_sd_px: (step_var - 2.0 * r).max(r).sqrt(),
        acceleration_q: q_acc.max(0.25 * r),
        measurement_r: r,
        initial_velocity_var: step_var.max(r),
        switch_probability: fallback.switch_probability,
    };
    let max_step_px = (3.72 * step_var.sqrt()).max(1.2 * q[2]).max(0.6 * d).min(4.0 * d);
    MotionEstimate {
        source: MotionSource::Recording,
        confident_steps: steps.len(),
        confident_triplets: errors.len(),
        step_quantiles_px: Some(q),
        step_sd_px: Some(step_var.sqrt()),
        velocity_prediction_sd_px: error_var.map(f64::sqrt),
        max_step_px,
        noise,
    }
}

/// Confident links between consecutive frames (`links[t]` joins frame t to t+1), refined twice
/// by predicting each linked nucleus one step ahead.
///
/// Each pass links every pair of frames from the previous pass's links alone, so the pairs of
/// a pass are linked in parallel (collected in frame order: the same links on any thread
/// count).
fn refined_links(frames: &[Vec<[f64; 2]>]) -> Vec<Vec<(usize, usize)>> {
    use rayon::prelude::*;
    let pairs = frames.len().saturating_sub(1);
    let mut links: Vec<Vec<(usize, usize)>> = (0..pairs)
        .into_par_iter()
        .map(|t| confident_links(&frames[t], &frames[t + 1]))
        .collect();
    for _ in 0..REFINEMENTS {
        links = (0..pairs)
            .into_par_iter()
            .map(|t| {
                let mut predicted = frames[t].clone();
                if t > 0 {
                    for &(k, i) in &links[t - 1] {
                        let (p, a) = (frames[t - 1][k], frames[t][i]);
                        predicted[i] = [2.0 * a[0] - p[0], 2.0 * a[1] - p[1]];
                    }
                }
                confident_links(&predicted, &frames[t + 1])
            })
            .collect();
    }
    links
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::Rng;

    /// Points on a jittered grid (spacing `spacing`), each moving as a persistent random walk
    /// (Ornstein-Uhlenbeck velocity with per-axis s.d. `sd` and memory `a`), in a periodic box.
    fn walkers(n_side: usize, spacing: f64, sd: f64, a: f64, frames: usize, seed: u64) -> Vec<Vec<[f64; 2]>> {
        let mut rng = Rng::new(seed);
        let size = n_side as f64 * spacing;
        let mut pos: Vec<[f64; 2]> = (0..n_side * n_side)
            .map(|k| {
                let (i, j) = (k % n_side, k / n_side);
                [(i as f64 + 0.5) * spacing, (j as f64 + 0.5) * spacing]
            })
            .collect();
        let mut vel: Vec<[f64; 2]> = pos.iter().map(|_| [sd * rng.normal(), sd * rng.normal()]).collect();
        let kick = sd * (1.0 - a * a).sqrt();
        let mut out = Vec::new();
        for _ in 0..frames {
            out.push(pos.clone());
            for (p, v) in pos.iter_mut().zip(vel.iter_mut()) {
                for k in 0..2 {
                    v[k] = a * v[k] + kick * rng.normal();
                    p[k] = (p[k] + v[k]).rem_euclid(size);
                }
            }
        }
        out
    }

    #[test]
    fn slow_wanderers_give_their_step_size_and_a_short_reach() {
        // Source: construction. Per-axis velocity s.d. 1 px/frame with no memory (a = 0): the
        // steps are 2D Gaussian with σ = 1, so the robust step s.d. is 1 (within 10%), and the
        // reach is the 0.6-diameter floor (14 px nuclei: 8.4 px > 3.72σ).
        let frames = walkers(12, 40.0, 1.0, 0.0, 20, 1);
        let e = estimate_motion(&frames, 14.0);
        assert_eq!(e.source, MotionSource::Recording);
        let sd = e.step_sd_px.unwrap();
        assert!((sd - 1.0).abs() < 0.1, "{e:?}");
        assert!((e.max_step_px - 8.4).abs() < 1e-9, "{e:?}");
    }

    #[test]
    fn fast_persistent_movers_are_measured_despite_crowding() {
        // Source: construction, the Ornstein-Uhlenbeck walk of synth: per-axis velocity s.d.
        // σ_v = 9 px/frame (mean speed 11.3 px/frame), memory a = e^(−1/5) (persistence 5
        // frames), about 56 px of room per walker (neighbours ~28 px apart, as in a random
        // field of that density, 0.5/√density). A step is the velocity, so its per-axis s.d. is σ_v;
        // repeating the last step errs by v(t+1) − v(t), of s.d. σ_v·√(2(1−a)) = 5.42 px. The
        // estimates must be within 15%, and the reach must cover 99% of steps.
        let a = (-1.0f64 / 5.0).exp();
        let frames = walkers(10, 56.0, 9.0, a, 30, 2);
        let e = estimate_motion(&frames, 14.0);
        let sd = e.step_sd_px.unwrap();
        let pred = e.velocity_prediction_sd_px.unwrap();
        let want = 9.0 * (2.0 * (1.0 - a)).sqrt();
        assert!((sd / 9.0 - 1.0).abs() < 0.15, "step sd {sd}: {e:?}");
        assert!(
            (pred / want - 1.0).abs() < 0.15,
            "prediction sd {pred} vs {want}: {e:?}"
        );
        // 99% of a 2D Gaussian step of σ 9 lies within 9·√(−2 ln 0.01) = 27.3 px.
        assert!(e.max_step_px >= 27.3, "{e:?}");
    }

    #[test]
    fn prediction_errors_split_into_measurement_and_acceleration_noise() {
        // Source: the exact discretisation of continuous white-noise acceleration of density
        // q (Bar-Shalom, Li & Kirubarajan 2001, "Estimation with Applications to Tracking and
        // Navigation", §6.2.2, from memory): per axis, position and velocity get noise of
        // covariance q·[[1/3, 1/2], [1/2, 1]] each frame; positions are measured with
        // variance r. 300 tracks of 80 frames with q = 1, r = 0.5 px²: the split must return
        // r within 10% and q within 20%.
        let (q, r) = (1.0f64, 0.5f64);
        let mut rng = Rng::new(7);
        let mut pairs = Vec::new();
        for _ in 0..300 {
            let mut state = [[0.0f64; 2]; 2]; // per axis: position, velocity
            let mut measured: Vec<[f64; 2]> = Vec::new();
            for _ in 0..80 {
                for s in state.iter_mut() {
                    let (n1, n2) = (rng.normal(), rng.normal());
                    s[0] += s[1] + q.sqrt() * (1.0f64 / 3.0).sqrt() * n1;
                    s[1] += q.sqrt() * (0.75f64.sqrt() * n1 + 0.5 * n2);
                }
                measured.push([0, 1].map(|a| state[a][0] + r.sqrt() * rng.normal()));
            }
            let errors: Vec<[f64; 2]> = measured
                .windows(3)
                .map(|w| [0, 1].map(|a| w[2][a] - 2.0 * w[1][a] + w[0][a]))
                .collect();
            pairs.extend(errors.windows(2).map(|e| (e[0], e[1])));
        }
        let (r_hat, q_hat) = split_prediction_error(&pairs, 100.0).unwrap();
        assert!((r_hat / r - 1.0).abs() < 0.1, "r {r_hat}");
        assert!((q_hat / q - 1.0).abs() < 0.2, "q {q_hat}");
    }

    #[test]
    fn without_runs_of_three_a_twelfth_of_the_error_is_measurement() {
        // Construction: two frames give steps but no prediction errors, so the repeated-step
        // error variance is taken as twice the step variance (independent steps), and the
        // measurement variance as at most a twelfth of it (half of what V = 6r would give if
        // all of it were measurement noise). Steps of 0.3 px (per axis) are far below the
        // diameter's own measurement noise, which would otherwise be taken.
        let frames = walkers(12, 40.0, 0.3, 0.0, 2, 3);
        let e = estimate_motion(&frames, 14.0);
        assert_eq!(e.confident_triplets, 0);
        let step_var = e.step_sd_px.unwrap().powi(2);
        let expected = (2.0 * step_var / 12.0).max((0.01 * 14.0f64).powi(2));
        assert!(expected < MotionNoise::for_diameter(14.0).measurement_r);
        assert!((e.noise.measurement_r / expected - 1.0).abs() < 1e-9, "{e:?}");
    }

    #[test]
    fn too_few_links_fall_back_to_the_diameter() {
        // Construction: two frames of three points give at most three links.
        let frames = vec![vec![[0.0, 0.0], [50.0, 0.0], [0.0, 50.0]]; 2];
        let e = estimate_motion(&frames, 10.0);
        assert_eq!(e.source, MotionSource::Diameter);
        assert_eq!(e.max_step_px, 6.0);
    }

    #[test]
    fn nearest_two_is_the_definition() {
        // Against the definition, by brute force over every point: the nearest point (lowest
        // index among equals) and the two smallest squared distances. Points scattered, in
        // clumps with exact duplicates, on a line, and queries inside and far outside.
        let mut rng = Rng::new(5);
        let mut sets: Vec<Vec<[f64; 2]>> = Vec::new();
        sets.push(
            (0..300)
                .map(|_| [rng.range(0.0, 1000.0), rng.range(0.0, 700.0)])
                .collect(),
        );
        let clumps: Vec<[f64; 2]> = (0..40).map(|k| [(k % 5) as f64 * 3.0, (k / 5 % 3) as f64]).collect();
        sets.push(clumps);
        sets.push((0..50).map(|k| [k as f64 * 7.5, 2.0]).collect());
        sets.push(vec![[4.0, 4.0], [4.0, 4.0]]);
        sets.push((0..20).map(|_| [rng.range(0.0, 1e-9), rng.range(0.0, 1e6)]).collect());
        for points in &sets {
            let mut queries: Vec<[f64; 2]> = points.iter().take(60).copied().collect();
            queries.extend((0..200).map(|_| [rng.range(-2000.0, 3000.0), rng.range(-2000.0, 3000.0)]));
            queries.extend((0..100).map(|_| [rng.range(-1.0, 16.0), rng.range(-1.0, 4.0)]));
            let got = nearest_two(&queries, points);
            for (q, &(j, d1, d2)) in queries.iter().zip(&got) {
                let d: Vec<f64> = points
                    .iter()
                    .map(|p| (q[0] - p[0]) * (q[0] - p[0]) + (q[1] - p[1]) * (q[1] - p[1]))
                    .collect();
                let mut sorted = d.clone();
                sorted.sort_by(f64::total_cmp);
                let first = d.iter().position(|&x| x == sorted[0]).unwrap();
                assert_eq!((j, d1, d2), (first, sorted[0], sorted[1]), "query {q:?}");
            }
        }
    }

    #[test]
    fn confident_links_refuse_ambiguous_pairs() {
        // Hand-derived: source at 0 with targets at 1 and 1.5 (ratio 0.67 > 0.6): refused;
        // source at 100 with targets at 101 and 110 (0.1): accepted.
        let s = [[0.0, 0.0], [100.0, 0.0]];
        let t = [[1.0, 0.0], [1.5, 0.0], [101.0, 0.0], [110.0, 0.0]];
        assert_eq!(confident_links(&s, &t), vec![(1, 2)]);
    }
}
