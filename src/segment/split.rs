//! Splitting touching nuclei one foreground component at a time. Every stage of the split
//! (distance transform, seeds, watershed) is local to a connected component of the mask, so it
//! runs on a small window around each component instead of the whole frame: on a typical
//! frame, where nuclei cover a few percent of the pixels, that is most of the work saved.

use super::blobs::{split_basins_at_blobs, BlobResponse, BlobRule};
use super::hmaxima::h_maxima_seeds;
use super::label::{Foreground, Runs};
use super::{distance_transform, watershed};
use crate::numeric::Grid;
use crate::preprocess::{gaussian_blur, gaussian_radius};

/// An 8-connected foreground component: its pixels and its bounding box.
struct Component {
    /// Range of the component's pixel indices in the shared pixel list.
    pixels: std::ops::Range<usize>,
    /// Columns `x0..x1` and rows `y0..y1` of the bounding box.
    x0: usize,
    x1: usize,
    y0: usize,
    y1: usize,
}

/// A rectangle of the frame: columns `x0..x0 + width`, rows `y0..y0 + height`.
struct Window {
    x0: usize,
    y0: usize,
    width: usize,
    height: usize,
}

impl Window {
    /// The component's box grown by `pad` pixels on every side, clipped to the frame.
    fn around(c: &Component, pad: usize, frame_width: usize, frame_height: usize) -> Window {
        let (x0, y0) = (c.x0.saturating_sub(pad), c.y0.saturating_sub(pad));
        let (x1, y1) = ((c.x1 + pad).min(frame_width), (c.y1 + pad).min(frame_height));
        Window {
            x0,
            y0,
            width: x1 - x0,
            height: y1 - y0,
        }
    }

    /// Index within the window of each of the frame's pixels `own` (which must lie inside
    /// it), `frame` being the frame's grid (its column and row without a division).
    fn local_indices(&self, own: &[u32], frame: &Grid) -> Vec<u32> {
        own.iter()
            .map(|&p| {
                let (x, y) = frame.column_row(p as usize);
                ((y - self.y0) * self.width + (x - self.x0)) as u32
            })
            .collect()
    }
}

/// Distance transform, h-maxima seeds and seeded watershed over a foreground mask; returns one
/// label per pixel (0 = background), numbered 1, 2, ... component by component.
///
/// Seeds are taken on the distance map smoothed by `distance_smoothing_px` (0 = not smoothed):
/// the exact EDT of a pixelated outline has ridges of spurious maxima (square roots of
/// neighbouring integers), which a light smoothing removes while necks between touching
/// nuclei remain; flooding still follows the exact squared distances.
///
/// Each 8-connected component is split on its own, in a window of its bounding box grown by
/// the smoothing radius (at least one pixel, which holds the background next to every edge
/// pixel). Distances and flooding are those of the whole frame at once: the nearest
/// background pixel of a component pixel lies within one pixel of its box (the disc up to it
/// is foreground and connected to the pixel), and h-maxima reconstruction and flooding never
/// leave a component. Departure: inside a window only the component's own distances are
/// smoothed, so a neighbouring nucleus no longer lends its distances to this one's seeds (no
/// change to any detection on the benchmark, crowded and stripe recordings, benches/SPEED.md).
pub fn split_touching(
    mask: &[bool],
    width: usize,
    height: usize,
    seed_h_px: f64,
    distance_smoothing_px: f64,
) -> Vec<u32> {
    let runs = Runs::of(mask, width, height, true);
    let foreground = split_touching_foreground(mask, &runs, width, height, seed_h_px, distance_smoothing_px, None);
    foreground.label_image(mask.len())
}

