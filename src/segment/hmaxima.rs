//! Seeds for the watershed: the h-maxima of the distance map, i.e. maxima whose dynamic
//! (height above the saddle to a taller peak) is at least `h`.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

/// Marks the h-maxima of `values` inside `mask`: pixels where `values − R(values − h) ≥ h`,
/// with `R` the grey reconstruction by dilation under `values` (8-connected).
///
/// # Method
/// P. Soille (2003), *Morphological Image Analysis*, 2nd ed., Springer, §6.3.4 (h-maxima via
/// reconstruction); reconstruction by priority-queue propagation, L. Vincent (1993),
/// "Morphological grayscale reconstruction in image analysis", IEEE Trans. Image Process.
/// 2(2):176–201, doi:10.1109/83.217222. As scikit-image `h_maxima`, the marker is lowered by a
/// further `2·ε·|v|` so that a dynamic exactly equal to `h` keeps its seed.
pub fn h_maxima(values: &[f32], mask: &[bool], width: usize, height: usize, h: f64) -> Vec<bool> {
    let n = values.len();
    let mut rec = vec![f64::NEG_INFINITY; n];
    let mut heap = BinaryHeap::new();
    for i in 0..n {
        if mask[i] {
            let v = values[i] as f64;
            let marker = v - h - 2.0 * f64::EPSILON * v.abs();
            rec[i] = marker;
            heap.push(Item {
                value: marker,
                index: i,
            });
        }
    }
    while let Some(Item { value, index }) = heap.pop() {
        if value < rec[index] {
            continue;
        }
        for q in neighbours8(index, width, height) {
            if !mask[q] {
                continue;
            }
            let candidate = value.min(values[q] as f64);
            if candidate > rec[q] {
                rec[q] = candidate;
                heap.push(Item {
                    value: candidate,
                    index: q,
                });
            }
        }
    }
    (0..n).map(|i| mask[i] && values[i] as f64 - rec[i] >= h).collect()
}

#[derive(PartialEq)]
struct Item {
    value: f64,
    index: usize,
}
impl Eq for Item {}
impl PartialOrd for Item {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Item {
    fn cmp(&self, other: &Self) -> Ordering {
        self.value
            .total_cmp(&other.value)
            .then_with(|| other.index.cmp(&self.index))
    }
}

/// The up-to-8 neighbours of a pixel inside the image.
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
