//! Constant-velocity Kalman filter for one track: the predicted position of the next frame
//! and the uncertainty that sets the track's search gate.

use serde::Serialize;

/// Noise levels of the constant-velocity model, in pixels and frames.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MotionNoise {
    /// Spectral density `q` of the white-acceleration process noise, px² per frame³.
    pub process_q: f64,
    /// Variance of a measured position (segmentation jitter of a centroid), px².
    pub measurement_r: f64,
    /// Initial variance of position and velocity of a new track, px² and (px/frame)².
    pub initial_p: f64,
}

impl MotionNoise {
    /// Defaults from the nucleus diameter `d`: a centroid jitters by about 0.1 d (common
    /// practice for segmented nuclei: a few percent of the area at the rim); the velocity may
    /// change by about 0.1 d per frame; a new track's velocity is unknown up to about d per frame.
    pub fn for_diameter(d: f64) -> Self {
        MotionNoise {
            process_q: (0.1 * d).powi(2),
            measurement_r: (0.1 * d).powi(2),
            initial_p: d * d,
        }
    }
}

/// One axis of the state: position `x`, velocity `v`, and the 2x2 covariance `p`
/// (`[pxx, pxv, pvv]`, symmetric).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Axis {
    x: f64,
    v: f64,
    p: [f64; 3],
}

/// A constant-velocity Kalman filter in 2D, with independent and identically modelled axes
/// (state `[x, v]` per axis, transition `F = [[1, 1], [0, 1]]`, measurement `H = [1, 0]`,
/// process noise `Q = q [[1/3, 1/2], [1/2, 1]]` for one frame).
///
/// # Method
/// R. E. Kalman (1960), "A new approach to linear filtering and prediction problems", J. Basic
/// Eng. 82(1):35–45, doi:10.1115/1.3662552. The white-acceleration (continuous Wiener process
/// acceleration) form of `Q` for a unit time step, as commonly used in tracking. The gate is the
/// innovation ellipse `νᵀS⁻¹ν < χ²` (here a circle, the axes being alike).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConstantVelocity {
    axes: [Axis; 2],
    noise: MotionNoise,
    updates: u32,
}

/// χ² with 2 degrees of freedom at 0.99: the 99% gate of a 2D innovation (METHODS.md §7; the
/// quantile is −2 ln 0.01 = 9.2103).
pub const GATE_CHI2_99: f64 = 9.210340371976184;

impl ConstantVelocity {
    /// A filter started at state `[x, v] = [0, 0]` with covariance `P₀ = initial_p · I` on
    /// each axis; the first [`Self::step`] predicts, then takes the first measurement.
    pub fn new(noise: MotionNoise) -> Self {
        let axis = Axis {
            x: 0.0,
            v: 0.0,
            p: [noise.initial_p, 0.0, noise.initial_p],
        };
        ConstantVelocity {
            axes: [axis; 2],
            noise,
            updates: 0,
        }
    }

    /// A filter whose first measurement is `position` (velocity unknown, so zero with the
    /// initial variance): the state of a track that has just started.
    pub fn started_at(position: [f64; 2], noise: MotionNoise) -> Self {
        let mut f = Self::new(noise);
        for (axis, &z) in f.axes.iter_mut().zip(&position) {
            axis.x = z;
            axis.p = [noise.measurement_r, 0.0, noise.initial_p];
        }
        f.updates = 1;
        f
    }

    /// Measurements taken so far.
    pub fn updates(&self) -> u32 {
        self.updates
    }

    /// The position predicted for the next frame.
    pub fn predicted_position(&self) -> [f64; 2] {
        self.axes.map(|a| a.x + a.v)
    }

    /// The position predicted `frames` frames ahead.
    pub fn position_after(&self, frames: f64) -> [f64; 2] {
        self.axes.map(|a| a.x + frames * a.v)
    }

    /// Current velocity estimate, px per frame.
    pub fn velocity(&self) -> [f64; 2] {
        self.axes.map(|a| a.v)
    }

    /// Variance of the innovation of the next measurement on one axis: `S = H P⁻ Hᵀ + R`.
    pub fn innovation_variance(&self) -> f64 {
        let a = self.axes[0];
        let q = self.noise.process_q;
        // P⁻ = F P Fᵀ + Q, position entry.
        a.p[0] + 2.0 * a.p[1] + a.p[2] + q / 3.0 + self.noise.measurement_r
    }

