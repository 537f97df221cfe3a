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
    clear_slivers(mask, min_area, (w, h));
    let candidates = above_level_outside(values, low, mask);
    let regions = Regions::of(&candidates, (w, h));
    let runs = &regions.runs.spans;
    let mut touches = vec![false; runs.len()];
    for (k, &run) in runs.iter().enumerate() {
        touches[regions.of_run[k]] |= beside_mask(mask, run, (w, h));
    }
    let grid = Grid::new(w, h);
    let mut summit = vec![false; runs.len()];
    for (k, &(y, s, e)) in runs.iter().enumerate() {
        let id = regions.of_run[k];
        if touches[id] && !summit[id] {
            summit[id] = (y * w + s..y * w + e).any(|p| is_summit(p, id, &regions, values, &grid, core_radius));
        }
    }
    // Decided on the mask as it was: a pixel added makes no neighbour of a later one.
    let mut add: Vec<usize> = Vec::new();
    for (k, &(y, s, e)) in runs.iter().enumerate() {
        let id = regions.of_run[k];
        if !touches[id] {
            add.extend(y * w + s..y * w + e);
        } else if summit[id] {
            add.extend((y * w + s..y * w + e).filter(|&p| !grid.neighbours8(p).any(|q| mask[q])));
        }
    }
    for p in add {
        mask[p] = true;
    }
}

crate::multiversioned! {
    /// Which values lie above `level` where `mask` is not set (the candidates of
    /// [`add_dim_nuclei`]), as many pixels per instruction as the level's vectors hold.
    pub(super) fn above_level_outside / above_level_outside_with(values: &[f32], level: f32, mask: &[bool]) -> Vec<bool> {
        mask.iter().zip(values).map(|(&m, &v)| !m & (v > level)).collect()
    }
}

/// Clears the 8-connected components of `mask` smaller than `min_area` px ([`Regions`]).
fn clear_slivers(mask: &mut [bool], min_area: f64, (w, h): (usize, usize)) {
    let regions = Regions::of(mask, (w, h));
    let spans = &regions.runs.spans;
    let mut area = vec![0usize; spans.len()];
    for (&id, &(_, s, e)) in regions.of_run.iter().zip(spans) {
        area[id] += e - s;
    }
    for (&id, &(y, s, e)) in regions.of_run.iter().zip(spans) {
        if (area[id] as f64) < min_area {
            mask[y * w + s..y * w + e].iter_mut().for_each(|m| *m = false);
        }
    }
}

/// The 8-connected regions of a mask as runs ([`Runs`], joined by union-find): each run's
/// region is named by one of its runs. Found by scanning rows in order rather than by flooding
/// from pixel to pixel, whose scattered reads of frame-sized maps cost most of this step.
struct Regions {
    runs: Runs,
    /// The region of each run.
    of_run: Vec<usize>,
}

impl Regions {
    fn of(mask: &[bool], (w, h): (usize, usize)) -> Regions {
        let runs = Runs::of(mask, w, h, true);
        let mut sets = runs.joined(Connectivity::Eight);
        let of_run = (0..runs.len()).map(|k| sets.find(k)).collect();
        Regions { runs, of_run }
    }

    /// The region holding the pixel at column `x`, row `y`, if any.
    fn at(&self, x: usize, y: usize) -> Option<usize> {
        self.runs.run_at(x, y).map(|k| self.of_run[k])
    }
}

/// Whether the run `(y, s, e)` has a pixel of `mask` among its 8-neighbours.
fn beside_mask(mask: &[bool], (y, s, e): (usize, usize, usize), (w, h): (usize, usize)) -> bool {
    let (from, to) = (s.saturating_sub(1), (e + 1).min(w));
    let row_has = |r: usize| mask[r * w + from..r * w + to].iter().any(|&m| m);
    (y > 0 && row_has(y - 1)) || (y + 1 < h && row_has(y + 1)) || mask[y * w + from] || mask[y * w + to - 1]
}

/// Whether pixel `p` of region `id` is a local maximum (no 8-neighbour higher) with every
/// pixel within `radius` of it inside the image and the region.
fn is_summit(p: usize, id: usize, regions: &Regions, values: &[f32], grid: &Grid, radius: f64) -> bool {
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
            if regions.at(nx as usize, ny as usize) != Some(id) {
                return false;
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 9 x 9 region with a single summit at the centre (values fall with the distance from
    /// it), less the pixels for which `outside(x, y)` holds.
    fn summit_test(outside: impl Fn(usize, usize) -> bool) -> bool {
        let (w, h) = (9, 9);
        let values: Vec<f32> = (0..w * h)
            .map(|p| 100.0 - ((p % w) as f32 - 4.0).abs() - ((p / w) as f32 - 4.0).abs())
            .collect();
        let inside: Vec<bool> = (0..w * h).map(|p| !outside(p % w, p / w)).collect();
        let regions = Regions::of(&inside, (w, h));
        let id = regions.at(4, 4).expect("the centre is inside");
        is_summit(4 * w + 4, id, &regions, &values, &Grid::new(w, h), 2.5)
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
