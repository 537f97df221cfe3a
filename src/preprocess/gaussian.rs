//! Separable Gaussian filtering and Gaussian derivatives, with the boundary and kernel
//! conventions of `scipy.ndimage` (mode `reflect`, radius `int(4σ + 0.5)`), so results can be
//! checked against it.

use crate::image2d::Image;
use crate::numeric::spare;
use std::ops::Range;

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
    truncated_derivative_kernel(sigma, order, 4.0)
}

/// [`gaussian_derivative_kernel`] reaching `truncate` standard deviations either side (radius
/// `⌊truncate·σ + 0.5⌋`, scipy's `truncate`; 4 in [`gaussian_derivative_kernel`]).
pub fn truncated_derivative_kernel(sigma: f32, order: u8, truncate: f64) -> Vec<f32> {
    let radius = (truncate * sigma as f64 + 0.5) as i64;
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
    gaussian_blur_watched(image, sigma, &mut |_| {})
}

/// [`gaussian_blur`], handing the result's rows to `watch` as they are made (whole rows, top
/// to bottom, in one or more calls), so that a caller needing one more look at every value
/// (the top-hat's block minima) has it while the rows are still in cache.
pub fn gaussian_blur_watched(image: &Image, sigma: f32, watch: &mut dyn FnMut(&[f32])) -> Image {
    let out = if sigma <= 0.0 {
        image.as_standard_layout().into_owned()
    } else {
        let k = gaussian_kernel(sigma);
        return convolve_watched(image, &k, &k, watch);
    };
    watch(out.as_slice().expect("standard layout"));
    out
}

/// The Laplacian of Gaussian, `∂²/∂x² + ∂²/∂y²` of `G_σ * I`, as `scipy.ndimage.gaussian_laplace`.
///
/// # Method
/// D. Marr & E. Hildreth (1980), "Theory of edge detection", Proc. R. Soc. Lond. B
/// 207:187–217, doi:10.1098/rspb.1980.0020; computed as two separable filters, `G''` across
/// and `G` down plus `G` across and `G''` down, added last.
///
/// Both row filters are taken in one pass over each row into images with the reflected rows
/// the column kernels reach above and below, so that the two column filters and their sum are
/// one pass too: the same sums in the same order as two [`convolve_separable`] calls and an
/// addition (tested bit for bit), with three fewer passes over the image and no intermediate
/// sums. The column pass runs in strips, as in [`convolve_separable`] (the diameter
/// estimate's sampled frame 74 → 62 ms with them, one thread, `cargo bench --bench stages`).
pub fn gaussian_laplace(image: &Image, sigma: f32) -> Image {
    use rayon::prelude::*;
    let g0 = gaussian_derivative_kernel(sigma, 0);
    let g2 = gaussian_derivative_kernel(sigma, 2);
    let (h, w) = image.dim();
    if w == 0 || h == 0 {
        return image.clone();
    }
    let standard = image.as_standard_layout();
    let src = standard.as_slice().expect("standard layout");
    let r = g0.len() / 2;
    // Row r + y holds source row y filtered across; rows above r and below r + h hold the
    // reflected rows the column kernels read. Every value is written before it is read, so
    // the two images share the thread's spare buffer rather than zeroed allocations.
    let stride = row_stride(w);
    let rows = (h + 2 * r) * stride;
    let mut spare = scratch::take(2 * rows);
    let (with_g0, with_g2) = spare[..2 * rows].split_at_mut(rows);
    with_g0[r * stride..(r + h) * stride]
        .par_chunks_mut(BAND_ROWS * stride)
        .zip(with_g2[r * stride..(r + h) * stride].par_chunks_mut(BAND_ROWS * stride))
        .zip(src.par_chunks(BAND_ROWS * w))
        .with_min_len(bands_per_task())
        .for_each(|((g0_band, g2_band), src)| {
            let mut padded = vec![0f32; w + 2 * r];
            let rows = g0_band.chunks_exact_mut(stride).zip(g2_band.chunks_exact_mut(stride));
            for ((g0_row, g2_row), line) in rows.zip(src.chunks_exact(w)) {
                pad_row(&mut padded, line, r);
                filter_steps_pair(&mut g0_row[..w], &mut g2_row[..w], &padded, 1, &g0, &g2);
            }
        });
    reflect_rows(with_g0, h, r, stride);
    reflect_rows(with_g2, h, r, stride);
    let (with_g0, with_g2) = (&*with_g0, &*with_g2);
    let mut out = vec![0f32; h * w];
    let bands = out.par_chunks_mut(BAND_ROWS * w).enumerate();
    bands.with_min_len(bands_per_task()).for_each(|(band, dst)| {
        by_strip_pairs(dst, w, band * BAND_ROWS, |upper, lower, y, x0| {
            let at = y * stride + x0;
            laplace_rows(upper, lower, (&with_g2[at..], &with_g0[at..]), stride, (&g0, &g2));
        });
    });
    scratch::give_back(spare);
    Image::from_shape_vec((h, w), out).expect("sized buffer")
}

/// [`gaussian_laplace`] on this thread, handed over a band of rows at a time
/// (as many rows as half a second-level cache holds, and at least twice the kernels' reach):
/// `each_band(first_row, values)` with the band's rows one after another, from the top down.
/// The rows filtered across that a band's column pass reads are held in two buffers of a
/// band's size (the kernels' reach below carried over to the next band, as a frame's Gaussian
/// does on its thread), so they are read back from the second-level cache, and no frame-sized
/// response is made when the caller only folds it into something else (the diameter estimate
/// keeps each pixel's strongest scale). The same sums in the same order as
/// [`gaussian_laplace`], so the same bits (tested).
pub fn laplace_by_bands(image: &Image, sigma: f32, mut each_band: impl FnMut(usize, &[f32])) {
    let g0 = gaussian_derivative_kernel(sigma, 0);
    let g2 = gaussian_derivative_kernel(sigma, 2);
    let (h, w) = image.dim();
    if w == 0 || h == 0 {
        return;
    }
    let standard = image.as_standard_layout();
    let src = standard.as_slice().expect("standard layout");
    let r = g0.len() / 2;
    let stride = row_stride(w);
    // Bands of at least twice the kernels' reach: the reach carried from band to band is
    // copied, so that it costs at most a pass over half the band's rows.
    let band_rows = held_band_rows(2 * stride).max(4 * r);
    let held = band_rows + 2 * r;
    let mut spare = scratch::take(2 * held * stride + w + 2 * r + band_rows * w);
    let (with_g0, rest) = spare.split_at_mut(held * stride);
    let (with_g2, rest) = rest.split_at_mut(held * stride);
    let (padded, band_out) = rest.split_at_mut(w + 2 * r);
    for band in Bands::new(h, band_rows, r) {
        band.fill(|k, source| match source {
            RowSource::Held(from) => {
                with_g0.copy_within(from * stride..from * stride + w, k * stride);
                with_g2.copy_within(from * stride..from * stride + w, k * stride);
            }
            RowSource::Image(line) => {
                pad_row(padded, &src[line * w..(line + 1) * w], r);
                let (a, b) = (
                    &mut with_g0[k * stride..k * stride + w],
                    &mut with_g2[k * stride..k * stride + w],
                );
                filter_steps_pair(a, b, padded, 1, &g0, &g2);
            }
        });
        let out = &mut band_out[..band.rows * w];
        by_strip_pairs(out, w, 0, |upper, lower, y, x0| {
            let at = y * stride + x0;
            laplace_rows(upper, lower, (&with_g2[at..], &with_g0[at..]), stride, (&g0, &g2));
        });
        each_band(band.top, out);
        with_g0.copy_within(band.carried(stride), 0);
        with_g2.copy_within(band.carried(stride), 0);
    }
    scratch::give_back(spare);
}

/// Columns per strip of a column pass ([`by_strip_pairs`]): the rows under a kernel of up to ~25
/// taps, over this many columns and from two images, stay within the first-level cache from
/// one output row to the next (each row reuses all but one of the rows above it).
const STRIP: usize = 128;

/// Row stride of the intermediate images of the separable filters: the width plus 16 values,
/// so that the rows under a column kernel do not all fall in the same few cache sets, as
/// rows a power of two apart in memory (1024 or 512 values wide) do.
fn row_stride(w: usize) -> usize {
    w + 16
}

