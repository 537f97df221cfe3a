//! Background estimation by grey-scale opening with a flat square, for uneven illumination.
//!
//! Why a top-hat and not large-Gaussian subtraction: a Gaussian of a few nucleus diameters
//! averages the nuclei into the "background", so dense regions are dimmed and bright nuclei get
//! negative halos; an opening by a window larger than a nucleus removes nuclei entirely and
//! follows any illumination that varies slowly over the window (a linear ramp is left exactly
//! unchanged away from the borders). The opening is then smoothed by a Gaussian of half a
//! diameter so that its flat-topped plateaus do not print steps into the corrected image.

use super::gaussian::{gaussian_blur, reflect};
use crate::image2d::Image;

/// White top-hat: `image − G(opening(image))`, clamped at 0.
///
/// # Method
/// S. R. Sternberg (1983), "Biomedical image processing", IEEE Computer 16(1):22–34,
/// doi:10.1109/MC.1983.1654163 (background as a grey-scale opening); the square opening is
/// computed with the van Herk / Gil–Werman running extrema, M. van Herk (1992), Pattern
/// Recognit. Lett. 13(7):517–521, doi:10.1016/0167-8655(92)90069-C, and J. Gil & M. Werman
/// (1993), IEEE PAMI 15(5):504–507, doi:10.1109/34.211471.
///
/// Departures: the opening is smoothed with a Gaussian of `smooth_sigma` before subtraction;
/// and for windows of 16 px and more the background is estimated on an image reduced by block
/// minima of `window / 8` px (the background varies slowly by assumption, so a coarse grid
/// holds it), then brought back by bilinear interpolation. That costs a bias of at most
/// `(f − 1)/2` px times the illumination slope, and makes the step about 8x cheaper.
pub fn tophat(image: &Image, window: usize, smooth_sigma: f32) -> Image {
    let mut out = image.clone();
    tophat_in_place(&mut out, window, smooth_sigma);
    out
}

/// [`tophat`] overwriting its input. On the reduced grid the background is interpolated and
/// subtracted in the same pass, without a full-size background image.
pub fn tophat_in_place(image: &mut Image, window: usize, smooth_sigma: f32) {
    let minima = TophatMinima::of_image(image, window);
    tophat_in_place_watched(image, window, smooth_sigma, minima, &mut |_| {});
}

/// [`tophat_in_place`] with the block minima of the reduced grid already taken from `image`'s
/// rows (by [`TophatMinima::take_rows`], e.g. as a filter made them, so that the frame is not
/// read once more for them; `minima` is `None` exactly where [`TophatMinima::new`] is),
/// handing every row of the result to `watch` once, in order, in runs of whole rows, as it is
/// finished.
pub fn tophat_in_place_watched(
    image: &mut Image,
    window: usize,
    smooth_sigma: f32,
    minima: Option<TophatMinima>,
    watch: &mut dyn FnMut(&[f32]),
) {
    let dim = image.dim();
    match minima {
        Some(minima) => {
            let (small, factor) = reduced_background(minima, window, smooth_sigma);
            let values = image.as_slice_mut().expect("standard layout");
            upsample_bilinear_with(&small, factor, dim, values, |row, top, bottom, fy| {
                subtract_blend(row, top, bottom, fy);
                watch(row);
            });
        }
        None => {
            let background = gaussian_blur(&grey_opening_square(image, window), smooth_sigma);
            let values = image.as_slice_mut().expect("standard layout");
            let background = background.as_slice().expect("standard layout");
            values
                .iter_mut()
                .zip(background)
                .for_each(|(v, &b)| *v = (*v - b).max(0.0));
            watch(values);
        }
    }
}

