//! Seeds for the watershed: the h-maxima of the distance map, i.e. maxima whose dynamic
//! (height above the saddle to a taller peak) is at least `h`.

use super::queue::LevelQueue;

/// Levels per pixel of distance when values are quantised for the bucket queue: 1/256 px is
/// far below the precision of a segmented outline.
pub const LEVELS_PER_UNIT: f64 = 256.0;

/// Marks the h-maxima of `values` (non-negative, e.g. a distance map) inside `mask`: pixels
/// where `values − R(values − h) ≥ h`, with `R` the grey reconstruction by dilation under
/// `values` (8-connected).
///
/// # Method
/// P. Soille (2003), *Morphological Image Analysis*, 2nd ed., Springer, §6.3.4 (h-maxima via
/// reconstruction); reconstruction by propagation from the highest level down, L. Vincent
/// (1993), "Morphological grayscale reconstruction in image analysis", IEEE Trans. Image
/// Process. 2(2):176–201, doi:10.1109/83.217222, over values quantised to
/// 1/[`LEVELS_PER_UNIT`] (departure: values are rounded to that step), highest level first from
/// a hierarchical queue ([`LevelQueue`]). As scikit-image `h_maxima`, a dynamic exactly equal
/// to `h` keeps its seed.
pub fn h_maxima(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> Vec<bool> {
    let n = values.len();
    // f32 arithmetic: distances of a frame are far below 2^24 / 256, so the product is exact
    // enough and `as u32` saturates.
    let level = |v: f32| (v.max(0.0) * LEVELS_PER_UNIT as f32 + 0.5) as u32;
    let levels: Vec<u32> = values.iter().map(|&v| level(v)).collect();
    let h_levels = (h * LEVELS_PER_UNIT).round().max(0.0) as u32;
    // Marker = value − h (as levels, floored at 0); reconstruction starts from it.
    let mut rec: Vec<u32> = levels.iter().map(|&v| v.saturating_sub(h_levels)).collect();
    // A pixel whose marker is at level 0 can raise nothing (every level is ≥ 0), so it is
    // never queued. Entries left behind by a later raise are skipped when they come up.
    let top = (0..n).filter(|&i| mask[i]).map(|i| rec[i]).max().unwrap_or(0);
    let mut queue = LevelQueue::new(top);
    for i in (0..n).filter(|&i| mask[i] && rec[i] > 0) {
        queue.push(rec[i], i as u32);
    }
    for current in (1..=top).rev() {
        while let Some(p) = queue.pop(current) {
            let p = p as usize;
            if rec[p] != current {
                continue;
            }
            for q in neighbours8(p, width, height) {
                if !mask[q] {
                    continue;
                }
                let candidate = current.min(levels[q]);
                if candidate > rec[q] {
                    rec[q] = candidate;
                    queue.push(candidate, q as u32);
                }
            }
        }
    }
    (0..n)
        .map(|i| mask[i] && levels[i] >= h_levels && levels[i] - rec[i] >= h_levels)
        .collect()
}

pub(crate) fn neighbours8(i: usize, width: usize, height: usize) -> impl Iterator<Item = usize> {
    let (x, y) = ((i % width) as isize, (i / width) as isize);
    const OFFSETS: [(isize, isize); 8] = [(-1, -1), (0, -1), (1, -1), (-1, 0), (1, 0), (-1, 1), (0, 1), (1, 1)];
    OFFSETS.iter().filter_map(move |&(dx, dy)| {
        let (nx, ny) = (x + dx, y + dy);
        (nx >= 0 && ny >= 0 && nx < width as isize && ny < height as isize).then(|| ny as usize * width + nx as usize)
    })
}

/// The up-to-4 edge neighbours of a pixel inside the image.
pub(crate) fn neighbours4(i: usize, width: usize, height: usize) -> impl Iterator<Item = usize> {
    let (x, y) = (i % width, i / width);
    let left = (x > 0).then(|| i - 1);
    let right = (x + 1 < width).then(|| i + 1);
    let up = (y > 0).then(|| i - width);
    let down = (y + 1 < height).then(|| i + width);
    [up, left, right, down].into_iter().flatten()
}
