//! Small numeric helpers shared by several stages (order statistics, the seeded random
//! generator, numbers printed for people). They sit at the bottom of the module graph: they import nothing from the
//! stages, so every stage may use them without an import circle.

mod rng;

pub use rng::Rng;

/// `x` with four significant figures for people to read (`452.1`, `0.3308`), whole numbers
/// without decimals, trailing zeros dropped; outside 10⁻³ to 10⁵ in exponent form (`2.5e-5`).
pub fn significant(x: f64) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    if x == x.round() && x.abs() < 1e6 {
        return format!("{}", x as i64);
    }
    if x.abs() >= 1e5 || x.abs() < 1e-3 {
        return format!("{x:.3e}");
    }
    let decimals = (3 - x.abs().log10().floor() as i32).clamp(0, 6) as usize;
    let s = format!("{x:.decimals$}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// `n` copies of `value`, written into the vector rather than taken from a fresh zeroed
/// allocation (which `vec![0; n]` becomes). A large fresh zeroed block is the kernel's shared
/// zero page until written; a page that is read before it is written (a scan that marks a
/// few pixels of a frame-sized map) then costs a copy-on-write fault and a flush of every
/// core's address cache, ~10% of a short run's time when measured. Writing it first costs one
/// pass.
pub fn filled<T: Clone>(n: usize, value: T) -> Vec<T> {
    let mut v = Vec::with_capacity(n);
    v.resize(n, value);
    v
}

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
    // The two order statistics by selection (linear time), not a full sort: the same values.
    let mut v = values.to_vec();
    let h = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
    let (_, &mut at_lo, above) = v.select_nth_unstable_by(lo, f64::total_cmp);
    let at_hi = if hi > lo {
        above.iter().copied().min_by(f64::total_cmp).unwrap_or(at_lo)
    } else {
        at_lo
    };
    Some(at_lo + (h - lo as f64) * (at_hi - at_lo))
}

/// Disjoint sets over `0..n` (union-find with path halving), where a union keeps the smaller
/// index as the root, so roots do not depend on the order of unions.
///
/// # Method
/// R. E. Tarjan & J. van Leeuwen (1984), "Worst-case analysis of set union algorithms",
/// J. ACM 31(2):245–281, doi:10.1145/62.2160 (path halving).
#[derive(Debug, Clone)]
pub struct DisjointSets {
    parent: Vec<usize>,
}

impl DisjointSets {
    /// `n` sets of one element each.
    pub fn new(n: usize) -> Self {
        DisjointSets {
            parent: (0..n).collect(),
        }
    }

    /// The root of `i`'s set.
    pub fn find(&mut self, mut i: usize) -> usize {
        while self.parent[i] != i {
            self.parent[i] = self.parent[self.parent[i]];
            i = self.parent[i];
        }
        i
    }

    /// Joins the sets of `a` and `b` under the smaller root.
    pub fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        self.parent[ra.max(rb)] = ra.min(rb);
    }
}

/// The column and row of pixel `i` of a `width`-wide image. In 32 bits when the index fits
/// (every real frame): a 64-bit division costs several times a 32-bit one on many x86 CPUs,
/// and the flooding loops divide once per pixel they visit.
#[inline]
pub fn column_row(i: usize, width: usize) -> (usize, usize) {
    match (u32::try_from(i), u32::try_from(width)) {
        (Ok(i), Ok(width)) => ((i % width) as usize, (i / width) as usize),
        _ => (i % width, i / width),
    }
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

    #[test]
    fn disjoint_sets_join_under_the_smallest_index() {
        // Hand-made: {0}, {1, 3, 4}, {2}; the root of a set is its smallest element.
        let mut d = DisjointSets::new(5);
        d.union(4, 3);
        d.union(3, 1);
        assert_eq!([d.find(0), d.find(1), d.find(2), d.find(3), d.find(4)], [0, 1, 2, 1, 1]);
    }
}