/// The smoothed opening that [`tophat`] subtracts.
pub fn background_estimate(image: &Image, window: usize, smooth_sigma: f32) -> Image {
    match TophatMinima::of_image(image, window) {
        Some(minima) => {
            let (small, factor) = reduced_background(minima, window, smooth_sigma);
            let mut out = Image::zeros(image.dim());
            let values = out.as_slice_mut().expect("standard layout");
            upsample_bilinear_with(&small, factor, image.dim(), values, |row, top, bottom, fy| {
                for ((o, &t), &b) in row.iter_mut().zip(top).zip(bottom) {
                    *o = blend(t, b, fy);
                }
            });
            out
        }
        None => gaussian_blur(&grey_opening_square(image, window), smooth_sigma),
    }
}

/// The background on the grid reduced by block minima (`minima`, of the factor
/// [`TophatMinima::new`] chose for `window`), with that factor.
fn reduced_background(minima: TophatMinima, window: usize, smooth_sigma: f32) -> (Image, usize) {
    let factor = minima.f;
    let small = minima.finish();
    let small_window = (window / factor) | 1;
    let background = gaussian_blur(&grey_opening_square(&small, small_window), smooth_sigma / factor as f32);
    (background, factor)
}

/// The minima over non-overlapping `f` x `f` blocks of an image (edge blocks over what
/// exists), taken from its rows as they come, top to bottom ([`TophatMinima::take_rows`]):
/// the start of [`tophat`]'s reduced background, for windows of 16 px and more, where `f` is
/// `window / 8`.
pub struct TophatMinima {
    w: usize,
    h: usize,
    f: usize,
    /// The column minima of the block row being taken.
    band: Vec<f32>,
    /// Rows of it taken so far.
    band_rows: usize,
    /// Rows of the image taken so far.
    rows_taken: usize,
    /// Each column's minimum with the `f − 1` columns after it, across the block row.
    across: Vec<f32>,
    /// The block minima, a block row at a time.
    out: Vec<f32>,
}

impl TophatMinima {
    /// For a `w` x `h` image and the top-hat's `window`; `None` for windows under 16 px,
    /// whose background is estimated at full size.
    pub fn new((w, h): (usize, usize), window: usize) -> Option<TophatMinima> {
        let f = (window / 8).max(1);
        (f > 1).then(|| TophatMinima {
            w,
            h,
            f,
            band: vec![f32::INFINITY; w],
            band_rows: 0,
            rows_taken: 0,
            across: Vec::with_capacity(w),
            out: Vec::with_capacity(h.div_ceil(f) * w.div_ceil(f)),
        })
    }

    /// Every row of `image` taken at once; `None` as [`TophatMinima::new`].
    fn of_image(image: &Image, window: usize) -> Option<TophatMinima> {
        let (h, w) = image.dim();
        let mut minima = TophatMinima::new((w, h), window)?;
        minima.take_rows(image.as_slice().expect("standard layout"));
        Some(minima)
    }

    /// Takes the image's next whole rows (in order; any number at a time). Down each block
    /// row first (whole rows at a time, vectorised), then across when its last row is in.
    pub fn take_rows(&mut self, rows: &[f32]) {
        for row in rows.chunks_exact(self.w.max(1)) {
            fold_extreme(&mut self.band, row, Extreme::Min);
            self.band_rows += 1;
            self.rows_taken += 1;
            if self.band_rows == self.f || self.rows_taken == self.h {
                self.close_band();
            }
        }
    }

    /// Across the block row: the minimum of `f` values from each column (`INF.min(b₀).min(b₁)…`
    /// in order, clipped at the right edge), taken for every column by `f` whole-row folds of
    /// the row shifted by 0 to `f − 1` (vectorised), then read at each block's first column:
    /// the same values, compared in the same order, as folding each block on its own.
    fn close_band(&mut self) {
        let w = self.w;
        self.across.clear();
        self.across.resize(w, f32::INFINITY);
        for k in 0..self.f.min(w) {
            fold_extreme(&mut self.across[..w - k], &self.band[k..], Extreme::Min);
        }
        self.out.extend(self.across.iter().step_by(self.f));
        self.band.fill(f32::INFINITY);
        self.band_rows = 0;
    }

