//! Preparing a frame for thresholding: Gaussian smoothing against shot noise, and background
//! subtraction against uneven illumination. Thresholds live in `segment`.

mod background;
mod gaussian;
mod noise;

pub use background::{
    background_estimate, grey_opening_square, max_filter_square, min_filter_square, tophat, tophat_in_place,
};
pub use gaussian::{
    convolve_separable, filters_on_this_thread, gaussian_blur, gaussian_derivative_kernel, gaussian_kernel,
    gaussian_laplace, gaussian_radius, laplace_by_bands, LaplaceKernels,
};
pub use noise::{immerkaer_sigma, robust_noise_sigma, MEDIAN_ABS_OF_STANDARD_NORMAL};

use crate::image2d::Image;
use crate::params::{BackgroundMethod, SegmentParams};

/// Smooths, then removes the background as the parameters ask. The result is the image that
/// thresholds see; it is non-negative after background subtraction.
pub fn prepare(raw: &Image, params: &SegmentParams) -> Image {
    let mut smoothed = gaussian_blur(raw, params.smoothing_sigma_px as f32);
    match params.background {
        BackgroundMethod::None => {}
        BackgroundMethod::Tophat => tophat_in_place(
            &mut smoothed,
            background_window(params.diameter_px),
            (params.diameter_px / 2.0) as f32,
        ),
    }
    smoothed
}

/// Side of the square structuring element for background estimation: an odd number of pixels
/// about twice the nucleus diameter, so that a window always reaches past a nucleus into the
/// background around it (common practice: clearly larger than the objects).
pub fn background_window(diameter_px: f64) -> usize {
    let side = (2.0 * diameter_px).ceil() as usize;
    side | 1
}
