//! Mask clean-up and label bookkeeping: hole filling, connected components, size filtering
//! and canonical relabelling.

use super::hmaxima::neighbours8;

/// Fills holes: background regions (4-connected) that do not reach the image border become
/// foreground. A nucleus with a dim nucleolus is one object, not a ring.
///
/// Background runs of each row are joined with the overlapping runs of the row above by
/// union-find (a run-based two-pass labelling, as in K. Wu, E. Otoo & K. Suzuki (2009),
/// "Optimizing two-pass connected-component labeling algorithms", Pattern Anal. Appl.
/// 12:117–135, doi:10.1007/s10044-008-0109-y), so the cost follows the number of runs rather
/// than a flood over every background pixel.
pub fn fill_holes(mask: &mut [bool], width: usize, height: usize) {
    // Runs of background: (row, start, end exclusive).
    let mut runs: Vec<(usize, usize, usize)> = Vec::new();
    let mut row_start = Vec::with_capacity(height + 1);
    for y in 0..height {
        row_start.push(runs.len());
        let row = &mask[y * width..(y + 1) * width];
        let mut x = 0;
        while x < width {
            if row[x] {
                x += 1;
                continue;
            }
            let start = x;
            while x < width && !row[x] {
                x += 1;
            }
            runs.push((y, start, x));
        }
    }
    row_start.push(runs.len());
    let mut sets = crate::numeric::DisjointSets::new(runs.len());
    for y in 1..height {
        let (above, here) = (row_start[y - 1]..row_start[y], row_start[y]..row_start[y + 1]);
        let mut a = above.start;
        for r in here {
            let (_, s, e) = runs[r];
            while a < above.end && runs[a].2 <= s {
                a += 1;
            }
            let mut b = a;
            while b < above.end && runs[b].1 < e {
                sets.union(b, r);
                b += 1;
            }
        }
    }
    let mut outside = vec![false; runs.len()];
    for (k, &(y, s, e)) in runs.iter().enumerate() {
        if y == 0 || y + 1 == height || s == 0 || e == width {
            let root = sets.find(k);
            outside[root] = true;
        }
    }
    for (k, &(y, s, e)) in runs.iter().enumerate() {
        let root = sets.find(k);
        if !outside[root] {
            mask[y * width + s..y * width + e].iter_mut().for_each(|m| *m = true);
        }
    }
}

/// Labels the 8-connected components of `mask` 1, 2, ... in raster order of their first pixel.
pub fn label_components(mask: &[bool], width: usize, height: usize) -> (Vec<u32>, u32) {
    let mut labels = vec![0u32; mask.len()];
    let mut next = 0;
    let mut stack = Vec::new();
    for i in 0..mask.len() {
        if mask[i] && labels[i] == 0 {
            next += 1;
            labels[i] = next;
            stack.push(i);
            while let Some(p) = stack.pop() {
                for q in neighbours8(p, width, height) {
                    if mask[q] && labels[q] == 0 {
                        labels[q] = next;
                        stack.push(q);
                    }
                }
            }
        }
    }
    (labels, next)
}

/// Drops objects whose area is outside `[min_area, max_area]` and renumbers the rest 1, 2, ...
/// in raster order of their first pixel, so labels do not depend on seed order.
pub fn filter_and_relabel(labels: &mut [u32], min_area: f64, max_area: f64) -> u32 {
    let foreground: Vec<u32> = (0..labels.len() as u32).filter(|&i| labels[i as usize] != 0).collect();
    filter_and_relabel_pixels(labels, &foreground, min_area, max_area)
}

/// [`filter_and_relabel`] for a label image that is zero outside `pixels` (indices in any
/// order): only those pixels are read and rewritten.
pub fn filter_and_relabel_pixels(labels: &mut [u32], pixels: &[u32], min_area: f64, max_area: f64) -> u32 {
    let top = pixels.iter().map(|&i| labels[i as usize]).max().unwrap_or(0) as usize;
    let mut area = vec![0u64; top + 1];
    let mut first = vec![u32::MAX; top + 1];
    for &i in pixels {
        let l = labels[i as usize] as usize;
        area[l] += 1;
        first[l] = first[l].min(i);
    }
    let mut kept: Vec<usize> = (1..=top)
        .filter(|&l| area[l] > 0 && (min_area..=max_area).contains(&(area[l] as f64)))
        .collect();
    kept.sort_unstable_by_key(|&l| first[l]);
    let mut new_id = vec![0u32; top + 1];
    for (k, &l) in kept.iter().enumerate() {
        new_id[l] = k as u32 + 1;
    }
    for &i in pixels {
        let l = &mut labels[i as usize];
        *l = new_id[*l as usize];
    }
    kept.len() as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ring_is_filled_and_components_counted() {
        // Source: hand-drawn 5x5 ring (hole at the centre) plus a separate pixel.
        #[rustfmt::skip]
        let mut m: Vec<bool> = [
            1,1,1,0,0,
            1,0,1,0,0,
            1,1,1,0,0,
            0,0,0,0,0,
            0,0,0,0,1,
        ].iter().map(|&v| v == 1).collect();
        fill_holes(&mut m, 5, 5);
        assert!(m[6]);
        let (labels, n) = label_components(&m, 5, 5);
        assert_eq!(n, 2);
        assert_eq!(labels[24], 2);
        let mut l = labels.clone();
        assert_eq!(filter_and_relabel(&mut l, 2.0, 100.0), 1);
        assert_eq!(l[24], 0);
    }

    #[test]
    fn relabelling_follows_the_first_pixel_in_raster_order() {
        // Hand-made: label 7 starts at pixel 1, label 3 at pixel 2, label 5 (one pixel) is
        // dropped by the minimum area; 7 becomes 1 and 3 becomes 2.
        let mut l = vec![0, 7, 3, 3, 7, 5, 0, 3];
        assert_eq!(filter_and_relabel(&mut l, 2.0, 10.0), 2);
        assert_eq!(l, vec![0, 1, 2, 2, 1, 0, 0, 2]);
    }
}
