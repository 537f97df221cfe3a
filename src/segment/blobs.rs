//! Nuclei that one watershed basin still holds together, told apart by the blob response:
//! touching nuclei of a cluster are each a bright blob, whatever the outline and the seam.

use super::diameter::{log_noise_gain, MIN_BLOB_SIGNIFICANCE};
use super::split::basin_boxes;
use super::watershed;
use crate::numeric::Grid;
use crate::preprocess::LaplaceKernels;

/// Scale of the blob response over the expected diameter. A disc of diameter `d` responds
/// most at σ = d / (2√2) (fixtures/methods/check_values.md §6); 0.265 = 0.75 / (2√2) is tuned
/// to a nucleus three quarters of the expected diameter across (the size of a daughter just
/// after division), small enough to find each of two small nuclei pressed together, while a
/// full-size nucleus still gives one maximum at its centre. Our own choice.
const SCALE: f64 = 0.265;

/// Two blob centres closer than this (over the expected diameter) are one nucleus: two nuclei
/// whose centres are closer than half a diameter overlap by most of their area. Our own bound.
const SEPARATION: f64 = 0.45;

/// Between two blob centres of two nuclei the response falls to at most this share of the
/// weaker centre's (the seam between them is no blob); along one elongated nucleus, whose two
/// ends can each be a maximum at this small scale, it stays high. Our own bound: at 0.5 no
/// scene of `benches/accuracy.sh` lost detection precision, while without it the elongated
/// and textured nuclei of the tissue look were cut in two (detection F1 0.999 → 0.980 on the
/// dim scene).
const SADDLE: f32 = 0.5;

/// The blob response's kernels reach 3 standard deviations (99.7% of the Gaussian's weight;
/// common practice), a quarter less work than scipy's 4; measured, 747 instead of 749 of 865
/// divisions found on the twelve crowded dividing scenes the split was developed on.
const TRUNCATE: f64 = 3.0;

/// Steps of the blob response a basin is flooded over (finer than its noise at every
/// brightness: a centre stands at least 6 noise responses high).
const FLOOD_LEVELS: f32 = 4096.0;

/// How blob centres are found in a frame: the scale of the response, the level a centre must
/// reach and the least distance between two centres, all from the expected diameter and the
/// frame's noise.
#[derive(Debug, Clone, Copy)]
pub(crate) struct BlobRule {
    pub sigma_px: f64,
    pub floor: f32,
    pub separation_px: f64,
}

impl BlobRule {
    /// For nuclei of `diameter_px` in a prepared frame whose background noise is `noise`: a
    /// centre must stand [`MIN_BLOB_SIGNIFICANCE`] times above the response of that noise at
    /// the scale (as the diameter estimate's blobs do).
    pub(crate) fn new(diameter_px: f64, noise: f32) -> Self {
        let sigma_px = SCALE * diameter_px;
        BlobRule {
            sigma_px,
            floor: (MIN_BLOB_SIGNIFICANCE * noise as f64 * log_noise_gain(sigma_px)) as f32,
            separation_px: SEPARATION * diameter_px,
        }
    }
}

/// The scale-normalised blob response `−σ²∇²G_σ` of a rule, its kernels made once (a frame
/// asks for it at every object's pixels).
pub(crate) struct BlobResponse {
    /// `−σ²`.
    scale: f32,
    kernels: LaplaceKernels,
}

impl BlobResponse {
    /// The response at `rule`'s scale, kernels cut at [`TRUNCATE`].
    pub(crate) fn of(rule: &BlobRule) -> Self {
        let sigma = rule.sigma_px as f32;
        BlobResponse {
            scale: -sigma * sigma,
            kernels: LaplaceKernels::new(sigma, TRUNCATE),
        }
    }

    /// The response of `values` (a `width`-wide frame) at `pixels`: equal to the response of
    /// the whole frame at them.
    pub(crate) fn at(&self, values: &[f32], width: usize, pixels: &[u32]) -> Vec<f32> {
        let at = self.kernels.at(values, width, pixels);
        at.into_iter().map(|l| self.scale * l).collect()
    }
}