/// [`split_touching`] as the frame's foreground pixels and their labels (grouped by
/// component), so later stages can visit the objects without scanning the frame. With
/// `intensity` (the prepared frame, its background noise σ and the blob rule), seeds and
/// flooding use the distance weighted by the intensity (see [`intensity_weighted`]) instead of
/// the distance alone, each basin is split again at its own level
/// ([`each_basin_on_its_own`]), and then at its blob centres ([`split_basins_at_blobs`]).
/// `runs` are the mask's foreground runs (`Runs::of(mask, width, height, true)`, or what the
/// hole filling that made the mask gave back), where the search for its components starts.
pub(crate) fn split_touching_foreground(
    mask: &[bool],
    runs: &Runs,
    width: usize,
    height: usize,
    seed_h_px: f64,
    distance_smoothing_px: f64,
    intensity: Option<&IntensityCues>,
) -> Foreground {
    let (pixels, components) = find_components(mask, runs, width, height);
    let mut labels = Vec::with_capacity(pixels.len());
    let pad = if distance_smoothing_px > 0.0 {
        gaussian_radius(distance_smoothing_px as f32).max(1)
    } else {
        1
    };
    let mut next = 0u32;
    let grid = Grid::new(width, height);
    for c in &components {
        let window = Window::around(c, pad, width, height);
        let own = &pixels[c.pixels.clone()];
        let at = window.local_indices(own, &grid);
        let mut local_mask = vec![false; window.width * window.height];
        for &i in &at {
            local_mask[i as usize] = true;
        }
        let local_cues = intensity.map(|cues| WindowCues::of(cues, own, &at, &window, width));
        let local = split_component(
            &local_mask,
            local_cues.as_ref(),
            window.width,
            window.height,
            seed_h_px,
            distance_smoothing_px,
        );
        let mut most = 0;
        for &i in &at {
            let l = local[i as usize];
            labels.push(if l == 0 { 0 } else { next + l });
            most = most.max(l);
        }
        next += most;
    }
    Foreground { pixels, labels }
}

/// The 8-connected components of `mask` in raster order of their first pixel, with all their
/// pixels in one list, each component's in breadth-first order from its first pixel.
///
/// The search reads one byte per neighbour (a copy of the mask in which reached pixels are
/// marked) rather than the mask and a frame-sized map of marks: on a 1024² frame that is 1 MB
/// of memory to jump about in instead of 5 MB.
fn find_components(mask: &[bool], runs: &Runs, width: usize, height: usize) -> (Vec<u32>, Vec<Component>) {
    const UNREACHED: u8 = 1;
    const REACHED: u8 = 2;
    let grid = Grid::new(width, height);
    let mut state: Vec<u8> = mask.iter().map(|&m| u8::from(m)).collect();
    let mut pixels: Vec<u32> = Vec::new();
    let mut components = Vec::new();
    // Most of a frame is background: only the foreground runs are looked at, in raster order,
    // and of each only its first pixel. A run lies in one component, which is searched whole
    // once any of its pixels is found, so a run's other pixels are unreached only while its
    // first one is, and a component's first pixel in raster order starts a run.
    let starts = (runs.spans.iter()).map(|&(y, s, _)| y * width + s);
    for start in starts {
        if state[start] != UNREACHED {
            continue;
        }
        let first = pixels.len();
        state[start] = REACHED;
        pixels.push(start as u32);
        let (mut x0, mut x1, mut y0, mut y1) = (usize::MAX, 0, usize::MAX, 0);
        let mut cursor = first;
        while cursor < pixels.len() {
            let p = pixels[cursor] as usize;
            cursor += 1;
            let (x, y) = grid.column_row(p);
            (x0, x1, y0, y1) = (x0.min(x), x1.max(x + 1), y0.min(y), y1.max(y + 1));
            grid.for_each_neighbour8(p, |q| {
                if state[q] == UNREACHED {
                    state[q] = REACHED;
                    pixels.push(q as u32);
                }
            });
        }
        components.push(Component {
            pixels: first..pixels.len(),
            x0,
            x1,
            y0,
            y1,
        });
    }
    (pixels, components)
}

