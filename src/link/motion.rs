//! The motion model of one track: an interacting-multiple-model (IMM) filter that mixes a
//! random walk (no memory of velocity: the next position is the last one) with a
//! constant-velocity Kalman filter, weighting each by how well it has predicted this track's
//! own recent positions. A track that wanders is searched for around where it was; a track
//! that moves persistently is searched for ahead of itself; a track that does both in turn
//! moves between the two. Its search gate widens or narrows with its own recent prediction
//! errors.

use serde::{Deserialize, Serialize};

/// Noise levels of the two motion models, in pixels and frames; estimated from the recording
/// by [`super::estimate`] or derived from the diameter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MotionNoise {
    /// Standard deviation of one axis of a random-walk step, px.
    pub random_walk_sd_px: f64,
    /// Spectral density `q` of the white-acceleration process noise of the constant-velocity
    /// model, px² per frame³ (the variance of a velocity change over one frame).
    pub acceleration_q: f64,
    /// Variance of a measured position (segmentation jitter of a centroid), px².
    pub measurement_r: f64,
    /// Variance of one velocity component of a track that has just started, (px/frame)².
    pub initial_velocity_var: f64,
    /// Probability per frame that a track switches between the two models.
    pub switch_probability: f64,
}

impl MotionNoise {
    /// Values from the nucleus diameter `d` alone, for when the recording cannot tell: a
    /// centroid jitters by about 0.05 d (a few percent of the area at the rim, common
    /// practice), a random-walk step or a velocity change is about 0.1 d per axis per frame,
    /// a new track's velocity is unknown up to about d per frame; a track keeps its model for
    /// about 10 frames (our own choice).
    pub fn for_diameter(d: f64) -> Self {
        MotionNoise {
            random_walk_sd_px: 0.1 * d,
            acceleration_q: (0.1 * d).powi(2),
            measurement_r: (0.05 * d).powi(2),
            initial_velocity_var: d * d,
            switch_probability: 0.1,
        }
    }
}

/// One axis of one model: position `x`, velocity `v` and the covariance `[pxx, pxv, pvv]`.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Axis {
    x: f64,
    v: f64,
    p: [f64; 3],
}

/// The two motion models.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Model {
    /// `x' = x + w`, `v' = w`: each step is independent of the last; the velocity is this
    /// frame's step, so that after a switch the other model starts from the last step.
    RandomWalk,
    /// `x' = x + v`, `v' = v + a` with white acceleration.
    ConstantVelocity,
}

const MODELS: [Model; 2] = [Model::RandomWalk, Model::ConstantVelocity];

impl Axis {
    /// The prediction of this axis under `model`.
    fn predicted(self, model: Model, noise: &MotionNoise) -> Axis {
        match model {
            Model::RandomWalk => {
                // The step w is the velocity of this frame: x' = x + w, v' = w, independent of
                // the past (so v' has mean 0, variance σ², and covariance σ² with x').
                let step_var = noise.random_walk_sd_px.powi(2);
                Axis {
                    x: self.x,
                    v: 0.0,
                    p: [self.p[0] + step_var, step_var, step_var],
                }
            }
            Model::ConstantVelocity => {
                let q = noise.acceleration_q;
                Axis {
                    x: self.x + self.v,
                    v: self.v,
                    p: [
                        self.p[0] + 2.0 * self.p[1] + self.p[2] + q / 3.0,
                        self.p[1] + self.p[2] + q / 2.0,
                        self.p[2] + q,
                    ],
                }
            }
        }
    }

    /// Innovation variance of a measurement of this (predicted) axis.
    fn innovation_variance(&self, r: f64) -> f64 {
        self.p[0] + r
    }

    /// The Kalman update with measurement `z`; returns the innovation.
    fn update(&mut self, z: f64, r: f64) -> f64 {
        let s = self.p[0] + r;
        let (kx, kv) = (self.p[0] / s, self.p[1] / s);
        let nu = z - self.x;
        self.x += kx * nu;
        self.v += kv * nu;
        self.p = [
            (1.0 - kx) * self.p[0],
            (1.0 - kx) * self.p[1],
            self.p[2] - kv * self.p[1],
        ];
        nu
    }
}

/// χ² with 2 degrees of freedom at 0.99: the 99% gate of a 2D innovation (the quantile is
/// −2 ln 0.01 = 9.2103).
pub const GATE_CHI2_99: f64 = 9.210340371976184;