    /// The block minima, once every row is taken.
    fn finish(self) -> Image {
        let (sh, sw) = (self.h.div_ceil(self.f), self.w.div_ceil(self.f));
        debug_assert_eq!(self.out.len(), sh * sw, "every row taken");
        Image::from_shape_vec((sh, sw), self.out).expect("every row taken")
    }
}

crate::multiversioned! {
    /// The top-hat of one output row: `row` less the background blended from the rows
    /// interpolated across above and below it ([`blend`]), at least 0;
    /// as many pixels per instruction as the level's vectors hold.
    fn subtract_blend / subtract_blend_with(row: &mut [f32], top: &[f32], bottom: &[f32], fy: f32) {
        for ((o, &t), &b) in row.iter_mut().zip(top).zip(bottom) {
            *o = (*o - blend(t, b, fy)).max(0.0);
        }
    }
}

/// The bilinear blend of a value of the row above (`top`) and of the row below (`bottom`),
/// `fy` of the way down.
#[inline(always)]
fn blend(top: f32, bottom: f32, fy: f32) -> f32 {
    top * (1.0 - fy) + bottom * fy
}

/// Bilinear interpolation of a block image back to `(h, w)`, block centres as sample points:
/// each output row is handed to `apply` with the two rows interpolated across that it is
/// blended from and the weight of the lower one, `apply(row, top, bottom, fy)`, whose
/// interpolated values are their [`blend`].
fn upsample_bilinear_with(
    small: &Image,
    f: usize,
    (h, w): (usize, usize),
    out: &mut [f32],
    mut apply: impl FnMut(&mut [f32], &[f32], &[f32], f32),
) {
    let (sh, sw) = small.dim();
    let coordinate = |i: usize, n: usize| {
        let c = ((i as f32 + 0.5) / f as f32 - 0.5).clamp(0.0, (n - 1) as f32);
        let i0 = c.floor() as usize;
        (i0, (i0 + 1).min(n - 1), c - i0 as f32)
    };
    let columns: Vec<(usize, usize, f32)> = (0..w).map(|x| coordinate(x, sw)).collect();
    let src = small.as_slice().expect("standard layout");
    // Each small row interpolated across once (the rows of a block share it), then every
    // output row is a blend of two such rows: the same products and sums as interpolating
    // each pixel from its four samples.
    let across = |r: usize| -> Vec<f32> {
        let line = &src[r * sw..(r + 1) * sw];
        columns
            .iter()
            .map(|&(x0, x1, fx)| line[x0] * (1.0 - fx) + line[x1] * fx)
            .collect()
    };
    let mut cached: [(usize, Vec<f32>); 2] = [(usize::MAX, Vec::new()), (usize::MAX, Vec::new())];
    for (y, row) in out.chunks_exact_mut(w).take(h).enumerate() {
        let (y0, y1, fy) = coordinate(y, sh);
        // Moving down a small row, the bottom row becomes the top one: swapped, not copied.
        if cached[0].0 != y0 && cached[1].0 == y0 {
            cached.swap(0, 1);
        }
        for (slot, r) in [(0, y0), (1, y1)] {
            if cached[slot].0 != r {
                cached[slot] = match cached.iter().position(|c| c.0 == r) {
                    Some(other) => cached[other].clone(),
                    None => (r, across(r)),
                };
            }
        }
        apply(row, &cached[0].1, &cached[1].1, fy);
    }
}

/// Grey-scale opening (erosion then dilation) by a flat `window` x `window` square, borders by
/// reflection, as `scipy.ndimage.grey_opening(size=(window, window))` for odd windows.
///
/// Four passes down columns with two transposes between them: down (min), transpose, down
/// (min: the erosion, transposed), down (max), transpose, down (max). The erosion and dilation
/// each run as in [`min_filter_square`] and [`max_filter_square`], but the erosion's transposed
/// result feeds the dilation directly, saving the two transposes that would turn it back and
/// forth.
pub fn grey_opening_square(image: &Image, window: usize) -> Image {
    let (h, w) = image.dim();
    if h == 0 || w == 0 {
        return image.clone();
    }
    let standard = image.as_standard_layout();
    let src = standard.as_slice().expect("standard layout");
    let columns_eroded = running_extreme_down(src, w, h, window, Extreme::Min);
    let eroded_t = running_extreme_down(&transpose(&columns_eroded, w, h), h, w, window, Extreme::Min);
    let rows_dilated_t = running_extreme_down(&eroded_t, h, w, window, Extreme::Max);
    let opened = running_extreme_down(&transpose(&rows_dilated_t, h, w), w, h, window, Extreme::Max);
    Image::from_shape_vec((h, w), opened).expect("sized buffer")
}

