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

/// [`box_average`] of whole-number samples below 2^16 as decoded (a 16-bit frame), without
/// their `f32` copy: the same values to the last bit, since every partial sum of a block (at
/// most 16 x 16 values below 2^16) is a whole number below 2^24, which `f32` holds exactly
/// whatever the order of the additions. The movie's downscale reads the frame's 2 bytes per
/// pixel instead of the 4 of its converted image, and adds them as integers. `None` for a
/// factor above 16, whose blocks could exceed that.
pub fn box_average_of_samples(raw: &[u16], w: usize, h: usize, factor: usize) -> Option<Vec<f32>> {
    let factor = factor.max(1);
    if factor > 16 {
        return None;
    }
    let (bw, bh) = (w.div_ceil(factor), h.div_ceil(factor));
    let side = |b: usize, n: usize| (n - b * factor).min(factor) as f32;
    let across: Vec<f32> = (0..bw).map(|bx| side(bx, w)).collect();
    let mut sums = vec![0u32; bw];
    let mut mean = Vec::with_capacity(bw * bh);
    for (by, rows) in raw.get(..w * h)?.chunks(w.max(1) * factor).enumerate() {
        sums.fill(0);
        for row in rows.chunks_exact(w.max(1)) {
            add_samples_by_blocks(&mut sums, row, factor);
        }
        let down = side(by, h);
        mean.extend(sums.iter().zip(&across).map(|(&s, &a)| s as f32 / (a * down)));
    }
    Some(mean)
}

crate::multiversioned! {
    /// Adds each run of `factor` samples of `row` to its block's sum (a last, shorter run too),
    /// the common factors known to the compiler so that whole blocks are added as vectors.
    fn add_samples_by_blocks / add_samples_by_blocks_with(sums: &mut [u32], row: &[u16], factor: usize) {
        match factor {
            2 => add_sample_blocks::<2>(sums, row),
            3 => add_sample_blocks::<3>(sums, row),
            4 => add_sample_blocks::<4>(sums, row),
            _ => {
                for (s, block) in sums.iter_mut().zip(row.chunks(factor)) {
                    *s += block.iter().map(|&v| u32::from(v)).sum::<u32>();
                }
            }
        }
    }
}

/// [`add_samples_by_blocks`] for a factor `F` known when compiled.
#[inline(always)]
fn add_sample_blocks<const F: usize>(sums: &mut [u32], row: &[u16]) {
    let whole = row.len() / F;
    for (s, block) in sums.iter_mut().zip(row.chunks_exact(F)) {
        *s += block.iter().map(|&v| u32::from(v)).sum::<u32>();
    }
    if let Some(s) = sums.get_mut(whole) {
        *s += row[whole * F..].iter().map(|&v| u32::from(v)).sum::<u32>();
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
    fn box_average_of_samples_is_the_definitions_to_the_last_bit() {
        // Source: definition (each block's values added row by row, left to right, in f32,
        // then divided by the block's pixel count), written out pixel by pixel on the samples
        // converted to f32: the same bits for 16-bit samples up to the top of their range
        // (where the sums come nearest 2^24), every factor up to 16, widths and heights that
        // leave partial blocks; none above 16, or for fewer samples than the frame holds.
        let mut rng = crate::numeric::Rng::new(5);
        for (w, h) in [(37usize, 23usize), (16, 16), (5, 40), (1, 1), (133, 6)] {
            for top in [1000.0, 65535.0] {
                let raw: Vec<u16> = (0..w * h)
                    .map(|i| {
                        if i % 5 == 0 {
                            65535
                        } else {
                            (rng.uniform() * top) as u16
                        }
                    })
                    .collect();
                for factor in 1..=16usize {
                    let (bw, bh) = (w.div_ceil(factor), h.div_ceil(factor));
                    let mut want = vec![0f32; bw * bh];
                    for by in 0..bh {
                        for bx in 0..bw {
                            let (mut s, mut n) = (0f32, 0);
                            for y in by * factor..((by + 1) * factor).min(h) {
                                for x in bx * factor..((bx + 1) * factor).min(w) {
                                    s += raw[y * w + x] as f32;
                                    n += 1;
                                }
                            }
                            want[by * bw + bx] = s / n as f32;
                        }
                    }
                    let got = box_average_of_samples(&raw, w, h, factor).expect("factor up to 16");
                    assert_eq!(got.len(), want.len());
                    assert!(
                        got.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits()),
                        "{w} x {h}, factor {factor}"
                    );
                    // Each row's block sums on every instruction level, by definition.
                    let row = &raw[..w];
                    let defined: Vec<u32> = row
                        .chunks(factor)
                        .map(|b| b.iter().map(|&v| u32::from(v)).sum())
                        .collect();
                    for level in crate::simd::levels() {
                        let mut sums = vec![0u32; bw];
                        add_samples_by_blocks_with(level, &mut sums, row, factor);
                        assert_eq!(sums, defined, "{w} wide, factor {factor}, {level:?}");
                    }
                }
                assert_eq!(box_average_of_samples(&raw, w, h, 17), None);
                assert_eq!(box_average_of_samples(&raw[1..], w, h, 2), None);
            }
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
