//! Global thresholds from a grey-level histogram: Otsu, triangle and Li, binned exactly as
//! scikit-image 0.26 bins them so results can be compared number for number:
//! integer images get one bin per integer from min to max; float images 256 equal bins over
//! [min, max] (numpy's `histogram` edges and bin assignment).

/// A grey-level histogram with bin centres.
#[derive(Debug, Clone, PartialEq)]
pub struct Histogram {
    /// Pixel count per bin.
    pub counts: Vec<u64>,
    /// Centre value of each bin.
    pub centers: Vec<f64>,
    /// Whether bins are single integer levels (changes Li's tolerance).
    pub integer_levels: bool,
}

impl Histogram {
    /// One bin per integer level from the minimum to the maximum value.
    ///
    /// Returns `None` for an empty input.
    pub fn of_integers(values: &[u32]) -> Option<Histogram> {
        let (&lo, &hi) = (values.iter().min()?, values.iter().max()?);
        let mut counts = vec![0u64; (hi - lo) as usize + 1];
        for &v in values {
            counts[(v - lo) as usize] += 1;
        }
        let centers = (lo..=hi).map(|v| v as f64).collect();
        Some(Histogram {
            counts,
            centers,
            integer_levels: true,
        })
    }

    /// `nbins` equal bins over [min, max] of the finite values, as `numpy.histogram`;
    /// non-finite values are ignored. Returns `None` when no value is finite.
    pub fn of_floats(values: impl Iterator<Item = f64> + Clone, nbins: usize) -> Option<Histogram> {
        let (lo, hi) = values
            .clone()
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| (lo.min(v), hi.max(v)));
        Self::binned(values, lo, hi, nbins)
    }

    /// As [`Histogram::of_floats`] over `f32` values, with the range found in `f32` (exact:
    /// every `f32` is an `f64`), for whole frames.
    pub fn of_f32(values: &[f32], nbins: usize) -> Option<Histogram> {
        Self::of_f32_within(values, nbins, min_max_all_finite(values))
    }

    /// [`Histogram::of_f32`] with the values' extremes already found (as
    /// `min_max_all_finite` finds them: `None` when a value is not finite or there are
    /// none), e.g. by a [`ValueRange`] as the values were made.
    pub fn of_f32_within(values: &[f32], nbins: usize, extremes: Option<(f32, f32)>) -> Option<Histogram> {
        let Some((lo, hi)) = extremes else {
            return Self::of_floats(values.iter().map(|&v| v as f64), nbins);
        };
        let (lo, hi) = widened_range(lo as f64, hi as f64);
        let edges = linspace(lo, hi, nbins + 1);
        let counts = count_bins_f32(values, lo, hi - lo, &edges);
        Some(Self::from_counts(counts, &edges))
    }

    fn binned(values: impl Iterator<Item = f64>, lo: f64, hi: f64, nbins: usize) -> Option<Histogram> {
        if lo > hi {
            return None;
        }
        let (lo, hi) = widened_range(lo, hi);
        let edges = linspace(lo, hi, nbins + 1);
        let last = nbins - 1;
        let mut counts = vec![0u64; nbins];
        for v in values.filter(|v| v.is_finite()) {
            counts[numpy_bin(numpy_guess(v, lo, hi - lo, last), v, &edges)] += 1;
        }
        Some(Self::from_counts(counts, &edges))
    }

    fn from_counts(counts: Vec<u64>, edges: &[f64]) -> Histogram {
        let centers = edges.windows(2).map(|e| (e[0] + e[1]) / 2.0).collect();
        Histogram {
            counts,
            centers,
            integer_levels: false,
        }
    }

    /// Total pixels counted.
    pub fn total(&self) -> u64 {
        self.counts.iter().sum()
    }

    fn is_single_level(&self) -> bool {
        self.counts.iter().filter(|&&c| c > 0).count() <= 1
    }

    fn first_nonzero_center(&self) -> f64 {
        self.counts
            .iter()
            .position(|&c| c > 0)
            .map(|i| self.centers[i])
            .unwrap_or(0.0)
    }
}