/// The split of one window: exact squared EDT, the distance optionally smoothed, then seeds and
/// flooding on the distance alone (`intensity` = `None`) or on the distance weighted by the
/// intensity (see [`intensity_weighted`]). Labels 1, 2, ... by seed order.
fn split_component(
    mask: &[bool],
    intensity: Option<&WindowCues>,
    width: usize,
    height: usize,
    seed_h_px: f64,
    distance_smoothing_px: f64,
) -> Vec<u32> {
    if mask.iter().all(|&m| m) {
        // Foreground wall to wall: no pixel has a distance to the background (the outside of
        // the image is not background), so there is nothing to split on.
        return vec![1; mask.len()];
    }
    let squared = distance_transform::squared_edt(mask, width, height, (1.0, 1.0));
    let distance = distance_transform::distances_of_squares(&squared);
    let distance = if distance_smoothing_px > 0.0 {
        gaussian_blur(
            &crate::image2d::from_vec(width, height, distance),
            distance_smoothing_px as f32,
        )
        .into_raw_vec_and_offset()
        .0
    } else {
        distance
    };
    let Some(cues) = intensity else {
        let (seeds, count) = h_maxima_seeds(&distance, mask, width, height, seed_h_px);
        let levels = || squared.iter().map(|&d| d.min(u32::MAX as f64 / 2.0) as u32).collect();
        return watershed::flood_seeds(mask, seeds, count, (width, height), levels);
    };
    let lit = Lit::of(&cues.values, mask, cues.noise);
    let labels = flood_on_landscape(&distance, &lit, mask, (width, height), seed_h_px);
    let labels = if labels.iter().any(|&l| l > 1) {
        each_basin_on_its_own(&labels, &distance, &lit, width, seed_h_px)
    } else {
        labels
    };
    split_basins_at_blobs(&labels, &cues.blob, &cues.blobs, width)
}

/// Splits each basin of `labels` again on its own landscape ([`flood_on_landscape`] with the
/// basin as the mask, in its bounding box): a cluster's bright level is set by its brightest
/// nuclei, and the landscape clamps everything above it, so two smaller nuclei brighter than
/// that level, pressed into one basin, have their seam flattened away; judged at the basin's
/// own level, as an isolated object is, the seam shows again. Only a basin whose own bright
/// level is above 1.15 times the component's is split again (below that little of it was
/// clamped; the same bound as a mitotic brightening in `link::divide`): on a crowded
/// 1024 x 1024 recording of 20 frames that took segmentation from 3.48 s to 3.26 s on one
/// thread, and 747 to 746 of 865 divisions on twelve crowded dividing scenes. Our own step.
fn each_basin_on_its_own(labels: &[u32], distance: &[f32], component: &Lit, width: usize, seed_h_px: f64) -> Vec<u32> {
    let boxes = basin_boxes(labels, width);
    let mut basin_values: Vec<Vec<f32>> = vec![Vec::new(); boxes.len()];
    for (&l, &v) in labels.iter().zip(component.values).filter(|(&l, _)| l > 0) {
        basin_values[l as usize].push(v);
    }
    let mut out = vec![0u32; labels.len()];
    let mut next = 0u32;
    for (basin, b) in boxes.into_iter().enumerate().skip(1) {
        if b.w == 0 {
            continue;
        }
        let own = b.own(labels, basin);
        let bright = bright_level(std::mem::take(&mut basin_values[basin]));
        if bright <= OWN_LEVEL_ABOVE * component.bright {
            (0..own.len()).filter(|&i| own[i]).for_each(|i| out[b.at(i)] = next + 1);
            next += 1;
            continue;
        }
        let d: Vec<f32> = (0..own.len()).map(|i| distance[b.at(i)]).collect();
        let v: Vec<f32> = (0..own.len()).map(|i| component.values[b.at(i)]).collect();
        let lit = Lit {
            values: &v,
            bright,
            noise: component.noise,
        };
        let parts = flood_on_landscape(&d, &lit, &own, (b.w, b.h), seed_h_px);
        for (i, &part) in parts.iter().enumerate().filter(|(_, &part)| part > 0) {
            out[b.at(i)] = next + part;
        }
        next += parts.iter().copied().max().unwrap_or(0);
    }
    out
}

/// A basin's bounding box in a label image `width` wide: its cells, row by row, are where a
/// basin is worked on by itself.
#[derive(Debug, Clone, Copy)]
pub(super) struct BasinBox {
    x0: usize,
    y0: usize,
    /// Columns and rows; 0 for a label not present.
    pub w: usize,
    pub h: usize,
    width: usize,
}

