//! A small deterministic random-number generator, so synthetic recordings are identical for a
//! given seed on every platform and every version of the dependencies.

/// xoshiro256** seeded through SplitMix64.
///
/// # Method
/// D. Blackman & S. Vigna (2021), "Scrambled linear pseudorandom number generators", ACM
/// Trans. Math. Softw. 47(4):36, doi:10.1145/3460772.
#[derive(Debug, Clone)]
pub struct Rng {
    s: [u64; 4],
}

impl Rng {
    /// A generator for `seed`; different streams come from different seeds.
    pub fn new(seed: u64) -> Rng {
        let mut z = seed;
        let mut next = || {
            z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut x = z;
            x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            x ^ (x >> 31)
        };
        Rng {
            s: [next(), next(), next(), next()],
        }
    }

    /// Next 64 random bits.
    #[inline]
    pub fn next_u64(&mut self) -> u64 {
        let result = self.s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = self.s[1] << 17;
        self.s[2] ^= self.s[0];
        self.s[3] ^= self.s[1];
        self.s[1] ^= self.s[2];
        self.s[0] ^= self.s[3];
        self.s[2] ^= t;
        self.s[3] = self.s[3].rotate_left(45);
        result
    }

    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform in [lo, hi).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }

    /// Standard normal by the Box–Muller transform (G. E. P. Box & M. E. Muller (1958), Ann.
    /// Math. Stat. 29(2):610–611).
    pub fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    /// Standard normal by the ziggurat method, for the millions of draws of a frame's noise:
    /// one 64-bit draw and a table look-up for 99% of the values, no logarithm or cosine.
    /// The layer comes from the draw's low 8 bits and the value from its high 52, so the two
    /// are independent (the correlation Doornik found in the original scheme, which took
    /// both from one 32-bit word).
    ///
    /// # Method
    /// G. Marsaglia & W. W. Tsang (2000), "The ziggurat method for generating random
    /// variables", J. Stat. Softw. 5(8), doi:10.18637/jss.v005.i08 (256 layers; the tail by
    /// Marsaglia's 1964 method); J. A. Doornik (2005), "An improved ziggurat method to
    /// generate normal random samples", University of Oxford.
    #[inline]
    pub fn ziggurat_normal(&mut self) -> f64 {
        let table = ziggurat_table();
        loop {
            let bits = self.next_u64();
            let layer = (bits & 0xff) as usize;
            // Symmetric uniform in (−1, 1) from the high 52 bits.
            let u = ((bits >> 12) as f64 + 0.5) * (2.0 / (1u64 << 52) as f64) - 1.0;
            let x = u * table.x[layer];
            if x.abs() < table.x[layer + 1] {
                return x;
            }
            if layer == 0 {
                return self.normal_tail(u < 0.0);
            }
            let (f_outer, f_inner) = (table.f[layer], table.f[layer + 1]);
            if f_inner + (f_outer - f_inner) * self.uniform() < (-0.5 * x * x).exp() {
                return x;
            }
        }
    }

    /// A normal value beyond the ziggurat's last layer (|x| > R), with the given sign
    /// (G. Marsaglia (1964), "Generating a variable from the tail of the normal distribution",
    /// Technometrics 6(1):101–102).
    fn normal_tail(&mut self, negative: bool) -> f64 {
        loop {
            let a = -(1.0 - self.uniform()).ln() / ZIGGURAT_R;
            let b = -(1.0 - self.uniform()).ln();
            if 2.0 * b > a * a {
                let x = ZIGGURAT_R + a;
                return if negative { -x } else { x };
            }
        }
    }

    /// Poisson-distributed count with mean `lambda`: Knuth's product method below 30, the
    /// normal approximation with continuity rounding above (error < 1% in the variance there;
    /// the normal value by the ziggurat).
    #[inline]
    pub fn poisson(&mut self, lambda: f64) -> f64 {
        if lambda <= 0.0 {
            return 0.0;
        }
        if lambda < 30.0 {
            let limit = (-lambda).exp();
            let mut k = 0.0;
            let mut p = self.uniform();
            while p > limit {
                k += 1.0;
                p *= self.uniform();
            }
            return k;
        }
        // Rounded half up by truncation (a conversion, not a call to the C library's round).
        let shifted = lambda + lambda.sqrt() * self.ziggurat_normal() + 0.5;
        if shifted > 0.0 {
            (shifted as u64) as f64
        } else {
            0.0
        }
    }
}

