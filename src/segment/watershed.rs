//! Seeded watershed on the distance map, restricted to the foreground mask, so that touching
//! nuclei come out as separate objects.

use super::queue::LevelQueue;
use crate::numeric::Grid;

/// Floods the mask from labelled seeds, highest distance first, and returns one label per
/// pixel (0 = background). `levels` are integer flooding levels (here squared distances):
/// higher levels are flooded first; within a level, first come first served.
///
/// # Method
/// F. Meyer (1994), "Topographic distance and watershed lines", Signal Processing 38:113–125,
/// doi:10.1016/0165-1684(94)90060-4 (priority flooding from markers); L. Vincent & P. Soille
/// (1991), IEEE PAMI 13(6):583–598, doi:10.1109/34.87344. The priority queue is a
/// hierarchical queue over the integer levels ([`LevelQueue`]), O(n + levels). Departure: a
/// pixel reached from below (a maximum without its own seed) joins the current level instead
/// of jumping the queue.
pub fn seeded_watershed(levels: &[u32], mask: &[bool], seeds: &[u32], width: usize, height: usize) -> Vec<u32> {
    let n = levels.len();
    let grid = Grid::new(width, height);
    let mut labels = seeds.to_vec();
    let top = levels.iter().copied().max().unwrap_or(0) as usize;
    let mut queue = LevelQueue::new(top as u32);
    for i in 0..n {
        if labels[i] != 0 {
            queue.push(levels[i], i as u32);
        }
    }
    let mut next = queue.highest_occupied(top as u32);
    while let Some(level) = next {
        while let Some(p) = queue.pop(level) {
            let p = p as usize;
            for q in grid.neighbours4(p) {
                if mask[q] && labels[q] == 0 {
                    labels[q] = labels[p];
                    queue.push(levels[q].min(level), q as u32);
                }
            }
        }
        // Later pushes go to this level or below, and this one is empty now.
        next = queue.highest_occupied(level);
    }
    labels
}

/// [`seeded_watershed`] from seeds carrying `count` labels, its levels made by `levels` only
/// when there are two labels or more: with one or none, the order of flooding decides
/// nothing, and a plain 4-connected fill from the seeds gives the same labels without levels
/// or a queue. Most components of a frame are one nucleus with one seed.
pub fn flood_seeds(
    mask: &[bool],
    seeds: Vec<u32>,
    count: u32,
    (width, height): (usize, usize),
    levels: impl FnOnce() -> Vec<u32>,
) -> Vec<u32> {
    if count <= 1 {
        return flood_one_label(mask, seeds, width, height);
    }
    seeded_watershed(&levels(), mask, &seeds, width, height)
}

