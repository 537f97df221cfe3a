//! Small numeric helpers shared by several stages (order statistics and the seeded random
//! generator). They sit at the bottom of the module graph: they import nothing from the
//! stages, so every stage may use them without an import circle.

mod rng;

pub use rng::Rng;

/// The median of the values (mean of the two middle ones for an even count); `None` if empty.
/// Sorts `v`.
pub fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len();
    Some(if m % 2 == 1 {
        v[m / 2]
    } else {
        0.5 * (v[m / 2 - 1] + v[m / 2])
    })
}

/// The lower median: the middle value for an odd count, the lower of the two middle ones for
/// an even count, so the result is always one of the values; `None` if empty. Sorts `v`.
pub fn lower_median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    Some(v[(v.len() - 1) / 2])
}

/// The `q` quantile (0–1) of values by linear interpolation between order statistics
/// (numpy's default rule); `None` when empty.
pub fn quantile(values: &[f64], q: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let h = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
    Some(v[lo] + (h - lo as f64) * (v[hi] - v[lo]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn medians_and_quantiles_follow_numpy() {
        // Source: numpy.median and numpy.quantile (default linear rule) on these lists,
        // values worked by hand: median([3, 1, 2]) = 2, median([4, 1, 3, 2]) = 2.5,
        // quantile([1, 2, 3, 4], 0.25) = 1.75, quantile([10], 0.9) = 10.
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), Some(2.5));
        assert_eq!(lower_median(&mut [4.0, 1.0, 3.0, 2.0]), Some(2.0));
        assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0], 0.25), Some(1.75));
        assert_eq!(quantile(&[10.0], 0.9), Some(10.0));
        assert_eq!(median(&mut []), None);
        assert_eq!(lower_median(&mut []), None);
    }
}
