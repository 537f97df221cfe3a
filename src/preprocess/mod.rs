//! Preparing a frame for thresholding: Gaussian smoothing against shot noise, and background
//! subtraction against uneven illumination. Thresholds live in `segment`.

mod background;
mod gaussian;
mod noise;

pub use background::{
    background_estimate, grey_opening_square, max_filter_square, min_filter_square, tophat, tophat_in_place,
    tophat_in_place_watched, TophatMinima,
};
pub use gaussian::{
    convolve_separable, filters_on_this_thread, gaussian_blur, gaussian_blur_watched, gaussian_derivative_kernel,
    gaussian_kernel, gaussian_laplace, gaussian_radius, give_back_image, laplace_by_bands, LaplaceKernels,
};
pub use noise::{immerkaer_sigma, robust_noise_sigma, MEDIAN_ABS_OF_STANDARD_NORMAL};

use crate::image2d::Image;
use crate::params::{BackgroundMethod, SegmentParams};

/// Smooths, then removes the background as the parameters ask. The result is the image that
/// thresholds see; it is non-negative after background subtraction.
///
/// The top-hat's block minima are taken from the smoothed rows as the filter makes them
/// ([`gaussian_blur_watched`]), rather than by reading the smoothed frame once more.
pub fn prepare(raw: &Image, params: &SegmentParams) -> Image {
    prepare_watched(raw, params, &mut |_| {})
}

/// [`prepare`], handing every row of the result to `watch` once, in order, in runs of whole
/// rows, as it is finished (while it is still in the cache): a later stage that reads every
/// value (the threshold's range) then needs no pass of its own over the frame.
pub fn prepare_watched(raw: &Image, params: &SegmentParams, watch: &mut dyn FnMut(&[f32])) -> Image {
    let sigma = params.smoothing_sigma_px as f32;
    match params.background {
        BackgroundMethod::None => gaussian_blur_watched(raw, sigma, watch),
        BackgroundMethod::Tophat => {
            let (h, w) = raw.dim();
            let window = background_window(params.diameter_px);
            let mut minima = TophatMinima::new((w, h), window);
            let mut smoothed = gaussian_blur_watched(raw, sigma, &mut |rows| {
                if let Some(m) = minima.as_mut() {
                    m.take_rows(rows);
                }
            });
            tophat_in_place_watched(&mut smoothed, window, (params.diameter_px / 2.0) as f32, minima, watch);
            smoothed
        }
    }
}

/// Side of the square structuring element for background estimation: an odd number of pixels
/// about twice the nucleus diameter, so that a window always reaches past a nucleus into the
/// background around it (common practice: clearly larger than the objects).
pub fn background_window(diameter_px: f64) -> usize {
    let side = (2.0 * diameter_px).ceil() as usize;
    side | 1
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_prepared_frame_is_the_top_hat_of_the_smoothed_frame() {
        // Source: gaussian_blur and tophat, each checked against scipy.ndimage elsewhere:
        // prepare takes the top-hat's block minima from the filter's rows as it makes them,
        // which must give the same bits as the two steps one after the other, on the filter's
        // banded path (kept on this thread) and its parallel one, for a reduced window (16 px
        // and more) and a full-size one.
        let mut rng = crate::numeric::Rng::new(9);
        let (w, h) = (300usize, 170usize);
        let raw = Image::from_shape_vec(
            (h, w),
            (0..w * h)
                .map(|i| (i % 97) as f32 + (rng.uniform() * 50.0) as f32)
                .collect(),
        )
        .expect("sized");
        for diameter_px in [14.0, 6.0] {
            let params = SegmentParams::for_diameter(diameter_px);
            assert_eq!(params.background, BackgroundMethod::Tophat);
            let window = background_window(diameter_px);
            let want = tophat(
                &gaussian_blur(&raw, params.smoothing_sigma_px as f32),
                window,
                (diameter_px / 2.0) as f32,
            );
            assert_eq!(prepare(&raw, &params), want, "diameter {diameter_px}, in parallel");
            assert_eq!(
                filters_on_this_thread(|| prepare(&raw, &params)),
                want,
                "diameter {diameter_px}, on this thread"
            );
            // What is watched is every row of the result once, in order, in whole rows.
            let mut watched = Vec::new();
            let prepared = prepare_watched(&raw, &params, &mut |rows| {
                assert_eq!(rows.len() % w, 0, "whole rows");
                watched.extend_from_slice(rows);
            });
            assert_eq!(prepared, want, "diameter {diameter_px}, watched");
            assert_eq!(
                watched,
                want.as_slice().unwrap(),
                "diameter {diameter_px}, the rows watched"
            );
        }
    }
}