impl BasinBox {
    /// The image pixel of cell `i`.
    pub fn at(&self, i: usize) -> usize {
        (self.y0 + i / self.w) * self.width + self.x0 + i % self.w
    }

    /// The cell of image pixel `p` (inside the box).
    pub fn local(&self, p: usize) -> usize {
        (p / self.width - self.y0) * self.w + p % self.width - self.x0
    }

    /// Which cells belong to `basin`.
    pub fn own(&self, labels: &[u32], basin: usize) -> Vec<bool> {
        (0..self.w * self.h)
            .map(|i| labels[self.at(i)] as usize == basin)
            .collect()
    }
}

/// The bounding box of each label of a `width`-wide label image (index = label; empty, `w`
/// 0, for labels not present).
pub(super) fn basin_boxes(labels: &[u32], width: usize) -> Vec<BasinBox> {
    let top = labels.iter().copied().max().unwrap_or(0) as usize;
    let mut edges = vec![(usize::MAX, 0, usize::MAX, 0); top + 1];
    for (y, row) in labels.chunks(width.max(1)).enumerate() {
        for (x, &l) in row.iter().enumerate().filter(|(_, &l)| l > 0) {
            let b = &mut edges[l as usize];
            *b = (b.0.min(x), b.1.max(x + 1), b.2.min(y), b.3.max(y + 1));
        }
    }
    edges
        .into_iter()
        .map(|(x0, x1, y0, y1)| BasinBox {
            x0,
            y0,
            w: x1.saturating_sub(x0),
            h: y1.saturating_sub(y0),
            width,
        })
        .collect()
}

/// Seeds at the h-maxima of the distance-and-intensity landscape ([`intensity_weighted`]) and
/// flooding over it, within `mask`.
fn flood_on_landscape(
    distance: &[f32],
    lit: &Lit,
    mask: &[bool],
    (width, height): (usize, usize),
    seed_h_px: f64,
) -> Vec<u32> {
    let (landscape, h) = intensity_weighted(distance, lit, mask, seed_h_px);
    let (seeds, count) = h_maxima_seeds(&landscape, mask, width, height, h);
    watershed::flood_seeds(mask, seeds, count, (width, height), || {
        let mut levels = vec![0u32; landscape.len()];
        super::hmaxima::quantise_levels(&landscape, super::hmaxima::LEVELS_PER_UNIT as f32, 0.0, &mut levels);
        levels
    })
}

/// What the intensity says about where nuclei are, for the whole frame: the prepared frame,
/// its background noise σ, and how blob centres are found in it.
pub(crate) struct IntensityCues<'a> {
    pub values: &'a [f32],
    pub noise: f32,
    pub blobs: BlobRule,
    /// The blob response of `blobs`.
    pub response: BlobResponse,
}

impl<'a> IntensityCues<'a> {
    /// The cues of a prepared frame with background noise σ `noise`, blobs found by `blobs`.
    pub fn new(values: &'a [f32], noise: f32, blobs: BlobRule) -> Self {
        IntensityCues {
            values,
            noise,
            blobs,
            response: BlobResponse::of(&blobs),
        }
    }
}

/// [`IntensityCues`] in one component's window: its own pixels' values and blob response
/// (0 and `−∞` elsewhere in the window).
struct WindowCues {
    values: Vec<f32>,
    noise: f32,
    blob: Vec<f32>,
    blobs: BlobRule,
}

impl WindowCues {
    /// The cues at the frame's pixels `own`, at `at` in the window.
    fn of(cues: &IntensityCues, own: &[u32], at: &[u32], window: &Window, width: usize) -> Self {
        let len = window.width * window.height;
        let mut local = WindowCues {
            values: vec![0.0; len],
            noise: cues.noise,
            blob: vec![f32::NEG_INFINITY; len],
            blobs: cues.blobs,
        };
        let response = cues.response.at(cues.values, width, own);
        for ((&p, &i), b) in own.iter().zip(at).zip(response) {
            let i = i as usize;
            local.values[i] = cues.values[p as usize];
            local.blob[i] = b;
        }
        local
    }
}

