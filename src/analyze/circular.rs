//! Circular statistics of directions: mean resultant length, the Rayleigh test of uniformity
//! and the V-test toward an expected direction.

use serde::Serialize;

/// Summary of a sample of directions (radians in, degrees out).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CircularSummary {
    /// Directions.
    pub n: usize,
    /// Mean resultant length r̄ (0 = no preferred direction, 1 = all alike).
    pub mean_resultant_length: f64,
    /// Mean direction, degrees in [0, 360) (undefined, reported as 0, when r̄ = 0).
    pub mean_direction_deg: f64,
    /// Rayleigh statistic z = R²/n.
    pub rayleigh_z: f64,
    /// Rayleigh p-value (Zar's approximation).
    pub rayleigh_p: f64,
}

/// Mean resultant length, mean direction and the Rayleigh test.
///
/// # Method
/// J. H. Zar (2010), *Biostatistical Analysis*, 5th ed., Pearson, ch. 26–27: R = |Σ e^{iθ}|,
/// r̄ = R/n, z = R²/n, p ≈ exp(√(1 + 4n + 4(n² − R²)) − (1 + 2n)) (Zar p. 617).
pub fn circular_summary(angles: &[f64]) -> Option<CircularSummary> {
    let n = angles.len();
    if n == 0 {
        return None;
    }
    let (c, s) = resultant(angles);
    let r = c.hypot(s);
    let nf = n as f64;
    let p = ((1.0 + 4.0 * nf + 4.0 * (nf * nf - r * r)).sqrt() - (1.0 + 2.0 * nf)).exp();
    Some(CircularSummary {
        n,
        mean_resultant_length: r / nf,
        mean_direction_deg: s.atan2(c).to_degrees().rem_euclid(360.0),
        rayleigh_z: r * r / nf,
        rayleigh_p: p.min(1.0),
    })
}

fn resultant(angles: &[f64]) -> (f64, f64) {
    angles.iter().fold((0.0, 0.0), |(c, s), a| (c + a.cos(), s + a.sin()))
}

/// V-test result: is there a mean direction near `expected`?
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct VTest {
    /// Expected direction, degrees.
    pub expected_deg: f64,
    /// V = R cos(θ̄ − μ₀).
    pub v: f64,
    /// u = V √(2/n).
    pub u: f64,
    /// One-sided p from the normal approximation of u.
    pub p: f64,
}

/// The V-test (modified Rayleigh test) toward `expected_deg`.
///
/// # Method
/// Zar (2010), §27.1 (Durand & Greenwood 1958): V = R cos(θ̄ − μ₀), u = V√(2/n); p from the
/// standard normal upper tail of u (Zar tabulates it; the normal approximation is his for
/// large n).
pub fn v_test(angles: &[f64], expected_deg: f64) -> Option<VTest> {
    let n = angles.len();
    if n == 0 {
        return None;
    }
    let (c, s) = resultant(angles);
    let mean = s.atan2(c);
    let v = c.hypot(s) * (mean - expected_deg.to_radians()).cos();
    let u = v * (2.0 / n as f64).sqrt();
    Some(VTest {
        expected_deg,
        v,
        u,
        p: super::stats::normal_sf(u),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rad(d: &[f64]) -> Vec<f64> {
        d.iter().map(|x| x.to_radians()).collect()
    }

    #[test]
    fn methods_rayleigh_check() {
        // Source: fixtures/methods/check_values.md §9 (Zar 2010 formula, values recomputed with numpy): angles
        // 10,20,30,40,200,350°: R = 3.778637, r̄ = 0.629773, z = 2.379683, p = 0.088717,
        // mean 17.6038°.
        let s = circular_summary(&rad(&[10., 20., 30., 40., 200., 350.])).unwrap();
        assert!((s.mean_resultant_length * 6.0 - 3.778637).abs() < 1e-6);
        assert!((s.mean_resultant_length - 0.629773).abs() < 1e-6);
        assert!((s.rayleigh_z - 2.379683).abs() < 1e-6);
        assert!((s.rayleigh_p - 0.088717).abs() < 1e-6);
        assert!((s.mean_direction_deg - 17.6038).abs() < 1e-4);
    }

    #[test]
    fn methods_v_test_check() {
        // Source: fixtures/methods/check_values.md §9, angles of Zar's Example 27.2, μ₀ = 90°: r̄ = 0.952137,
        // θ̄ = 94.0482°, V = 9.497612, u = 4.247461, one-sided normal p = 1.08e-5; Rayleigh
        // z = 9.065643, p = 5.3e-6 (scipy's directional_stats gives the same r̄).
        let a = rad(&[66., 75., 86., 88., 88., 93., 97., 101., 118., 130.]);
        let s = circular_summary(&a).unwrap();
        assert!((s.mean_resultant_length - 0.952137).abs() < 1e-6);
        assert!((s.mean_direction_deg - 94.0482).abs() < 1e-4);
        assert!((s.rayleigh_z - 9.065643).abs() < 1e-6);
        assert!((s.rayleigh_p - 5.3e-6).abs() < 0.05e-6);
        let v = v_test(&a, 90.0).unwrap();
        assert!((v.v - 9.497612).abs() < 1e-6 && (v.u - 4.247461).abs() < 1e-6);
        assert!((v.p - 1.08e-5).abs() < 0.01e-5, "{}", v.p);
    }
}
