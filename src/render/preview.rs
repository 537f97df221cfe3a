//! The tuning preview: one frame, contrast-stretched, with every object's outline in a colour
//! and a caption with the frame number and the object count.

use super::font::{draw_text, text_width};
use image::{Rgb, RgbImage};
use imageproc::drawing::draw_filled_rect_mut;
use imageproc::rect::Rect;

/// Outline colours, our own choice: twelve saturated hues that stand out on grey and from
/// each other; objects cycle through them by label.
pub const PALETTE: [[u8; 3]; 12] = [
    [255, 196, 0],
    [0, 220, 255],
    [255, 64, 160],
    [120, 255, 60],
    [255, 120, 40],
    [150, 110, 255],
    [0, 255, 170],
    [255, 255, 90],
    [255, 80, 80],
    [60, 160, 255],
    [210, 255, 140],
    [255, 150, 220],
];

/// A linear display mapping: the 0.5th percentile of a reference image to black and the
/// 99.8th to white (common practice for fluorescence display: ignores hot pixels and the
/// darkest noise).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DisplayRange {
    lo: f32,
    span: f32,
}

impl DisplayRange {
    /// The range of the finite values of `reference`.
    pub fn from_values(reference: &[f32]) -> DisplayRange {
        let rank = |n: usize, q: f64| ((n - 1) as f64 * q).round() as usize;
        let ranks = |n: usize| [rank(n, 0.005), rank(n, 0.998)];
        // A 16-bit frame's samples are whole numbers: counted, not selected (about a tenth of
        // the time for a 1024² frame, which the movie pass waits for before it starts).
        if reference.len() >= 1 << 16 {
            if let Some([lo, hi]) = ranked_by_counting(reference, ranks(reference.len())) {
                return DisplayRange::spanning(lo, hi);
            }
        }
        let mut finite: Vec<f32> = reference.iter().copied().filter(|v| v.is_finite()).collect();
        if finite.is_empty() {
            return DisplayRange { lo: 0.0, span: 1.0 };
        }
        // The two order statistics by selection, not a full sort (the same values: the k-th
        // smallest in the total order is one element whatever the method).
        let [low_rank, high_rank] = ranks(finite.len());
        let (below, &mut hi, _) = finite.select_nth_unstable_by(high_rank, f32::total_cmp);
        let lo = match below.len() {
            // Every value before `high_rank` is at most `hi`; the low rank is among them.
            n if low_rank < n => *below.select_nth_unstable_by(low_rank, f32::total_cmp).1,
            _ => hi,
        };
        DisplayRange::spanning(lo, hi)
    }

    /// `lo` to black and `hi` to white (a span of 1 when `hi` is not above `lo`).
    fn spanning(lo: f32, hi: f32) -> DisplayRange {
        DisplayRange {
            lo,
            span: if hi > lo { hi - lo } else { 1.0 },
        }
    }

    /// `v` mapped to [0, 1] (non-finite values to 0).
    pub fn unit(&self, v: f32) -> f32 {
        if v.is_finite() {
            ((v - self.lo) / self.span).clamp(0.0, 1.0)
        } else {
            0.0
        }
    }

    /// Each value as a display level 0..=`top`: [`DisplayRange::unit`] scaled and rounded
    /// half up by conversion (a C library `roundf` call per pixel otherwise, ~2% of a default
    /// run), in a loop that vectorises (the review page and the movie map every pixel of every
    /// frame). Equal to `round` for these non-negative values but one: 0.5 − 2⁻²⁵, the largest
    /// `f32` below a half, which `+ 0.5` rounds up to 1.
    pub fn levels(&self, values: &[f32], top: u8) -> Vec<u8> {
        let mut out = vec![0u8; values.len()];
        display_levels(values, self.lo, self.span, top as f32, &mut out);
        out
    }
}

/// The values of `values` at the two 0-based `ranks` of their ascending order (the lower rank
/// first), found by counting when every value is a whole number from 0 to 65535 (the bits of
/// one, so not −0); `None` otherwise.
fn ranked_by_counting(values: &[f32], ranks: [usize; 2]) -> Option<[f32; 2]> {
    let mut counts = vec![0u32; 1 << 16];
    for &v in values {
        let k = v as u32;
        if k > u32::from(u16::MAX) || (k as f32).to_bits() != v.to_bits() {
            return None;
        }
        counts[k as usize] += 1;
    }
    let mut found = [0f32; 2];
    let (mut seen, mut next) = (0usize, 0usize);
    for (k, &c) in counts.iter().enumerate() {
        seen += c as usize;
        while next < 2 && ranks[next] < seen {
            found[next] = k as f32;
            next += 1;
        }
        if next == 2 {
            break;
        }
    }
    Some(found)
}

