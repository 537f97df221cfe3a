//! Automatic estimate of the typical nucleus diameter by scale selection on the
//! scale-normalised Laplacian of Gaussian.

use crate::image2d::Image;
use crate::preprocess::gaussian_laplace;

/// The σ at which `−σ²·∇²G_σ * I` peaks at one pixel, over the given σ values.
///
/// # Method
/// T. Lindeberg (1998), "Feature detection with automatic scale selection", IJCV
/// 30(2):79–116, doi:10.1023/A:1008045108935 (γ = 1 normalisation for blobs). For a flat disc
/// of radius r the peak is at σ* = r/√2.
pub fn best_scale_at(image: &Image, row: usize, col: usize, sigmas: &[f64]) -> f64 {
    let mut best = (f64::NEG_INFINITY, sigmas[0]);
    for &s in sigmas {
        let r = -(s * s) * gaussian_laplace(image, s as f32)[[row, col]] as f64;
        if r > best.0 {
            best = (r, s);
        }
    }
    best.1
}

/// Estimates the typical nucleus diameter (px) of a frame: the median, over the strongest
/// blob responses, of the selected scale, converted by d = 2√2·σ* (METHODS.md §6, approach a).
/// Work is bounded: a central crop of at most 512x512 pixels, scales from 1.5 to 24 px in
/// steps of 8%, large scales computed on 2x-binned images. Returns `None` when no blob stands
/// out (an empty frame).
pub fn estimate_diameter(image: &Image) -> Option<f64> {
    let crop = central_crop(image, 512);
    let (h, w) = crop.dim();
    let mut best = Image::from_elem((h, w), f32::NEG_INFINITY);
    let mut best_sigma = Image::zeros((h, w));
    let mut sigma = 1.5f64;
    while sigma <= 24.0f64.min(w.min(h) as f64 / 4.0) {
        let level = ((sigma / 3.0).log2().floor().max(0.0)) as u32;
        let factor = 1usize << level;
        let binned = bin(&crop, factor);
        let s = sigma / factor as f64;
        let response = gaussian_laplace(&binned, s as f32);
        for y in 0..h {
            for x in 0..w {
                let (by, bx) = (
                    (y / factor).min(response.nrows() - 1),
                    (x / factor).min(response.ncols() - 1),
                );
                let r = -(s * s) as f32 * response[[by, bx]];
                if r > best[[y, x]] {
                    best[[y, x]] = r;
                    best_sigma[[y, x]] = sigma as f32;
                }
            }
        }
        sigma *= 1.08;
    }
    let peaks = strongest_peaks(&best, 5, 300);
    if peaks.is_empty() {
        return None;
    }
    let mut sigmas: Vec<f64> = peaks.iter().map(|&(y, x)| best_sigma[[y, x]] as f64).collect();
    sigmas.sort_by(f64::total_cmp);
    Some(2.0 * std::f64::consts::SQRT_2 * sigmas[sigmas.len() / 2])
}

fn central_crop(image: &Image, max_side: usize) -> Image {
    let (h, w) = image.dim();
    let (ch, cw) = (h.min(max_side), w.min(max_side));
    let (y0, x0) = ((h - ch) / 2, (w - cw) / 2);
    image.slice(ndarray::s![y0..y0 + ch, x0..x0 + cw]).to_owned()
}

/// Mean over `factor` x `factor` blocks (edge blocks averaged over what exists).
fn bin(image: &Image, factor: usize) -> Image {
    if factor == 1 {
        return image.clone();
    }
    let (h, w) = image.dim();
    let (bh, bw) = (h.div_ceil(factor), w.div_ceil(factor));
    let mut sum = Image::zeros((bh, bw));
    let mut count = Image::zeros((bh, bw));
    for ((y, x), &v) in image.indexed_iter() {
        sum[[y / factor, x / factor]] += v;
        count[[y / factor, x / factor]] += 1.0;
    }
    sum / count
}

/// Local maxima over a (2r+1)² window whose response exceeds a quarter of the 99.9th
/// percentile, strongest first, at most `limit`.
fn strongest_peaks(response: &Image, r: usize, limit: usize) -> Vec<(usize, usize)> {
    let (h, w) = response.dim();
    let mut sorted: Vec<f32> = response.iter().copied().filter(|v| v.is_finite()).collect();
    if sorted.is_empty() {
        return Vec::new();
    }
    sorted.sort_by(f32::total_cmp);
    let high = sorted[(sorted.len() - 1) * 999 / 1000];
    let floor = 0.25 * high;
    if high <= 0.0 || high.is_nan() {
        return Vec::new();
    }
    let mut peaks = Vec::new();
    for y in r..h.saturating_sub(r) {
        for x in r..w.saturating_sub(r) {
            let v = response[[y, x]];
            if v < floor {
                continue;
            }
            let window = response.slice(ndarray::s![y - r..=y + r, x - r..=x + r]);
            if window.iter().all(|&u| u <= v) {
                peaks.push((v, y, x));
            }
        }
    }
    peaks.sort_by(|a, b| b.0.total_cmp(&a.0).then((a.1, a.2).cmp(&(b.1, b.2))));
    peaks.into_iter().take(limit).map(|(_, y, x)| (y, x)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn disk(size: usize, r: f64) -> Image {
        let c = (size / 2) as f64;
        Image::from_shape_fn((size, size), |(y, x)| {
            if (y as f64 - c).powi(2) + (x as f64 - c).powi(2) <= r * r {
                1.0
            } else {
                0.0
            }
        })
    }

    #[test]
    fn scale_selection_matches_scipy_check_values() {
        // Source: METHODS.md §6 (scipy 1.17.1 ndi.gaussian_laplace, centre pixel of an 81x81
        // image, σ grid 2.00–10.00 step 0.05): disk r=6 -> 4.25, r=8 -> 5.60, r=10 -> 7.10.
        let sigmas: Vec<f64> = (0..=160).map(|i| 2.0 + 0.05 * i as f64).collect();
        for (r, want) in [(6.0, 4.25), (8.0, 5.60), (10.0, 7.10)] {
            let got = best_scale_at(&disk(81, r), 40, 40, &sigmas);
            assert!((got - want).abs() < 0.051, "r={r}: σ*={got}, scipy {want}");
        }
    }
}
