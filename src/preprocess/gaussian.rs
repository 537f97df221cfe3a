//! Separable Gaussian filtering and Gaussian derivatives, with the boundary and kernel
//! conventions of `scipy.ndimage` (mode `reflect`, radius `int(4σ + 0.5)`), so results can be
//! checked against it.

use crate::image2d::Image;

/// Normalised Gaussian weights `exp(-x²/2σ²)` for `x = -r..=r`, `r = int(4σ + 0.5)`.
pub fn gaussian_kernel(sigma: f32) -> Vec<f32> {
    gaussian_derivative_kernel(sigma, 0)
}

/// Half-width `r = int(4σ + 0.5)` of the kernels: how far a filtered pixel reads.
pub fn gaussian_radius(sigma: f32) -> usize {
    (4.0 * sigma as f64 + 0.5) as usize
}

/// Kernel of the Gaussian (order 0) or its second derivative (order 2), built as scipy's
/// `_gaussian_kernel1d`: the sampled Gaussian is normalised to sum 1, then multiplied by the
/// derivative polynomial (for order 2: `x²/σ⁴ - 1/σ²`).
///
/// # Panics
/// For orders other than 0 and 2 (a caller bug).
pub fn gaussian_derivative_kernel(sigma: f32, order: u8) -> Vec<f32> {
    let radius = gaussian_radius(sigma) as i64;
    let sigma = sigma as f64;
    let phi: Vec<f64> = (-radius..=radius)
        .map(|x| (-0.5 * (x * x) as f64 / (sigma * sigma)).exp())
        .collect();
    let sum: f64 = phi.iter().sum();
    let s2 = sigma * sigma;
    (-radius..=radius)
        .zip(&phi)
        .map(|(x, p)| {
            let p = p / sum;
            let x = x as f64;
            (match order {
                0 => p,
                2 => p * (x * x / (s2 * s2) - 1.0 / s2),
                _ => panic!("only orders 0 and 2 are implemented"),
            }) as f32
        })
        .collect()
}

/// Gaussian smoothing with standard deviation `sigma` pixels along both axes.
///
/// # Method
/// Separable convolution with a sampled Gaussian; boundary by half-sample reflection.
/// (C. F. Gauss's kernel; implementation follows the scipy.ndimage conventions.)
pub fn gaussian_blur(image: &Image, sigma: f32) -> Image {
    if sigma <= 0.0 {
        return image.clone();
    }
    let k = gaussian_kernel(sigma);
    convolve_separable(image, &k, &k)
}

/// The Laplacian of Gaussian, `∂²/∂x² + ∂²/∂y²` of `G_σ * I`, as `scipy.ndimage.gaussian_laplace`.
///
/// # Method
/// D. Marr & E. Hildreth (1980), "Theory of edge detection", Proc. R. Soc. Lond. B
/// 207:187–217, doi:10.1098/rspb.1980.0020; computed as two separable passes.
pub fn gaussian_laplace(image: &Image, sigma: f32) -> Image {
    let g0 = gaussian_derivative_kernel(sigma, 0);
    let g2 = gaussian_derivative_kernel(sigma, 2);
    let mut a = convolve_separable(image, &g2, &g0);
    let b = convolve_separable(image, &g0, &g2);
    a += &b;
    a
}

/// Convolves rows with `kernel_x` and columns with `kernel_y` (odd-length, centred kernels),
/// reflecting at the borders (`d c b a | a b c d | d c b a`).
pub fn convolve_separable(image: &Image, kernel_x: &[f32], kernel_y: &[f32]) -> Image {
    let (h, w) = image.dim();
    let mut across = Image::zeros((h, w));
    let rx = kernel_x.len() / 2;
    let mut padded = vec![0f32; w + 2 * rx];
    let across_rows = across.as_slice_mut().expect("standard layout");
    for (src, dst) in image.rows().into_iter().zip(across_rows.chunks_exact_mut(w)) {
        let src = src.as_slice().expect("standard layout");
        padded[rx..rx + w].copy_from_slice(src);
        for i in (0..rx).chain(rx + w..w + 2 * rx) {
            padded[i] = src[reflect(i as isize - rx as isize, w)];
        }
        // Accumulated tap by tap over the whole row (the same order of additions as a dot
        // product per pixel, so results do not change, but the loop vectorises).
        for (k, &weight) in kernel_x.iter().enumerate() {
            let shifted = &padded[k..k + w];
            dst.iter_mut().zip(shifted).for_each(|(o, &v)| *o += weight * v);
        }
    }
    let ry = kernel_y.len() / 2;
    let mut out = Image::zeros((h, w));
    let src = across.as_slice().expect("standard layout");
    let dst = out.as_slice_mut().expect("standard layout");
    for y in 0..h {
        let row = &mut dst[y * w..(y + 1) * w];
        for (k, &weight) in kernel_y.iter().enumerate() {
            let sy = reflect(y as isize + k as isize - ry as isize, h);
            let line = &src[sy * w..(sy + 1) * w];
            row.iter_mut().zip(line).for_each(|(o, &v)| *o += weight * v);
        }
    }
    out
}

/// Index into `0..n` under half-sample symmetric reflection, for any offset.
pub(crate) fn reflect(i: isize, n: usize) -> usize {
    let n = n as isize;
    let period = 2 * n;
    let m = i.rem_euclid(period);
    (if m < n { m } else { period - 1 - m }) as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reflection_matches_scipy_reflect_mode() {
        // Source: scipy.ndimage mode 'reflect' definition, (d c b a | a b c d | d c b a).
        let idx: Vec<usize> = (-4..8).map(|i| reflect(i, 4)).collect();
        assert_eq!(idx, vec![3, 2, 1, 0, 0, 1, 2, 3, 3, 2, 1, 0]);
    }

    #[test]
    fn kernel_sums_and_second_derivative_moments() {
        // Source: calculus of the Gaussian: ∫G = 1, ∫G'' = 0 and ∫G''(x)·x² dx = 2
        // (integration by parts twice), so the sampled kernels must match these moments.
        let k = gaussian_kernel(2.0);
        assert_eq!(k.len(), 2 * 8 + 1);
        assert!((k.iter().sum::<f32>() - 1.0).abs() < 1e-6);
        let d2 = gaussian_derivative_kernel(2.0, 2);
        let r = (d2.len() / 2) as f32;
        let m0: f32 = d2.iter().sum();
        let m2: f32 = d2
            .iter()
            .enumerate()
            .map(|(i, v)| v * (i as f32 - r).powi(2) / 2.0)
            .sum();
        assert!(m0.abs() < 2e-3, "{m0}");
        assert!((m2 - 1.0).abs() < 5e-3, "{m2}");
    }
}
