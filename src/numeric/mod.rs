//! Small numeric helpers shared by several stages (order statistics, the seeded random
//! generator, numbers printed for people). They sit at the bottom of the module graph: they import nothing from the
//! stages, so every stage may use them without an import circle.

mod point_grid;
mod rng;
pub mod spare;

pub(crate) use point_grid::PointGrid;
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

/// The squared Euclidean distance between two points of the plane, `dx² + dy²` (each square
/// one rounding, then the sum: the same bits wherever it is asked for).
pub fn squared_distance(a: &[f64; 2], b: &[f64; 2]) -> f64 {
    (a[0] - b[0]) * (a[0] - b[0]) + (a[1] - b[1]) * (a[1] - b[1])
}

/// Values grouped by a key in `0..keys`, each group in the order the values came in, all in one
/// list (a compressed sparse row layout, made by a counting sort): one allocation for all the
/// groups instead of a list per key.
pub struct Grouped<T> {
    /// Where each key's values start in `values`; one more entry at the end.
    starts: Vec<usize>,
    values: Vec<T>,
}

impl<T> Default for Grouped<T> {
    /// No keys and no values.
    fn default() -> Self {
        Grouped {
            starts: vec![0],
            values: Vec::new(),
        }
    }
}

impl<T: Copy + Default> Grouped<T> {
    /// The `(key, value)` pairs grouped by key (every key below `keys`); the pairs are gone
    /// through twice, once to count each key's values and once to place them.
    pub fn of(keys: usize, pairs: impl Iterator<Item = (usize, T)> + Clone) -> Self {
        let mut starts = vec![0usize; keys + 1];
        for (k, _) in pairs.clone() {
            starts[k + 1] += 1;
        }
        for k in 0..keys {
            starts[k + 1] += starts[k];
        }
        let mut next = starts.clone();
        let mut values = vec![T::default(); starts[keys]];
        for (k, v) in pairs {
            values[next[k]] = v;
            next[k] += 1;
        }
        Grouped { starts, values }
    }

    /// The values of `key`, in the order they came in.
    pub fn group(&self, key: usize) -> &[T] {
        &self.values[self.starts[key]..self.starts[key + 1]]
    }
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

/// The shape of a row-major image, with the width's reciprocal worked out once, so that the
/// flooding loops find a pixel's column and row (and so its neighbours) with a multiplication
/// instead of a division per pixel visited.
///
/// # Method
/// D. Lemire, O. Kaser & N. Kurz (2019), "Faster remainder by direct computation:
/// Applications to compilers and software libraries", Software: Practice and Experience
/// 49(6):953–970 (volume and pages from memory): with `M = ⌊(2⁶⁴ − 1) / d⌋ + 1`, `⌊M·n / 2⁶⁴⌋ = ⌊n / d⌋`
/// for every 32-bit `n` and `d`. Larger indices fall back to a division.
#[derive(Debug, Clone, Copy)]
pub struct Grid {
    /// Columns.
    pub width: usize,
    /// Rows.
    pub height: usize,
    /// `M` for the width, 0 when the width is 1 or does not fit 32 bits.
    reciprocal: u64,
}

impl Grid {
    /// The grid of a `width` x `height` image (one 64-bit division, here).
    pub fn new(width: usize, height: usize) -> Grid {
        let reciprocal = match u32::try_from(width) {
            Ok(w) if w > 1 => u64::MAX / w as u64 + 1,
            _ => 0,
        };
        Grid {
            width,
            height,
            reciprocal,
        }
    }

    /// The column and row of pixel `i`.
    #[inline]
    pub fn column_row(&self, i: usize) -> (usize, usize) {
        if self.reciprocal != 0 && i <= u32::MAX as usize {
            let row = ((self.reciprocal as u128 * i as u128) >> 64) as usize;
            (i - row * self.width, row)
        } else {
            (i % self.width, i / self.width)
        }
    }

    /// The up-to-8 neighbours of pixel `i` inside the image (edges and corners).
    #[inline]
    pub fn neighbours8(&self, i: usize) -> impl Iterator<Item = usize> {
        let (x, y) = self.column_row(i);
        self.neighbours8_at(i, (x, y))
    }

    /// [`Grid::neighbours8`] of pixel `i` whose column and row `(x, y)` the caller knows
    /// already (a scan in raster order), without finding them again.
    #[inline]
    pub fn neighbours8_at(&self, i: usize, (x, y): (usize, usize)) -> impl Iterator<Item = usize> {
        let (w, h) = (self.width, self.height);
        let (left, right, up, down) = (x > 0, x + 1 < w, y > 0, y + 1 < h);
        let all = [
            i.wrapping_sub(w + 1),
            i.wrapping_sub(w),
            i.wrapping_sub(w - 1),
            i.wrapping_sub(1),
            i + 1,
            i + w - 1,
            i + w,
            i + w + 1,
        ];
        if left && right && up && down {
            // Away from the edges (most pixels): all eight, no test per neighbour.
            return all.into_iter().take(8);
        }
        let inside = [
            up && left,
            up,
            up && right,
            left,
            right,
            down && left,
            down,
            down && right,
        ];
        inside_only(all, inside)
    }

    /// Calls `f` with each of [`Grid::neighbours8`], in the same order: for a pixel away from
    /// the edges the eight offsets are taken as they are, with no test per neighbour (the
    /// inner step of every pixel flood, where an iterator's bookkeeping showed in profiles).
    #[inline]
    pub fn for_each_neighbour8(&self, i: usize, mut f: impl FnMut(usize)) {
        let (x, y) = self.column_row(i);
        let w = self.width;
        if x > 0 && x + 1 < w && y > 0 && y + 1 < self.height {
            for q in [i - w - 1, i - w, i - w + 1, i - 1, i + 1, i + w - 1, i + w, i + w + 1] {
                f(q);
            }
        } else {
            self.neighbours8(i).for_each(f);
        }
    }