/// numpy's `linspace(start, stop, num)`: `i·step + start`, last value set to `stop`.
fn linspace(start: f64, stop: f64, num: usize) -> Vec<f64> {
    let step = (stop - start) / (num - 1) as f64;
    let mut v: Vec<f64> = (0..num).map(|i| i as f64 * step + start).collect();
    v[num - 1] = stop;
    v
}

/// numpy widens a zero-width range to [v - 0.5, v + 0.5].
fn widened_range(lo: f64, hi: f64) -> (f64, f64) {
    if lo == hi {
        (lo - 0.5, hi + 0.5)
    } else {
        (lo, hi)
    }
}

/// The extremes of values met in runs (e.g. a frame's rows as a stage finishes them), as
/// `min_max_all_finite` finds them over all the values at once (up to which of +0 and −0 a
/// zero extreme is, as there): the histogram's range without a pass of its own over the frame.
#[derive(Debug, Clone, Copy, Default)]
pub struct ValueRange {
    /// The smallest and largest value of the runs so far, all finite.
    extremes: Option<(f32, f32)>,
    /// Whether a value met so far is not finite.
    not_finite: bool,
}

impl ValueRange {
    /// Takes in a run of values.
    pub fn take(&mut self, values: &[f32]) {
        match (min_max_all_finite(values), self.extremes) {
            (None, _) => self.not_finite |= !values.is_empty(),
            (Some(run), None) => self.extremes = Some(run),
            (Some((lo, hi)), Some((low, high))) => {
                self.extremes = Some((if lo < low { lo } else { low }, if hi > high { hi } else { high }));
            }
        }
    }

    /// The smallest and largest value met when every one was finite; `None` when one was not
    /// or there were none.
    pub fn extremes(&self) -> Option<(f32, f32)> {
        self.extremes.filter(|_| !self.not_finite)
    }
}

crate::multiversioned! {
    /// Smallest and largest value when every value is finite; `None` when one is not or there
    /// are none. One pass over sixteen lanes (one AVX-512 register, two AVX2), the finiteness
    /// read from the exponent bits, so that the loop vectorises. The extremes do not depend on
    /// the order the values are met in (only which of +0 and −0 is kept for a zero extreme
    /// can, and the two are equal in every later comparison and difference).
    pub(crate) fn min_max_all_finite / min_max_all_finite_with(values: &[f32]) -> Option<(f32, f32)> {
        const LANES: usize = 16;
        const EXPONENT: u32 = 0x7f80_0000;
        let first = *values.first()?;
        let (mut lo, mut hi, mut not_finite) = ([first; LANES], [first; LANES], [false; LANES]);
        let chunks = values.chunks_exact(LANES);
        let rest = chunks.remainder();
        for chunk in chunks {
            for k in 0..LANES {
                lo[k] = if chunk[k] < lo[k] { chunk[k] } else { lo[k] };
                hi[k] = if chunk[k] > hi[k] { chunk[k] } else { hi[k] };
                not_finite[k] |= chunk[k].to_bits() & EXPONENT == EXPONENT;
            }
        }
        if not_finite.iter().any(|&f| f) || !rest.iter().all(|v| v.is_finite()) {
            return None;
        }
        let lo = lo.iter().chain(rest).fold(first, |m, &v| if v < m { v } else { m });
        let hi = hi.iter().chain(rest).fold(first, |m, &v| if v > m { v } else { m });
        Some((lo, hi))
    }
}

