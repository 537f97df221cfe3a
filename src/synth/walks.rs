//! Synthetic track sets with known motion parameters (no images): persistent random walks,
//! free diffusion, diffusion with a drift, localisation noise and missing frames. They are the
//! simulation side of the statistics' tests, where the estimates are checked against the
//! parameters that made the tracks.

use super::Rng;
use crate::tracks::PathPoint;

/// What a set of walks is made of; lengths and times in any units (one frame = `interval`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WalkSettings {
    /// Tracks.
    pub tracks: usize,
    /// Frames per track.
    pub frames: usize,
    /// Time between frames.
    pub interval: f64,
    /// Diffusion coefficient D (length² per time).
    pub diffusion: f64,
    /// Persistence time P (time); 0 for free diffusion.
    pub persistence: f64,
    /// A common drift velocity (length per time), added to every track.
    pub drift: [f64; 2],
    /// Localisation error per axis (length), Gaussian, added to every recorded position.
    pub localisation_error: f64,
    /// Share of frames left out at random (neither the first nor the last).
    pub missing: f64,
}

impl WalkSettings {
    /// Persistent random walks with no drift, noise or gaps.
    pub fn persistent(tracks: usize, frames: usize, interval: f64, diffusion: f64, persistence: f64) -> Self {
        WalkSettings {
            tracks,
            frames,
            interval,
            diffusion,
            persistence,
            drift: [0.0, 0.0],
            localisation_error: 0.0,
            missing: 0.0,
        }
    }
}

/// Tracks of the walk `s`, each starting at its own random place in a 1000-unit square.
///
/// # Method
/// The persistent random walk as an Ornstein–Uhlenbeck velocity process (G. E. Uhlenbeck &
/// L. S. Ornstein (1930), Phys. Rev. 36:823–841, doi:10.1103/PhysRev.36.823), whose MSD is
/// exactly Fürth's with D = σ_v²·P per axis pair (σ_v² the stationary variance per axis),
/// integrated in 50 sub-steps per frame with the exact one-step decay; free diffusion as
/// Gaussian steps of variance 2D·Δt per axis (Einstein 1905).
pub fn walks(s: &WalkSettings, seed: u64) -> Vec<Vec<PathPoint>> {
    let mut rng = Rng::new(seed);
    (0..s.tracks).map(|_| one_walk(s, &mut rng)).collect()
}

fn one_walk(s: &WalkSettings, rng: &mut Rng) -> Vec<PathPoint> {
    let sub = 50;
    let h = s.interval / sub as f64;
    let (mut x, mut y) = (rng.range(0.0, 1000.0), rng.range(0.0, 1000.0));
    let axis_var = if s.persistence > 0.0 {
        s.diffusion / s.persistence
    } else {
        0.0
    };
    let (mut vx, mut vy) = (axis_var.sqrt() * rng.normal(), axis_var.sqrt() * rng.normal());
    let decay = if s.persistence > 0.0 {
        (-h / s.persistence).exp()
    } else {
        0.0
    };
    let kick = (axis_var * (1.0 - decay * decay)).sqrt();
    let mut out = Vec::with_capacity(s.frames);
    for f in 0..s.frames {
        if f > 0 {
            if s.persistence > 0.0 {
                for _ in 0..sub {
                    x += vx * h;
                    y += vy * h;
                    vx = vx * decay + kick * rng.normal();
                    vy = vy * decay + kick * rng.normal();
                }
            } else {
                let step = (2.0 * s.diffusion * s.interval).sqrt();
                x += step * rng.normal();
                y += step * rng.normal();
            }
            x += s.drift[0] * s.interval;
            y += s.drift[1] * s.interval;
        }
        let noise = s.localisation_error;
        let recorded = PathPoint::new(f, x + noise * rng.normal(), y + noise * rng.normal());
        let keep = f == 0 || f + 1 == s.frames || rng.uniform() >= s.missing;
        if keep {
            out.push(recorded);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_of_free_diffusion_have_the_einstein_variance() {
        // Physical law: 2D Brownian steps over Δt have ⟨|Δr|²⟩ = 4DΔt (A. Einstein (1905),
        // Ann. Phys. 17:549–560). D = 0.5, Δt = 2: 4; 20 000 steps, within 3% (the relative
        // standard error of a mean of |Δr|², an exponential with 2 degrees of freedom per
        // step, is 1/√20000 = 0.7%).
        let s = WalkSettings::persistent(200, 101, 2.0, 0.5, 0.0);
        let w = walks(&s, 3);
        let d2: Vec<f64> = w
            .iter()
            .flat_map(|t| {
                t.windows(2)
                    .map(|p| (p[1].x - p[0].x).powi(2) + (p[1].y - p[0].y).powi(2))
            })
            .collect();
        let mean = d2.iter().sum::<f64>() / d2.len() as f64;
        assert!((mean / 4.0 - 1.0).abs() < 0.03, "{mean}");
    }

    #[test]
    fn missing_frames_leave_the_ends_and_about_their_share() {
        // Construction: 15% of frames left out, never the first or the last.
        let s = WalkSettings {
            missing: 0.15,
            ..WalkSettings::persistent(100, 40, 1.0, 1.0, 0.0)
        };
        let w = walks(&s, 4);
        assert!(w.iter().all(|t| t[0].frame == 0 && t[t.len() - 1].frame == 39));
        let kept = w.iter().map(Vec::len).sum::<usize>() as f64 / 4000.0;
        assert!((kept - (1.0 - 0.15 * 38.0 / 40.0)).abs() < 0.02, "{kept}");
    }
}
