//! Mask clean-up and label bookkeeping: hole filling, connected components, size filtering
//! and canonical relabelling.

use super::hmaxima::{neighbours4, neighbours8};

/// Fills holes: background regions (4-connected) that do not reach the image border become
/// foreground. A nucleus with a dim nucleolus is one object, not a ring.
pub fn fill_holes(mask: &mut [bool], width: usize, height: usize) {
    let n = mask.len();
    let mut outside = vec![false; n];
    let mut stack: Vec<usize> = Vec::new();
    for i in 0..n {
        let (x, y) = (i % width, i / width);
        let border = x == 0 || y == 0 || x + 1 == width || y + 1 == height;
        if border && !mask[i] && !outside[i] {
            outside[i] = true;
            stack.push(i);
        }
    }
    while let Some(p) = stack.pop() {
        for q in neighbours4(p, width, height) {
            if !mask[q] && !outside[q] {
                outside[q] = true;
                stack.push(q);
            }
        }
    }
    mask.iter_mut().zip(&outside).for_each(|(m, o)| *m = !*o);
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
    let top = labels.iter().copied().max().unwrap_or(0) as usize;
    let mut area = vec![0u64; top + 1];
    for &l in labels.iter() {
        area[l as usize] += 1;
    }
    let mut new_id = vec![0u32; top + 1];
    let mut next = 0;
    for l in labels.iter_mut() {
        if *l == 0 {
            continue;
        }
        let old = *l as usize;
        let a = area[old] as f64;
        if a < min_area || a > max_area {
            *l = 0;
            continue;
        }
        if new_id[old] == 0 {
            next += 1;
            new_id[old] = next;
        }
        *l = new_id[old];
    }
    next
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
}