/// Running minimum over a `window` x `window` square (grey erosion).
pub fn min_filter_square(image: &Image, window: usize) -> Image {
    filter_square(image, window, Extreme::Min)
}

/// Running maximum over a `window` x `window` square (reflected borders).
pub fn max_filter_square(image: &Image, window: usize) -> Image {
    filter_square(image, window, Extreme::Max)
}

/// A separable running extreme: down the columns, then across the rows (as the columns of the
/// transposed result). Each pass takes whole rows as vectors of lanes, so the extremes of all
/// columns are carried at once instead of one dependent chain per line. The extreme of a
/// square is that of its columns' extremes in either order, and every value is one of the
/// inputs, so the result does not depend on the order.
fn filter_square(image: &Image, window: usize, extreme: Extreme) -> Image {
    let (h, w) = image.dim();
    if h == 0 || w == 0 {
        return image.clone();
    }
    let standard = image.as_standard_layout();
    let src = standard.as_slice().expect("standard layout");
    let down = running_extreme_down(src, w, h, window, extreme);
    let across = running_extreme_down(&transpose(&down, w, h), h, w, window, extreme);
    Image::from_shape_vec((h, w), transpose(&across, h, w)).expect("sized buffer")
}

/// `src` (`h` rows of `w`) transposed: `w` rows of `h`.
fn transpose(src: &[f32], w: usize, h: usize) -> Vec<f32> {
    const TILE: usize = 32;
    let mut out = vec![0f32; w * h];
    for y0 in (0..h).step_by(TILE) {
        for x0 in (0..w).step_by(TILE) {
            for y in y0..(y0 + TILE).min(h) {
                for x in x0..(x0 + TILE).min(w) {
                    out[x * h + y] = src[y * w + x];
                }
            }
        }
    }
    out
}

/// Running extreme over `window` (odd) rows down every column of `src` (`h` rows of `w`),
/// rows beyond the ends reflected: the van Herk/Gil-Werman block prefix and suffix extremes
/// (M. van Herk (1992), Pattern Recognit. Lett. 13(7):517–521; J. Gil & M. Werman (1993),
/// IEEE PAMI 15(5):504–507), with a whole row as the unit, so each step is a vector operation
/// across the columns ([`fold_extreme`]). The padded rows are cut into blocks of `window`;
/// an output row needs the suffix extreme of its own block and the prefix extreme of that
/// block or the next, so the blocks are taken one at a time and only three blocks' rows are
/// held (in cache) instead of the prefix and suffix extremes of the whole image.
fn running_extreme_down(src: &[f32], w: usize, h: usize, window: usize, extreme: Extreme) -> Vec<f32> {
    let k = window.max(1);
    let r = k / 2;
    let padded = PaddedRows { src, w, h, r, extreme };
    let mut out: Vec<f32> = Vec::with_capacity(h * w);
    let (mut suffix, mut next_prefix) = (Vec::with_capacity(k * w), Vec::with_capacity(k * w));
    let mut prefix = Vec::with_capacity(k * w);
    padded.prefix_of(0..k, &mut prefix);
    for block in (0..h).step_by(k) {
        padded.suffix_reversed_of(block..block + k, &mut suffix);
        // Rows past the block's first reach into the next block's prefix.
        if block + 1 < h {
            padded.prefix_of(block + k..block + 2 * k, &mut next_prefix);
        }
        for y in block..(block + k).min(h) {
            // Rows y .. y + k − 1: the suffix of this block from y, and the prefix of this
            // block whole (for its first row) or of the next block up to row y + k − 1.
            let s = &suffix[(block + k - 1 - y) * w..][..w];
            let p = if y == block {
                &prefix[(k - 1) * w..][..w]
            } else {
                &next_prefix[(y - block - 1) * w..][..w]
            };
            out.extend_from_slice(s);
            fold_extreme(&mut out[y * w..], p, extreme);
        }
        std::mem::swap(&mut prefix, &mut next_prefix);
    }
    out
}