/// Splits every basin of `labels` (0 = background; 1, 2, ... basins of a window `width` wide)
/// that holds two or more distinct blob centres (see [`distinct_centres`]), flooding the
/// basin's blob response from its centres; other basins are kept whole. `blob` is the
/// response in the window (`−∞` outside the component). Returns labels 1, 2, ... in the order
/// of the basins.
///
/// # Method
/// Seeds at the maxima of the scale-normalised Laplacian of Gaussian (T. Lindeberg (1998),
/// "Feature detection with automatic scale selection", IJCV 30(2):79–116,
/// doi:10.1023/A:1008045108935), as nuclei in clusters are seeded by Y. Al-Kofahi, W.
/// Lassoued, W. Lee & B. Roysam (2010), "Improved automatic detection and segmentation of cell
/// nuclei in histopathology images", IEEE Trans. Biomed. Eng. 57(4):841–852,
/// doi:10.1109/TBME.2009.2035102. Departure: one scale from the expected diameter instead of a
/// search over scales, used only inside the basins of the distance-and-intensity watershed
/// (so an outline the first split got right is kept), and a centre counts only where the
/// response between it and a stronger one falls to [`SADDLE`] of the weaker.
pub(crate) fn split_basins_at_blobs(labels: &[u32], blob: &[f32], rule: &BlobRule, width: usize) -> Vec<u32> {
    let height = labels.len() / width.max(1);
    let centres = distinct_centres(labels, blob, rule, width, height);
    let mut out = vec![0u32; labels.len()];
    let mut first_label = vec![0u32; centres.len()];
    let mut next = 0u32;
    for (basin, c) in centres.iter().enumerate().skip(1) {
        first_label[basin] = next + 1;
        next += c.len().max(1) as u32;
    }
    for (p, &l) in labels.iter().enumerate() {
        out[p] = first_label[l as usize];
    }
    if centres.iter().all(|c| c.len() < 2) {
        return out;
    }
    let boxes = basin_boxes(labels, width);
    for (basin, c) in centres.iter().enumerate().skip(1).filter(|(_, c)| c.len() >= 2) {
        let b = boxes[basin];
        let own = b.own(labels, basin);
        // The response in FLOOD_LEVELS steps up to the basin's strongest centre, whatever the
        // recording's grey levels (the level queue holds one bucket per step).
        let top = blob[c[0]].max(f32::MIN_POSITIVE);
        let levels: Vec<u32> = (0..own.len())
            .map(|i| (blob[b.at(i)].clamp(0.0, top) / top * FLOOD_LEVELS) as u32)
            .collect();
        let mut seeds = vec![0u32; own.len()];
        for (k, &p) in c.iter().enumerate() {
            seeds[b.local(p)] = k as u32 + 1;
        }
        let parts = watershed::seeded_watershed(&levels, &own, &seeds, b.w, b.h);
        for (i, &part) in parts.iter().enumerate().filter(|(_, &part)| part > 0) {
            out[b.at(i)] = first_label[basin] + part - 1;
        }
    }
    out
}