/// Copies into rows `0..r` and `r + h..h + 2r` of `rows` (`stride` apart; rows `r..r + h`
/// hold the image's `h` rows) the image rows that reflection at the top and bottom puts there.
fn reflect_rows(rows: &mut [f32], h: usize, r: usize, stride: usize) {
    for j in (0..r).chain(r + h..h + 2 * r) {
        let from = r + reflect(j as isize - r as isize, h);
        rows.copy_within(from * stride..(from + 1) * stride, j * stride);
    }
}

/// The column pass of a separable filter ([`filter_steps`]) for output row `upper` and, when
/// given, the row below it, `lower`, from the rows under the taps of `kernel`, `step` apart.
fn gaussian_rows(upper: &mut [f32], lower: Option<&mut [f32]>, src: &[f32], step: usize, kernel: &[f32]) {
    match lower {
        Some(lower) => filter_steps_two_rows(upper, lower, src, step, kernel),
        None => filter_steps(upper, src, step, kernel),
    }
}

/// The column pass of a Laplacian of Gaussian ([`filter_steps_sum`]) for output row `upper`
/// and, when given, the row below it, `lower`, from the rows filtered across `(a, b)` under
/// the taps of `(kernel_a, kernel_b)`.
fn laplace_rows(
    upper: &mut [f32],
    lower: Option<&mut [f32]>,
    (a, b): (&[f32], &[f32]),
    step: usize,
    (kernel_a, kernel_b): (&[f32], &[f32]),
) {
    match lower {
        Some(lower) => filter_steps_sum_two_rows(upper, lower, (a, b), step, (kernel_a, kernel_b)),
        None => filter_steps_sum(upper, a, b, step, kernel_a, kernel_b),
    }
}

/// Runs `filter(upper, lower, y, x0)` over the whole rows of `dst` (`w` wide, the first of them
/// image row `first`), two rows at a time, strip by strip of [`STRIP`] columns, each strip from
/// top to bottom: `upper` and `lower` are the parts of rows `y` and `y + 1` from column `x0`
/// (`lower` is `None` for a last, odd row). Every output value is computed once, as row by
/// row.
fn by_strip_pairs(
    dst: &mut [f32],
    w: usize,
    first: usize,
    mut filter: impl FnMut(&mut [f32], Option<&mut [f32]>, usize, usize),
) {
    let mut x0 = 0;
    while x0 < w {
        let x1 = (x0 + STRIP).min(w);
        for (i, pair) in dst.chunks_mut(2 * w).enumerate() {
            let (upper, lower) = pair.split_at_mut(w.min(pair.len()));
            let lower = (!lower.is_empty()).then(|| &mut lower[x0..x1]);
            filter(&mut upper[x0..x1], lower, first + 2 * i, x0);
        }
        x0 = x1;
    }
}

/// Rows per parallel task of the whole-image filters: enough work per task that the threads'
/// handover costs little, few enough that a frame splits into tasks for both cores.
const BAND_ROWS: usize = 32;

/// Bytes of the rows filtered across that a band held on the thread ([`convolve_in_bands`],
/// [`laplace_by_bands`]) keeps: half of a core's second-level cache of 512 KiB (common on
/// current x86 cores; from memory), so that they are read back from it with the band's input
/// and output beside them.
const HELD_BAND_BYTES: usize = 256 << 10;

/// Output rows per band held on the thread whose rows filtered across take `values_per_row`
/// values (their stride, times the buffers): as many as [`HELD_BAND_BYTES`] holds, from
/// [`BAND_ROWS`] to eight times that (a narrow image gains nothing from taller). Each band
/// copies the kernel's reach below it to the next band's top, so the taller the band the less
/// is copied: 63 rows rather than 32 of a 1024-wide frame took its Gaussian (σ = 1.4) from
/// 1.44-1.51 ms to 1.37 ms on one thread, and the diameter estimate's frame from 42 ms to
/// 40.5 ms (benches/stages.rs, alternating); taller still gained nothing.
fn held_band_rows(values_per_row: usize) -> usize {
    (HELD_BAND_BYTES / (values_per_row * std::mem::size_of::<f32>())).clamp(BAND_ROWS, 8 * BAND_ROWS)
}