crate::multiversioned! {
    /// [`DisplayRange::levels`] for the range `lo`, `lo + span`: [`DisplayRange::unit`] with
    /// the clamp written as `max` then `min` (which also send a NaN quotient to 0, as a
    /// saturating conversion would), then the conversion of a value known to lie in
    /// 0.5..=`top` + 0.5 done without saturation (the saturating one kept the loop scalar).
    fn display_levels / display_levels_with(values: &[f32], lo: f32, span: f32, top: f32, out: &mut [u8]) {
        for (o, &v) in out.iter_mut().zip(values) {
            // Not `clamp`: it keeps a NaN, and the conversion below must never see one.
            #[allow(clippy::manual_clamp)]
            let unit = if v.is_finite() { ((v - lo) / span).max(0.0).min(1.0) } else { 0.0 };
            let rounded = unit * top + 0.5;
            // SAFETY: `unit` is in 0..=1 (f32::max drops a NaN), so `rounded` is finite and
            // within 0.5..=top + 0.5 ≤ 255.5, where truncation to u32 is defined.
            *o = unsafe { rounded.to_int_unchecked::<u32>() } as u8;
        }
    }
}

/// Maps intensities to 8 bits with the [`DisplayRange`] of the values themselves.
pub fn stretch_to_u8(values: &[f32]) -> Vec<u8> {
    let range = DisplayRange::from_values(values);
    values.iter().map(|&v| (range.unit(v) * 255.0) as u8).collect()
}

/// Renders the preview: grey frame, outlines (object pixels with a 4-neighbour of another
/// label) coloured by label, and a caption `t=FRAME n=COUNT` in the top-left corner.
pub fn outline_preview(
    values: &[f32],
    labels: &[u32],
    width: usize,
    height: usize,
    frame: usize,
    count: usize,
) -> RgbImage {
    let grey = stretch_to_u8(values);
    let mut img = RgbImage::from_fn(width as u32, height as u32, |x, y| {
        let g = grey[y as usize * width + x as usize];
        Rgb([g, g, g])
    });
    for y in 0..height {
        for x in 0..width {
            let l = labels[y * width + x];
            if l != 0 && is_edge(labels, width, height, x, y) {
                img.put_pixel(x as u32, y as u32, Rgb(PALETTE[(l as usize - 1) % PALETTE.len()]));
            }
        }
    }
    caption(&mut img, &format!("t={frame} n={count}"));
    img
}

/// Whether object pixel (x, y) lies on its object's outline: on the image border or next to a
/// pixel of another label (4-neighbourhood). Inside the image the four neighbours are compared
/// at once, none waiting on the comparison before it: the movie's outline search from the
/// objects' pixels waits on the label image's loads (1.70% → 1.49% of a default run's samples).
#[inline]
pub fn is_edge(labels: &[u32], width: usize, height: usize, x: usize, y: usize) -> bool {
    if x == 0 || y == 0 || x + 1 == width || y + 1 == height {
        return true;
    }
    let p = y * width + x;
    let l = labels[p];
    (labels[p - 1] != l) | (labels[p + 1] != l) | (labels[p - width] != l) | (labels[p + width] != l)
}