/// Counts per bin of finite `f32` values within [edges[0], edges[last + 1]], as numpy assigns
/// them: the bin of `v` is the last one whose lower edge is ≤ `v`. For an `f32` value that
/// comparison is exact against the edge rounded up to the next `f32`, so the whole loop runs in
/// `f32`. Each value's position in the range, `t = (v − lo) · nbins / (hi − lo)`, names its
/// bin `⌊t⌋` unless `t` lies within the arithmetic's error bound of a whole number; only such
/// values (a few per hundred thousand) are placed by comparing with the edges. Blocks of values
/// are positioned branch-free ([`position_block`], vectorised), then tallied into four
/// sub-histograms in turn (a frame has long stretches of one bin, which would otherwise chain
/// every increment on the same counter).
fn count_bins_f32(values: &[f32], lo: f64, denom: f64, edges: &[f64]) -> Vec<u64> {
    let nbins = edges.len() - 1;
    let last = nbins - 1;
    let lower: Vec<f32> = edges.iter().map(|&e| f32_at_or_above(e)).collect();
    let (lo32, scale) = (lo as f32, (nbins as f64 / denom) as f32);
    let guess = |v: f32| (((v - lo32) * scale) as i32).max(0) as usize;
    // Error of t: the subtraction, the product and the scale in f32 (≤ 2⁻²⁴ relative each, of
    // values up to the largest magnitude in play), and each edge's own rounding to f32; eight
    // times their sum is a safe margin.
    let magnitude = lo.abs().max((lo + denom).abs());
    let margin = (8.0 * f32::EPSILON as f64 * (nbins as f64 + 2.0 * magnitude * nbins as f64 / denom)) as f32;
    let mut counts = vec![0u64; nbins];
    if margin >= 0.25 || nbins > NEAR_EDGE as usize {
        for &v in values {
            counts[exact_bin(guess(v), v, &lower)] += 1;
        }
        return counts;
    }
    // Sub-histograms a cache line apart from a multiple of 4 KiB (loads and stores whose
    // addresses agree in their low 12 bits are treated as dependent by the CPU), in 32 bits,
    // added into the totals every 2²⁴ values.
    let stride = nbins + 16;
    let mut tallies = vec![0u32; 4 * stride];
    let mut bins = [0u16; 2048];
    for chunk in values.chunks(1 << 24) {
        for block in chunk.chunks(bins.len()) {
            let bins = &mut bins[..block.len()];
            position_block(block, lo32, scale, last as u16, margin, bins);
            let mut near = 0u16;
            let quads = bins.chunks_exact(4);
            for &b in quads.remainder() {
                tallies[(b & !NEAR_EDGE) as usize] += 1;
                near |= b;
            }
            for q in quads {
                tallies[(q[0] & !NEAR_EDGE) as usize] += 1;
                tallies[stride + (q[1] & !NEAR_EDGE) as usize] += 1;
                tallies[2 * stride + (q[2] & !NEAR_EDGE) as usize] += 1;
                tallies[3 * stride + (q[3] & !NEAR_EDGE) as usize] += 1;
                near |= q[0] | q[1] | q[2] | q[3];
            }
            if near & NEAR_EDGE != 0 {
                // Move the few values near an edge (a few per block) from their position's bin
                // to their own; pieces of 64 without one are passed over by one OR each.
                for (piece, values) in bins.chunks(64).zip(block.chunks(64)) {
                    if piece.iter().fold(0, |any, &b| any | b) & NEAR_EDGE == 0 {
                        continue;
                    }
                    for (&b, &v) in piece.iter().zip(values).filter(|(&b, _)| b & NEAR_EDGE != 0) {
                        let (placed, exact) = ((b & !NEAR_EDGE) as usize, exact_bin(guess(v), v, &lower));
                        counts[exact] += 1;
                        counts[placed] -= 1;
                    }
                }
            }
        }
        for (i, c) in counts.iter_mut().enumerate() {
            *c += (0..4)
                .map(|k| std::mem::take(&mut tallies[k * stride + i]) as u64)
                .sum::<u64>();
        }
    }
    counts
}

/// [`position_block`]'s mark (the top bit) on a value near a bin edge, whose bin must be
/// checked against the edges.
const NEAR_EDGE: u16 = 1 << 15;