/// χ² with 2 degrees of freedom at 0.999 (−2 ln 0.001 = 13.8155): the gate used. A track
/// meets its gate once per frame, so a 99% gate would cut about one true link in a hundred
/// by chance alone, a break in a quarter of 30-frame tracks.
pub const GATE_CHI2: f64 = 13.815510557964274;

/// How many recent normalised innovations set a track's own gate scale (an exponential
/// average with this memory, our own choice: a few frames).
const GATE_MEMORY_FRAMES: f64 = 5.0;

/// An IMM filter over a random walk and a constant-velocity model, in 2D with independent,
/// identically modelled axes that share the model probabilities.
///
/// # Method
/// H. A. P. Blom & Y. Bar-Shalom (1988), "The interacting multiple model algorithm for
/// systems with Markovian switching coefficients", IEEE Trans. Autom. Control 33(8):780–783,
/// doi:10.1109/9.1299: mixing by the Markov switching matrix, one Kalman step per model
/// (R. E. Kalman (1960), J. Basic Eng. 82(1):35–45, doi:10.1115/1.3662552; white-acceleration
/// process noise for the constant-velocity model), model probabilities re-weighted by each
/// model's Gaussian measurement likelihood, and the combined prediction and covariance for
/// the gate. Applied to cell tracking by A. Genovesio, T. Liedl, V. Emiliani, W. J. Parak, M.
/// Coppey-Moisan & J.-C. Olivo-Marin (2006), "Multiple particle tracking in 3-D+t microscopy:
/// method and application to the tracking of endocytosed quantum dots", IEEE Trans. Image
/// Process. 15(5):1062–1070, doi:10.1109/TIP.2006.872323. Departure: the gate's variance is
/// also scaled by the track's recent normalised innovation squared over its expected value 2
/// (bounded to 0.5–4), so a track whose own steps run larger or smaller than the model's
/// widens or narrows its search, as the per-track search radius of Jaqaman et al. (2008) does.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MotionFilter {
    axes: [[Axis; 2]; 2],
    probability: [f64; 2],
    noise: MotionNoise,
    updates: u32,
    /// Exponential average of the normalised innovation squared over 2 (1 = as modelled).
    gate_scale: f64,
}

impl MotionFilter {
    /// A filter whose first measurement is `position`: velocity unknown (zero with the
    /// initial variance), both models equally likely.
    pub fn started_at(position: [f64; 2], noise: MotionNoise) -> Self {
        let axis = |z: f64| Axis {
            x: z,
            v: 0.0,
            p: [noise.measurement_r, 0.0, noise.initial_velocity_var],
        };
        let both = [axis(position[0]), axis(position[1])];
        MotionFilter {
            axes: [both, both],
            probability: [0.5, 0.5],
            noise,
            updates: 1,
            gate_scale: 1.0,
        }
    }

    /// Measurements taken so far.
    pub fn updates(&self) -> u32 {
        self.updates
    }

    /// Probability of the random walk and of the constant-velocity model.
    pub fn model_probabilities(&self) -> [f64; 2] {
        self.probability
    }

    /// The mixed states and predictions of the next frame: `(predicted axes per model,
    /// predicted model probabilities)`.
    fn predict(&self) -> ([[Axis; 2]; 2], [f64; 2]) {
        let pi = self.noise.switch_probability;
        let stay = 1.0 - pi;
        let c = [
            stay * self.probability[0] + pi * self.probability[1],
            pi * self.probability[0] + stay * self.probability[1],
        ];
        let mut predicted = self.axes;
        for (j, &model) in MODELS.iter().enumerate() {
            let weight = |i: usize| {
                let to_j = if i == j { stay } else { pi };
                if c[j] > 0.0 {
                    to_j * self.probability[i] / c[j]
                } else {
                    0.5
                }
            };
            for (a, out) in predicted[j].iter_mut().enumerate() {
                let (w0, w1) = (weight(0), weight(1));
                let (s0, s1) = (self.axes[0][a], self.axes[1][a]);
                let x = w0 * s0.x + w1 * s1.x;
                let v = w0 * s0.v + w1 * s1.v;
                let spread = |s: Axis| [(s.x - x).powi(2), (s.x - x) * (s.v - v), (s.v - v).powi(2)];
                let (d0, d1) = (spread(s0), spread(s1));
                let p = [0, 1, 2].map(|k| w0 * (s0.p[k] + d0[k]) + w1 * (s1.p[k] + d1[k]));
                *out = Axis { x, v, p }.predicted(model, &self.noise);
            }
        }
        (predicted, c)
    }