/// Writes `text` in white on a black box in the top-left corner.
pub fn caption(img: &mut RgbImage, text: &str) {
    let scale = if img.width() >= 512 { 3 } else { 2 };
    let (w, h) = (text_width(text, scale) + 2 * scale, 7 * scale);
    if w > img.width() || h > img.height() {
        return;
    }
    draw_filled_rect_mut(img, Rect::at(0, 0).of_size(w, h), Rgb([0, 0, 0]));
    let (iw, ih) = (img.width(), img.height());
    draw_text(text, scale, scale, scale, |x, y| {
        if x < iw && y < ih {
            img.put_pixel(x, y, Rgb([255, 255, 255]));
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn display_levels_round_as_the_standard_library_does() {
        // Source: f32::round (half away from zero) from Rust's standard library, against the
        // conversion `levels` uses, on 200 000 values across the range and on exact halves.
        let range = DisplayRange::from_values(&[0.0, 1000.0]);
        let mut rng = crate::numeric::Rng::new(3);
        let values = (0..200_000).map(|_| rng.range(-50.0, 1050.0) as f32);
        let halves = (0..=510).map(|k| k as f32 * 0.5 / 255.0 * range.span + range.lo);
        let values: Vec<f32> = values.chain(halves).collect();
        for top in [239u8, 255] {
            for (&v, got) in values.iter().zip(range.levels(&values, top)) {
                let want = (range.unit(v) * top as f32).round() as u8;
                assert_eq!(got, want, "{v} at {top}");
            }
        }
    }

    #[test]
    fn every_instruction_level_maps_as_the_standard_rounding() {
        // Source: f32::round (half away from zero) from Rust's standard library, of
        // `unit` scaled, one value at a time, for the mapping on every instruction level:
        // random values across and beyond the range, exact halves, infinities, NaN and a range
        // so wide that the quotient overflows.
        let mut rng = crate::numeric::Rng::new(5);
        for range in [
            DisplayRange::from_values(&[0.0, 1000.0]),
            DisplayRange::from_values(&[-3e38, 3e38]),
        ] {
            let mut values: Vec<f32> = (0..5000).map(|_| rng.range(-50.0, 1050.0) as f32).collect();
            values.extend((0..=510).map(|k| k as f32 * 0.5 / 255.0 * range.span + range.lo));
            values.extend([
                f32::INFINITY,
                f32::NEG_INFINITY,
                f32::NAN,
                3e38,
                -3e38,
                -0.0,
                f32::MIN_POSITIVE,
            ]);
            for top in [239u8, 255] {
                let want: Vec<u8> = (values.iter())
                    .map(|&v| (range.unit(v) * top as f32).round() as u8)
                    .collect();
                assert_eq!(range.levels(&values, top), want, "top {top}");
                for level in crate::simd::levels() {
                    let mut got = vec![0u8; values.len()];
                    display_levels_with(level, &values, range.lo, range.span, top as f32, &mut got);
                    assert_eq!(got, want, "{level:?} top {top}");
                }
            }
        }
    }

    #[test]
    fn the_display_range_takes_the_percentiles_of_the_sorted_values() {
        // Source: definition (the finite values sorted, the entries at round((n − 1)·q) for
        // q = 0.005 and 0.998, as numpy.quantile with method 'nearest' except at exact
        // halves), on random values with repeats and on lengths from 1 up; from 65536 values
        // on, 16-bit samples (whole numbers to 65535, counted) and samples that are not (a
        // fraction, −0, 65536, a NaN, an infinity: selected).
        let by_definition = |values: &[f32]| {
            let mut sorted: Vec<f32> = values.iter().copied().filter(|v| v.is_finite()).collect();
            sorted.sort_by(f32::total_cmp);
            let at = |q: f64| sorted[((sorted.len() - 1) as f64 * q).round() as usize];
            let (lo, hi) = (at(0.005), at(0.998));
            DisplayRange {
                lo,
                span: if hi > lo { hi - lo } else { 1.0 },
            }
        };
        let mut rng = crate::numeric::Rng::new(9);
        let mut cases: Vec<Vec<f32>> = (1..40)
            .chain([1000, 4097])
            .map(|n| (0..n).map(|_| (rng.uniform() * 50.0).floor() as f32).collect())
            .collect();
        for n in [65_536usize, 70_001] {
            let samples: Vec<f32> = (0..n).map(|_| (rng.uniform() * 65_536.0).floor() as f32).collect();
            cases.push(samples.clone());
            let mut extremes = samples.clone();
            extremes[..400].fill(0.0);
            extremes[n - 400..].fill(65_535.0);
            cases.push(extremes);
            cases.push(samples.iter().map(|v| (v / 64.0).floor()).collect());
            for odd in [0.5, -0.0, 65_536.0, f32::NAN, f32::INFINITY, -1.0] {
                let mut c = samples.clone();
                c[n / 2] = odd;
                cases.push(c);
            }
        }
        for values in &cases {
            assert_eq!(
                DisplayRange::from_values(values),
                by_definition(values),
                "n = {}",
                values.len()
            );
        }
    }
}