/// How much brighter than its component a basin must be to be split again at its own level.
const OWN_LEVEL_ABOVE: f32 = 1.15;

/// An object's intensities (indexed as its window), its bright level ([`bright_level`] of
/// its pixels) and the frame's background noise σ: what its landscape is made from.
struct Lit<'a> {
    values: &'a [f32],
    bright: f32,
    noise: f32,
}

impl<'a> Lit<'a> {
    fn of(values: &'a [f32], mask: &[bool], noise: f32) -> Self {
        // Room for the whole window at once: collected through the filter, the list grew by
        // doubling, seven allocations and copies for a nucleus's window.
        let mut inside = Vec::with_capacity(values.len());
        inside.extend(values.iter().zip(mask).filter(|(_, &m)| m).map(|(&v, _)| v));
        Lit {
            values,
            bright: bright_level(inside),
            noise,
        }
    }
}

/// The bright level of an object's values: their 90th percentile (0 for none).
fn bright_level(mut inside: Vec<f32>) -> f32 {
    if inside.is_empty() {
        return 0.0;
    }
    let k = (inside.len() - 1) * 9 / 10;
    *inside.select_nth_unstable_by(k, f32::total_cmp).1
}

/// The landscape that touching nuclei are split on, and the dynamic a seed needs on it.
///
/// Touching nuclei are told apart by shape (a neck in the outline, so two maxima of the
/// distance to the background) and by intensity (each is brightest inside and a dimmer seam
/// runs between them). The landscape is the distance map times the intensity relative to the
/// component's bright level (its 90th percentile, at most 1): at a nucleus's centre both
/// factors are high, at a seam both are low, so a pair pressed into one convex blob, whose
/// distance map has a single maximum, still shows two maxima when a seam divides them. Seeds
/// are the maxima whose dynamic is at least `seed_h_px` and at least twice the landscape's
/// noise at the component's centre (`max distance × noise / bright level`), so that noise in a
/// dim nucleus does not cut it in two; flooding then follows the same landscape, so the cut
/// falls in the seam.
///
/// # Method
/// Distance and intensity combined for clustered nuclei: N. Malpica, C. Ortiz de Solórzano,
/// J. J. Vaquero, A. Santos, I. Vallcorba, J. M. García-Sagredo & F. del Pozo (1997),
/// "Applying watershed algorithms to the segmentation of clustered nuclei", Cytometry
/// 28(4):289–297. Departure: their combination is replaced by this product, and the seed
/// dynamic is bounded below by the measured noise (our own choice). On the scenes of
/// `benches/accuracy.sh` it lifted MOTA on the dense scenes by 3 to 7 points with no loss of
/// precision; without the noise bound, a dim textured scene lost 7% of its mostly-tracked
/// tracks to split nuclei.
fn intensity_weighted(distance: &[f32], lit: &Lit, mask: &[bool], seed_h_px: f64) -> (Vec<f32>, f64) {
    let (values, bright, noise) = (lit.values, lit.bright, lit.noise);
    if bright <= 0.0 {
        return (distance.to_vec(), seed_h_px);
    }
    let landscape = distance
        .iter()
        .zip(values)
        .map(|(&d, &v)| d * (v / bright).clamp(0.0, 1.0))
        .collect();
    let deepest = distance
        .iter()
        .zip(mask)
        .filter(|(_, &m)| m)
        .map(|(&d, _)| d)
        .fold(0f32, f32::max);
    let noise_floor = 2.0 * deepest as f64 * noise.max(0.0) as f64 / bright as f64;
    (landscape, seed_h_px.max(noise_floor))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn components_are_the_8_connected_ones_each_searched_breadth_first() {
        // Source: the 8-connected components of `label_components` (checked against
        // skimage.measure.label in tests/reference.rs), and what a search from the
        // component's first pixel in raster order lists: every later pixel an 8-neighbour of
        // one listed before it. Random masks with edges, corner-only joins and one-pixel
        // components.
        let mut rng = crate::numeric::Rng::new(7);
        for (w, h, fill) in [(1, 1, 1.0), (7, 5, 0.5), (40, 30, 0.45), (64, 9, 0.6)] {
            let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() < fill).collect();
            let runs = Runs::of(&mask, w, h, true);
            let (pixels, components) = find_components(&mask, &runs, w, h);
            let (labels, count) = super::super::label::label_components(&mask, w, h);
            assert_eq!(components.len(), count as usize, "{w} x {h}");
            let grid = Grid::new(w, h);
            for c in &components {
                let own = &pixels[c.pixels.clone()];
                let label = labels[own[0] as usize];
                let mut expected: Vec<u32> = (0..(w * h) as u32).filter(|&p| labels[p as usize] == label).collect();
                assert_eq!(own[0], expected[0], "starts at its first pixel in raster order");
                for (k, &p) in own.iter().enumerate().skip(1) {
                    let near = |&q: &u32| grid.neighbours8(p as usize).any(|n| n == q as usize);
                    assert!(own[..k].iter().any(near), "pixel {p} reached from an earlier one");
                }
                let mut sorted = own.to_vec();
                sorted.sort_unstable();
                expected.sort_unstable();
                assert_eq!(sorted, expected, "{w} x {h}");
                assert_eq!(
                    (c.x0, c.y0),
                    own.iter().fold((w, h), |(x0, y0), &p| {
                        let (x, y) = grid.column_row(p as usize);
                        (x0.min(x), y0.min(y))
                    })
                );
            }
        }
    }

    #[test]
    fn a_mask_without_background_is_one_object() {
        // A frame that is foreground everywhere has no distance to a background pixel (the
        // outside of the image is not background): nothing to split, one object.
        let labels = split_touching(&vec![true; 48 * 32], 48, 32, 0.5, 1.0);
        assert!(labels.iter().all(|&l| l == 1));
    }

    /// An ellipse of semi-axes 14 and 8 px (convex: its distance map has one maximum), lit as
    /// two nuclei of intensity 100 divided by a seam of intensity 40 that is 4 px wide across
    /// its middle (construction).
    fn pressed_pair() -> (Vec<bool>, Vec<f32>, usize, usize) {
        let (w, h) = (40, 24);
        let inside = |x: f64, y: f64| ((x - 20.0) / 14.0).powi(2) + ((y - 12.0) / 8.0).powi(2) <= 1.0;
        let mask: Vec<bool> = (0..w * h).map(|i| inside((i % w) as f64, (i / w) as f64)).collect();
        let values: Vec<f32> = (0..w * h)
            .map(|i| {
                let x = (i % w) as f64;
                if !mask[i] {
                    0.0
                } else if (x - 20.0).abs() < 2.0 {
                    40.0
                } else {
                    100.0
                }
            })
            .collect();
        (mask, values, w, h)
    }

    /// Intensity cues whose blob step never fires (no response reaches an infinite floor), so
    /// that a test sees the distance-and-intensity landscape alone.
    fn landscape_only(values: &[f32], noise: f32) -> IntensityCues<'_> {
        let blobs = BlobRule {
            sigma_px: 1.0,
            floor: f32::INFINITY,
            separation_px: 0.0,
        };
        IntensityCues::new(values, noise, blobs)
    }

    /// The label image of `mask` split on the landscape of `cues` (seed dynamic 0.14 px, the
    /// distance smoothed by 1 px).
    fn split_on_landscape(mask: &[bool], w: usize, h: usize, cues: &IntensityCues) -> Vec<u32> {
        let runs = Runs::of(mask, w, h, true);
        split_touching_foreground(mask, &runs, w, h, 0.14, 1.0, Some(cues)).label_image(mask.len())
    }

    fn object_sizes(labels: &[u32]) -> Vec<usize> {
        let top = labels.iter().copied().max().unwrap_or(0) as usize;
        (1..=top)
            .map(|l| labels.iter().filter(|&&v| v == l as u32).count())
            .collect()
    }

    #[test]
    fn a_seam_splits_a_pair_that_shape_alone_cannot() {
        // Source: construction (pressed_pair). Shape alone: one object. With intensity: two
        // objects of equal size (the figure is symmetric about the seam; the seam's own
        // columns go to one side or the other, so the sizes differ by at most its pixels).
        let (mask, values, w, h) = pressed_pair();
        let shape_only = split_touching(&mask, w, h, 0.14, 1.0);
        assert_eq!(object_sizes(&shape_only).len(), 1);
        let labels = split_on_landscape(&mask, w, h, &landscape_only(&values, 0.0));
        let sizes = object_sizes(&labels);
        assert_eq!(sizes.len(), 2, "{sizes:?}");
        let seam = (0..w * h).filter(|&i| mask[i] && values[i] < 50.0).count();
        assert!(sizes[0].abs_diff(sizes[1]) <= seam, "{sizes:?}, seam {seam}");
        // Every pixel left of the seam is in one object, every pixel right of it in the other.
        let left = labels[12 * w + 10];
        let right = labels[12 * w + 30];
        assert_ne!(left, right);
        for i in (0..w * h).filter(|&i| mask[i]) {
            let x = i % w;
            if x < 18 {
                assert_eq!(labels[i], left);
            } else if x > 22 {
                assert_eq!(labels[i], right);
            }
        }
    }

    #[test]
    fn a_bright_pair_in_a_dimmer_cluster_is_judged_at_its_own_level() {
        // Source: construction. Twelve touching nuclei of 600 grey levels in a 4 x 3 grid, and
        // below it, touching its bottom row, a convex pair (an ellipse of semi-axes 9 x 5.5 px)
        // of two nuclei of 900 divided by a seam of 700, 2 px wide: one component, the pair
        // under a tenth of its pixels. At the component's bright level (its 90th percentile,
        // 600) the pair and its seam are all clamped to 1, so the landscape there is the
        // distance alone, with one maximum; at the pair's own level the seam shows, and the
        // pair is two objects.
        let (w, h) = (64, 64);
        let in_grid = |x: f64, y: f64| {
            (0..4).any(|i| {
                (0..3).any(|j| (x - 12.0 - 13.0 * i as f64).powi(2) + (y - 10.0 - 13.0 * j as f64).powi(2) <= 49.0)
            })
        };
        let pair = |x: f64, y: f64| ((x - 31.5) / 9.0).powi(2) + ((y - 47.5) / 5.5).powi(2) <= 1.0;
        let values: Vec<f32> = (0..w * h)
            .map(|i| {
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                match (pair(x, y), in_grid(x, y)) {
                    (true, _) if (x - 31.5).abs() < 1.0 => 700.0,
                    (true, _) => 900.0,
                    (false, true) => 600.0,
                    _ => 0.0,
                }
            })
            .collect();
        let mask: Vec<bool> = values.iter().map(|&v| v > 0.0).collect();
        let pair_share = (0..w * h).filter(|&i| pair((i % w) as f64, (i / w) as f64)).count() as f64
            / mask.iter().filter(|&&m| m).count() as f64;
        assert!(pair_share < 0.1, "{pair_share}");
        let labels = split_on_landscape(&mask, w, h, &landscape_only(&values, 0.0));
        let (left, right) = (labels[48 * w + 26], labels[48 * w + 37]);
        assert!(left > 0 && right > 0);
        assert_ne!(left, right, "the pair is two nuclei");
    }

    #[test]
    fn a_seam_within_the_noise_does_not_split() {
        // Source: the noise bound of intensity_weighted. The same pair with a noise σ of 40
        // grey levels: the landscape's noise at the centre is 8 px x 40 / 100 = 3.2 px, and
        // the seam's dip (from about 8 px beside the seam to 8 x 0.4 = 3.2 px in it, 4.8 px
        // deep) is below twice that (6.4 px), so it is one object.
        let (mask, values, w, h) = pressed_pair();
        let labels = split_on_landscape(&mask, w, h, &landscape_only(&values, 40.0));
        assert_eq!(object_sizes(&labels).len(), 1);
    }
}
