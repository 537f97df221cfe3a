//! Exact Euclidean distance transform: for every foreground pixel, the distance to the nearest
//! background pixel. Outside the image is not background (as `scipy.ndimage.distance_transform_edt`).

/// Squared distance used for "no background anywhere on this line yet".
const FAR: f64 = f64::INFINITY;

/// Lower envelope of parabolas `(q − p)²·s² + f(p)`, in O(n).
///
/// # Method
/// P. F. Felzenszwalb & D. P. Huttenlocher (2012), "Distance Transforms of Sampled Functions",
/// Theory of Computing 8:415–428, doi:10.4086/toc.2012.v008a019 (algorithm DT(f), with the
/// parabola intersection `s` and the pop rule `s ≤ z[k]`); `spacing` scales the axis.
pub fn squared_distance_1d(f: &[f64], spacing: f64, out: &mut [f64]) {
    let mut scratch = Envelope::default();
    scratch.transform(f, spacing, out);
}

/// Reusable buffers of the lower envelope (one allocation per image, not per line).
#[derive(Default)]
struct Envelope {
    v: Vec<usize>,
    z: Vec<f64>,
}

impl Envelope {
    fn transform(&mut self, f: &[f64], spacing: f64, out: &mut [f64]) {
        self.transform_range(f, spacing, out, 0..f.len());
    }

    /// [`Envelope::transform`] written at `range` only, from the parabolas of `range` only
    /// (indices stay the line's, so every intersection is computed as on the whole line).
    /// Exact when no parabola outside the range can be lowest inside it: when the range is
    /// bounded on each side by a zero of `f` or the line's end (a parabola beyond a zero lies
    /// above that zero's parabola everywhere past it).
    fn transform_range(&mut self, f: &[f64], spacing: f64, out: &mut [f64], range: std::ops::Range<usize>) {
        let n = range.len();
        let s2 = spacing * spacing;
        self.v.resize(n, 0);
        self.z.resize(n + 1, 0.0);
        let (v, z) = (&mut self.v, &mut self.z);
        let mut k = 0usize;
        let first = match f[range.clone()].iter().position(|x| x.is_finite()) {
            Some(i) => range.start + i,
            None => {
                out[range].iter_mut().for_each(|o| *o = FAR);
                return;
            }
        };
        v[0] = first;
        z[0] = f64::NEG_INFINITY;
        z[1] = f64::INFINITY;
        for q in first + 1..range.end {
            if !f[q].is_finite() {
                continue;
            }
            loop {
                let p = v[k];
                let s =
                    ((f[q] + s2 * (q * q) as f64) - (f[p] + s2 * (p * p) as f64)) / (2.0 * s2 * (q as f64 - p as f64));
                if s <= z[k] {
                    // z[0] is -inf, so this pops only while k > 0.
                    k -= 1;
                    continue;
                }
                k += 1;
                v[k] = q;
                z[k] = s;
                z[k + 1] = f64::INFINITY;
                break;
            }
        }
        let mut k = 0;
        for (q, o) in out.iter_mut().enumerate().take(range.end).skip(range.start) {
            while z[k + 1] < q as f64 {
                k += 1;
            }
            let d = q as f64 - v[k] as f64;
            *o = s2 * d * d + f[v[k]];
        }
    }
}

/// Squared Euclidean distance to the nearest background pixel, for a row-major mask
/// (`true` = foreground); `spacing = (row, column)` physical steps. Background pixels get 0.
/// Without any background pixel the result is infinite.
///
/// The column pass of a binary mask needs no envelope: the distance to the nearest background
/// pixel in the same column comes from one downward and one upward scan over whole rows
/// (phase 1 of A. Meijster, J. B. T. M. Roerdink & W. H. Hesselink (2000), "A general
/// algorithm for computing distance transforms in linear time", in Mathematical Morphology and
/// its Applications to Image and Signal Processing, Kluwer, pp. 331–340), which reads memory in
/// order; the row pass is the envelope above, or, at unit spacing over a short run of a row
/// (an object's, in its window), a comparison of every pair of columns, which gives the same
/// whole numbers.
pub fn squared_edt(mask: &[bool], width: usize, height: usize, spacing: (f64, f64)) -> Vec<f64> {
    let g = column_distances(mask, width, height);
    let row_step2 = spacing.0 * spacing.0;
    let mut out = vec![0f64; width * height];
    let mut line = vec![0f64; width];
    let mut envelope = Envelope::default();
    for y in 0..height {
        let column = &g[y * width..(y + 1) * width];
        // Background pixels are 0; each run of foreground is worked out from the parabolas
        // between the background pixels around it (or the row's ends), which are the only
        // ones that can be lowest there: the same numbers as the whole row's envelope, for the
        // fraction of the row the nuclei cover.
        let row = &mut out[y * width..(y + 1) * width];
        let background = |x: usize| !mask[y * width + x];
        let mut x = 0;
        while x < width {
            if background(x) {
                x += 1;
                continue;
            }
            let start = x.saturating_sub(1);
            let mut end = x;
            while end < width && !background(end) {
                end += 1;
            }
            let range = start..(end + 1).min(width);
            if spacing != (1.0, 1.0) || !nearest_in_short_run(column, row, range.clone()) {
                // The envelope reads the column distances of its range only, as squares.
                for (l, &d) in line[range.clone()].iter_mut().zip(&column[range.clone()]) {
                    *l = if d == u32::MAX {
                        FAR
                    } else {
                        row_step2 * (d as f64) * (d as f64)
                    };
                }
                envelope.transform_range(&line, spacing.1, row, range);
            }
            x = end;
        }
    }
    out
}