/// What [`seeded_watershed`] returns when the seeds carry one label or none: every mask pixel
/// 4-connected to a seed takes the seed's label (pixels the flooding cannot reach stay 0).
/// With a single label the order of flooding decides nothing, so the same labels come out
/// (tested against [`seeded_watershed`]).
///
/// # Method
/// Scan-line filling (A. S. Glassner, ed. (1990), *Graphics Gems*, Academic Press, "A seed
/// fill algorithm" by P. Heckbert, pp. 275–277 and 721–722; pages from memory): from each
/// pixel taken off the stack its run of the row is filled left and right, then the rows above
/// and below are scanned along that run and the first pixel of each unfilled stretch of the
/// mask is pushed; rows are read in order instead of four neighbours a pixel, each a
/// branch the processor could not predict.
fn flood_one_label(mask: &[bool], seeds: Vec<u32>, width: usize, height: usize) -> Vec<u32> {
    let mut labels = seeds;
    let open = |labels: &[u32], p: usize| mask[p] && labels[p] == 0;
    let mut stack: Vec<(usize, usize)> = (0..labels.len())
        .filter(|&p| labels[p] != 0)
        .map(|p| (p % width, p / width))
        .collect();
    while let Some((x, y)) = stack.pop() {
        let row = y * width;
        let label = labels[row + x];
        let (mut left, mut right) = (x, x);
        while left > 0 && open(&labels, row + left - 1) {
            left -= 1;
            labels[row + left] = label;
        }
        while right + 1 < width && open(&labels, row + right + 1) {
            right += 1;
            labels[row + right] = label;
        }
        let above = y.checked_sub(1);
        let below = (y + 1 < height).then_some(y + 1);
        for next in [above, below].into_iter().flatten() {
            let next_row = next * width;
            let mut column = left;
            while column <= right {
                if open(&labels, next_row + column) {
                    labels[next_row + column] = label;
                    stack.push((column, next));
                    // The rest of this stretch is filled from the pixel just pushed.
                    while column < right && open(&labels, next_row + column + 1) {
                        column += 1;
                    }
                }
                column += 1;
            }
        }
    }
    labels
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_label_floods_as_the_priority_flooding() {
        // Source: definition (the doc of `flood_one_label`): with one seed label the flooding
        // order decides nothing. Random masks with holes and pixels joined only at a corner
        // (which 4-connected flooding does not cross), random levels, seeds of one label on
        // one to three pixels (some outside the mask), and no seed at all.
        let mut rng = crate::numeric::Rng::new(7);
        for case in 0..300 {
            let (w, h) = (1 + (rng.next_u64() % 30) as usize, 1 + (rng.next_u64() % 30) as usize);
            let n = w * h;
            let fill = 0.3 + 0.6 * rng.uniform();
            let mask: Vec<bool> = (0..n).map(|_| rng.uniform() < fill).collect();
            let levels: Vec<u32> = (0..n).map(|_| (rng.next_u64() % 50) as u32).collect();
            let mut seeds = vec![0u32; n];
            let label = 1 + (rng.next_u64() % 5) as u32;
            for _ in 0..case % 4 {
                seeds[(rng.next_u64() % n as u64) as usize] = label;
            }
            let want = seeded_watershed(&levels, &mask, &seeds, w, h);
            assert_eq!(flood_one_label(&mask, seeds, w, h), want, "case {case}");
        }
    }

    #[test]
    fn floods_exactly_as_the_reference_on_a_tie_free_landscape() {
        // Source: fixtures/methods/check_values.md §5, pixel-exact case (scikit-image 0.26
        // `watershed(-levels, seeds, mask, connectivity=1)`): three integer cones with unique
        // levels, seeds at the local maxima: sizes [218, 329, 128], labels' CRC-32 1ab2657a.
        let (h, w) = (24usize, 32usize);
        let n = h * w;
        let cones = [(6i64, 8i64, 9i64), (15, 22, 11), (19, 6, 7)];
        let base: Vec<i64> = (0..n)
            .map(|i| {
                let (y, x) = ((i / w) as i64, (i % w) as i64);
                cones
                    .iter()
                    .map(|&(cy, cx, r)| r - (y - cy).abs() - (x - cx).abs())
                    .max()
                    .unwrap()
            })
            .collect();
        let levels: Vec<u32> = (0..n)
            .map(|i| (base[i] * n as i64 + (i as i64 * 389) % n as i64 + 20 * n as i64) as u32)
            .collect();
        let mask: Vec<bool> = base.iter().map(|&b| b > -4).collect();
        let mut seeds = vec![0u32; n];
        let mut k = 0;
        for i in 0..n {
            if mask[i] && Grid::new(w, h).neighbours4(i).all(|q| levels[q] < levels[i]) {
                k += 1;
                seeds[i] = k;
            }
        }
        assert_eq!(k, 3);
        let labels = seeded_watershed(&levels, &mask, &seeds, w, h);
        let sizes: Vec<usize> = (1..=3).map(|l| labels.iter().filter(|&&v| v == l).count()).collect();
        assert_eq!(sizes, vec![218, 329, 128]);
        let bytes: Vec<u8> = labels.iter().flat_map(|v| v.to_le_bytes()).collect();
        assert_eq!(format!("{:08x}", crc32fast::hash(&bytes)), "1ab2657a");
    }
}