/// The rows of an image padded by `r` reflected rows at either end, and the extreme
/// [`running_extreme_down`] folds them with.
struct PaddedRows<'a> {
    src: &'a [f32],
    w: usize,
    h: usize,
    r: usize,
    extreme: Extreme,
}

impl PaddedRows<'_> {
    /// Padded row `i` (source row `i − r`, reflected).
    fn row(&self, i: usize) -> &[f32] {
        let y = reflect(i as isize - self.r as isize, self.h);
        &self.src[y * self.w..(y + 1) * self.w]
    }

    /// The prefix extremes of a block of padded rows (cut at the last padded row), in order,
    /// into `into`: each row the extreme of the block's rows up to it.
    fn prefix_of(&self, rows: std::ops::Range<usize>, into: &mut Vec<f32>) {
        self.folded(rows.start..rows.end.min(self.h + 2 * self.r), into);
    }

    /// The suffix extremes of a block of padded rows, last row first, into `into`: each row
    /// the extreme of the block's rows from it to the block's end.
    fn suffix_reversed_of(&self, rows: std::ops::Range<usize>, into: &mut Vec<f32>) {
        self.folded((rows.start..rows.end.min(self.h + 2 * self.r)).rev(), into);
    }

    /// Padded rows in `order`, each folded with the ones before it, into `into` (built row by
    /// row without zeroing first).
    fn folded(&self, order: impl Iterator<Item = usize>, into: &mut Vec<f32>) {
        let w = self.w;
        into.clear();
        for (j, i) in order.enumerate() {
            if j == 0 {
                into.extend_from_slice(self.row(i));
            } else {
                into.extend_from_within((j - 1) * w..j * w);
                fold_extreme(&mut into[j * w..], self.row(i), self.extreme);
            }
        }
    }
}

/// Which extreme a running filter keeps.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Extreme {
    /// The smallest value (erosion).
    Min,
    /// The largest value (dilation).
    Max,
}