crate::multiversioned! {
    /// Each pixel's distance in pixels to the nearest background pixel of its column (0 on the
    /// background, `u32::MAX` where the column has none): phase 1 of Meijster et al. (2000), one
    /// downward and one upward scan over whole rows, each a select per pixel (so that it
    /// vectorises; on the wider instruction levels, whose unsigned minimum and saturating
    /// addition the baseline lacks).
    fn column_distances / column_distances_with(mask: &[bool], width: usize, height: usize) -> Vec<u32> {
        let mut g = vec![0u32; width * height];
        for (d, &m) in g.iter_mut().zip(mask).take(width) {
            *d = if m { u32::MAX } else { 0 };
        }
        for y in 1..height {
            let (above, rest) = g.split_at_mut(y * width);
            let (above, row) = (&above[(y - 1) * width..], &mut rest[..width]);
            let mask = &mask[y * width..(y + 1) * width];
            for ((d, &a), &m) in row.iter_mut().zip(above).zip(mask) {
                *d = if m { a.saturating_add(1) } else { 0 };
            }
        }
        for y in (0..height.saturating_sub(1)).rev() {
            let (row, below) = g[y * width..(y + 2) * width].split_at_mut(width);
            for (d, &b) in row.iter_mut().zip(below.iter()) {
                *d = (*d).min(b.saturating_add(1));
            }
        }
        g
    }
}

/// Ranges of a row up to this long (a run of foreground and the background pixel either
/// side) take [`nearest_in_short_run`] instead of the envelope.
const SHORT_RUN: usize = 32;

/// The longest column distance [`nearest_in_short_run`] takes: its square plus the square of a
/// [`SHORT_RUN`] stays below 2³¹, the mark of a column without background.
const SHORT_RUN_COLUMN: u32 = 46_000;

/// No background in the column, in [`nearest_in_short_run`]'s squares.
const NO_BACKGROUND: u32 = 1 << 31;

/// The row pass over `range` at unit spacing by trying every column, when the range is at
/// most [`SHORT_RUN`] long and its column distances at most [`SHORT_RUN_COLUMN`] (else
/// `false`, nothing written): `out[q]` = min over `p` in `range` of `(q − p)² + column[p]²`.
/// In whole numbers, so exact; the envelope's result is the same exact minimum (a sum of two
/// squares of integers, exact in `f64`), so the same bits. For an object's rows, a dozen or
/// two pixels long, comparing every pair (in 32-bit lanes, a whole [`SHORT_RUN`] at a time)
/// costs less than the envelope's divisions.
fn nearest_in_short_run(column: &[u32], out: &mut [f64], range: std::ops::Range<usize>) -> bool {
    let column = &column[range.clone()];
    if column.len() > SHORT_RUN || column.iter().any(|&d| d != u32::MAX && d > SHORT_RUN_COLUMN) {
        return false;
    }
    // Past the range, and where a column has no background, a square no minimum takes.
    let mut squares = [NO_BACKGROUND; SHORT_RUN];
    for (s, &d) in squares.iter_mut().zip(column) {
        if d != u32::MAX {
            *s = d * d;
        }
    }
    nearest_of_squares(&squares, &mut out[range]);
    true
}

crate::multiversioned! {
    /// `out[q]` = min over `p` of `(q − p)² + squares[p]` (`f64::INFINITY` where that is at
    /// least [`NO_BACKGROUND`]), for `q` below `out.len()` (at most [`SHORT_RUN`]).
    fn nearest_of_squares / nearest_of_squares_with(squares: &[u32; SHORT_RUN], out: &mut [f64]) {
        for (q, o) in out.iter_mut().enumerate() {
            let mut nearest = u32::MAX;
            for (p, &f) in squares.iter().enumerate() {
                let d = q as i32 - p as i32;
                nearest = nearest.min(f + (d * d) as u32);
            }
            *o = if nearest >= NO_BACKGROUND { FAR } else { f64::from(nearest) };
        }
    }
}

