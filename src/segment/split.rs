//! Splitting touching nuclei one foreground component at a time. Every stage of the split
//! (distance transform, seeds, watershed) is local to a connected component of the mask, so it
//! runs on a small window around each component instead of the whole frame: on a typical
//! frame, where nuclei cover a few percent of the pixels, that is most of the work saved.

use super::hmaxima::{h_maxima, neighbours8};
use super::label::label_components;
use super::{distance_transform, watershed};
use crate::preprocess::{gaussian_blur, gaussian_radius};

/// Marks a pixel as reached by the component search before its final label is known.
const VISITED: u32 = u32::MAX;

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

    /// Index within the window of frame pixel `i` (which must lie inside it).
    fn local(&self, i: usize, frame_width: usize) -> usize {
        (i / frame_width - self.y0) * self.width + (i % frame_width - self.x0)
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
/// change to any detection on the benchmark, crowded and stripe recordings, DEVELOPERS.md).
pub fn split_touching(
    mask: &[bool],
    width: usize,
    height: usize,
    seed_h_px: f64,
    distance_smoothing_px: f64,
) -> Vec<u32> {
    split_touching_with_pixels(mask, width, height, seed_h_px, distance_smoothing_px).0
}

/// [`split_touching`], also returning every foreground pixel's index (grouped by component),
/// so later stages can visit the objects without scanning the frame.
pub(crate) fn split_touching_with_pixels(
    mask: &[bool],
    width: usize,
    height: usize,
    seed_h_px: f64,
    distance_smoothing_px: f64,
) -> (Vec<u32>, Vec<u32>) {
    let mut labels = vec![0u32; mask.len()];
    let (pixels, components) = find_components(mask, width, height, &mut labels);
    let pad = if distance_smoothing_px > 0.0 {
        gaussian_radius(distance_smoothing_px as f32).max(1)
    } else {
        1
    };
    let mut next = 0u32;
    for c in &components {
        let window = Window::around(c, pad, width, height);
        let own = &pixels[c.pixels.clone()];
        let mut local_mask = vec![false; window.width * window.height];
        for &p in own {
            local_mask[window.local(p as usize, width)] = true;
        }
        let local = split_component(
            &local_mask,
            window.width,
            window.height,
            seed_h_px,
            distance_smoothing_px,
        );
        let mut most = 0;
        for &p in own {
            let l = local[window.local(p as usize, width)];
            labels[p as usize] = if l == 0 { 0 } else { next + l };
            most = most.max(l);
        }
        next += most;
    }
    (labels, pixels)
}

/// The 8-connected components of `mask` in raster order of their first pixel, with all their
/// pixels in one list; `visited` (all zero on entry) is used to mark reached pixels.
fn find_components(mask: &[bool], width: usize, height: usize, visited: &mut [u32]) -> (Vec<u32>, Vec<Component>) {
    let mut pixels: Vec<u32> = Vec::new();
    let mut components = Vec::new();
    for start in 0..mask.len() {
        if !mask[start] || visited[start] != 0 {
            continue;
        }
        let first = pixels.len();
        visited[start] = VISITED;
        pixels.push(start as u32);
        let (mut x0, mut x1, mut y0, mut y1) = (usize::MAX, 0, usize::MAX, 0);
        let mut cursor = first;
        while cursor < pixels.len() {
            let p = pixels[cursor] as usize;
            cursor += 1;
            let (x, y) = (p % width, p / width);
            (x0, x1, y0, y1) = (x0.min(x), x1.max(x + 1), y0.min(y), y1.max(y + 1));
            for q in neighbours8(p, width, height) {
                if mask[q] && visited[q] == 0 {
                    visited[q] = VISITED;
                    pixels.push(q as u32);
                }
            }
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

/// The split of one window: exact squared EDT, seeds on the (optionally smoothed) distance,
/// watershed from the seeds over the squared distances. Labels 1, 2, ... by seed order.
fn split_component(mask: &[bool], width: usize, height: usize, seed_h_px: f64, distance_smoothing_px: f64) -> Vec<u32> {
    if mask.iter().all(|&m| m) {
        // Foreground wall to wall: no pixel has a distance to the background (the outside of
        // the image is not background), so there is nothing to split on.
        return vec![1; mask.len()];
    }
    let squared = distance_transform::squared_edt(mask, width, height, (1.0, 1.0));
    let levels: Vec<u32> = squared.iter().map(|&d| d.min(u32::MAX as f64 / 2.0) as u32).collect();
    let distance: Vec<f32> = squared
        .iter()
        .map(|&d| if d > 0.0 { d.sqrt() as f32 } else { 0.0 })
        .collect();
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
    let seed_mask = h_maxima(&distance, mask, width, height, seed_h_px);
    let (seeds, _) = label_components(&seed_mask, width, height);
    watershed::seeded_watershed(&levels, mask, &seeds, width, height)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_mask_without_background_is_one_object() {
        // A frame that is foreground everywhere has no distance to a background pixel (the
        // outside of the image is not background): nothing to split, one object.
        let labels = split_touching(&vec![true; 48 * 32], 48, 32, 0.5, 1.0);
        assert!(labels.iter().all(|&l| l == 1));
    }
}
