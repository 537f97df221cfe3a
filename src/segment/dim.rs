//! Nuclei too dim for the frame's global threshold: found at a lower level, alone or pressed
//! against brighter nuclei.

use super::label::{Connectivity, Runs};
use crate::numeric::Grid;

/// Adds to `mask` the nuclei too dim for the frame's threshold. A global threshold set by
/// bright nuclei cuts a nucleus half as bright as its neighbours to a sliver or loses it. So
/// slivers of the mask smaller than `min_area` px (which the size filter would drop) are
/// first cleared, and the candidates are the connected regions above a lower level (half the
/// threshold, and at least 6 noise standard deviations) outside the mask:
/// - a region that touches no object of the mask rises above the lower level but nowhere above
///   the threshold: a dim nucleus (or noise, which the minimum area removes); it is added;
/// - a region that touches an object is either the blurred rim of that brighter nucleus (thin,
///   its values rising towards the object) or a dim nucleus pressed against it. It is added
///   only where it holds a summit of its own: a local maximum with a disc of `core_radius` px
///   around it inside the region, which a rim never holds. It is added without its pixels next
///   to the object, so the two stay separate objects and the bright one keeps the outline the
///   threshold gave it.
///
/// # Method
/// Two levels as in hysteresis thresholding (J. Canny (1986), "A computational approach to
/// edge detection", IEEE Trans. PAMI 8(6):679–698, doi:10.1109/TPAMI.1986.4767851), read the
/// other way round: the low level's regions are kept where the high level found nothing, or
/// where they hold a nucleus of their own. The factor of one half, the noise bound and the
/// summit rule are our own choices.
pub(super) fn add_dim_nuclei(
    mask: &mut [bool],
    values: &[f32],
    threshold: f64,
    noise: f32,
    (w, h): (usize, usize),
    core_radius: f64,
    min_area: f64,
) {
    let low = (0.5 * threshold).max(6.0 * noise as f64);
    if low >= threshold {
        return;
    }
    let low = low as f32;
    let grid = Grid::new(w, h);
    clear_slivers(mask, min_area, (w, h));
    // Read at every pixel, written at a few (see `filled`).
    let mut region = crate::numeric::filled(mask.len(), 0u32);
    let mut next = 0u32;
    let mut add: Vec<usize> = Vec::new();
    let candidate = |m: bool, v: f32| !m & (v > low);
    for start in chunks_where(mask, values, candidate).into_iter().flatten() {
        if !candidate(mask[start], values[start]) || region[start] != 0 {
            continue;
        }
        next += 1;
        let (pixels, touches) = flood(start, next, &mut region, mask, values, low, (w, h));
        if !touches {
            add.extend(pixels);
        } else if pixels
            .iter()
            .any(|&p| is_summit(p, next, &region, values, &grid, core_radius))
        {
            add.extend(pixels.into_iter().filter(|&p| !grid.neighbours8(p).any(|q| mask[q])));
        }
    }
    for p in add {
        mask[p] = true;
    }
}

/// Clears the 8-connected components of `mask` smaller than `min_area` px (their runs joined
/// by union-find, [`Runs`]).
fn clear_slivers(mask: &mut [bool], min_area: f64, (w, h): (usize, usize)) {
    let runs = Runs::of(mask, w, h, true);
    let mut sets = runs.joined(Connectivity::Eight);
    let mut area = vec![0usize; runs.len()];
    for (k, &(_, s, e)) in runs.spans.iter().enumerate() {
        area[sets.find(k)] += e - s;
    }
    for (k, &(y, s, e)) in runs.spans.iter().enumerate() {
        if (area[sets.find(k)] as f64) < min_area {
            mask[y * w + s..y * w + e].iter_mut().for_each(|m| *m = false);
        }
    }
}

/// The 64-pixel chunks of the frame where `test(mask, value)` holds for some pixel: each
/// chunk is tested whole, branch-free (vectorised), so a scan for the few pixels that start
/// something skips the empty stretches of a frame cheaply.
fn chunks_where<T: Copy>(mask: &[bool], values: &[T], test: impl Fn(bool, T) -> bool) -> Vec<std::ops::Range<usize>> {
    const CHUNK: usize = 64;
    (0..mask.len().div_ceil(CHUNK))
        .map(|c| c * CHUNK..((c + 1) * CHUNK).min(mask.len()))
        .filter(|range| {
            let (m, v) = (&mask[range.clone()], &values[range.clone()]);
            m.iter().zip(v).fold(false, |any, (&m, &v)| any | test(m, v))
        })
        .collect()
}