thread_local! {
    /// Set while [`filters_on_this_thread`] runs: the filters keep their bands on the thread.
    static ON_THIS_THREAD: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

/// Runs `work` with the whole-image filters kept on the calling thread (their bands one after
/// another, the same sums, so the same bits), restoring the setting afterwards.
///
/// For work that is already one task among many on the worker pool, as each frame of the first
/// pass is: a filter that splits its bands across the workers makes the worker that waits for
/// a stolen band take up other work meanwhile (rayon's work stealing), often a whole frame, and
/// its own frame, held up behind that one, holds up the frames read in order after it (a
/// sampled 100-frame run showed one core idle for ~40 ms every few hundred ms). Where a filter
/// is the only work left (the diameter estimate's last sampled frame) splitting it pays, so it
/// stays the default.
pub fn filters_on_this_thread<T>(work: impl FnOnce() -> T) -> T {
    /// Restores the setting on the way out, also when `work` panics.
    struct Restore(bool);
    impl Drop for Restore {
        fn drop(&mut self) {
            ON_THIS_THREAD.with(|on| on.set(self.0));
        }
    }
    let _restore = Restore(ON_THIS_THREAD.with(|on| on.replace(true)));
    work()
}

/// Whether the whole-image filters are kept on this thread ([`filters_on_this_thread`]).
fn kept_on_this_thread() -> bool {
    ON_THIS_THREAD.with(|on| on.get())
}

/// The fewest bands a parallel task of a whole-image filter takes: all of them (so no task is
/// handed to another thread) inside [`filters_on_this_thread`], else one.
fn bands_per_task() -> usize {
    if kept_on_this_thread() {
        usize::MAX
    } else {
        1
    }
}

/// Fills `padded` (`line.len() + 2·r` long) with `line` and `r` reflected samples either side.
fn pad_row(padded: &mut [f32], line: &[f32], r: usize) {
    let w = line.len();
    padded[r..r + w].copy_from_slice(line);
    for i in (0..r).chain(r + w..w + 2 * r) {
        padded[i] = line[reflect(i as isize - r as isize, w)];
    }
}

/// The two kernels of a Laplacian of Gaussian (the Gaussian and its second derivative, cut at
/// a number of standard deviations), made once for the many small boxes of one frame that
/// [`LaplaceKernels::at`] filters (each kernel is a few dozen exponentials).
pub struct LaplaceKernels {
    g0: Vec<f32>,
    g2: Vec<f32>,
}

impl LaplaceKernels {
    /// The kernels of σ = `sigma` reaching `truncate` standard deviations either side.
    pub fn new(sigma: f32, truncate: f64) -> Self {
        LaplaceKernels {
            g0: truncated_derivative_kernel(sigma, 0, truncate),
            g2: truncated_derivative_kernel(sigma, 2, truncate),
        }
    }

    /// [`gaussian_laplace`] of a `width`-wide frame (`values`, row-major) at the given pixels
    /// only, with these kernels (cut at 4 standard deviations they give exactly the whole-frame
    /// result: the same kernels, reflection at the borders and order of additions). The row
    /// passes run over the pixels' columns and the rows within the kernel's reach of them, so
    /// the work follows the pixels' box, not the frame. Its four images (the padded rows, the
    /// two row passes and their column sum) are cut from the thread's spare buffer: every value
    /// that reaches a pixel asked for is written before it is read, and a frame asks for one
    /// box per object.
    pub fn at(&self, values: &[f32], width: usize, pixels: &[u32]) -> Vec<f32> {
        let height = values.len() / width.max(1);
        let (Some(&first), true) = (pixels.first(), width > 0) else {
            return Vec::new();
        };
        let (g0, g2) = (&self.g0, &self.g2);
        let r = g0.len() / 2;
        let grid = crate::numeric::Grid::new(width, height);
        let column_row = |p: u32| grid.column_row(p as usize);
        let ((fx, fy), mut x1, mut y1) = (column_row(first), 0, 0);
        let (mut x0, mut y0) = (fx, fy);
        for &p in pixels {
            let (x, y) = column_row(p);
            (x0, x1, y0, y1) = (x0.min(x), x1.max(x + 1), y0.min(y), y1.max(y + 1));
        }
        // Rows y0 - r .. y1 + r (as offsets), each padded to columns x0 - r .. x1 + r and laid
        // end to end, `stride` apart: one row pass over them all filters every row with g0 and
        // g2 (one call instead of one per row: a small object's rows are a vector or two wide,
        // and a call per row cost more than its sums), keeping each row's first `band`
        // outputs, the box's columns, `band` apart (the others straddle two rows). The column
        // pass's outputs are then the box's pixels, `band` apart: for a small object the
        // kernel's reach either side is about the box's width, and laid `stride` apart most
        // of that pass's outputs went unread.
        let band = x1 - x0;
        let rows = y1 - y0 + 2 * r;
        let box_rows = y1 - y0;
        let stride = band + 2 * r;
        let all = rows * stride;
        let filtered = rows * band;
        let box_len = box_rows * band;
        let mut spare = scratch::take(all + 2 * filtered + box_len);
        let (padded, rest) = spare.split_at_mut(all);
        let (with_g0, rest) = rest.split_at_mut(filtered);
        let (with_g2, rest) = rest.split_at_mut(filtered);
        let laplacian = &mut rest[..box_len];
        // Columns x0 - r .. x1 + r of the frame; those inside it are copied, the rest reflected.
        let inside = r.saturating_sub(x0)..stride.min(width + r - x0);
        for (j, padded) in padded.chunks_exact_mut(stride).enumerate() {
            let sy = reflect(y0 as isize + j as isize - r as isize, height);
            let line = &values[sy * width..(sy + 1) * width];
            padded[inside.clone()].copy_from_slice(&line[x0 + inside.start - r..x0 + inside.end - r]);
            for i in (0..inside.start).chain(inside.end..stride) {
                padded[i] = line[reflect(x0 as isize + i as isize - r as isize, width)];
            }
        }
        filter_steps_pair_kept(with_g0, with_g2, padded, (stride, band), g0, g2);
        // The two column passes and their sum over the whole box in one call (an output reads
        // the outputs of the row pass in its own column only), then the pixels read from it.
        filter_steps_sum(laplacian, with_g2, with_g0, band, g0, g2);
        let at = pixels
            .iter()
            .map(|&p| {
                let (x, y) = column_row(p);
                laplacian[(y - y0) * band + x - x0]
            })
            .collect();
        scratch::give_back(spare);
        at
    }
}

/// Convolves rows with `kernel_x` and columns with `kernel_y` (odd-length, centred kernels),
/// reflecting at the borders (`d c b a | a b c d | d c b a`). Bands of rows are filtered in
/// parallel (each output row depends on nothing but the input, so the result is the same on
/// any number of threads): a frame's filter then keeps both cores busy when it is the last
/// piece of work left, as in the diameter estimate's last sampled frame. A small image (an
/// object's window) has its padded rows laid end to end and filtered by one call per pass,
/// and a filter kept on its thread ([`filters_on_this_thread`], a frame of the first pass)
/// goes a band of rows at a time through a band-sized buffer: the same sums in the same order
/// on all three paths.
///
/// The column pass goes down strips of 128 columns rather than along whole rows, and the
/// row-filtered image's rows are 16 values longer than the image's: each output row then
/// finds the rows under the kernel in the first-level cache, left there by the row above,
/// instead of reading them again from the second level (a frame's Gaussian 2.02 → 1.71 ms,
/// one thread, `cargo bench --bench stages`). The same sums in the same order, so the same
/// bits.
pub fn convolve_separable(image: &Image, kernel_x: &[f32], kernel_y: &[f32]) -> Image {
    convolve_watched(image, kernel_x, kernel_y, &mut |_| {})
}

/// [`convolve_separable`], handing the output's rows to `watch` as
/// [`gaussian_blur_watched`] does: a band at a time where the filter is kept on its thread,
/// the whole image at the end otherwise.
fn convolve_watched(image: &Image, kernel_x: &[f32], kernel_y: &[f32], watch: &mut dyn FnMut(&[f32])) -> Image {
    let (h, w) = image.dim();
    let out = if w == 0 || h == 0 {
        image.as_standard_layout().into_owned()
    } else {
        let standard = image.as_standard_layout();
        let src = standard.as_slice().expect("standard layout");
        if w <= STRIP && h * w <= SMALL_IMAGE {
            convolve_small(src, (w, h), kernel_x, kernel_y)
        } else if kept_on_this_thread() {
            return convolve_in_bands(src, (w, h), kernel_x, kernel_y, watch);
        } else {
            convolve_in_parallel(src, (w, h), kernel_x, kernel_y)
        }
    };
    watch(out.as_slice().expect("standard layout"));
    out
}

/// [`convolve_separable`]'s bands of rows filtered in parallel.
fn convolve_in_parallel(src: &[f32], (w, h): (usize, usize), kernel_x: &[f32], kernel_y: &[f32]) -> Image {
    use rayon::prelude::*;
    let (rx, ry) = (kernel_x.len() / 2, kernel_y.len() / 2);
    // Row ry + y holds source row y filtered across, the rows above and below the reflected
    // rows the column kernel reads ([`gaussian_laplace`] has the same layout).
    let stride = row_stride(w);
    let rows = (h + 2 * ry) * stride;
    let mut spare = scratch::take(rows);
    let across = &mut spare[..rows];
    across[ry * stride..(ry + h) * stride]
        .par_chunks_mut(BAND_ROWS * stride)
        .zip(src.par_chunks(BAND_ROWS * w))
        .with_min_len(bands_per_task())
        .for_each(|(dst, src)| {
            let mut padded = vec![0f32; w + 2 * rx];
            for (line, out) in src.chunks_exact(w).zip(dst.chunks_exact_mut(stride)) {
                pad_row(&mut padded, line, rx);
                filter_padded_row(&mut out[..w], &padded, kernel_x);
            }
        });
    reflect_rows(across, h, ry, stride);
    let across = &*across;
    let mut out = vec![0f32; h * w];
    let bands = out.par_chunks_mut(BAND_ROWS * w).enumerate();
    bands.with_min_len(bands_per_task()).for_each(|(band, dst)| {
        by_strip_pairs(dst, w, band * BAND_ROWS, |upper, lower, y, x0| {
            gaussian_rows(upper, lower, &across[y * stride + x0..], stride, kernel_y);
        });
    });
    scratch::give_back(spare);
    Image::from_shape_vec((h, w), out).expect("sized buffer")
}

/// [`convolve_separable`] kept on this thread ([`filters_on_this_thread`]), a band of output
/// rows at a time ([`held_band_rows`]): the rows filtered across that a band's column pass
/// reads (its own and the kernel's reach above and below, reflected at the image's edges) are
/// held in a buffer of a band's size, and the reach below is carried over to the next band,
/// so the row pass's output is read back from the second-level cache instead of from a
/// frame-sized image in memory, and the output is zeroed a band at a time, in cache, rather
/// than all at once. The same sums in the same order, so the same bits.
fn convolve_in_bands(
    src: &[f32],
    (w, h): (usize, usize),
    kernel_x: &[f32],
    kernel_y: &[f32],
    watch: &mut dyn FnMut(&[f32]),
) -> Image {
    let (rx, ry) = (kernel_x.len() / 2, kernel_y.len() / 2);
    let stride = row_stride(w);
    let band_rows = held_band_rows(stride);
    let held = band_rows + 2 * ry;
    let mut spare = scratch::take(held * stride + w + 2 * rx);
    let (across, padded) = spare.split_at_mut(held * stride);
    let padded = &mut padded[..w + 2 * rx];
    // A spare image's buffer where this thread has one (every value is written below), else
    // one zeroed a band at a time.
    let mut out = spare_image_buffer(h * w).unwrap_or_else(|| Vec::with_capacity(h * w));
    for band in Bands::new(h, band_rows, ry) {
        band.fill(|k, source| match source {
            RowSource::Held(from) => across.copy_within(from * stride..from * stride + w, k * stride),
            RowSource::Image(line) => {
                pad_row(padded, &src[line * w..(line + 1) * w], rx);
                filter_padded_row(&mut across[k * stride..k * stride + w], padded, kernel_x);
            }
        });
        // Zeroed a band at a time (where new), in cache, just before the column pass writes it.
        let end = (band.top + band.rows) * w;
        if out.len() < end {
            out.resize(end, 0.0);
        }
        by_strip_pairs(&mut out[band.top * w..end], w, 0, |upper, lower, y, x0| {
            gaussian_rows(upper, lower, &across[y * stride + x0..], stride, kernel_y);
        });
        watch(&out[band.top * w..end]);
        across.copy_within(band.carried(stride), 0);
    }
    scratch::give_back(spare);
    Image::from_shape_vec((h, w), out).expect("sized buffer")
}

/// The bands of rows of a separable filter that runs a band at a time with the rows filtered
/// across held in a buffer ([`convolve_in_bands`], [`laplace_by_bands`]): row `k` of the
/// buffer holds image row `top − reach + k` (reflected at the image's edges), for the
/// column kernel reaching `reach` rows above and below; the first band fills all its rows,
/// each later band finds the `2·reach` rows it shares with the band before at the buffer's top
/// ([`Band::carried`]) and fills the rest.
struct Bands {
    h: usize,
    band_rows: usize,
    reach: usize,
    top: usize,
}

impl Bands {
    fn new(h: usize, band_rows: usize, reach: usize) -> Bands {
        Bands {
            h,
            band_rows,
            reach,
            top: 0,
        }
    }
}

/// One band of [`Bands`].
struct Band {
    /// Its first output row.
    top: usize,
    /// Its output rows.
    rows: usize,
    /// The buffer rows still to fill.
    to_filter: Range<usize>,
    reach: usize,
    h: usize,
}

impl Band {
    /// The image row that buffer row `k` holds.
    fn source_row(&self, k: usize) -> usize {
        reflect(self.top as isize - self.reach as isize + k as isize, self.h)
    }

    /// Fills the buffer rows still to fill, calling `row(k, source)` for each buffer row `k`:
    /// from an image row filtered across, or as a copy of a buffer row already filtered that
    /// holds the same image row (reflection at the image's edges repeats rows: the same sums).
    /// The rows that reflection puts above the image come last, so that their source rows are
    /// filtered first.
    fn fill(&self, mut row: impl FnMut(usize, RowSource)) {
        for k in self.reflected_last() {
            match self.held_copy_of(k) {
                Some(from) => row(k, RowSource::Held(from)),
                None => row(k, RowSource::Image(self.source_row(k))),
            }
        }
    }

    /// The buffer rows still to fill with those that reflection puts above the image last
    /// (the first band's top `reach` rows), so that their source rows come first.
    fn reflected_last(&self) -> impl Iterator<Item = usize> {
        let Range { start, end } = self.to_filter;
        (start.max(self.reach)..end).chain(start..self.reach.min(end))
    }

    /// The buffer row already filtered, in [`Band::reflected_last`]'s order, that holds the
    /// same image row as buffer row `k` (reflection at the image's edges repeats rows), if
    /// any.
    fn held_copy_of(&self, k: usize) -> Option<usize> {
        let held = (self.source_row(k) + self.reach).checked_sub(self.top)?;
        let Range { start, end } = self.to_filter;
        let carried = held < start;
        let filtered_before = held >= start.max(self.reach) && (k < self.reach || held < k);
        (held != k && held < end && (carried || filtered_before)).then_some(held)
    }

    /// The buffer's values (rows `stride` apart) that the next band finds at its top: the
    /// reach below this band is the reach above the next.
    fn carried(&self, stride: usize) -> Range<usize> {
        self.rows * stride..(self.rows + 2 * self.reach) * stride
    }
}

/// Where a buffer row of a [`Band`] comes from ([`Band::fill`]).
enum RowSource {
    /// This image row, filtered across.
    Image(usize),
    /// This buffer row, filtered already (it holds the same image row).
    Held(usize),
}

impl Iterator for Bands {
    type Item = Band;
    fn next(&mut self) -> Option<Band> {
        if self.top >= self.h {
            return None;
        }
        let rows = (self.top + self.band_rows).min(self.h) - self.top;
        let filled = if self.top == 0 { 0 } else { 2 * self.reach };
        let band = Band {
            top: self.top,
            rows,
            to_filter: filled..rows + 2 * self.reach,
            reach: self.reach,
            h: self.h,
        };
        self.top += rows;
        Some(band)
    }
}

/// Pixels up to which an image no wider than a [`STRIP`] is filtered by [`convolve_small`]
/// (an object's window; a frame is far larger).
const SMALL_IMAGE: usize = 1 << 14;

/// [`convolve_separable`] of a small `w` x `h` image (an object's window), on this thread: its
/// rows padded and laid end to end, `w + 2·rx` apart, are filtered across by one call (an
/// output straddling two rows is never read), and the column pass is one call over the rows
/// so filtered, `w + 2·rx` apart too, whose outputs are then packed `w` apart. A window's rows
/// are a vector or two wide, and a call per row, a task per band and the strips cost more than
/// its sums. The same sums in the same order as the whole-image path, so the same bits.
fn convolve_small(src: &[f32], (w, h): (usize, usize), kernel_x: &[f32], kernel_y: &[f32]) -> Image {
    let (rx, ry) = (kernel_x.len() / 2, kernel_y.len() / 2);
    let stride = w + 2 * rx;
    let rows = h + 2 * ry;
    // Outputs of a pass over `h` rows `stride` apart (the last row's tail is not computed).
    let span = (h - 1) * stride + w;
    let mut spare = scratch::take(h * stride + rows * stride + span);
    let (padded, rest) = spare.split_at_mut(h * stride);
    let (across, rest) = rest.split_at_mut(rows * stride);
    let down = &mut rest[..span];
    for (line, padded) in src.chunks_exact(w).zip(padded.chunks_exact_mut(stride)) {
        pad_row(padded, line, rx);
    }
    // Row ry + y of `across` is source row y filtered across (its first w values).
    filter_steps(&mut across[ry * stride..ry * stride + span], padded, 1, kernel_x);
    reflect_rows(across, h, ry, stride);
    filter_steps(down, across, stride, kernel_y);
    let mut out = Vec::with_capacity(h * w);
    for row in down.chunks(stride) {
        out.extend_from_slice(&row[..w]);
    }
    scratch::give_back(spare);
    Image::from_shape_vec((h, w), out).expect("sized buffer")
}

thread_local! {
    /// An image no longer needed, given back ([`give_back_image`]) for the next filter on this
    /// thread that writes every value of its output.
    static SPARE_IMAGE: std::cell::RefCell<Vec<f32>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// Gives an image no longer needed (a frame's prepared image, once segmented) back to this
/// thread, so that the next Gaussian of its size kept on the thread
/// ([`filters_on_this_thread`]) writes its output into it rather than into a new buffer of
/// zeros (that frame of zeros was 1.4% of a frame's segmentation). The larger buffer is kept.
pub fn give_back_image(image: Image) {
    spare::keep(&SPARE_IMAGE, image.into_raw_vec_and_offset().0);
}

/// The spare image's buffer cut to `n` values (their contents stale, every one to be
/// overwritten), when this thread has one that large.
fn spare_image_buffer(n: usize) -> Option<Vec<f32>> {
    let mut buffer = spare::take(&SPARE_IMAGE, n, 0.0)?;
    buffer.truncate(n);
    Some(buffer)
}

/// The row pass's intermediate image, kept per thread from one filter to the next: every
/// value is written before it is read, so a buffer of the right length is reused as it is
/// instead of being allocated and zeroed again (4 MB per filtered 1024 x 1024 frame).
mod scratch {
    use crate::numeric::spare;
    use std::cell::RefCell;

    thread_local! {
        static SPARE: RefCell<Vec<f32>> = const { RefCell::new(Vec::new()) };
    }

    /// A buffer of at least `n` values, contents unspecified (zeroed only where new).
    pub(super) fn take(n: usize) -> Vec<f32> {
        spare::take_or_new(&SPARE, n, 0.0)
    }

    /// Returns a buffer to the thread's slot (the larger one is kept).
    pub(super) fn give_back(buffer: Vec<f32>) {
        spare::keep(&SPARE, buffer);
    }
}

/// Pixels a filtered block holds in registers while the taps are added: 32 `f32` are four
/// AVX2 or two AVX-512 registers per filter, enough independent sums to keep the adder busy
/// when two filters run at once; one filter alone takes blocks twice as wide
/// ([`filter_lines`]).
const BLOCK: usize = 32;

crate::multiversioned! {
    /// `out[x]` = Σₖ `kernel[k]` · `src[k · step + x]`, added in the order of the taps: one
    /// output row of a separable filter from the rows under its taps, `step` apart in one
    /// buffer (the shifted copies of a padded row for `step` 1; the rows of an intermediate
    /// image, reflected rows included, for a column pass). See [`filter_lines`].
    fn filter_steps / filter_steps_with(out: &mut [f32], src: &[f32], step: usize, kernel: &[f32]) {
        let line = |_, k: usize| &src[k * step..];
        filter_lines(out.len(), line, [kernel], |x, [sums]| out[x..x + sums.len()].copy_from_slice(sums));
    }
}

crate::multiversioned! {
    /// [`filter_steps`] of two output rows one `step` apart at once: `upper[x]` =
    /// Σₖ `kernel[k]` · `src[k · step + x]` and `lower[x]` = Σₖ `kernel[k]` · `src[(k + 1) ·
    /// step + x]`, each added in the order of the taps, so the same bits as two calls. The
    /// rows under the taps are loaded once for both (each but the first and last feeds both
    /// sums): one row at a time, a column pass waited on its loads (each value under each
    /// tap, and the tap's broadcast per block) more than on its arithmetic.
    fn filter_steps_two_rows / filter_steps_two_rows_with(
        upper: &mut [f32],
        lower: &mut [f32],
        src: &[f32],
        step: usize,
        kernel: &[f32]
    ) {
        let n = upper.len();
        let mut x = 0;
        while x + BLOCK <= n {
            let block = |k: usize| -> [f32; BLOCK] {
                src[k * step + x..k * step + x + BLOCK].try_into().expect("block")
            };
            let [a, b] = filter_block_two_rows::<BLOCK>(block, kernel);
            upper[x..x + BLOCK].copy_from_slice(&a);
            lower[x..x + BLOCK].copy_from_slice(&b);
            x += BLOCK;
        }
        if x < n {
            let (upper, lower) = (&mut upper[x..], &mut lower[x..]);
            filter_steps(upper, &src[x..], step, kernel);
            filter_steps(lower, &src[step + x..], step, kernel);
        }
    }
}

crate::multiversioned! {
    /// [`filter_steps_sum`] of two output rows one `step` apart at once, as
    /// [`filter_steps_two_rows`] does for one kernel: each of the two sums of each row in the
    /// order of its taps, then added, so the same bits as two calls.
    fn filter_steps_sum_two_rows / filter_steps_sum_two_rows_with(
        upper: &mut [f32],
        lower: &mut [f32],
        sources: (&[f32], &[f32]),
        step: usize,
        kernels: (&[f32], &[f32])
    ) {
        let ((a, b), (kernel_a, kernel_b)) = (sources, kernels);
        let n = upper.len();
        let mut x = 0;
        while x + BLOCK <= n {
            let block = |src: &[f32], k: usize| -> [f32; BLOCK] {
                src[k * step + x..k * step + x + BLOCK].try_into().expect("block")
            };
            let [upper_a, lower_a] = filter_block_two_rows::<BLOCK>(|k| block(a, k), kernel_a);
            let [upper_b, lower_b] = filter_block_two_rows::<BLOCK>(|k| block(b, k), kernel_b);
            for (o, (p, q)) in upper[x..x + BLOCK].iter_mut().zip(upper_a.iter().zip(&upper_b)) {
                *o = p + q;
            }
            for (o, (p, q)) in lower[x..x + BLOCK].iter_mut().zip(lower_a.iter().zip(&lower_b)) {
                *o = p + q;
            }
            x += BLOCK;
        }
        if x < n {
            filter_steps_sum(&mut upper[x..], &a[x..], &b[x..], step, kernel_a, kernel_b);
            filter_steps_sum(&mut lower[x..], &a[step + x..], &b[step + x..], step, kernel_a, kernel_b);
        }
    }
}

/// The sums of [`filter_steps_two_rows`] over one block of `N` pixels, `row(j)` being the
/// values of the `j`-th row under the taps (`0..=taps`): row `j` adds its product with tap
/// `j` to the upper sum and with tap `j − 1` to the lower one, so that each sum still takes
/// its taps in order and its first product as its start.
#[inline(always)]
fn filter_block_two_rows<const N: usize>(row: impl Fn(usize) -> [f32; N], kernel: &[f32]) -> [[f32; N]; 2] {
    let taps = kernel.len();
    let mut upper = [0f32; N];
    let mut lower = [0f32; N];
    if taps == 0 {
        return [upper, lower];
    }
    let first = row(0);
    upper.iter_mut().zip(first).for_each(|(a, v)| *a = kernel[0] * v);
    let second = row(1);
    lower.iter_mut().zip(second).for_each(|(a, v)| *a = kernel[0] * v);
    if taps > 1 {
        upper.iter_mut().zip(second).for_each(|(a, v)| *a += kernel[1] * v);
    }
    for j in 2..taps {
        let v = row(j);
        upper.iter_mut().zip(v).for_each(|(a, v)| *a += kernel[j] * v);
        lower.iter_mut().zip(v).for_each(|(a, v)| *a += kernel[j - 1] * v);
    }
    if taps > 1 {
        let v = row(taps);
        lower.iter_mut().zip(v).for_each(|(a, v)| *a += kernel[taps - 1] * v);
    }
    [upper, lower]
}

crate::multiversioned! {
    /// [`filter_steps`] of one `src` with two kernels at once (`out_a` with `kernel_a`, `out_b`
    /// with `kernel_b`, both of one length): each value under the taps is loaded once for both
    /// sums. The same sums as two separate calls, so the same bits.
    fn filter_steps_pair / filter_steps_pair_with(
        out_a: &mut [f32],
        out_b: &mut [f32],
        src: &[f32],
        step: usize,
        kernel_a: &[f32],
        kernel_b: &[f32],
    ) {
        let line = |_, k: usize| &src[k * step..];
        filter_lines(out_a.len(), line, [kernel_a, kernel_b], |x, [a, b]| {
            out_a[x..x + a.len()].copy_from_slice(a);
            out_b[x..x + b.len()].copy_from_slice(b);
        });
    }
}

crate::multiversioned! {
    /// [`filter_steps_pair`] (step 1) of `src`, rows `stride` apart, keeping each row's first
    /// `band` outputs only, into `out_a` and `out_b` with rows `band` apart (as many rows as
    /// they hold; `(stride, band)` = `kept`): the row pass of a box narrower than its padded
    /// rows. Rows go two at a time in blocks of 16 outputs from their start (eight chains of
    /// additions, so that the adder does not wait on the tap before), a block reading on
    /// into the next row for lanes past the band (dropped), the last rows' blocks taking zeros
    /// past the values ([`filter_tail`]): for a small object's box (14 columns, a reach of 11
    /// either side) 16 sums a row instead of the 36 of running over the rows end to end, as
    /// this did before (`LaplaceKernels::at`'s row pass about 4.4% → 2.8% of a frame's
    /// samples). The same sums, so the same bits.
    fn filter_steps_pair_kept / filter_steps_pair_kept_with(
        out_a: &mut [f32],
        out_b: &mut [f32],
        src: &[f32],
        kept: (usize, usize),
        kernel_a: &[f32],
        kernel_b: &[f32],
    ) {
        let (stride, band) = kept;
        if band == 0 {
            return;
        }
        let reach = kernel_a.len().saturating_sub(1);
        let rows = out_a.len() / band;
        let mut put = |row: usize, x: usize, [a, b]: [&[f32]; 2]| {
            out_a[row * band + x..row * band + x + a.len()].copy_from_slice(a);
            out_b[row * band + x..row * band + x + b.len()].copy_from_slice(b);
        };
        for j in (0..rows).step_by(2) {
            for x in (0..band).step_by(16) {
                let take = (band - x).min(16);
                let (first, second) = (j * stride + x, (j + 1) * stride + x);
                if j + 1 < rows && second + reach + 16 <= src.len() {
                    let line = |m: usize, k: usize| {
                        let at = if m < 2 { first } else { second } + k;
                        &src[at..at + 16]
                    };
                    let sums = filter_block::<16, 4>(&line, [kernel_a, kernel_b, kernel_a, kernel_b]);
                    put(j, x, [&sums[0][..take], &sums[1][..take]]);
                    put(j + 1, x, [&sums[2][..take], &sums[3][..take]]);
                    continue;
                }
                // The last row, or the last two where the second's block would run past the
                // values: a row at a time, zeros past them.
                for row in j..(j + 2).min(rows) {
                    let start = row * stride;
                    let line = |_, k: usize| &src[start + k..];
                    filter_tail::<16, 2>(x + take, x, &line, [kernel_a, kernel_b], &mut |x, sums| put(row, x, sums));
                }
            }
        }
    }
}

crate::multiversioned! {
    /// `out` = [`filter_steps`] of `src_a` with `kernel_a` + [`filter_steps`] of `src_b` with
    /// `kernel_b` (kernels of one length): the two column passes of a Laplacian of Gaussian
    /// and their sum in one pass, without the two intermediate images. Each filtered value is
    /// the same sum as on its own, and the two are added last, so the same bits.
    fn filter_steps_sum / filter_steps_sum_with(
        out: &mut [f32],
        src_a: &[f32],
        src_b: &[f32],
        step: usize,
        kernel_a: &[f32],
        kernel_b: &[f32],
    ) {
        let line = |m: usize, k: usize| if m == 0 { &src_a[k * step..] } else { &src_b[k * step..] };
        filter_lines(out.len(), line, [kernel_a, kernel_b], |x, [a, b]| {
            out[x..x + a.len()].iter_mut().zip(a.iter().zip(b)).for_each(|(o, (&a, &b))| *o = a + b);
        });
    }
}

/// For `M` filters of one length at once, the sums `Σₖ kernels[m][k] · line(m, k)[x]` for
/// `x` in `0..n`, taps added in order, every pixel's sums held in registers over all taps:
/// for one filter blocks of 2 x [`BLOCK`] pixels first (eight AVX2 registers: each tap's
/// additions wait on the tap's before, and four chains of them left the adder waiting; a
/// frame's Gaussian took ~15% less time), then blocks of [`BLOCK`] pixels, then 16 (a small
/// object's box is narrower than a block), then the last pixels as one block of 16 (more than
/// 8 left) or 8 ([`filter_tail`]; the same sums for the lanes that count). Each block's sums
/// go to `emit(x, sums)`, one slice per filter as long as the pixels they stand for. Inlined
/// into each instruction level's copy of its callers.
#[inline(always)]
fn filter_lines<'a, const M: usize>(
    n: usize,
    line: impl Fn(usize, usize) -> &'a [f32],
    kernels: [&[f32]; M],
    mut emit: impl FnMut(usize, [&[f32]; M]),
) {
    let mut x = 0;
    if M == 1 {
        while x + 2 * BLOCK <= n {
            let sums = filter_block::<{ 2 * BLOCK }, M>(&|m, k| &line(m, k)[x..x + 2 * BLOCK], kernels);
            emit(x, std::array::from_fn(|m| &sums[m][..]));
            x += 2 * BLOCK;
        }
    }
    while x + BLOCK <= n {
        let sums = filter_block::<BLOCK, M>(&|m, k| &line(m, k)[x..x + BLOCK], kernels);
        emit(x, std::array::from_fn(|m| &sums[m][..]));
        x += BLOCK;
    }
    while x + 16 <= n {
        let sums = filter_block::<16, M>(&|m, k| &line(m, k)[x..x + 16], kernels);
        emit(x, std::array::from_fn(|m| &sums[m][..]));
        x += 16;
    }
    let rest = n - x;
    if rest > 8 {
        // Nine to fifteen pixels left (a small object's box is often that wide): one block of
        // 16 instead of one of 8 and a tail of 8, half the sums on a CPU with 16-lane vectors.
        filter_tail::<16, M>(n, x, &line, kernels, &mut emit);
        return;
    }
    if rest == 8 {
        let sums = filter_block::<8, M>(&|m, k| &line(m, k)[x..x + 8], kernels);
        emit(x, std::array::from_fn(|m| &sums[m][..]));
    } else if rest > 0 {
        filter_tail::<8, M>(n, x, &line, kernels, &mut emit);
    }
}

/// The last `n − x` (fewer than `N`) pixels of [`filter_lines`] as one block of `N` whose
/// unused lanes are dropped: where the line runs on past the output (a column pass away from
/// the last rows, a padded row) its next values fill them, elsewhere zeros. A store per tap
/// there made the last pixels of each short row cost as much as the rest.
#[inline(always)]
fn filter_tail<'a, const N: usize, const M: usize>(
    n: usize,
    x: usize,
    line: &impl Fn(usize, usize) -> &'a [f32],
    kernels: [&[f32]; M],
    emit: &mut impl FnMut(usize, [&[f32]; M]),
) {
    let rest = n - x;
    let tail = |m: usize, k: usize| -> [f32; N] {
        let l = line(m, k);
        match l.get(x..x + N) {
            Some(whole) => whole.try_into().expect("block"),
            None => {
                let mut values = [0f32; N];
                values[..rest].copy_from_slice(&l[x..n]);
                values
            }
        }
    };
    let sums = filter_block_of::<N, M>(tail, kernels);
    emit(x, std::array::from_fn(|m| &sums[m][..rest]));
}