/// Euclidean distance transform with unit spacing, as `f32`.
pub fn edt(mask: &[bool], width: usize, height: usize) -> Vec<f32> {
    distances_of_squares(&squared_edt(mask, width, height, (1.0, 1.0)))
}

/// The distances of squared distances: `√d` rounded to `f32` (0 where `d` is not above 0),
/// the same bits as `d.sqrt() as f32`. Where every `d` is an `f32` value (the whole numbers
/// below 2²⁴ an object's squared distances are), the root is taken in `f32`, eight to a
/// vector instead of two or four: the root of an `f32` value correctly rounded to `f32` is
/// the `f64` root rounded to `f32`, since 53 ≥ 2·24 + 2 bits make that double rounding
/// harmless (S. A. Figueroa (1995), "When is double rounding innocuous?", ACM SIGNUM
/// Newsletter 30(3):21–26; volume, pages and the bound from memory, the test checks the
/// claim on every whole number below 2²² and beyond).
pub fn distances_of_squares(squared: &[f64]) -> Vec<f32> {
    let mut out = vec![0f32; squared.len()];
    distances_of_squares_into(squared, &mut out);
    out
}

crate::multiversioned! {
    /// [`distances_of_squares`] into `out` (as long as `squared`).
    fn distances_of_squares_into / distances_of_squares_into_with(squared: &[f64], out: &mut [f32]) {
        let in_f32 = squared.iter().fold(true, |all, &d| all & (f64::from(d as f32) == d));
        if in_f32 {
            for (o, &d) in out.iter_mut().zip(squared) {
                let d = d as f32;
                *o = if d > 0.0 { d.sqrt() } else { 0.0 };
            }
        } else {
            for (o, &d) in out.iter_mut().zip(squared) {
                *o = if d > 0.0 { d.sqrt() as f32 } else { 0.0 };
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_distances_by_definition_on_every_level() {
        // Source: definition (phase 1 of Meijster et al. 2000: each pixel's distance to the
        // nearest background pixel of its column, u32::MAX where the column has none), brute
        // force on random masks, columns without background included, every instruction level.
        let mut rng = crate::numeric::Rng::new(5);
        for (w, h, density) in [
            (1usize, 1usize, 0.5),
            (13, 1, 0.7),
            (1, 17, 0.8),
            (37, 29, 0.9),
            (64, 40, 0.97),
        ] {
            let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() < density).collect();
            let want: Vec<u32> = (0..w * h)
                .map(|p| {
                    let (x, y) = (p % w, p / w);
                    (0..h)
                        .filter(|&v| !mask[v * w + x])
                        .map(|v| v.abs_diff(y) as u32)
                        .min()
                        .unwrap_or(u32::MAX)
                })
                .collect();
            for level in crate::simd::levels() {
                assert_eq!(column_distances_with(level, &mask, w, h), want, "{level:?} {w} x {h}");
            }
        }
    }

    #[test]
    fn distances_of_squares_are_the_f64_roots_rounded() {
        // Source: IEEE 754 (square root correctly rounded in each format) and Figueroa
        // (1995): √d in f32 equals √d in f64 rounded to f32 for d an f32 value; checked here
        // against `d.sqrt() as f32` bit for bit on every whole number below 2²², spread ones
        // up to 2²⁴ and past it, values no f32 holds (the f64 path), 0, −0, ∞ and NaN, on
        // every instruction level.
        let mut values: Vec<f64> = (0..1u32 << 22).map(f64::from).collect();
        values.extend((0..200_000u64).map(|i| ((i * 2_654_435_761) % (1 << 25)) as f64));
        let odd = [0.1, 2.5e-8, 16_777_217.0, 1e300, -0.0, -4.0, f64::INFINITY, f64::NAN];
        let reference = |v: &[f64]| -> Vec<u32> {
            v.iter()
                .map(|&d| if d > 0.0 { (d.sqrt() as f32).to_bits() } else { 0 })
                .collect()
        };
        for level in crate::simd::levels() {
            for chunk in values.chunks(4099).chain(std::iter::once(&odd[..])) {
                let mut got = vec![f32::NAN; chunk.len()];
                distances_of_squares_into_with(level, chunk, &mut got);
                let got: Vec<u32> = got.iter().map(|v| v.to_bits()).collect();
                assert_eq!(got, reference(chunk), "{level:?}");
            }
        }
        // One value no f32 holds sends its whole slice down the f64 path, alike.
        let mixed = [4.0, 16_777_217.0, 9.0, 2.0];
        assert_eq!(
            distances_of_squares(&mixed)
                .iter()
                .map(|v| v.to_bits())
                .collect::<Vec<_>>(),
            reference(&mixed)
        );
    }

    #[test]
    fn runs_of_foreground_give_the_whole_rows_numbers() {
        // Source: the whole-row lower envelope (squared_distance_1d over each row of column
        // distances found by brute force) is the definition the run-by-run pass must equal,
        // bit for bit, also with an anisotropic spacing; random masks, most pixels foreground
        // in some rows and background in others, and a row without background.
        let (w, h) = (53, 31);
        let mut rng = crate::numeric::Rng::new(11);
        let mut mask: Vec<bool> = (0..w * h)
            .map(|i| rng.uniform() < if (i / w) % 3 == 0 { 0.9 } else { 0.3 })
            .collect();
        mask[4 * w..5 * w].iter_mut().for_each(|m| *m = true);
        for spacing in [(1.0, 1.0), (0.65, 1.3)] {
            let fast = squared_edt(&mask, w, h, spacing);
            for y in 0..h {
                let line: Vec<f64> = (0..w)
                    .map(|x| {
                        let rows = (0..h).filter(|&r| !mask[r * w + x]).map(|r| r.abs_diff(y)).min();
                        rows.map_or(FAR, |d| spacing.0 * spacing.0 * (d as f64) * (d as f64))
                    })
                    .collect();
                let mut whole = vec![0.0; w];
                squared_distance_1d(&line, spacing.1, &mut whole);
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(
                    bits(&fast[y * w..(y + 1) * w]),
                    bits(&whole),
                    "row {y}, spacing {spacing:?}"
                );
            }
        }
    }

    #[test]
    fn short_runs_take_the_nearest_square_on_every_level() {
        // Source: the definition, min over p of (q − p)² + squares[p], for random squares (some
        // marking a column without background) on every instruction level, and a run whose
        // columns all lack background giving infinity.
        let mut rng = crate::numeric::Rng::new(3);
        for case in 0..200 {
            let len = 1 + case % SHORT_RUN;
            let mut squares = [NO_BACKGROUND; SHORT_RUN];
            for s in squares.iter_mut().take(len) {
                let d = (rng.next_u64() % 60) as u32;
                *s = if d == 59 && case % 3 == 0 { NO_BACKGROUND } else { d * d };
            }
            let want: Vec<f64> = (0..len)
                .map(|q| {
                    (0..len)
                        .filter(|&p| squares[p] < NO_BACKGROUND)
                        .map(|p| f64::from(squares[p]) + (q as f64 - p as f64).powi(2))
                        .fold(FAR, f64::min)
                })
                .collect();
            for level in crate::simd::levels() {
                let mut got = vec![0.0; len];
                nearest_of_squares_with(level, &squares, &mut got);
                assert_eq!(got, want, "case {case}, {level:?}");
            }
        }
        let mut got = [0.0; 5];
        nearest_of_squares(&[NO_BACKGROUND; SHORT_RUN], &mut got);
        assert_eq!(got, [FAR; 5]);
    }

    #[test]
    fn one_dimensional_check_value() {
        // Source: fixtures/methods/check_values.md §4, FH 1D on [0,∞,∞,∞,0,∞,∞] -> [0,1,4,1,0,1,4].
        let f = [0.0, FAR, FAR, FAR, 0.0, FAR, FAR];
        let mut out = [0.0; 7];
        squared_distance_1d(&f, 1.0, &mut out);
        assert_eq!(out, [0.0, 1.0, 4.0, 1.0, 0.0, 1.0, 4.0]);
    }

    fn methods_mask() -> Vec<bool> {
        let mut m = vec![true; 35];
        m[2 * 7 + 3] = false;
        m[0] = false;
        m
    }

    #[test]
    fn two_dimensional_check_values() {
        // Source: fixtures/methods/check_values.md §4 (scipy 1.17.1 distance_transform_edt), 5x7 ones with zeros
        // at (2,3) and (0,0).
        let d = squared_edt(&methods_mask(), 7, 5, (1.0, 1.0));
        let want_row0 = [0.0, 1.0, 2.0, 2.0, 2.236068, 2.828427, 3.605551];
        let want_row4 = [3.605551, 2.828427, 2.236068, 2.0, 2.236068, 2.828427, 3.605551];
        for x in 0..7 {
            assert!((d[x].sqrt() - want_row0[x]).abs() < 1e-6);
            assert!((d[28 + x].sqrt() - want_row4[x]).abs() < 1e-6);
        }
        // sampling=(2,1): rows two units apart.
        let d = squared_edt(&methods_mask(), 7, 5, (2.0, 1.0));
        let want_row0 = [0.0, 1.0, 2.0, 3.0, 4.0, 4.472136, 5.0];
        let want_row4 = [5.0, 4.472136, 4.123106, 4.0, 4.123106, 4.472136, 5.0];
        for x in 0..7 {
            assert!((d[x].sqrt() - want_row0[x]).abs() < 1e-6);
            assert!((d[28 + x].sqrt() - want_row4[x]).abs() < 1e-6);
        }
    }
}