    /// Radius of the 99% gate around the predicted position, px.
    pub fn gate_radius(&self) -> f64 {
        (GATE_CHI2_99 * self.innovation_variance()).sqrt()
    }

    /// One frame without a usable measurement: predict only (the track coasts on its velocity,
    /// and its uncertainty grows).
    pub fn coast(&mut self) {
        let q = self.noise.process_q;
        for a in self.axes.iter_mut() {
            a.x += a.v;
            a.p = [
                a.p[0] + 2.0 * a.p[1] + a.p[2] + q / 3.0,
                a.p[1] + a.p[2] + q / 2.0,
                a.p[2] + q,
            ];
        }
    }

    /// One frame: predict, then correct with the measured position.
    pub fn step(&mut self, measured: [f64; 2]) {
        let (q, r) = (self.noise.process_q, self.noise.measurement_r);
        for (a, &z) in self.axes.iter_mut().zip(&measured) {
            // Predict: x⁻ = F x, P⁻ = F P Fᵀ + Q.
            let x = a.x + a.v;
            let v = a.v;
            let pxx = a.p[0] + 2.0 * a.p[1] + a.p[2] + q / 3.0;
            let pxv = a.p[1] + a.p[2] + q / 2.0;
            let pvv = a.p[2] + q;
            // Update: K = P⁻Hᵀ/S, x = x⁻ + K(z − Hx⁻), P = (I − KH)P⁻.
            let s = pxx + r;
            let (kx, kv) = (pxx / s, pxv / s);
            let nu = z - x;
            a.x = x + kx * nu;
            a.v = v + kv * nu;
            a.p = [(1.0 - kx) * pxx, (1.0 - kx) * pxv, pvv - kv * pxv];
        }
        self.updates += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn methods_kalman_check_value() {
        // Source: METHODS.md §7 (recomputed by shared/methods/check_values.py with numpy):
        // F=[[1,1],[0,1]], H=[1,0], Q=0.1·[[1/3,1/2],[1/2,1]], R=1, x0=[0,0], P0=diag(10,10);
        // after z = 1, 2.1, 2.9: x = [2.915217, 0.920377], P diagonal [0.782838, 0.478714],
        // next predicted position 3.835594.
        let mut f = ConstantVelocity::new(MotionNoise {
            process_q: 0.1,
            measurement_r: 1.0,
            initial_p: 10.0,
        });
        for z in [1.0, 2.1, 2.9] {
            f.step([z, -z]);
        }
        let a = f.axes[0];
        assert!((a.x - 2.915217).abs() < 1e-6 && (a.v - 0.920377).abs() < 1e-6, "{a:?}");
        assert!((a.p[0] - 0.782838).abs() < 1e-6 && (a.p[2] - 0.478714).abs() < 1e-6);
        assert!((f.predicted_position()[0] - 3.835594).abs() < 1e-6);
        // The second axis saw the mirrored measurements: the filter is linear and axes independent.
        assert!((f.predicted_position()[1] + 3.835594).abs() < 1e-6);
    }

    #[test]
    fn gate_quantile_is_chi_square_two_dof() {
        // Source: the χ² distribution with 2 degrees of freedom is exponential with mean 2, so its
        // 0.99 quantile is −2 ln(0.01); METHODS.md §7 quotes 9.21.
        assert!((GATE_CHI2_99 - (-2.0 * 0.01f64.ln())).abs() < 1e-12);
        assert!((GATE_CHI2_99 - 9.21).abs() < 0.001);
    }

    #[test]
    fn follows_a_constant_drift() {
        // Physical law: a body moving at constant velocity; after a few noiseless steps the
        // filter predicts the next position almost exactly, and the gate shrinks from its start.
        let mut f = ConstantVelocity::started_at([0.0, 0.0], MotionNoise::for_diameter(14.0));
        let first_gate = f.gate_radius();
        for k in 1..30 {
            f.step([3.0 * k as f64, -(k as f64)]);
        }
        let p = f.predicted_position();
        assert!((p[0] - 90.0).abs() < 0.05 && (p[1] + 30.0).abs() < 0.05, "{p:?}");
        assert!(f.gate_radius() < 0.5 * first_gate);
    }
}