crate::multiversioned! {
    /// The bin `⌊(v − lo) · scale⌋` (0..=`last`) of each value of `block`, marked with
    /// [`NEAR_EDGE`] where the position lies within `margin` of an inner bin edge. Branch-free,
    /// so it vectorises.
    fn position_block / position_block_with(block: &[f32], lo: f32, scale: f32, last: u16, margin: f32, bins: &mut [u16]) {
        let top = last as f32;
        for (b, &v) in bins.iter_mut().zip(block) {
            // max/min rather than clamp (NaN goes to 0), and the whole number read from the
            // bits of 2²³ + whole (exact below 2²³) rather than a saturating conversion: forms
            // the compiler vectorises.
            let t = ((v - lo) * scale).max(0.0).min(top + 1.0);
            let whole = t.floor().min(top);
            let fraction = t - whole;
            let near = (fraction < margin && whole > 0.0) | (fraction > 1.0 - margin && whole < top);
            let bin = ((whole + 8_388_608.0).to_bits() & 0x7fff) as u16;
            *b = bin | if near { NEAR_EDGE } else { 0 };
        }
    }
}

/// The bin of `v` walked from `start` against the `lower` edges (numpy's rule), as many steps
/// as it takes.
fn exact_bin(start: usize, v: f32, lower: &[f32]) -> usize {
    let last = lower.len() - 2;
    let mut i = start.min(last);
    while i > 0 && v < lower[i] {
        i -= 1;
    }
    while i < last && v >= lower[i + 1] {
        i += 1;
    }
    i
}

/// The smallest `f32` that is ≥ `x` (finite `x` within the `f32` range).
fn f32_at_or_above(x: f64) -> f32 {
    let near = x as f32;
    if (near as f64) >= x {
        near
    } else if near >= 0.0 {
        f32::from_bits(near.to_bits() + 1)
    } else {
        f32::from_bits(near.to_bits() - 1)
    }
}

/// numpy's first guess of a value's bin, `(v − lo) / (hi − lo) · nbins`, truncated, with the
/// top edge put into the last bin (`as usize` saturates, so the result is in 0..=last).
#[inline(always)]
fn numpy_guess(v: f64, lo: f64, denom: f64, last: usize) -> usize {
    ((((v - lo) / denom) * (last + 1) as f64) as usize).min(last)
}

/// numpy's correction of a guess against the actual edges, one bin each way
/// (`v` lies in [edges[0], edges[last + 1]]).
#[inline(always)]
fn numpy_bin(guess: usize, v: f64, edges: &[f64]) -> usize {
    let last = edges.len() - 2;
    let mut i = guess;
    i -= (v < edges[i]) as usize;
    i += ((v >= edges[i + 1]) & (i != last)) as usize;
    i
}

/// Otsu's threshold: the bin centre maximising the between-class variance; foreground is
/// `value > threshold`. Ties go to the first maximum.
///
/// # Method
/// N. Otsu (1979), "A Threshold Selection Method from Gray-Level Histograms", IEEE Trans.
/// Systems, Man, and Cybernetics 9(1):62–66, doi:10.1109/TSMC.1979.4310076.
/// The arithmetic replicates scikit-image 0.26 `threshold_otsu` step by step (counts held as
/// float32, class weights accumulated in float32, class means in float64) so that near-ties are
/// broken the same way.
///
/// ```
/// use caravan::segment::threshold::{otsu_threshold, Histogram};
/// // fixtures/methods/check_values.md §1 check value (scikit-image 0.26): a six-way tie, the first maximum wins.
/// let h = Histogram::of_integers(&[0, 0, 1, 1, 2, 8, 9, 9, 10, 10]).unwrap();
/// assert_eq!(otsu_threshold(&h), 2.0);
/// ```
pub fn otsu_threshold(hist: &Histogram) -> f64 {
    if hist.is_single_level() {
        return hist.first_nonzero_center();
    }
    let n = hist.counts.len();
    let counts: Vec<f32> = hist.counts.iter().map(|&c| c as f32).collect();
    let weighted: Vec<f64> = counts.iter().zip(&hist.centers).map(|(&c, &x)| c as f64 * x).collect();
    let mut w1 = vec![0f32; n];
    let mut s1 = vec![0f64; n];
    let (mut acc_w, mut acc_s) = (0f32, 0f64);
    for i in 0..n {
        acc_w += counts[i];
        acc_s += weighted[i];
        w1[i] = acc_w;
        s1[i] = acc_s;
    }
    let mut w2 = vec![0f32; n];
    let mut s2 = vec![0f64; n];
    let (mut acc_w, mut acc_s) = (0f32, 0f64);
    for i in (0..n).rev() {
        acc_w += counts[i];
        acc_s += weighted[i];
        w2[i] = acc_w;
        s2[i] = acc_s;
    }
    let mut best = (f64::NEG_INFINITY, 0usize);
    for k in 0..n - 1 {
        let mean1 = s1[k] / w1[k] as f64;
        let mean2 = s2[k + 1] / w2[k + 1] as f64;
        let d = mean1 - mean2;
        let var = (w1[k] * w2[k + 1]) as f64 * (d * d);
        if var > best.0 {
            best = (var, k);
        }
    }
    hist.centers[best.1]
}