/// For each basin (index = label), its blob centres that count: pixels of the basin whose
/// response is at least the floor and above every 8-neighbour's, strongest first, each kept
/// only if at least the separation from every stronger centre kept and with the response
/// between them falling to [`SADDLE`] of the weaker.
fn distinct_centres(labels: &[u32], blob: &[f32], rule: &BlobRule, width: usize, height: usize) -> Vec<Vec<usize>> {
    let basins = labels.iter().copied().max().unwrap_or(0) as usize;
    let grid = Grid::new(width, height);
    let mut centres: Vec<Vec<usize>> = vec![Vec::new(); basins + 1];
    // Row by row, so that each pixel's column and row are known without a division; the
    // test of a row's inner pixels worked out for the row at once (vectorised), the pixels at
    // the window's edges (with fewer neighbours) one by one.
    let mut inner = vec![false; width.saturating_sub(2)];
    for (y, row) in labels.chunks_exact(width.max(1)).enumerate() {
        let inner_row = y > 0 && y + 1 < height && width >= 3;
        if inner_row {
            let line = |yy: usize| &blob[yy * width..(yy + 1) * width];
            above_all_neighbours(line(y - 1), line(y), line(y + 1), rule.floor, &mut inner);
        }
        for (x, &l) in row.iter().enumerate() {
            if l == 0 {
                continue;
            }
            let p = y * width + x;
            let centre = if inner_row && x > 0 && x + 1 < width {
                inner[x - 1]
            } else {
                let b = blob[p];
                b >= rule.floor && grid.neighbours8_at(p, (x, y)).all(|q| blob[q] < b)
            };
            if centre {
                centres[l as usize].push(p);
            }
        }
    }
    let min2 = rule.separation_px.powi(2);
    let distinct = |p: usize, k: usize| {
        let (dx, dy) = (
            (p % width) as f64 - (k % width) as f64,
            (p / width) as f64 - (k / width) as f64,
        );
        dx * dx + dy * dy >= min2 && lowest_between(blob, p, k, width) <= SADDLE * blob[p].min(blob[k])
    };
    for c in centres.iter_mut() {
        c.sort_by(|&a, &b| blob[b].total_cmp(&blob[a]).then(a.cmp(&b)));
        let mut kept: Vec<usize> = Vec::with_capacity(c.len());
        for &p in c.iter() {
            if kept.iter().all(|&k| distinct(p, k)) {
                kept.push(p);
            }
        }
        *c = kept;
    }
    centres
}

crate::multiversioned! {
    /// For each pixel of `row` but the first and last (`out[x − 1]` for pixel `x`), whether
    /// it is at least `floor` and strictly above its eight neighbours in `above`, `row` and
    /// `below` (NaN is above nothing and beats nothing): [`distinct_centres`]'s test for a
    /// row's inner pixels at once. Comparisons only, so the same on every level.
    fn above_all_neighbours / above_all_neighbours_with(
        above: &[f32],
        row: &[f32],
        below: &[f32],
        floor: f32,
        out: &mut [bool]
    ) {
        let n = out.len();
        let (a, r, b) = (&above[..n + 2], &row[..n + 2], &below[..n + 2]);
        for (i, o) in out.iter_mut().enumerate() {
            let v = r[i + 1];
            let upper = (a[i] < v) & (a[i + 1] < v) & (a[i + 2] < v) & (r[i] < v);
            let lower = (r[i + 2] < v) & (b[i] < v) & (b[i + 1] < v) & (b[i + 2] < v);
            *o = (v >= floor) & upper & lower;
        }
    }
}