/// The sums of [`filter_lines`] over one block of `N` pixels, `block(m, k)` being the values
/// under tap `k` of filter `m`.
#[inline(always)]
fn filter_block<'a, const N: usize, const M: usize>(
    block: &impl Fn(usize, usize) -> &'a [f32],
    kernels: [&[f32]; M],
) -> [[f32; N]; M] {
    filter_block_of::<N, M>(|m, k| block(m, k).try_into().expect("block"), kernels)
}

/// [`filter_block`] from blocks given by value.
#[inline(always)]
fn filter_block_of<const N: usize, const M: usize>(
    block: impl Fn(usize, usize) -> [f32; N],
    kernels: [&[f32]; M],
) -> [[f32; N]; M] {
    let taps = kernels[0].len();
    // All of one length, so that the taps below are read without bounds checks.
    let kernels = kernels.map(|kernel| &kernel[..taps]);
    let mut acc = [[0f32; N]; M];
    if taps == 0 {
        return acc;
    }
    for (m, (sums, kernel)) in acc.iter_mut().zip(kernels).enumerate() {
        sums.iter_mut().zip(block(m, 0)).for_each(|(a, v)| *a = kernel[0] * v);
    }
    // Tap by tap, every filter at each tap (one filter's values are loaded once for all).
    for k in 1..taps {
        for (m, (sums, kernel)) in acc.iter_mut().zip(kernels).enumerate() {
            sums.iter_mut().zip(block(m, k)).for_each(|(a, v)| *a += kernel[k] * v);
        }
    }
    acc
}