/// Triangle threshold: the bin farthest from the line joining the histogram peak to the far
/// end of its longer tail.
///
/// # Method
/// G. W. Zack, W. E. Rogers & S. A. Latt (1977), "Automatic measurement of sister chromatid
/// exchange frequency", J. Histochem. Cytochem. 25(7):741–753, doi:10.1177/25.7.70454.
/// Follows scikit-image 0.26 `threshold_triangle` (no ImageJ offset constant).
pub fn triangle_threshold(hist: &Histogram) -> f64 {
    let n = hist.counts.len();
    let peak = first_argmax(&hist.counts);
    let low = hist.counts.iter().position(|&c| c > 0).unwrap_or(0);
    let high = hist.counts.iter().rposition(|&c| c > 0).unwrap_or(0);
    if low == high {
        return hist.centers[low];
    }
    let flip = (peak as isize - low as isize) < (high as isize - peak as isize);
    let h: Vec<u64> = if flip {
        hist.counts.iter().rev().copied().collect()
    } else {
        hist.counts.clone()
    };
    let (low, peak) = if flip {
        (n - high - 1, n - peak - 1)
    } else {
        (low, peak)
    };
    let width = (peak - low) as f64;
    let peak_height = h[peak] as f64;
    let norm = (peak_height * peak_height + width * width).sqrt();
    let (ph, wd) = (peak_height / norm, width / norm);
    let mut best = (f64::NEG_INFINITY, 0usize);
    for x in 0..(peak - low) {
        let length = ph * x as f64 - wd * h[x + low] as f64;
        if length > best.0 {
            best = (length, x);
        }
    }
    let level = best.1 + low;
    hist.centers[if flip { n - level - 1 } else { level }]
}

/// Li's minimum cross-entropy threshold, iterated from the mean until it moves less than
/// the tolerance (0.5 for integer levels, half a bin otherwise).
///
/// # Method
/// C. H. Li & C. K. Lee (1993), "Minimum cross entropy thresholding", Pattern Recognit.
/// 26(4):617–625, doi:10.1016/0031-3203(93)90115-D; iteration of C. H. Li & P. K. S. Tam
/// (1998), Pattern Recognit. Lett. 19(8):771–776, doi:10.1016/S0167-8655(98)00057-9.
/// As scikit-image, values are shifted so the minimum is 0 (the logarithms need positive means).
/// Departure: float images iterate over the 256-bin histogram rather than every pixel.
pub fn li_threshold(hist: &Histogram) -> f64 {
    if hist.is_single_level() {
        return hist.first_nonzero_center();
    }
    let lo = hist.first_nonzero_center();
    let x: Vec<f64> = hist.centers.iter().map(|c| c - lo).collect();
    let w: Vec<f64> = hist.counts.iter().map(|&c| c as f32 as f64).collect();
    let tolerance = if hist.integer_levels { 0.5 } else { (x[1] - x[0]) / 2.0 };
    let total: f64 = w.iter().sum();
    let mut t_next = x.iter().zip(&w).map(|(a, b)| a * b).sum::<f64>() / total;
    let mut t_curr = -2.0 * tolerance;
    while (t_next - t_curr).abs() > tolerance {
        t_curr = t_next;
        let (mut sf, mut wf, mut sb, mut wb) = (0.0, 0.0, 0.0, 0.0);
        for (a, b) in x.iter().zip(&w) {
            if *a > t_curr {
                sf += a * b;
                wf += b;
            } else {
                sb += a * b;
                wb += b;
            }
        }
        let (mean_fore, mean_back) = (sf / wf, sb / wb);
        if mean_back == 0.0 || wf == 0.0 {
            break;
        }
        t_next = (mean_back - mean_fore) / (mean_back.ln() - mean_fore.ln());
    }
    t_next + lo
}

