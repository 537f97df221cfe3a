//! The single-channel float image used by every per-pixel stage: an `ndarray` of shape
//! `(rows, columns)` = `(y, x)`.

/// A single-channel image of `f32`, indexed `[[row, column]]`.
pub type Image = ndarray::Array2<f32>;

/// Builds an [`Image`] from a row-major buffer.
///
/// # Panics
/// If `data.len() != width * height` (a caller bug).
pub fn from_vec(width: usize, height: usize, data: Vec<f32>) -> Image {
    ndarray::Array2::from_shape_vec((height, width), data).expect("buffer matches shape")
}

/// The mean of each `factor` x `factor` block of a `w` x `h` image (blocks at the right and
/// bottom edges may be smaller): the downscale of the movie and of the review page alike, and
/// the diameter estimate's binning. Each block's values are added in raster order, then
/// divided by the block's pixel count.
pub fn box_average(raw: &[f32], w: usize, h: usize, factor: usize) -> Vec<f32> {
    let factor = factor.max(1);
    let (bw, bh) = (w.div_ceil(factor), h.div_ceil(factor));
    let mut sum = vec![0f32; bw * bh];
    // Row by row, each block's sum accumulated in the same order as pixel by pixel (rows
    // down, then across), without a division per pixel.
    for (y, row) in raw.chunks_exact(w.max(1)).take(h).enumerate() {
        let sums = &mut sum[(y / factor) * bw..(y / factor + 1) * bw];
        match factor {
            2 => add_blocks::<2>(sums, row),
            3 => add_blocks::<3>(sums, row),
            4 => add_blocks::<4>(sums, row),
            _ => {
                for (s, block) in sums.iter_mut().zip(row.chunks(factor)) {
                    for &v in block {
                        *s += v;
                    }
                }
            }
        }
    }
    // Divided by each block's pixel count (across times down, as the count is defined), row by
    // row: no integer division per block to find its column and row.
    let side = |b: usize, n: usize| (n - b * factor).min(factor) as f32;
    let across: Vec<f32> = (0..bw).map(|bx| side(bx, w)).collect();
    let mut mean = Vec::with_capacity(sum.len());
    for (by, row) in sum.chunks_exact(bw.max(1)).enumerate() {
        let down = side(by, h);
        mean.extend(row.iter().zip(&across).map(|(s, &a)| s / (a * down)));
    }
    mean
}

/// Adds each run of `F` values of `row` to its block's sum, in order (a last, shorter run
/// too): the common factors with the block width known to the compiler, so the whole blocks
/// are added as vectors (the same additions in the same order).
fn add_blocks<const F: usize>(sums: &mut [f32], row: &[f32]) {
    let whole = row.len() / F;
    for (s, block) in sums.iter_mut().zip(row.chunks_exact(F)) {
        for &v in block {
            *s += v;
        }
    }
    if let Some(s) = sums.get_mut(whole) {
        for &v in &row[whole * F..] {
            *s += v;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn box_average_adds_in_the_same_order_for_every_factor() {
        // Source: definition (each block's values added row by row, left to right, then
        // divided by the block's pixel count), written out pixel by pixel: the same bits for
        // the factors with their own loop (2, 3, 4) and the general one (5), widths and
        // heights that leave partial blocks.
        let (w, h) = (23usize, 11usize);
        let raw: Vec<f32> = (0..w * h).map(|i| ((i * 7919) % 1000) as f32 * 0.37 + 0.01).collect();
        for factor in 1..=5usize {
            let (bw, bh) = (w.div_ceil(factor), h.div_ceil(factor));
            let mut want = vec![0f32; bw * bh];
            for by in 0..bh {
                for bx in 0..bw {
                    let mut s = 0f32;
                    let mut n = 0;
                    for y in by * factor..((by + 1) * factor).min(h) {
                        for x in bx * factor..((bx + 1) * factor).min(w) {
                            s += raw[y * w + x];
                            n += 1;
                        }
                    }
                    want[by * bw + bx] = s / n as f32;
                }
            }
            let got = box_average(&raw, w, h, factor);
            assert!(
                got.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits()),
                "factor {factor}"
            );
        }
    }

    #[test]
    fn box_average_takes_the_mean_of_each_block() {
        // Hand-computed: a 3 x 2 image in blocks of 2, the right block one column wide:
        // (0 + 10 + 30 + 40) / 4 = 20 and (20 + 50) / 2 = 35.
        assert_eq!(
            box_average(&[0.0, 10.0, 20.0, 30.0, 40.0, 50.0], 3, 2, 2),
            vec![20.0, 35.0]
        );
    }
}
