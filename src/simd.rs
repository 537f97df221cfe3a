//! Runtime choice of the vector instructions the per-pixel loops run on.
//!
//! A release build targets the baseline of its architecture (SSE2 on x86-64), so that one
//! binary runs on any machine; most CPUs in use offer wider vectors (AVX2: 8 `f32` at a time;
//! AVX-512: 16). A loop declared with [`multiversioned!`](crate::multiversioned) is written
//! once, in plain Rust, and compiled three times: the portable build, a copy with AVX2 enabled
//! and a copy with AVX-512 enabled; each call takes the widest copy the CPU supports, as
//! detected once at run time (`is_x86_feature_detected!`). On other architectures only the
//! portable build exists.
//!
//! The copies compute the same numbers, bit for bit: Rust never fuses `a * b + c` into one
//! rounding (no fused multiply-add unless asked for by `mul_add`), IEEE 754 rounds each
//! lane's operation as it would a scalar one, and the loops keep their order of additions
//! whatever the vector width. The tests of each dispatched loop run every level the machine
//! has against the portable one and compare bits; `CARAVAN_SIMD=portable` (or `avx2`) caps the
//! level for a whole run (to compare outputs with `cmp`, or to time the levels).

use std::sync::OnceLock;

/// An instruction level a dispatched loop can run on, narrowest first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Level {
    /// The build's baseline (SSE2 on x86-64).
    Portable,
    /// 256-bit vectors (AVX2, with FMA present; x86-64 only).
    Avx2,
    /// 512-bit vectors (AVX-512 F and BW; x86-64 only).
    Avx512,
}

/// The widest level this CPU supports, or a narrower one named by `CARAVAN_SIMD`
/// (`portable` or `avx2`). Detected once per process.
pub fn level() -> Level {
    static LEVEL: OnceLock<Level> = OnceLock::new();
    *LEVEL.get_or_init(|| match std::env::var("CARAVAN_SIMD").as_deref() {
        Ok("portable") => Level::Portable,
        Ok("avx2") => Level::Avx2.min(supported()),
        _ => supported(),
    })
}

/// Every level this CPU supports, narrowest first (for tests that compare them).
pub fn levels() -> Vec<Level> {
    [Level::Portable, Level::Avx2, Level::Avx512]
        .into_iter()
        .filter(|&l| l <= supported())
        .collect()
}

/// The widest level the CPU offers (detected once).
pub fn supported() -> Level {
    static SUPPORTED: OnceLock<Level> = OnceLock::new();
    *SUPPORTED.get_or_init(detect)
}

fn detect() -> Level {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx512f")
            && std::arch::is_x86_feature_detected!("avx512bw")
            && std::arch::is_x86_feature_detected!("avx2")
            && std::arch::is_x86_feature_detected!("fma")
        {
            return Level::Avx512;
        }
        if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma") {
            return Level::Avx2;
        }
    }
    Level::Portable
}

/// Declares a function whose body is compiled for each [`Level`] and dispatched at run time:
/// `name(args)` runs on [`level()`](crate::simd::level), `name_with(level, args)` on the
/// given level (capped at what the CPU supports; for tests). Arguments are plain
/// `identifier: type` pairs; the body should be a loop the compiler can vectorise (fixed-size
/// blocks, no early exits).
#[macro_export]
macro_rules! multiversioned {
    ($(#[$meta:meta])* $vis:vis fn $name:ident / $with:ident ($($arg:ident : $ty:ty),* $(,)?) $(-> $ret:ty)? $body:block) => {
        $(#[$meta])*
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            $with($crate::simd::level(), $($arg),*)
        }

        #[doc = concat!("[`", stringify!($name), "`] on the given instruction level (capped at what the CPU supports).")]
        #[allow(clippy::too_many_arguments)]
        $vis fn $with(level: $crate::simd::Level, $($arg: $ty),*) $(-> $ret)? {
            #[inline(always)]
            fn body($($arg: $ty),*) $(-> $ret)? $body
            #[cfg(target_arch = "x86_64")]
            {
                #[target_feature(enable = "avx2,fma")]
                fn avx2($($arg: $ty),*) $(-> $ret)? {
                    body($($arg),*)
                }
                #[target_feature(enable = "avx512f,avx512bw,avx2,fma")]
                fn avx512($($arg: $ty),*) $(-> $ret)? {
                    body($($arg),*)
                }
                match level.min($crate::simd::supported()) {
                    // SAFETY: the CPU supports the features these copies were compiled for
                    // (`supported` detected them at run time).
                    $crate::simd::Level::Avx512 => return unsafe { avx512($($arg),*) },
                    $crate::simd::Level::Avx2 => return unsafe { avx2($($arg),*) },
                    $crate::simd::Level::Portable => {}
                }
            }
            #[cfg(not(target_arch = "x86_64"))]
            let _ = level;
            body($($arg),*)
        }
    };
}

#[cfg(test)]
mod tests {
    use super::*;

    crate::multiversioned! {
        fn scaled_sum / scaled_sum_with(values: &[f32], weight: f32) -> f32 {
            values.iter().fold(0.0, |s, &v| s + weight * v)
        }
    }

    #[test]
    fn every_level_gives_the_same_bits() {
        // Source: IEEE 754 (each operation correctly rounded) and Rust's rule that `a * b + c`
        // is two roundings unless `mul_add` is called: a sequential sum is the same number
        // whatever instructions compute it.
        let values: Vec<f32> = (0..1000).map(|i| (i as f32 * 0.37).sin() * 1e3).collect();
        let portable = scaled_sum_with(Level::Portable, &values, 0.1);
        for level in levels() {
            assert_eq!(scaled_sum_with(level, &values, 0.1).to_bits(), portable.to_bits());
        }
        assert_eq!(scaled_sum(&values, 0.1).to_bits(), portable.to_bits());
        assert_eq!(levels()[0], Level::Portable);
    }
}