fn first_argmax(v: &[u64]) -> usize {
    let mut best = 0;
    for (i, &c) in v.iter().enumerate() {
        if c > v[best] {
            best = i;
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_finite_samples_are_left_out_of_a_float_frame_histogram() {
        // Source: numpy.histogram's range is the finite samples' (non-finite ones are dropped
        // before binning, as `of_floats` documents); the fast f32 path must bin a frame with
        // an infinity or a NaN among its first eight lanes the same way: 14 finite samples,
        // range 1 ..= 14.
        let mut values: Vec<f32> = (1..=16).map(|v| v as f32).collect();
        values[2] = f32::INFINITY;
        values[5] = f32::NAN;
        values.retain(|v| !(v.is_finite() && *v > 14.0));
        values.extend([f32::NEG_INFINITY, 3.0]);
        let fast = Histogram::of_f32(&values, 8).unwrap();
        let slow = Histogram::of_floats(values.iter().map(|&v| v as f64), 8).unwrap();
        assert_eq!(fast.counts, slow.counts);
        assert_eq!(fast.counts.iter().sum::<u64>(), 13);
        assert_eq!(fast.centers, slow.centers);
        assert!((fast.centers[0] - (1.0 + 13.0 / 16.0)).abs() < 1e-12);
    }

    #[test]
    fn extremes_and_finiteness_on_every_instruction_level() {
        // Source: the definition (the smallest and largest of the values; none when one is not
        // finite), by a plain scalar fold. Lengths around the lane count, and a non-finite
        // value (each of +∞, −∞, NaN) at every position of a 40-value frame.
        let mut rng = crate::numeric::Rng::new(11);
        for n in [1usize, 7, 15, 16, 17, 31, 33, 100] {
            let values: Vec<f32> = (0..n).map(|_| (rng.uniform() * 2000.0 - 500.0) as f32).collect();
            let want = values.iter().copied().fold(f32::INFINITY, f32::min).to_bits();
            let want_hi = values.iter().copied().fold(f32::NEG_INFINITY, f32::max).to_bits();
            for level in crate::simd::levels() {
                let (lo, hi) = min_max_all_finite_with(level, &values).unwrap();
                assert_eq!((lo.to_bits(), hi.to_bits()), (want, want_hi), "{level:?} {n}");
            }
        }
        for bad in [f32::INFINITY, f32::NEG_INFINITY, f32::NAN] {
            for at in 0..40 {
                let mut values: Vec<f32> = (0..40).map(|i| i as f32).collect();
                values[at] = bad;
                for level in crate::simd::levels() {
                    assert_eq!(min_max_all_finite_with(level, &values), None, "{level:?} {bad} at {at}");
                }
            }
        }
    }

    #[test]
    fn a_range_taken_in_runs_is_the_range_of_all_the_values() {
        // Source: the definition (the smallest and largest of all the values, none when one is
        // not finite or there are none), by a plain scalar fold over all of them, whatever
        // runs they come in: runs cut at random places, empty runs among them, a non-finite
        // value (+∞, −∞, NaN) in any run.
        let mut rng = crate::numeric::Rng::new(23);
        for case in 0..200 {
            let n = (rng.next_u64() % 90) as usize;
            let mut values: Vec<f32> = (0..n).map(|_| (rng.uniform() * 3000.0 - 1000.0) as f32).collect();
            if case % 5 == 0 && n > 0 {
                let at = (rng.next_u64() % n as u64) as usize;
                values[at] = [f32::INFINITY, f32::NEG_INFINITY, f32::NAN][case % 3];
            }
            let want = values.iter().all(|v| v.is_finite()) && n > 0;
            let want = want.then(|| {
                let lo = values.iter().copied().fold(f32::INFINITY, f32::min);
                (lo, values.iter().copied().fold(f32::NEG_INFINITY, f32::max))
            });
            let mut range = ValueRange::default();
            let mut start = 0;
            while start < n {
                let end = (start + (rng.next_u64() % 20) as usize).min(n);
                range.take(&values[start..end]);
                start = end;
            }
            range.take(&[]);
            assert_eq!(range.extremes(), want, "case {case}");
        }
    }

    fn bimodal() -> Vec<u32> {
        // Source: fixtures/methods/check_values.md §1 bimodal sample, counts[v] = round(1000 e^{-(v-30)²/50}) +
        // round(500 e^{-(v-90)²/200}).
        let mut v = Vec::new();
        for level in 0..256u32 {
            let x = level as f64;
            let c = (1000.0 * (-(x - 30.0).powi(2) / 50.0).exp()).round()
                + (500.0 * (-(x - 90.0).powi(2) / 200.0).exp()).round();
            v.extend(std::iter::repeat_n(level, c as usize));
        }
        v
    }

    #[test]
    fn otsu_matches_methods_check_values() {
        // Source: fixtures/methods/check_values.md §1 (skimage 0.26 threshold_otsu).
        let h = Histogram::of_integers(&[0, 0, 1, 1, 2, 8, 9, 9, 10, 10]).unwrap();
        assert_eq!(otsu_threshold(&h), 2.0);
        let f = Histogram::of_floats([0., 0., 1., 1., 2., 8., 9., 9., 10., 10.].into_iter(), 256).unwrap();
        assert_eq!(otsu_threshold(&f), 2.01171875);
        let b = [0u32, 1, 2, 3, 100, 101, 255, 255, 254, 5];
        assert_eq!(otsu_threshold(&Histogram::of_integers(&b).unwrap()), 101.0);
        assert_eq!(
            otsu_threshold(&Histogram::of_floats(b.iter().map(|&v| v as f64), 256).unwrap()),
            101.103515625
        );
        let c = [100u32, 100, 101, 103, 3000, 3010, 3020, 4095];
        assert_eq!(otsu_threshold(&Histogram::of_integers(&c).unwrap()), 103.0);
        assert_eq!(
            otsu_threshold(&Histogram::of_floats(c.iter().map(|&v| v as f64), 256).unwrap()),
            107.802734375
        );
        let bi = bimodal();
        assert_eq!(bi.len(), 25064, "N from fixtures/methods/check_values.md §1");
        assert_eq!(otsu_threshold(&Histogram::of_integers(&bi).unwrap()), 60.0);
        assert_eq!(
            otsu_threshold(&Histogram::of_floats(bi.iter().map(|&v| v as f64), 256).unwrap()),
            58.8046875
        );
    }

    #[test]
    fn triangle_and_li_match_methods_check_values() {
        // Source: fixtures/methods/check_values.md §2 (skimage 0.26): triangle 44, Li 53.1075347162524.
        let h = Histogram::of_integers(&bimodal()).unwrap();
        assert_eq!(triangle_threshold(&h), 44.0);
        assert!(
            (li_threshold(&h) - 53.1075347162524).abs() < 1e-9,
            "{}",
            li_threshold(&h)
        );
    }

    #[test]
    fn float_bins_match_numpy_at_edges_and_narrow_ranges() {
        // Source: numpy 2.4.6, np.histogram(a.astype(np.float64), bins, range=(a.min(), a.max()))
        // (float64, as scikit-image bins its float64 images). (1) bins=256 over float32 values
        // k/256 (k = 0..=256), the float32 just below each k/256 (k >= 1), 0.3 and 0.7: two
        // per bin, three in bins 76, 179 and 255. (2) bins=16 over the float32 values
        // 1000 + k·2⁻¹⁴ (k = 0..=40), a range where bin edges fall between float32 values:
        // [3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 3].
        let mut a: Vec<f32> = (0..=256).map(|k| k as f32 / 256.0).collect();
        a.extend((1..=256).map(|k| f32::from_bits((k as f32 / 256.0).to_bits() - 1)));
        a.extend([0.3, 0.7]);
        let h = Histogram::of_f32(&a, 256).unwrap();
        for (bin, &count) in h.counts.iter().enumerate() {
            let want = if [76, 179, 255].contains(&bin) { 3 } else { 2 };
            assert_eq!(count, want, "bin {bin}");
        }
        let b: Vec<f32> = (0..=40).map(|k| 1000.0 + k as f32 * 2f32.powi(-14)).collect();
        let h = Histogram::of_f32(&b, 16).unwrap();
        assert_eq!(h.counts, [3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 2, 3, 3]);
        // The general path (f64 values, NaN skipped) agrees.
        let with_nan = b.iter().map(|&v| v as f64).chain([f64::NAN]);
        assert_eq!(Histogram::of_floats(with_nan, 16).unwrap().counts, h.counts);
        let f32_with_nan: Vec<f32> = b.iter().copied().chain([f32::NAN, f32::INFINITY]).collect();
        assert_eq!(Histogram::of_f32(&f32_with_nan, 16).unwrap().counts, h.counts);
    }

    #[test]
    fn frame_bins_follow_numpys_rule_on_every_instruction_level() {
        // Source: numpy's histogram rule (the bin of v is the last whose f64 edge is ≤ v; the
        // top edge in the last bin), as the general f64 path applies it; the vectorised f32
        // positions must agree on any range, near and far from zero, and every vector level
        // must place the same values as the portable build (crate::simd).
        let mut rng = crate::numeric::Rng::new(7);
        for (offset, spread) in [(0.0, 1.0), (300.0, 2000.0), (1e6, 3.0), (-5.0, 1e-3), (7e4, 0.02)] {
            let values: Vec<f32> = (0..20_000)
                .map(|i| (offset + spread * if i % 5 == 0 { 0.0 } else { rng.uniform() }) as f32)
                .collect();
            let fast = Histogram::of_f32(&values, 256).unwrap();
            let slow = Histogram::of_floats(values.iter().map(|&v| v as f64), 256).unwrap();
            assert_eq!(fast.counts, slow.counts, "offset {offset} spread {spread}");
            let mut portable = vec![0u16; values.len()];
            position_block_with(
                crate::simd::Level::Portable,
                &values,
                offset as f32,
                255.0 / spread as f32,
                255,
                1e-3,
                &mut portable,
            );
            for level in crate::simd::levels() {
                let mut wide = vec![0u16; values.len()];
                position_block_with(
                    level,
                    &values,
                    offset as f32,
                    255.0 / spread as f32,
                    255,
                    1e-3,
                    &mut wide,
                );
                assert_eq!(wide, portable, "{level:?}");
            }
        }
    }

    #[test]
    fn constant_image_returns_its_value() {
        // Source: skimage threshold_otsu/li/triangle return the single value of a flat image.
        let h = Histogram::of_integers(&[7, 7, 7]).unwrap();
        assert_eq!(otsu_threshold(&h), 7.0);
        assert_eq!(li_threshold(&h), 7.0);
        assert_eq!(triangle_threshold(&h), 7.0);
    }
}
