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

    /// Poisson-distributed count with mean `lambda`: Knuth's product method below 30, the
    /// normal approximation with continuity rounding above (error < 1% in the variance there).
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
        (lambda + lambda.sqrt() * self.normal()).round().max(0.0)
    }
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
}