    /// The position predicted for the next frame (probability-weighted over the models).
    pub fn predicted_position(&self) -> [f64; 2] {
        let (pred, c) = self.predict();
        [0, 1].map(|a| c[0] * pred[0][a].x + c[1] * pred[1][a].x)
    }

    /// The position predicted `frames` frames ahead, extrapolating the combined velocity.
    pub fn position_after(&self, frames: f64) -> [f64; 2] {
        let v = self.velocity();
        let x = self.position();
        [x[0] + frames * v[0], x[1] + frames * v[1]]
    }

    /// The current (filtered) position, probability-weighted.
    pub fn position(&self) -> [f64; 2] {
        [0, 1].map(|a| self.probability[0] * self.axes[0][a].x + self.probability[1] * self.axes[1][a].x)
    }

    /// The current velocity, px per frame: the constant-velocity model's estimate weighted by
    /// its probability (the random walk has none).
    pub fn velocity(&self) -> [f64; 2] {
        [0, 1].map(|a| self.probability[1] * self.axes[1][a].v)
    }

    /// Variance of the next measurement's innovation on one axis, with the spread between the
    /// models' predictions (the combined covariance of the IMM).
    pub fn innovation_variance(&self) -> f64 {
        let (pred, c) = self.predict();
        let r = self.noise.measurement_r;
        let mean = c[0] * pred[0][0].x + c[1] * pred[1][0].x;
        let mean_y = c[0] * pred[0][1].x + c[1] * pred[1][1].x;
        let per_axis = |a: usize, m: f64| {
            (0..2)
                .map(|j| c[j] * (pred[j][a].innovation_variance(r) + (pred[j][a].x - m).powi(2)))
                .sum::<f64>()
        };
        0.5 * (per_axis(0, mean) + per_axis(1, mean_y))
    }

    /// The innovation variance scaled by the track's own recent prediction errors: what its
    /// gate and its link costs are measured against, px².
    pub fn gate_variance(&self) -> f64 {
        self.gate_scale * self.innovation_variance()
    }

    /// Radius of the 99.9% gate around the predicted position, px, scaled by the track's own
    /// recent prediction errors.
    pub fn gate_radius(&self) -> f64 {
        (GATE_CHI2 * self.gate_variance()).sqrt()
    }

    /// One frame without a usable measurement: predict only (the track coasts, and its
    /// uncertainty grows).
    pub fn coast(&mut self) {
        let (pred, c) = self.predict();
        self.axes = pred;
        self.probability = c;
    }

    /// One frame: mix, predict, then correct every model with the measured position and
    /// re-weight the models by their likelihoods.
    pub fn step(&mut self, measured: [f64; 2]) {
        let (mut pred, c) = self.predict();
        let r = self.noise.measurement_r;
        let mut log_likelihood = [0.0f64; 2];
        let mut nis = 0.0;
        for j in 0..2 {
            for a in 0..2 {
                let s = pred[j][a].innovation_variance(r);
                let nu = pred[j][a].update(measured[a], r);
                log_likelihood[j] += -0.5 * (nu * nu / s + (std::f64::consts::TAU * s).ln());
                nis += c[j] * nu * nu / s;
            }
        }
        let top = log_likelihood[0].max(log_likelihood[1]);
        let weights = [0, 1].map(|j| c[j] * (log_likelihood[j] - top).exp());
        let total = weights[0] + weights[1];
        // The second point is the first the constant-velocity model can learn a velocity from:
        // its prediction of it knew none, so its likelihood says nothing about the model yet.
        self.probability = if self.updates >= 2 && total > 0.0 && total.is_finite() {
            weights.map(|w| w / total)
        } else {
            c
        };
        self.axes = pred;
        let memory = 1.0 / GATE_MEMORY_FRAMES;
        self.gate_scale = ((1.0 - memory) * self.gate_scale + memory * nis / 2.0).clamp(1.0, 4.0);
        self.updates += 1;
    }