crate::multiversioned! {
    /// `into[i]` = the `extreme` of `into[i]` and `values[i]`, on the widest instruction level:
    /// exact (one of the two values), so the same on every level.
    fn fold_extreme / fold_extreme_with(into: &mut [f32], values: &[f32], extreme: Extreme) {
        match extreme {
            Extreme::Max => into.iter_mut().zip(values).for_each(|(o, &v)| *o = o.max(v)),
            Extreme::Min => into.iter_mut().zip(values).for_each(|(o, &v)| *o = o.min(v)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_row_top_hat_is_the_blend_subtracted_on_every_level() {
        // Source: the definition, one pixel at a time (IEEE 754: each product and sum rounded
        // as a scalar one; `f32::max` returns the number when one side is NaN), against every
        // instruction level, for lengths around the vectors' widths.
        let specials = [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, -0.0, 1e30];
        let mut rng = crate::numeric::Rng::new(11);
        let mut value = |i: usize| {
            if i % 7 == 3 {
                specials[i % specials.len()]
            } else {
                (rng.uniform() * 200.0 - 50.0) as f32
            }
        };
        for n in [0usize, 1, 5, 8, 9, 16, 23, 32, 47, 100] {
            let row: Vec<f32> = (0..n).map(&mut value).collect();
            let top: Vec<f32> = (0..n).map(&mut value).collect();
            let bottom: Vec<f32> = (0..n).map(&mut value).collect();
            for fy in [0.0f32, 0.3, 0.875] {
                let want: Vec<u32> = (0..n)
                    .map(|i| (row[i] - (top[i] * (1.0 - fy) + bottom[i] * fy)).max(0.0).to_bits())
                    .collect();
                for level in crate::simd::levels() {
                    let mut got = row.clone();
                    subtract_blend_with(level, &mut got, &top, &bottom, fy);
                    let got: Vec<u32> = got.iter().map(|v| v.to_bits()).collect();
                    assert_eq!(got, want, "{level:?} {n} {fy}");
                }
            }
        }
    }

    #[test]
    fn extremes_fold_as_min_and_max_on_every_level() {
        // Source: f32::min and f32::max, value by value, on every instruction level; lengths
        // that are and are not a multiple of a vector, values with ties.
        for n in [0usize, 1, 7, 16, 33, 70] {
            let into: Vec<f32> = (0..n).map(|i| ((i * 37) % 11) as f32 - 5.0).collect();
            let values: Vec<f32> = (0..n).map(|i| ((i * 53) % 13) as f32 - 6.0).collect();
            for extreme in [Extreme::Min, Extreme::Max] {
                let pick = if extreme == Extreme::Max { f32::max } else { f32::min };
                let want: Vec<f32> = into.iter().zip(&values).map(|(&a, &b)| pick(a, b)).collect();
                for level in crate::simd::levels() {
                    let mut got = into.clone();
                    fold_extreme_with(level, &mut got, &values, extreme);
                    assert_eq!(got, want, "n {n}, {extreme:?}, {level:?}");
                }
            }
        }
    }

    #[test]
    fn running_extreme_matches_brute_force() {
        // Source: definition of the running minimum, checked by direct search.
        let line: Vec<f32> = (0..23).map(|i| ((i * 7919) % 13) as f32).collect();
        for k in [1usize, 3, 5, 7, 9] {
            let fast = running_extreme_down(&line, 1, line.len(), k, Extreme::Min);
            for (i, &v) in fast.iter().enumerate() {
                let r = (k / 2) as isize;
                let want = (-r..=r)
                    .map(|d| line[reflect(i as isize + d, line.len())])
                    .fold(f32::INFINITY, f32::min);
                assert_eq!(v, want, "k={k} i={i}");
            }
        }
    }

    #[test]
    fn square_extremes_match_brute_force() {
        // Source: definition of the grey erosion and dilation by a flat square with reflected
        // borders (scipy.ndimage mode 'reflect'), by direct search over each window; images
        // narrower and shorter than the window (reflected more than once) included.
        for (h, w) in [(1usize, 1usize), (2, 9), (7, 3), (17, 23)] {
            let img = Image::from_shape_fn((h, w), |(y, x)| ((y * 31 + x * 7919) % 29) as f32 - 11.0);
            for k in [1usize, 3, 5, 9, 15] {
                let r = (k / 2) as isize;
                for (pick, got) in [
                    (f32::min as fn(f32, f32) -> f32, min_filter_square(&img, k)),
                    (f32::max, max_filter_square(&img, k)),
                ] {
                    for ((y, x), &v) in got.indexed_iter() {
                        let want = (-r..=r)
                            .flat_map(|dy| (-r..=r).map(move |dx| (dy, dx)))
                            .map(|(dy, dx)| img[[reflect(y as isize + dy, h), reflect(x as isize + dx, w)]])
                            .reduce(pick)
                            .unwrap();
                        assert_eq!(v, want, "{h}x{w} k={k} ({y},{x})");
                    }
                }
            }
        }
    }

    #[test]
    fn the_opening_is_the_dilation_of_the_erosion() {
        // Source: definition of the grey opening, the dilation of the erosion by the same
        // element (P. Soille (2003), Morphological Image Analysis, ch. 4; chapter from memory),
        // built here from the two filters checked by brute force above.
        for (h, w) in [(1usize, 1usize), (5, 12), (17, 23)] {
            let img = Image::from_shape_fn((h, w), |(y, x)| ((y * 37 + x * 7919) % 31) as f32);
            for k in [1usize, 3, 7, 13] {
                let want = max_filter_square(&min_filter_square(&img, k), k);
                assert_eq!(grey_opening_square(&img, k), want, "{h}x{w} k={k}");
            }
        }
    }

    #[test]
    fn reduced_background_follows_a_gentle_ramp() {
        // Source: own derivation (doc comment of `tophat`): block minima of f px bias the
        // background by at most (f-1)/2 px x slope in each axis; here f = 3, slope 0.05 per px
        // in x and 0.02 in y, so the residual off the spots stays below 0.05 + 0.02 + rounding,
        // and a 9x9 spot of +100 keeps its height within that.
        let img = Image::from_shape_fn((120, 160), |(y, x)| {
            let spot = if (50..59).contains(&y) && (70..79).contains(&x) {
                100.0
            } else {
                0.0
            };
            200.0 + 0.05 * x as f32 + 0.02 * y as f32 + spot
        });
        let out = tophat(&img, 29, 0.0);
        assert!((out[[54, 74]] - 100.0).abs() < 0.1, "{}", out[[54, 74]]);
        // Interior points only: within a window of the border the reflection makes any opening
        // lag the ramp (fixtures/methods/check_values.md §3 shows the same artefact for a disk).
        for (y, x) in [(20, 20), (100, 140), (60, 20), (30, 120)] {
            assert!(out[[y, x]] < 0.1, "({y},{x}): {}", out[[y, x]]);
        }
    }

    #[test]
    fn tophat_keeps_a_spot_on_a_ramp_whole() {
        // Source: a flat opening leaves a monotone ramp unchanged (erosion and dilation shift
        // it by the same amount), so the top-hat of ramp + spot is the spot alone, 10.
        // Compare fixtures/methods/check_values.md §3: a disk(3) top-hat gives 9.5 because a discrete disk loses
        // slope next to the spot; a square does not.
        let img = Image::from_shape_fn((21, 41), |(y, x)| {
            0.5 * x as f32
                + if (9..=11).contains(&y) && (19..=21).contains(&x) {
                    10.0
                } else {
                    0.0
                }
        });
        let out = tophat(&img, 7, 0.0);
        assert!((out[[10, 20]] - 10.0).abs() < 1e-4);
        assert!(out[[10, 10]].abs() < 1e-4);
        assert!(out[[3, 30]].abs() < 1e-4);
    }

    #[test]
    fn block_minima_taken_row_by_row_are_each_blocks_minimum() {
        // Source: the definition, the minimum of each f x f block (edge blocks over what
        // exists) by direct search; rows handed over one at a time, all at once, and in pieces
        // of several rows; sizes that are and are not multiples of the block, ties included.
        let mut rng = crate::numeric::Rng::new(5);
        for (w, h, window) in [
            (37usize, 29usize, 16usize),
            (64, 64, 24),
            (5, 40, 40),
            (100, 3, 16),
            (17, 17, 130),
        ] {
            let values: Vec<f32> = (0..w * h).map(|_| (rng.uniform() * 20.0).floor() as f32).collect();
            let minima = TophatMinima::new((w, h), window).expect("windows of 16 px and more are reduced");
            let f = minima.f;
            let (sh, sw) = (h.div_ceil(f), w.div_ceil(f));
            let mut want = vec![f32::INFINITY; sh * sw];
            for y in 0..h {
                for x in 0..w {
                    let o = &mut want[(y / f) * sw + x / f];
                    *o = o.min(values[y * w + x]);
                }
            }
            for piece_rows in [1usize, 2, 7, h] {
                let mut m = TophatMinima::new((w, h), window).expect("reduced");
                values.chunks(piece_rows * w).for_each(|rows| m.take_rows(rows));
                let got = m.finish();
                assert_eq!(got.dim(), (sh, sw));
                assert_eq!(
                    got.as_slice().expect("standard layout"),
                    &want[..],
                    "{w}x{h}, f {f}, {piece_rows} rows"
                );
            }
        }
        assert!(
            TophatMinima::new((64, 64), 15).is_none(),
            "windows under 16 px are not reduced"
        );
    }
}