    /// Calls `f` with each of [`Grid::neighbours4`], in the same order (see
    /// [`Grid::for_each_neighbour8`]).
    #[inline]
    pub fn for_each_neighbour4(&self, i: usize, mut f: impl FnMut(usize)) {
        let (x, y) = self.column_row(i);
        let w = self.width;
        if x > 0 && x + 1 < w && y > 0 && y + 1 < self.height {
            for q in [i - w, i - 1, i + 1, i + w] {
                f(q);
            }
        } else {
            self.neighbours4(i).for_each(f);
        }
    }

    /// The up-to-4 edge neighbours of pixel `i` inside the image.
    #[inline]
    pub fn neighbours4(&self, i: usize) -> impl Iterator<Item = usize> {
        let (x, y) = self.column_row(i);
        let w = self.width;
        let all = [i.wrapping_sub(w), i.wrapping_sub(1), i + 1, i + w];
        let inside = [y > 0, x > 0, x + 1 < w, y + 1 < self.height];
        if inside == [true; 4] {
            // Away from the edges (most pixels): all four, no test per neighbour.
            return all.into_iter().take(4);
        }
        inside_only(all, inside)
    }
}

/// The entries of `all` whose `inside` is true, in order (a pixel's neighbours at an edge).
fn inside_only<const N: usize>(all: [usize; N], inside: [bool; N]) -> std::iter::Take<std::array::IntoIter<usize, N>> {
    let mut kept = [0usize; N];
    let mut count = 0;
    for (q, ok) in all.into_iter().zip(inside) {
        kept[count] = q;
        count += usize::from(ok);
    }
    kept.into_iter().take(count)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grouped_values_keep_their_keys_and_order() {
        // Source: the definition, a list per key filled in arrival order; keys without values
        // give empty groups.
        let pairs = [(2usize, 'a'), (0, 'b'), (2, 'c'), (4, 'd'), (0, 'e')];
        let grouped = Grouped::of(6, pairs.iter().copied());
        for key in 0..6 {
            let want: Vec<char> = pairs.iter().filter(|p| p.0 == key).map(|p| p.1).collect();
            assert_eq!(grouped.group(key), &want[..], "key {key}");
        }
    }

    #[test]
    fn the_grid_divides_as_integer_division() {
        // Source: integer division (the theorem of Lemire, Kaser & Kurz 2019 for 32-bit
        // operands): every width up to 3000 against `/` and `%` at the first and last indices
        // and spread between, and the neighbours in the order up-left, up, up-right, left,
        // right, down-left, down, down-right (as an offset table read row by row).
        for width in 1..=3000usize {
            let grid = Grid::new(width, 5);
            let last = u32::MAX as usize;
            for i in (0..40)
                .chain((0..200).map(|k| k * 21_474_836 + width))
                .chain(last - 40..=last)
            {
                assert_eq!(grid.column_row(i), (i % width, i / width), "{i} / {width}");
            }
        }
        let grid = Grid::new(4, 3);
        assert_eq!(grid.neighbours8(5).collect::<Vec<_>>(), vec![0, 1, 2, 4, 6, 8, 9, 10]);
        assert_eq!(grid.neighbours8(0).collect::<Vec<_>>(), vec![1, 4, 5]);
        assert_eq!(grid.neighbours8(11).collect::<Vec<_>>(), vec![6, 7, 10]);
        assert_eq!(grid.neighbours4(5).collect::<Vec<_>>(), vec![1, 4, 6, 9]);
        assert_eq!(grid.neighbours4(3).collect::<Vec<_>>(), vec![2, 7]);
        // Every pixel of grids with one row, one column, or both, and a larger one: the
        // definition (row above left to right, then left and right, then the row below; for
        // the edge neighbours up, left, right, down), kept inside the grid.
        for (w, h) in [(1, 1), (1, 4), (5, 1), (2, 2), (5, 4)] {
            let grid = Grid::new(w, h);
            for i in 0..w * h {
                let (x, y) = ((i % w) as isize, (i / w) as isize);
                let offsets = [(-1, -1), (0, -1), (1, -1), (-1, 0), (1, 0), (-1, 1), (0, 1), (1, 1)];
                let inside = |(dx, dy): (isize, isize)| {
                    let (a, b) = (x + dx, y + dy);
                    (a >= 0 && b >= 0 && a < w as isize && b < h as isize).then(|| (b * w as isize + a) as usize)
                };
                let want: Vec<usize> = offsets.into_iter().filter_map(inside).collect();
                assert_eq!(grid.neighbours8(i).collect::<Vec<_>>(), want, "{w} x {h}, pixel {i}");
                let edges = [(0, -1), (-1, 0), (1, 0), (0, 1)];
                let want: Vec<usize> = edges.into_iter().filter_map(inside).collect();
                assert_eq!(grid.neighbours4(i).collect::<Vec<_>>(), want, "{w} x {h}, pixel {i}");
                let (mut by_call8, mut by_call4) = (Vec::new(), Vec::new());
                grid.for_each_neighbour8(i, |q| by_call8.push(q));
                grid.for_each_neighbour4(i, |q| by_call4.push(q));
                assert_eq!(by_call8, grid.neighbours8(i).collect::<Vec<_>>());
                assert_eq!(by_call4, want);
            }
        }
    }

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