    /// One frame with a measurement known to be off by about `extra_variance` px² per axis
    /// (the centroid of two nuclei segmented as one): every model is corrected with that much
    /// more measurement noise, and neither the model probabilities nor the gate scale learn
    /// from it.
    pub fn step_uncertain(&mut self, measured: [f64; 2], extra_variance: f64) {
        let (mut pred, c) = self.predict();
        let r = self.noise.measurement_r + extra_variance;
        for model in pred.iter_mut() {
            for (a, axis) in model.iter_mut().enumerate() {
                axis.update(measured[a], r);
            }
        }
        self.axes = pred;
        self.probability = c;
        self.updates += 1;
    }

    /// A filter run over a track's positions in frame order (`frames` gives each point's
    /// frame; missing frames are coasted through).
    pub fn replay(points: impl IntoIterator<Item = (usize, [f64; 2])>, noise: MotionNoise) -> Option<Self> {
        let mut points = points.into_iter();
        let (mut frame, first) = points.next()?;
        let mut f = MotionFilter::started_at(first, noise);
        for (t, at) in points {
            for _ in frame + 1..t {
                f.coast();
            }
            f.step(at);
            frame = t;
        }
        Some(f)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::Rng;

    fn cv_only(q: f64, r: f64, p0: f64) -> MotionNoise {
        MotionNoise {
            random_walk_sd_px: 1.0,
            acceleration_q: q,
            measurement_r: r,
            initial_velocity_var: p0,
            switch_probability: 0.0,
        }
    }

    /// A filter fed a random walk that follows `noise` (per-axis steps of
    /// `random_walk_sd_px`, measurements off by `measurement_r`), shifted by `offset`.
    fn walked(noise: MotionNoise, offset: [f64; 2], steps: usize, seed: u64) -> MotionFilter {
        let mut rng = Rng::new(seed);
        let mut truth = [0.0f64; 2];
        let mut f = MotionFilter::started_at(offset, noise);
        for _ in 0..steps {
            truth = truth.map(|x| x + noise.random_walk_sd_px * rng.normal());
            let measured = [0, 1].map(|a| offset[a] + truth[a] + noise.measurement_r.sqrt() * rng.normal());
            f.step(measured);
        }
        f
    }

    #[test]
    fn the_innovation_variance_does_not_depend_on_where_the_track_is() {
        // Source: translation invariance (the models are linear in position): the same motion
        // 1000 px right and 500 px up gives the same innovation and gate variances.
        let noise = MotionNoise::for_diameter(14.0);
        let here = walked(noise, [10.0, 20.0], 12, 5);
        let there = walked(noise, [1010.0, -480.0], 12, 5);
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-6 * a.abs();
        assert!(close(here.innovation_variance(), there.innovation_variance()));
        assert!(close(here.gate_variance(), there.gate_variance()));
    }

    #[test]
    fn a_track_moving_as_its_model_says_keeps_the_gate_unwidened() {
        // Source: the normalised innovation squared of a consistent Kalman filter averages
        // its dimension, 2 per 2-D measurement (Bar-Shalom, Li & Kirubarajan 2001, §5.4,
        // from memory); the gate widens only beyond that. A random walk that follows the
        // random-walk model's own noise keeps the gate scale near 1 (below 1.5 at the end of
        // each of five 300-step walks).
        let noise = MotionNoise::for_diameter(14.0);
        for seed in 1..=5 {
            let f = walked(noise, [0.0, 0.0], 300, seed);
            let scale = f.gate_variance() / f.innovation_variance();
            assert!(scale < 1.5, "seed {seed}: gate scale {scale}");
        }
    }

    #[test]
    fn with_one_model_it_is_the_kalman_filter_of_the_check_value() {
        // Source: fixtures/methods/check_values.md §7 (recomputed by fixtures/methods/check_values.py with numpy):
        // F=[[1,1],[0,1]], H=[1,0], Q=0.1·[[1/3,1/2],[1/2,1]], R=1, x0=[0,0], P0=diag(10,10);
        // after z = 1, 2.1, 2.9: x = [2.915217, 0.920377], P diagonal [0.782838, 0.478714],
        // next predicted position 3.835594. With no switching and all weight on the
        // constant-velocity model, the IMM is that filter.
        let noise = cv_only(0.1, 1.0, 10.0);
        let zero = Axis {
            x: 0.0,
            v: 0.0,
            p: [10.0, 0.0, 10.0],
        };
        let mut f = MotionFilter {
            axes: [[zero; 2]; 2],
            probability: [0.0, 1.0],
            noise,
            updates: 0,
            gate_scale: 1.0,
        };
        for z in [1.0, 2.1, 2.9] {
            f.step([z, -z]);
        }
        let a = f.axes[1][0];
        assert!((a.x - 2.915217).abs() < 1e-6 && (a.v - 0.920377).abs() < 1e-6, "{a:?}");
        assert!((a.p[0] - 0.782838).abs() < 1e-6 && (a.p[2] - 0.478714).abs() < 1e-6);
        assert!((f.predicted_position()[0] - 3.835594).abs() < 1e-6);
        assert!((f.predicted_position()[1] + 3.835594).abs() < 1e-6);
    }

    #[test]
    fn gate_quantile_is_chi_square_two_dof() {
        // Source: the χ² distribution with 2 degrees of freedom is exponential with mean 2, so
        // its 0.99 quantile is −2 ln(0.01); fixtures/methods/check_values.md §7 quotes 9.21.
        assert!((GATE_CHI2_99 - (-2.0 * 0.01f64.ln())).abs() < 1e-12);
        assert!((GATE_CHI2_99 - 9.21).abs() < 0.001);
        assert!((GATE_CHI2 - (-2.0 * 0.001f64.ln())).abs() < 1e-12);
    }

    #[test]
    fn a_steady_mover_is_taken_for_constant_velocity_and_a_wanderer_for_a_random_walk() {
        // Physical law: a body at constant velocity is predicted almost exactly and the
        // constant-velocity model takes the weight; positions that jump at random about a fixed
        // place are best predicted by the last position, so the random walk takes it.
        let noise = MotionNoise::for_diameter(14.0);
        let mut mover = MotionFilter::started_at([0.0, 0.0], noise);
        for k in 1..30 {
            mover.step([3.0 * k as f64, -(k as f64)]);
        }
        // The random walk keeps a share of about the switching probability, which pulls the
        // prediction back by a few tenths of the 3 px step.
        let p = mover.predicted_position();
        assert!((p[0] - 90.0).abs() < 0.5 && (p[1] + 30.0).abs() < 0.2, "{p:?}");
        assert!(
            mover.model_probabilities()[1] > 0.8,
            "{:?}",
            mover.model_probabilities()
        );
        let mut rng = Rng::new(5);
        let mut wanderer = MotionFilter::started_at([50.0, 50.0], noise);
        for _ in 0..40 {
            wanderer.step([50.0 + 1.4 * rng.normal(), 50.0 + 1.4 * rng.normal()]);
        }
        assert!(
            wanderer.model_probabilities()[0] > 0.6,
            "{:?}",
            wanderer.model_probabilities()
        );
    }

    #[test]
    fn gate_widens_for_a_track_moving_more_than_modelled() {
        // Construction: the same noise model, one track with steps of 1 px, one with steps of
        // 6 px in random directions: the second one's gate ends up wider.
        let noise = MotionNoise::for_diameter(14.0);
        let mut rng = Rng::new(6);
        let mut walk = |step: f64| {
            let mut f = MotionFilter::started_at([0.0, 0.0], noise);
            let mut at = [0.0, 0.0];
            for _ in 0..20 {
                let angle = std::f64::consts::TAU * rng.uniform();
                at = [at[0] + step * angle.cos(), at[1] + step * angle.sin()];
                f.step(at);
            }
            f.gate_radius()
        };
        let (small, large) = (walk(1.0), walk(6.0));
        assert!(large > 1.5 * small, "{small} vs {large}");
    }

    #[test]
    fn replay_coasts_through_missing_frames() {
        // Construction: constant velocity 2 px/frame with frames 3 and 4 missing: the replayed
        // filter predicts the next point (16) as if nothing was missing, within the lag its
        // random-walk share still gives after six points; without coasting it would take the
        // 6 px jump from frame 2 to 5 for one step and predict about 20.
        let noise = MotionNoise::for_diameter(14.0);
        let pts = [0usize, 1, 2, 5, 6, 7].map(|t| (t, [2.0 * t as f64, 10.0]));
        let f = MotionFilter::replay(pts, noise).unwrap();
        assert!(
            (f.predicted_position()[0] - 16.0).abs() < 1.0,
            "{:?}",
            f.predicted_position()
        );
    }
}