/// The start of the ziggurat's tail, R, and the area of each of its 256 layers, V
/// (Marsaglia & Tsang 2000, the 256-layer normal ziggurat; values as published there).
const ZIGGURAT_R: f64 = 3.654_152_885_361_009;
const ZIGGURAT_V: f64 = 0.004_928_673_233_99;

/// The ziggurat's layer edges x₀ > x₁ = R > … > x₂₅₆ = 0 and the density f(x) = exp(−x²/2) at
/// each: x₀ = V / f(R) (the base layer's width, tail included), x₍ᵢ₊₁₎ = f⁻¹(V / xᵢ + f(xᵢ)).
struct Ziggurat {
    x: [f64; 257],
    f: [f64; 257],
}

fn ziggurat_table() -> &'static Ziggurat {
    static TABLE: std::sync::OnceLock<Ziggurat> = std::sync::OnceLock::new();
    TABLE.get_or_init(|| {
        let density = |x: f64| (-0.5 * x * x).exp();
        let mut x = [0.0; 257];
        x[0] = ZIGGURAT_V / density(ZIGGURAT_R);
        x[1] = ZIGGURAT_R;
        for i in 1..255 {
            x[i + 1] = (-2.0 * (ZIGGURAT_V / x[i] + density(x[i])).ln()).sqrt();
        }
        x[256] = 0.0;
        let mut f = [0.0; 257];
        for i in 0..257 {
            f[i] = density(x[i]);
        }
        Ziggurat { x, f }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moments_match_the_distributions() {
        // Source: the Poisson distribution has mean = variance = λ; the standard normal has
        // mean 0 and variance 1. 20 000 draws: standard errors ~1%.
        let mut r = Rng::new(7);
        for lambda in [3.0, 200.0] {
            let v: Vec<f64> = (0..20_000).map(|_| r.poisson(lambda)).collect();
            let m = v.iter().sum::<f64>() / v.len() as f64;
            let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / v.len() as f64;
            assert!((m / lambda - 1.0).abs() < 0.03, "mean {m}");
            assert!((var / lambda - 1.0).abs() < 0.05, "var {var}");
        }
        let v: Vec<f64> = (0..20_000).map(|_| r.normal()).collect();
        let m = v.iter().sum::<f64>() / v.len() as f64;
        let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / v.len() as f64;
        assert!(m.abs() < 0.03 && (var - 1.0).abs() < 0.05);
    }

    #[test]
    fn ziggurat_draws_the_standard_normal() {
        // Source: the standard normal's probabilities (any table; from memory, to 6 digits):
        // P(|z| < 0.5) = 0.382925, P(|z| < 1) = 0.682689, P(|z| < 2) = 0.954500,
        // P(|z| > 3) = 0.002700, P(|z| > R = 3.6542) = 0.000258 (the tail drawn apart), and
        // its fourth moment 3. Two million draws: standard errors below 0.00035 for the
        // shares, 0.0035 for the moment.
        let mut r = Rng::new(11);
        let v: Vec<f64> = (0..2_000_000).map(|_| r.ziggurat_normal()).collect();
        let n = v.len() as f64;
        let share = |test: &dyn Fn(f64) -> bool| v.iter().filter(|&&z| test(z)).count() as f64 / n;
        for (bound, inside) in [(0.5, 0.382925), (1.0, 0.682689), (2.0, 0.954500)] {
            let got = share(&|z: f64| z.abs() < bound);
            assert!((got - inside).abs() < 0.0015, "P(|z| < {bound}) = {got}");
        }
        assert!((share(&|z: f64| z.abs() > 3.0) - 0.002700).abs() < 0.0003);
        let tail = share(&|z: f64| z.abs() > ZIGGURAT_R);
        assert!((tail - 0.000258).abs() < 0.00006, "tail {tail}");
        assert!((share(&|z: f64| z > 0.0) - 0.5).abs() < 0.0015);
        let m = v.iter().sum::<f64>() / n;
        let fourth = v.iter().map(|z| z.powi(4)).sum::<f64>() / n;
        assert!(
            m.abs() < 0.003 && (fourth - 3.0).abs() < 0.02,
            "mean {m}, fourth {fourth}"
        );
        // The last layer's edge meets 0: the recursion closes (Marsaglia & Tsang 2000).
        let table = ziggurat_table();
        assert!(table.x[255] > 0.0 && table.x[255] < 0.3, "x255 {}", table.x[255]);
    }
}