/// The lowest of `values` on the straight line between pixels `a` and `b` of a `width`-wide
/// image (nearest pixels, sampled every half pixel).
fn lowest_between(values: &[f32], a: usize, b: usize, width: usize) -> f32 {
    let (ax, ay) = ((a % width) as f64, (a / width) as f64);
    let (bx, by) = ((b % width) as f64, (b / width) as f64);
    let steps = (2.0 * (bx - ax).hypot(by - ay)).ceil().max(1.0) as usize;
    (0..=steps)
        .map(|i| {
            let t = i as f64 / steps as f64;
            let (x, y) = (
                (ax + t * (bx - ax)).round() as usize,
                (ay + t * (by - ay)).round() as usize,
            );
            values[y * width + x]
        })
        .fold(f32::INFINITY, f32::min)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::preprocess::gaussian_blur;

    /// A `w` x `h` image of filled ellipses `(cx, cy, semi-axis x, semi-axis y, value)`
    /// (the brighter wins where they overlap), blurred by a Gaussian of σ = 1.5 px as a
    /// microscope's point-spread function would.
    fn scene(w: usize, h: usize, shapes: &[(f64, f64, f64, f64, f32)]) -> Vec<f32> {
        let raw: Vec<f32> = (0..w * h)
            .map(|i| {
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                shapes
                    .iter()
                    .filter(|s| ((x - s.0) / s.2).powi(2) + ((y - s.1) / s.3).powi(2) <= 1.0)
                    .map(|s| s.4)
                    .fold(0.0, f32::max)
            })
            .collect();
        gaussian_blur(&crate::image2d::from_vec(w, h, raw), 1.5)
            .into_raw_vec_and_offset()
            .0
    }

    /// The image's pixels above `level` as one basin, split at its blob centres for nuclei
    /// of `diameter` px (noise σ 1); returns the number of parts and the part at each of
    /// `points`.
    fn parts(values: &[f32], w: usize, level: f32, diameter: f64, points: &[(usize, usize)]) -> (u32, Vec<u32>) {
        let labels: Vec<u32> = values.iter().map(|&v| u32::from(v > level)).collect();
        let inside: Vec<u32> = (0..values.len() as u32).filter(|&p| labels[p as usize] == 1).collect();
        let rule = BlobRule::new(diameter, 1.0);
        let mut blob = vec![f32::NEG_INFINITY; values.len()];
        for (&p, b) in inside.iter().zip(BlobResponse::of(&rule).at(values, w, &inside)) {
            blob[p as usize] = b;
        }
        let out = split_basins_at_blobs(&labels, &blob, &rule, w);
        let count = out.iter().copied().max().unwrap_or(0);
        (count, points.iter().map(|&(x, y)| out[y * w + x]).collect())
    }

    #[test]
    fn two_nuclei_joined_by_a_bridge_are_two_parts() {
        // Source: construction. Two equal nuclei 10 px across, centres 13 px apart, joined by a
        // bar 3 px wide of the same brightness (as a thresholded cluster joins two nuclei
        // through their blurred rims): one object, whose blob response (σ = 0.265 x 14 px)
        // peaks at each nucleus and falls below half of that on the bar.
        let (w, h) = (48, 32);
        let values = scene(
            w,
            h,
            &[
                (14.0, 16.0, 5.0, 5.0, 600.0),
                (27.0, 16.0, 5.0, 5.0, 600.0),
                (20.5, 16.0, 6.5, 1.5, 600.0),
            ],
        );
        let (count, at) = parts(&values, w, 100.0, 14.0, &[(14, 16), (27, 16)]);
        assert_eq!(count, 2);
        assert_ne!(at[0], at[1]);
        // The same scene 50 times as bright (a 16-bit camera near its top), thresholded 50
        // times as high: the same two parts, pixel for pixel up to their numbering (the rule
        // is a ratio, the flood's steps follow the response).
        let all: Vec<(usize, usize)> = (0..w * h).map(|p| (p % w, p / w)).collect();
        let bright: Vec<f32> = values.iter().map(|v| 50.0 * v).collect();
        let (dim_labels, bright_labels) = (
            parts(&values, w, 100.0, 14.0, &all).1,
            parts(&bright, w, 5000.0, 14.0, &all).1,
        );
        let pairs: std::collections::BTreeSet<(u32, u32)> = dim_labels.into_iter().zip(bright_labels).collect();
        assert_eq!(
            pairs.len(),
            3,
            "background and two parts, each the same in both: {pairs:?}"
        );
    }

    #[test]
    fn centre_candidates_are_the_pixels_above_every_neighbour() {
        // Source: definition (a candidate centre is a basin pixel whose response is at least
        // the floor and strictly above each of its 8-neighbours inside the window; NaN is
        // neither), brute force, on windows with many ties and NaN, rows and columns of one
        // and two pixels included, then sifted by distinct_centres' rule restated (strongest
        // first, apart and parted by a saddle). The row test on every instruction level.
        let mut rng = crate::numeric::Rng::new(44);
        for (w, h) in [(1usize, 1usize), (2, 5), (6, 1), (3, 3), (17, 11), (40, 23)] {
            let blob: Vec<f32> = (0..w * h)
                .map(|_| match (rng.uniform() * 40.0) as u32 {
                    0 => f32::NAN,
                    k => (k % 16) as f32 * 0.5,
                })
                .collect();
            let labels: Vec<u32> = (0..w * h).map(|_| (rng.uniform() * 3.0) as u32).collect();
            let rule = BlobRule {
                sigma_px: 2.0,
                floor: 1.0,
                separation_px: 1.5,
            };
            let grid = Grid::new(w, h);
            let mut want: Vec<Vec<usize>> = vec![Vec::new(); 3];
            for p in 0..w * h {
                let (x, y) = (p % w, p / w);
                let b = blob[p];
                if labels[p] > 0 && b >= rule.floor && grid.neighbours8_at(p, (x, y)).all(|q| blob[q] < b) {
                    want[labels[p] as usize].push(p);
                }
            }
            // Then strongest first, each kept if far enough from and parted by a low enough
            // saddle from every stronger one kept (the rule of distinct_centres, restated).
            for c in want.iter_mut() {
                c.sort_by(|&a, &b| blob[b].total_cmp(&blob[a]).then(a.cmp(&b)));
                let mut kept: Vec<usize> = Vec::new();
                for &p in c.iter() {
                    let apart = |k: usize| {
                        let (dx, dy) = ((p % w) as f64 - (k % w) as f64, (p / w) as f64 - (k / w) as f64);
                        dx * dx + dy * dy >= 1.5 * 1.5
                            && lowest_between(&blob, p, k, w) <= SADDLE * blob[p].min(blob[k])
                    };
                    if kept.iter().all(|&k| apart(k)) {
                        kept.push(p);
                    }
                }
                *c = kept;
            }
            let got = distinct_centres(&labels, &blob, &rule, w, h);
            let basins = labels.iter().copied().max().unwrap_or(0) as usize;
            assert_eq!(got[1..], want[1..=basins], "{w} x {h}");
            assert!(
                w * h < 100 || want.iter().map(Vec::len).sum::<usize>() > 3,
                "centres met"
            );
            if w >= 3 && h >= 3 {
                // The row test itself, on every level, against the definition for row 1.
                let row = |y: usize| &blob[y * w..(y + 1) * w];
                let defined: Vec<bool> = (1..w - 1)
                    .map(|x| {
                        let (p, b) = (w + x, blob[w + x]);
                        b >= 1.0 && grid.neighbours8_at(p, (x, 1)).all(|q| blob[q] < b)
                    })
                    .collect();
                for level in crate::simd::levels() {
                    let mut got = vec![true; w - 2];
                    above_all_neighbours_with(level, row(0), row(1), row(2), 1.0, &mut got);
                    assert_eq!(got, defined, "{level:?}");
                }
            }
        }
    }

    #[test]
    fn a_centre_at_the_floor_counts_and_a_tied_one_does_not() {
        // Source: definition (at least the floor, strictly above every neighbour).
        let rule = BlobRule {
            sigma_px: 2.0,
            floor: 1.0,
            separation_px: 1.5,
        };
        let at_floor = [0.0, 0.5, 0.0, 0.0, 1.0, 0.5, 0.0, 0.0, 0.0];
        assert_eq!(distinct_centres(&[1; 9], &at_floor, &rule, 3, 3)[1], vec![4]);
        let tied = [0.0, 0.5, 0.0, 0.0, 1.0, 1.0, 0.0, 0.0, 0.0];
        assert!(distinct_centres(&[1; 9], &tied, &rule, 3, 3)[1].is_empty());
    }

    #[test]
    fn an_elongated_nucleus_stays_whole() {
        // Source: construction and the saddle rule. One nucleus of semi-axes 11 x 5 px: at the
        // blob scale for a 14 px diameter its response has two maxima along the long axis (so
        // the rule is what decides), but between them it stays far above half of either.
        let (w, h) = (48, 32);
        let values = scene(w, h, &[(24.0, 16.0, 11.0, 5.0, 800.0)]);
        let all: Vec<u32> = (0..(w * h) as u32).collect();
        let rule = BlobRule::new(14.0, 1.0);
        let response = BlobResponse::of(&rule).at(&values, w, &all);
        let row = &response[16 * w..17 * w];
        let maxima = (1..w - 1)
            .filter(|&x| row[x] > row[x - 1] && row[x] > row[x + 1])
            .count();
        assert_eq!(maxima, 2);
        assert_eq!(parts(&values, w, 100.0, 14.0, &[]).0, 1);
    }

    #[test]
    fn the_line_minimum_is_taken_over_the_pixels_between() {
        // Source: construction: a 5 x 1 row, the lowest value between its ends is the middle one.
        let values = [5.0, 3.0, 1.0, 4.0, 6.0];
        assert_eq!(lowest_between(&values, 0, 4, 5), 1.0);
        assert_eq!(lowest_between(&values, 3, 4, 5), 4.0);
    }
}