/// `out` = `kernel` (odd length, centred) over `padded`, a row with `kernel.len() / 2`
/// samples of border either side: [`filter_steps`] over the row's shifted copies.
fn filter_padded_row(out: &mut [f32], padded: &[f32], kernel: &[f32]) {
    filter_steps(out, padded, 1, kernel);
}

/// Index into `0..n` under half-sample symmetric reflection, for any offset. Offsets inside
/// or one reflection away (what a filter narrower than the image reads) are mapped without a
/// division: the column pass asks for an index per tap and per row, and on the small images
/// of the diameter estimate and of each object the division cost as much as the filtering.
pub(crate) fn reflect(i: isize, n: usize) -> usize {
    let n = n as isize;
    if (0..n).contains(&i) {
        return i as usize;
    }
    if (-n..0).contains(&i) {
        return (-1 - i) as usize;
    }
    if (n..2 * n).contains(&i) {
        return (2 * n - 1 - i) as usize;
    }
    let period = 2 * n;
    let m = i.rem_euclid(period);
    (if m < n { m } else { period - 1 - m }) as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One output of a filter by its definition: `kernel`'s taps times the values under them
    /// (`value(k)` under tap `k`), added in tap order, as every test here compares with.
    fn in_tap_order(kernel: &[f32], value: impl Fn(usize) -> f32) -> f32 {
        let taps = kernel.iter().enumerate().skip(1);
        taps.fold(kernel[0] * value(0), |s, (k, &w)| s + w * value(k))
    }

    #[test]
    fn rows_a_step_apart_filter_as_the_definition_on_every_level() {
        // Source: the definition of the filter (each pixel's taps summed in tap order) and
        // IEEE 754 lane-by-lane rounding (crate::simd): for steps 1 (a padded row) and 75 (a
        // column pass over rows 75 wide), widths 1..=70, every level equals it bit for bit;
        // so do the two filters of one source at once (`filter_steps_pair`) and the sum of
        // two sources' filters (`filter_steps_sum`, the two definitions added last).
        let (g0, g2) = (gaussian_derivative_kernel(1.3, 0), gaussian_derivative_kernel(1.3, 2));
        let source = |seed: usize| -> Vec<f32> {
            (0..75 * (g0.len() + 1))
                .map(|i| ((i * 7919 + seed) % 211) as f32 * 0.29 - 13.0)
                .collect()
        };
        let (src, other) = (source(0), source(57));
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for step in [1usize, 75] {
            let definition = |src: &[f32], kernel: &[f32], n: usize| -> Vec<f32> {
                (0..n).map(|x| in_tap_order(kernel, |k| src[k * step + x])).collect()
            };
            // Up to two blocks of one filter and the blocks and tails after them.
            for n in 1..=140usize {
                let expected = definition(&src, &g0, n);
                let expected_g2 = definition(&src, &g2, n);
                let expected_sum: Vec<f32> = (definition(&src, &g0, n).iter().zip(definition(&other, &g2, n)))
                    .map(|(a, b)| a + b)
                    .collect();
                for level in crate::simd::levels() {
                    let context = format!("{level:?} step {step} width {n}");
                    let mut got = vec![f32::NAN; n];
                    filter_steps_with(level, &mut got, &src, step, &g0);
                    assert_eq!(bits(&got), bits(&expected), "{context}");
                    let (mut a, mut b) = (vec![f32::NAN; n], vec![f32::NAN; n]);
                    filter_steps_pair_with(level, &mut a, &mut b, &src, step, &g0, &g2);
                    assert_eq!((bits(&a), bits(&b)), (bits(&expected), bits(&expected_g2)), "{context}");
                    filter_steps_sum_with(level, &mut got, &src, &other, step, &g0, &g2);
                    assert_eq!(bits(&got), bits(&expected_sum), "{context}");
                }
            }
        }
    }

    #[test]
    fn two_rows_at_once_filter_as_the_definition_on_every_level() {
        // Source: the definition of the filter (each output's taps summed in tap order) and
        // IEEE 754 lane-by-lane rounding (crate::simd): two output rows a step apart filtered
        // at once, alone (`filter_steps_two_rows`) and as the sum of two sources' filters
        // (`filter_steps_sum_two_rows`, the two definitions added last), equal it bit for bit
        // for kernels of 1 to 25 taps, steps 1 and 75, widths 1..=140 (blocks and tails).
        let (g0, g2) = (gaussian_derivative_kernel(1.3, 0), gaussian_derivative_kernel(1.3, 2));
        let long = gaussian_derivative_kernel(3.0, 0);
        let kernels: [&[f32]; 6] = [&[0.7], &[0.3, -1.1], &[0.25, 0.5, 0.25], &g0, &g2, &long];
        let source = |seed: usize| -> Vec<f32> {
            (0..75 * (long.len() + 2) + 140)
                .map(|i| ((i * 7919 + seed) % 211) as f32 * 0.29 - 13.0)
                .collect()
        };
        let (src, other) = (source(0), source(57));
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for step in [1usize, 75] {
            for kernel in kernels {
                let definition = |src: &[f32], kernel: &[f32], from: usize, n: usize| -> Vec<f32> {
                    (0..n)
                        .map(|x| in_tap_order(kernel, |k| src[from + k * step + x]))
                        .collect()
                };
                let other_kernel: Vec<f32> = kernel.iter().rev().map(|w| w * 0.5 - 0.1).collect();
                for n in 1..=140usize {
                    let rows = [0, step].map(|from| definition(&src, kernel, from, n));
                    let sums = [0, step].map(|from| {
                        let a = definition(&src, kernel, from, n);
                        let b = definition(&other, &other_kernel, from, n);
                        a.iter().zip(&b).map(|(a, b)| a + b).collect::<Vec<f32>>()
                    });
                    for level in crate::simd::levels() {
                        let context = format!("{level:?} step {step} width {n} taps {}", kernel.len());
                        let (mut upper, mut lower) = (vec![f32::NAN; n], vec![f32::NAN; n]);
                        filter_steps_two_rows_with(level, &mut upper, &mut lower, &src, step, kernel);
                        assert_eq!(
                            [bits(&upper), bits(&lower)],
                            rows.each_ref().map(|r| bits(r)),
                            "{context}"
                        );
                        let kernels = (kernel, &other_kernel[..]);
                        filter_steps_sum_two_rows_with(level, &mut upper, &mut lower, (&src, &other), step, kernels);
                        assert_eq!(
                            [bits(&upper), bits(&lower)],
                            sums.each_ref().map(|r| bits(r)),
                            "{context}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn rows_filter_at_their_band_as_the_definition() {
        // Source: the definition of the filter (each output's taps summed in tap order along
        // its row) and IEEE 754 lane-by-lane rounding: rows `stride` apart filtered and kept
        // at their first `band` outputs, `band` apart, equal it bit for bit on
        // every level, for bands of one pixel to wider than a block, strides just long enough
        // for the taps and longer, one row to many (odd and even counts: rows go in pairs),
        // the values ending with the last row or running on past it.
        let (g0, g2) = (gaussian_derivative_kernel(1.6, 0), gaussian_derivative_kernel(1.6, 2));
        let taps = g0.len();
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        for band in [1usize, 7, 9, 15, 16, 17, 33, 40] {
            for (extra, rows, past) in [
                (0usize, 1usize, 0usize),
                (0, 5, 0),
                (3, 4, 0),
                (1, 9, 0),
                (0, 6, 0),
                (0, 2, 20),
                (2, 7, 5),
            ] {
                let stride = band + taps - 1 + extra;
                let src: Vec<f32> = (0..rows * stride + past)
                    .map(|i| ((i * 7919 + band) % 211) as f32 * 0.37 - 19.0)
                    .collect();
                let definition = |kernel: &[f32]| -> Vec<f32> {
                    (0..rows * band)
                        .map(|i| {
                            let at = (i / band) * stride + i % band;
                            in_tap_order(kernel, |k| src[at + k])
                        })
                        .collect()
                };
                let (want_a, want_b) = (definition(&g0), definition(&g2));
                for level in crate::simd::levels() {
                    let (mut a, mut b) = (vec![f32::NAN; rows * band], vec![f32::NAN; rows * band]);
                    filter_steps_pair_kept_with(level, &mut a, &mut b, &src, (stride, band), &g0, &g2);
                    let context = format!("{level:?} band {band} rows {rows} stride {stride} past {past}");
                    assert_eq!((bits(&a), bits(&b)), (bits(&want_a), bits(&want_b)), "{context}");
                }
            }
        }
    }

    #[test]
    fn windows_and_frames_filter_as_the_definition() {
        // Source: the definition of a separable filter with reflected borders (scipy.ndimage
        // mode 'reflect'; tested against scipy itself in tests/reference.rs): each row's taps
        // summed in order, then each column's. Small images (an object's window: rows laid end
        // to end, one call per pass) and larger ones (wider than a strip, or more pixels than
        // a window: bands in parallel, strips; on one thread, a band at a time), bit for bit.
        let (kx, ky) = (gaussian_kernel(1.0), gaussian_kernel(2.2));
        let sum = |line: &dyn Fn(isize) -> f32, kernel: &[f32], at: usize| -> f32 {
            let r = (kernel.len() / 2) as isize;
            in_tap_order(kernel, |k| line(at as isize + k as isize - r))
        };
        for (h, w) in [
            (1usize, 1usize),
            (3, 5),
            (4, 9),
            (2, 10),
            (32, 20),
            (33, 3),
            (70, 33),
            (300, 17),
            (40, 129),
            (170, 100),
            (300, 141),
            (3000, 6),
        ] {
            let image = Image::from_shape_fn((h, w), |(y, x)| ((y * 31 + x * 7919) % 97) as f32 * 0.7 - 20.0);
            let across = Image::from_shape_fn((h, w), |(y, x)| sum(&|i| image[[y, reflect(i, w)]], &kx, x));
            let want = Image::from_shape_fn((h, w), |(y, x)| sum(&|i| across[[reflect(i, h), x]], &ky, y));
            let bands = filters_on_this_thread(|| convolve_separable(&image, &kx, &ky));
            for got in [convolve_separable(&image, &kx, &ky), bands] {
                assert!(
                    got.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits()),
                    "{h} x {w}"
                );
            }
        }
    }

    #[test]
    fn a_spare_image_given_back_is_overwritten_whole() {
        // Source: the same filter with no spare image (bits equal; that path is checked
        // against the definition above), on a thread of its own (the spare is per thread):
        // spares full of NaN, of the image's size and larger (cut to size), and one too small
        // (not taken), must leave no value of theirs in the Gaussian kept on the thread.
        std::thread::spawn(|| {
            let image = Image::from_shape_fn((300, 141), |(y, x)| ((y * 131 + x * 7919) % 263) as f32 * 0.71 - 40.0);
            let bits = |i: &Image| i.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            let on_thread = || filters_on_this_thread(|| gaussian_blur(&image, 1.4));
            let want = bits(&on_thread());
            for len in [300 * 141, 300 * 141 + 5000, 300 * 141 - 1] {
                give_back_image(Image::from_elem((1, len), f32::NAN));
                assert_eq!(bits(&on_thread()), want, "a spare of {len} values");
            }
        })
        .join()
        .unwrap();
    }

    #[test]
    fn filters_kept_on_one_thread_give_the_same_bits_and_the_setting_is_restored() {
        // Source: the filters split into bands or not (each band's sums do not depend on the
        // thread that makes them): on images of ten bands, the Gaussian and the Laplacian of
        // Gaussian inside `filters_on_this_thread` equal those outside bit for bit; the setting
        // holds inside only, and is restored after a panic too.
        let image = Image::from_shape_fn((300, 141), |(y, x)| ((y * 131 + x * 7919) % 263) as f32 * 0.71 - 40.0);
        let bits = |i: &Image| i.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        let outside = (bits(&gaussian_blur(&image, 1.4)), bits(&gaussian_laplace(&image, 2.3)));
        let inside = filters_on_this_thread(|| {
            assert_eq!(bands_per_task(), usize::MAX);
            (bits(&gaussian_blur(&image, 1.4)), bits(&gaussian_laplace(&image, 2.3)))
        });
        assert_eq!(inside, outside);
        assert_eq!(bands_per_task(), 1);
        let panicked = std::panic::catch_unwind(|| filters_on_this_thread(|| panic!("a frame failed")));
        assert!(panicked.is_err());
        assert_eq!(bands_per_task(), 1);
    }

    #[test]
    fn reflection_matches_scipy_reflect_mode() {
        // Source: scipy.ndimage mode 'reflect' definition, (d c b a | a b c d | d c b a).
        let idx: Vec<usize> = (-4..8).map(|i| reflect(i, 4)).collect();
        assert_eq!(idx, vec![3, 2, 1, 0, 0, 1, 2, 3, 3, 2, 1, 0]);
        // Several periods away, and images of one and two pixels: the indices numpy.pad's
        // 'symmetric' mode (the same convention) gives for np.arange(4) padded (9, 13) and
        // np.arange(2) padded (5, 6), printed with numpy 2 and copied here.
        let far: Vec<usize> = (-9..13).map(|i| reflect(i, 4)).collect();
        assert_eq!(
            far,
            vec![0, 0, 1, 2, 3, 3, 2, 1, 0, 0, 1, 2, 3, 3, 2, 1, 0, 0, 1, 2, 3, 3]
        );
        assert!((-5..6).all(|i| reflect(i, 1) == 0));
        let two: Vec<usize> = (-5..6).map(|i| reflect(i, 2)).collect();
        assert_eq!(two, vec![0, 0, 1, 1, 0, 0, 1, 1, 0, 0, 1]);
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

    #[test]
    fn the_fused_laplacian_is_the_sum_of_two_separable_filters_bit_for_bit() {
        // Source: the definition the fused passes rearrange (scipy.ndimage.gaussian_laplace's
        // too: a second-derivative filter along each axis with the Gaussian along the other,
        // added): two separable filters with reflected borders, then their sum, in f32. Sizes
        // from one pixel to several bands (narrow and tall, and wide enough that a band is
        // the fewest rows), and kernels reaching several periods of
        // reflection past images smaller than them; the whole-image and the banded path.
        for (w, h, sigma) in [
            (1, 1, 1.0),
            (3, 2, 2.5),
            (37, 23, 2.3),
            (9, 70, 1.6),
            (70, 33, 0.7),
            (5, 40, 6.0),
            (150, 101, 5.5),
            (40, 200, 1.5),
            (9, 700, 1.6),
            (1100, 150, 1.2),
        ] {
            let image = Image::from_shape_fn((h, w), |(y, x)| ((y * 131 + x * 7919) % 263) as f32 * 0.71 - 40.0);
            let (g0, g2) = (
                gaussian_derivative_kernel(sigma, 0),
                gaussian_derivative_kernel(sigma, 2),
            );
            let want = convolve_separable(&image, &g2, &g0) + convolve_separable(&image, &g0, &g2);
            let got = gaussian_laplace(&image, sigma);
            assert_eq!(got.dim(), want.dim());
            let same = got.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits());
            assert!(same, "{w} x {h}, sigma {sigma}");
            let mut banded = Vec::new();
            laplace_by_bands(&image, sigma, |first, band| {
                assert_eq!(first * w, banded.len(), "bands in order, none skipped");
                assert!(band.len() % w == 0 && band.len() / w >= BAND_ROWS.min(h - first));
                banded.extend_from_slice(band);
            });
            let same = banded.len() == want.len() && banded.iter().zip(&want).all(|(a, b)| a.to_bits() == b.to_bits());
            assert!(same, "banded, {w} x {h}, sigma {sigma}");
        }
    }

    #[test]
    fn the_laplacian_at_some_pixels_equals_the_whole_frame_one() {
        // Source: gaussian_laplace (checked against scipy.ndimage.gaussian_laplace in
        // tests/reference.rs): the sparse evaluation must give the same numbers at the
        // pixels asked for, also next to the frame's edges where the kernel reflects: pixels
        // spread over the frame, a small object well inside it (a box narrower than a vector),
        // one whose kernel reaches exactly the frame's last row and column, four whose kernel
        // reaches one pixel past an edge, one in a corner, one across the frame.
        let (w, h) = (61, 47);
        let values: Vec<f32> = (0..w * h).map(|i| ((i * 7919) % 263) as f32 + (i % w) as f32).collect();
        let image = crate::image2d::from_vec(w, h, values.clone());
        let whole = gaussian_laplace(&image, 2.3);
        let whole = whole.as_slice().unwrap();
        let disc = |cx: usize, cy: usize, r: usize| -> Vec<u32> {
            (0..w * h)
                .filter(|&p| (p % w).abs_diff(cx).pow(2) + (p / w).abs_diff(cy).pow(2) <= r * r)
                .map(|p| p as u32)
                .collect()
        };
        let spread: Vec<u32> = [0, 1, w, 5 * w + 17, 11 * w + 36, (h - 1) * w + 3, w * h - 1]
            .into_iter()
            .map(|p| p as u32)
            .collect();
        let row: Vec<u32> = (0..w as u32).map(|x| 9 * w as u32 + x).collect();
        // σ 2.3 cut at 4: the kernel reaches 9 pixels either side.
        let at_the_reach = disc(w - 1 - 9 - 3, h - 1 - 9 - 3, 3);
        let one_past_it = [
            disc(w - 9 - 3, 20, 3),
            disc(20, h - 9 - 3, 3),
            disc(8 + 3, 20, 3),
            disc(20, 8 + 3, 3),
        ];
        let cases = [spread, disc(30, 23, 4), at_the_reach, disc(1, h - 2, 3), row];
        for pixels in cases.into_iter().chain(one_past_it) {
            let at = LaplaceKernels::new(2.3, 4.0).at(&values, w, &pixels);
            for (&p, v) in pixels.iter().zip(at) {
                assert_eq!(v.to_bits(), whole[p as usize].to_bits(), "pixel {p}");
            }
        }
    }
}