/// Labels with `id` the 8-connected region above `low` and outside `mask` that holds `start`;
/// returns its pixels and whether it touches the mask.
fn flood(
    start: usize,
    id: u32,
    region: &mut [u32],
    mask: &[bool],
    values: &[f32],
    low: f32,
    (w, h): (usize, usize),
) -> (Vec<usize>, bool) {
    region[start] = id;
    let mut touches = false;
    let pixels = grow(start, (w, h), |q| {
        touches |= mask[q];
        let take = region[q] == 0 && !mask[q] && values[q] > low;
        if take {
            region[q] = id;
        }
        take
    });
    (pixels, touches)
}

/// The 8-connected pixels reached from `start` through pixels that `take` accepts, `start`
/// first. `take` is asked for every neighbour reached and must mark what it accepts, so that
/// it refuses the same pixel when asked again.
fn grow(start: usize, (w, h): (usize, usize), mut take: impl FnMut(usize) -> bool) -> Vec<usize> {
    let grid = Grid::new(w, h);
    let mut pixels = vec![start];
    let mut k = 0;
    while k < pixels.len() {
        let p = pixels[k];
        k += 1;
        for q in grid.neighbours8(p) {
            if take(q) {
                pixels.push(q);
            }
        }
    }
    pixels
}

/// Whether pixel `p` of region `id` is a local maximum (no 8-neighbour higher) with every
/// pixel within `radius` of it inside the image and the region.
fn is_summit(p: usize, id: u32, region: &[u32], values: &[f32], grid: &Grid, radius: f64) -> bool {
    let (w, h) = (grid.width, grid.height);
    if grid.neighbours8(p).any(|q| values[q] > values[p]) {
        return false;
    }
    let r = radius.floor() as isize;
    let (x, y) = grid.column_row(p);
    let (x, y) = (x as isize, y as isize);
    for dy in -r..=r {
        for dx in -r..=r {
            if ((dx * dx + dy * dy) as f64) > radius * radius {
                continue;
            }
            let (nx, ny) = (x + dx, y + dy);
            if nx < 0 || ny < 0 || nx >= w as isize || ny >= h as isize {
                return false;
            }
            if region[ny as usize * w + nx as usize] != id {
                return false;
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 9 x 9 region `1` with a single summit at the centre (values fall with the distance
    /// from it), where the pixels for which `outside(x, y)` holds belong to region 0.
    fn summit_test(outside: impl Fn(usize, usize) -> bool) -> bool {
        let (w, h) = (9, 9);
        let values: Vec<f32> = (0..w * h)
            .map(|p| 100.0 - ((p % w) as f32 - 4.0).abs() - ((p / w) as f32 - 4.0).abs())
            .collect();
        let region: Vec<u32> = (0..w * h).map(|p| u32::from(!outside(p % w, p / w))).collect();
        is_summit(4 * w + 4, 1, &region, &values, &Grid::new(w, h), 2.5)
    }

    #[test]
    fn a_summit_needs_its_whole_disc_inside_the_region() {
        // Source: definition (the doc of `is_summit`): every pixel within the radius (2.5 px)
        // of the maximum must lie in its region. One pixel of another region 2 px above, below,
        // left or right of it makes it no summit; 3 px away (outside the disc) it does not.
        assert!(summit_test(|_, _| false));
        for (dx, dy) in [(0, -2), (0, 2), (-2, 0), (2, 0), (-1, -2), (2, 1)] {
            let (x, y) = ((4 + dx) as usize, (4 + dy) as usize);
            assert!(!summit_test(|a, b| (a, b) == (x, y)), "({dx}, {dy})");
        }
        for (x, y) in [(4, 1), (4, 7), (1, 4), (7, 4), (2, 2)] {
            assert!(summit_test(|a, b| (a, b) == (x, y)), "({x}, {y})");
        }
    }
}
