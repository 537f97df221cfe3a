//! Exact Euclidean distance transform: for every foreground pixel, the distance to the nearest
//! background pixel. Outside the image is not background (as `scipy.ndimage.distance_transform_edt`).

/// Squared distance used for "no background anywhere on this line yet".
const FAR: f64 = f64::INFINITY;

/// Lower envelope of parabolas `(q − p)²·s² + f(p)`, in O(n).
///
/// # Method
/// P. F. Felzenszwalb & D. P. Huttenlocher (2012), "Distance Transforms of Sampled Functions",
/// Theory of Computing 8:415–428, doi:10.4086/toc.2012.v008a019 (algorithm DT(f), with the
/// parabola intersection `s` and the pop rule `s ≤ z[k]`); `spacing` scales the axis.
pub fn squared_distance_1d(f: &[f64], spacing: f64, out: &mut [f64]) {
    let mut scratch = Envelope::default();
    scratch.transform(f, spacing, out);
}

/// Reusable buffers of the lower envelope (one allocation per image, not per line).
#[derive(Default)]
struct Envelope {
    v: Vec<usize>,
    z: Vec<f64>,
}

impl Envelope {
    fn transform(&mut self, f: &[f64], spacing: f64, out: &mut [f64]) {
        let n = f.len();
        let s2 = spacing * spacing;
        self.v.resize(n, 0);
        self.z.resize(n + 1, 0.0);
        let (v, z) = (&mut self.v, &mut self.z);
        let mut k = 0usize;
        let first = match f.iter().position(|x| x.is_finite()) {
            Some(i) => i,
            None => {
                out.iter_mut().for_each(|o| *o = FAR);
                return;
            }
        };
        v[0] = first;
        z[0] = f64::NEG_INFINITY;
        z[1] = f64::INFINITY;
        for q in first + 1..n {
            if !f[q].is_finite() {
                continue;
            }
            loop {
                let p = v[k];
                let s =
                    ((f[q] + s2 * (q * q) as f64) - (f[p] + s2 * (p * p) as f64)) / (2.0 * s2 * (q as f64 - p as f64));
                if s <= z[k] {
                    // z[0] is -inf, so this pops only while k > 0.
                    k -= 1;
                    continue;
                }
                k += 1;
                v[k] = q;
                z[k] = s;
                z[k + 1] = f64::INFINITY;
                break;
            }
        }
        let mut k = 0;
        for (q, o) in out.iter_mut().enumerate() {
            while z[k + 1] < q as f64 {
                k += 1;
            }
            let d = q as f64 - v[k] as f64;
            *o = s2 * d * d + f[v[k]];
        }
    }
}

/// Squared Euclidean distance to the nearest background pixel, for a row-major mask
/// (`true` = foreground); `spacing = (row, column)` physical steps. Background pixels get 0.
/// Without any background pixel the result is infinite.
///
/// The column pass of a binary mask needs no envelope: the distance to the nearest background
/// pixel in the same column comes from one downward and one upward scan over whole rows
/// (phase 1 of A. Meijster, J. B. T. M. Roerdink & W. H. Hesselink (2000), "A general
/// algorithm for computing distance transforms in linear time", in Mathematical Morphology and
/// its Applications to Image and Signal Processing, Kluwer, pp. 331–340), which reads memory in
/// order; the row pass is the envelope above.
pub fn squared_edt(mask: &[bool], width: usize, height: usize, spacing: (f64, f64)) -> Vec<f64> {
    // Rows to the nearest background pixel of the column (u32::MAX: none).
    let mut g = vec![u32::MAX; width * height];
    for y in 0..height {
        for x in 0..width {
            let i = y * width + x;
            g[i] = if !mask[i] {
                0
            } else if y > 0 {
                g[i - width].saturating_add(1)
            } else {
                u32::MAX
            };
        }
    }
    for y in (0..height.saturating_sub(1)).rev() {
        for x in 0..width {
            let i = y * width + x;
            let below = g[i + width].saturating_add(1);
            if below < g[i] {
                g[i] = below;
            }
        }
    }
    let row_step2 = spacing.0 * spacing.0;
    let mut out = vec![0f64; width * height];
    let mut line = vec![0f64; width];
    let mut envelope = Envelope::default();
    for y in 0..height {
        for (l, &d) in line.iter_mut().zip(&g[y * width..(y + 1) * width]) {
            *l = if d == u32::MAX {
                FAR
            } else {
                row_step2 * (d as f64) * (d as f64)
            };
        }
        envelope.transform(&line, spacing.1, &mut out[y * width..(y + 1) * width]);
    }
    out
}

/// Euclidean distance transform with unit spacing, as `f32`.
pub fn edt(mask: &[bool], width: usize, height: usize) -> Vec<f32> {
    squared_edt(mask, width, height, (1.0, 1.0))
        .into_iter()
        .map(|d| d.sqrt() as f32)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_dimensional_check_value() {
        // Source: fixtures/methods/check_values.md §4, FH 1D on [0,∞,∞,∞,0,∞,∞] -> [0,1,4,1,0,1,4].
        let f = [0.0, FAR, FAR, FAR, 0.0, FAR, FAR];
        let mut out = [0.0; 7];
        squared_distance_1d(&f, 1.0, &mut out);
        assert_eq!(out, [0.0, 1.0, 4.0, 1.0, 0.0, 1.0, 4.0]);
    }

    fn methods_mask() -> Vec<bool> {
        let mut m = vec![true; 35];
        m[2 * 7 + 3] = false;
        m[0] = false;
        m
    }

    #[test]
    fn two_dimensional_check_values() {
        // Source: fixtures/methods/check_values.md §4 (scipy 1.17.1 distance_transform_edt), 5x7 ones with zeros
        // at (2,3) and (0,0).
        let d = squared_edt(&methods_mask(), 7, 5, (1.0, 1.0));
        let want_row0 = [0.0, 1.0, 2.0, 2.0, 2.236068, 2.828427, 3.605551];
        let want_row4 = [3.605551, 2.828427, 2.236068, 2.0, 2.236068, 2.828427, 3.605551];
        for x in 0..7 {
            assert!((d[x].sqrt() - want_row0[x]).abs() < 1e-6);
            assert!((d[28 + x].sqrt() - want_row4[x]).abs() < 1e-6);
        }
        // sampling=(2,1): rows two units apart.
        let d = squared_edt(&methods_mask(), 7, 5, (2.0, 1.0));
        let want_row0 = [0.0, 1.0, 2.0, 3.0, 4.0, 4.472136, 5.0];
        let want_row4 = [5.0, 4.472136, 4.123106, 4.0, 4.123106, 4.472136, 5.0];
        for x in 0..7 {
            assert!((d[x].sqrt() - want_row0[x]).abs() < 1e-6);
            assert!((d[28 + x].sqrt() - want_row4[x]).abs() < 1e-6);
        }
    }
}
