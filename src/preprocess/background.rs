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
/// Departure: the opening is smoothed with a Gaussian of `smooth_sigma` before subtraction.
pub fn tophat(image: &Image, window: usize, smooth_sigma: f32) -> Image {
    let background = gaussian_blur(&grey_opening_square(image, window), smooth_sigma);
    let mut out = image - &background;
    out.mapv_inplace(|v| v.max(0.0));
    out
}

/// Grey-scale opening (erosion then dilation) by a flat `window` x `window` square, borders by
/// reflection, as `scipy.ndimage.grey_opening(size=(window, window))` for odd windows.
pub fn grey_opening_square(image: &Image, window: usize) -> Image {
    max_filter_square(&min_filter_square(image, window), window)
}

/// Grey-scale closing (dilation then erosion) by a flat square.
pub fn grey_closing_square(image: &Image, window: usize) -> Image {
    min_filter_square(&max_filter_square(image, window), window)
}

/// Running minimum over a `window` x `window` square (grey erosion).
pub fn min_filter_square(image: &Image, window: usize) -> Image {
    filter_square(image, window, f32::min)
}

/// Running maximum over a `window` x `window` square (grey dilation).
pub fn max_filter_square(image: &Image, window: usize) -> Image {
    filter_square(image, window, f32::max)
}

fn filter_square(image: &Image, window: usize, pick: fn(f32, f32) -> f32) -> Image {
    let mut rows = image.clone();
    for mut row in rows.rows_mut() {
        let line: Vec<f32> = row.to_vec();
        running_extreme(&line, window, pick, row.as_slice_mut().expect("contiguous row"));
    }
    let mut out = rows.clone();
    let mut column = vec![0f32; rows.nrows()];
    let mut result = vec![0f32; rows.nrows()];
    for x in 0..rows.ncols() {
        for (y, c) in column.iter_mut().enumerate() {
            *c = rows[[y, x]];
        }
        running_extreme(&column, window, pick, &mut result);
        for (y, r) in result.iter().enumerate() {
            out[[y, x]] = *r;
        }
    }
    out
}

/// van Herk / Gil–Werman: extreme over a centred window in O(1) per sample, using block-wise
/// prefix and suffix extremes of the reflected line.
fn running_extreme(line: &[f32], window: usize, pick: fn(f32, f32) -> f32, out: &mut [f32]) {
    let n = line.len();
    let k = window.max(1);
    let r = k / 2;
    let padded: Vec<f32> = (0..n + 2 * r)
        .map(|i| line[reflect(i as isize - r as isize, n)])
        .collect();
    let m = padded.len();
    let mut prefix = padded.clone();
    let mut suffix = padded.clone();
    for i in 1..m {
        if i % k != 0 {
            prefix[i] = pick(prefix[i - 1], padded[i]);
        }
    }
    for i in (0..m.saturating_sub(1)).rev() {
        if (i + 1) % k != 0 {
            suffix[i] = pick(suffix[i + 1], padded[i]);
        }
    }
    for (i, o) in out.iter_mut().enumerate() {
        let end = i + k - 1;
        *o = pick(suffix[i], prefix[end]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn running_extreme_matches_brute_force() {
        // Source: definition of the running minimum, checked by direct search.
        let line: Vec<f32> = (0..23).map(|i| ((i * 7919) % 13) as f32).collect();
        for k in [1usize, 3, 5, 7, 9] {
            let mut fast = vec![0f32; line.len()];
            running_extreme(&line, k, f32::min, &mut fast);
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
    fn tophat_keeps_a_spot_on_a_ramp_whole() {
        // Source: a flat opening leaves a monotone ramp unchanged (erosion and dilation shift
        // it by the same amount), so the top-hat of ramp + spot is the spot alone, 10.
        // Compare METHODS.md §3: a disk(3) top-hat gives 9.5 because a discrete disk loses
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
}
