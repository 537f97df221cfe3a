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
    let (levels, rec, h_levels) = reconstruct(values, mask, width, height, h);
    (0..levels.len())
        .map(|i| mask[i] && levels[i] >= h_levels && levels[i] - rec[i] >= h_levels)
        .collect()
}

/// Seeds from the h-maxima as regional maxima of the reconstruction `R(values − h)`: one label
/// per regional maximum (a plateau of `R` with no higher 8-neighbour in `mask`), given to
/// that plateau's pixels where `values − R ≥ h`. Unlike [`h_maxima`] read as a pixel set, two
/// peaks of equal height joined above `peak − h` form one plateau of `R` and so one seed: a
/// maximum's dynamic is measured to the saddle toward a peak at least as high, so of two equal
/// peaks whose saddle is shallower than `h`, only one stands (Soille 2003, §6.3.4, where the
/// h-maxima are `RMAX(HMAX_h(f))`; M. Grimaud (1992), "New measure of contrast: the dynamics",
/// Proc. SPIE 1769:292–305). Returns the labels (0 = no seed) and their count.
pub fn h_maxima_seeds(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> (Vec<u32>, u32) {
    let (levels, rec, h_levels) = reconstruct(values, mask, width, height, h);
    let n = levels.len();
    let mut visited = vec![false; n];
    let mut seeds = vec![0u32; n];
    let mut members = Vec::new();
    let mut count = 0u32;
    for start in 0..n {
        if !mask[start] || visited[start] {
            continue;
        }
        // The plateau of `rec` through `start`, and whether anything around it is higher.
        let level = rec[start];
        visited[start] = true;
        members.clear();
        members.push(start);
        let mut is_maximum = true;
        let mut cursor = 0;
        while cursor < members.len() {
            let p = members[cursor];
            cursor += 1;
            for q in neighbours8(p, width, height).filter(|&q| mask[q]) {
                if rec[q] > level {
                    is_maximum = false;
                } else if rec[q] == level && !visited[q] {
                    visited[q] = true;
                    members.push(q);
                }
            }
        }
        if !is_maximum {
            continue;
        }
        let peaks: Vec<usize> = members
            .iter()
            .copied()
            .filter(|&p| levels[p] >= h_levels && levels[p] - rec[p] >= h_levels)
            .collect();
        if peaks.is_empty() {
            continue;
        }
        count += 1;
        for p in peaks {
            seeds[p] = count;
        }
    }
    (seeds, count)
}

/// The quantised levels of `values`, the reconstruction by dilation of `levels − h` under
/// them, and `h` in levels.
fn reconstruct(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> (Vec<u32>, Vec<u32>, u32) {
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
    (levels, rec, h_levels)
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

#[cfg(test)]
mod tests {
    use super::*;

    /// A one-row profile: two peaks `a` and `b` at columns 2 and 8, a saddle `s` at 5.
    fn profile(a: f32, s: f32, b: f32) -> Vec<f32> {
        vec![
            0.0,
            0.5 * a,
            a,
            0.5 * (a + s),
            s,
            s,
            0.5 * (b + s),
            0.5 * (b + s),
            b,
            0.5 * b,
            0.0,
        ]
    }

    fn seed_columns(v: &[f32], h: f64) -> Vec<(usize, u32)> {
        let mask = vec![true; v.len()];
        let (seeds, _) = h_maxima_seeds(v, &mask, v.len(), 1, h);
        seeds
            .iter()
            .enumerate()
            .filter(|(_, &l)| l > 0)
            .map(|(i, &l)| (i, l))
            .collect()
    }

    #[test]
    fn seeds_follow_the_dynamics_of_the_peaks() {
        // Source: the definition of a maximum's dynamic (Grimaud 1992): the descent needed to
        // reach a higher (or equal) peak; hand-made profiles.
        // Deep saddle: both peaks have dynamic 6 ≥ 2, two seeds.
        assert_eq!(seed_columns(&profile(8.0, 2.0, 8.0), 2.0), vec![(2, 1), (8, 2)]);
        // Equal peaks, saddle 1 below them: one of the two has dynamic 1 < 2, so one seed
        // (both peak pixels, one label), where the pixel-set reading gives two.
        assert_eq!(seed_columns(&profile(8.0, 7.0, 8.0), 2.0), vec![(2, 1), (8, 1)]);
        let mask = vec![true; 11];
        let pixel_set = h_maxima(&profile(8.0, 7.0, 8.0), &mask, 11, 1, 2.0);
        assert_eq!(pixel_set.iter().filter(|&&b| b).count(), 2);
        // Unequal peaks, shallow saddle: only the higher one.
        assert_eq!(seed_columns(&profile(8.0, 7.0, 7.5), 2.0), vec![(2, 1)]);
    }
}
