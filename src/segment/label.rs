//! Mask clean-up and label bookkeeping: hole filling, connected components, size filtering
//! and canonical relabelling.

use crate::numeric::Grid;

/// Fills holes: background regions (4-connected) that do not reach the image border become
/// foreground. A nucleus with a dim nucleolus is one object, not a ring.
///
/// Background runs of each row are joined with the overlapping runs of the row above by
/// union-find ([`Runs`]), so the cost follows the number of runs rather than a flood over
/// every background pixel.
pub fn fill_holes(mask: &mut [bool], width: usize, height: usize) {
    fill_holes_giving_runs(mask, width, height);
}

/// [`fill_holes`], returning the foreground runs of the filled mask (what
/// `Runs::of(mask, width, height, true)` would find in it): the gaps of each row between the
/// background runs left, which the filling has at hand, so the split need not scan the frame
/// again for them.
pub(crate) fn fill_holes_giving_runs(mask: &mut [bool], width: usize, height: usize) -> Runs {
    let runs = Runs::of(mask, width, height, false);
    let mut sets = runs.joined(Connectivity::Four);
    let mut outside = vec![false; runs.len()];
    for (k, &(y, s, e)) in runs.spans.iter().enumerate() {
        if y == 0 || y + 1 == height || s == 0 || e == width {
            let root = sets.find(k);
            outside[root] = true;
        }
    }
    let mut foreground = Runs {
        spans: Vec::new(),
        row_start: Vec::with_capacity(height + 1),
    };
    for y in 0..height {
        foreground.row_start.push(foreground.spans.len());
        let mut x = 0;
        for k in runs.row_start[y]..runs.row_start[y + 1] {
            let (_, s, e) = runs.spans[k];
            if outside[sets.find(k)] {
                if s > x {
                    foreground.spans.push((y, x, s));
                }
                x = e;
            } else {
                mask[y * width + s..y * width + e].iter_mut().for_each(|m| *m = true);
            }
        }
        if x < width {
            foreground.spans.push((y, x, width));
        }
    }
    foreground.row_start.push(foreground.spans.len());
    foreground
}

/// Which neighbours join two pixels into one region.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Connectivity {
    /// Edge neighbours only.
    Four,
    /// Edge and corner neighbours.
    Eight,
}

/// The runs of one value in a mask, row by row: a run-based two-pass connected-component
/// labelling, as in K. Wu, E. Otoo & K. Suzuki (2009), "Optimizing two-pass connected-
/// component labeling algorithms", Pattern Anal. Appl. 12:117–135,
/// doi:10.1007/s10044-008-0109-y: each run is joined with the runs of the row above that it
/// touches, so the work follows the runs, not the pixels.
pub struct Runs {
    /// (row, first column, end column exclusive), in raster order.
    pub spans: Vec<(usize, usize, usize)>,
    /// Index of each row's first run; one more entry at the end.
    row_start: Vec<usize>,
}

impl Runs {
    /// The runs of pixels equal to `value` in a `width` x `height` mask. Stretches without
    /// a change are skipped eight pixels at a time (read as one 64-bit word).
    pub fn of(mask: &[bool], width: usize, height: usize, value: bool) -> Runs {
        let mut runs = Vec::new();
        let mut row_start = Vec::with_capacity(height + 1);
        for y in 0..height {
            row_start.push(runs.len());
            let row = &mask[y * width..(y + 1) * width];
            let mut x = next_equal(row, 0, value);
            while x < width {
                let end = next_equal(row, x, !value);
                runs.push((y, x, end));
                x = next_equal(row, end, value);
            }
        }
        row_start.push(runs.len());
        Runs { spans: runs, row_start }
    }

    /// Number of runs.
    pub fn len(&self) -> usize {
        self.spans.len()
    }

    /// Whether there are no runs.
    pub fn is_empty(&self) -> bool {
        self.spans.is_empty()
    }

    /// The run holding the pixel at column `x`, row `y`, if any (a binary search of the row's
    /// runs).
    pub fn run_at(&self, x: usize, y: usize) -> Option<usize> {
        let row = *self.row_start.get(y)?..*self.row_start.get(y + 1)?;
        let after = self.spans[row.clone()].partition_point(|&(_, s, _)| s <= x);
        let k = row.start + after.checked_sub(1)?;
        (x < self.spans[k].2).then_some(k)
    }

    /// The runs grouped into regions: run `k`'s region is the set of `k`.
    pub fn joined(&self, connectivity: Connectivity) -> crate::numeric::DisjointSets {
        // A run of the row above touches columns s..e of this row when it reaches past s
        // (past s − 1 with corners) and starts before e (before e + 1 with corners).
        let reach = usize::from(connectivity == Connectivity::Eight);
        let mut sets = crate::numeric::DisjointSets::new(self.spans.len());
        for y in 1..self.row_start.len().saturating_sub(1) {
            let above = self.row_start[y - 1]..self.row_start[y];
            let mut a = above.start;
            for r in self.row_start[y]..self.row_start[y + 1] {
                let (_, s, e) = self.spans[r];
                while a < above.end && self.spans[a].2 + reach <= s {
                    a += 1;
                }
                let mut b = a;
                while b < above.end && self.spans[b].1 < e + reach {
                    sets.union(b, r);
                    b += 1;
                }
            }
        }
        sets
    }
}

/// The first column at or after `from` whose pixel equals `value` (`row.len()` if none).
/// Eight pixels are read at once as the bytes of a 64-bit word (a `bool` is the byte 0 or 1):
/// the word differs from eight pixels of the other value exactly where a pixel holds
/// `value`, and the lowest such byte is the first pixel, so a row's stretches without a
/// change cost a load and a comparison per eight pixels; and four words are tested at once
/// before that (one branch per 32 pixels: most of a frame's rows are long stretches of
/// background).
fn next_equal(row: &[bool], from: usize, value: bool) -> usize {
    const OTHER: [u64; 2] = [0x0101_0101_0101_0101, 0];
    let other = OTHER[usize::from(value)];
    let word_at = |eight: &[bool]| u64::from_le_bytes(std::array::from_fn(|i| u8::from(eight[i])));
    let mut x = from;
    while let Some(block) = row.get(x..x + 32) {
        let differs = block
            .chunks_exact(8)
            .fold(0, |any, eight| any | (word_at(eight) ^ other));
        if differs != 0 {
            break;
        }
        x += 32;
    }
    while let Some(eight) = row.get(x..x + 8) {
        let differs = word_at(eight) ^ other;
        if differs != 0 {
            return x + (differs.trailing_zeros() / 8) as usize;
        }
        x += 8;
    }
    row[x..].iter().position(|&m| m == value).map_or(row.len(), |i| x + i)
}

/// Labels the 8-connected components of `mask` 1, 2, ... in raster order of their first pixel.
pub fn label_components(mask: &[bool], width: usize, height: usize) -> (Vec<u32>, u32) {
    let grid = Grid::new(width, height);
    let mut labels = vec![0u32; mask.len()];
    let mut next = 0;
    let mut stack = Vec::new();
    for i in 0..mask.len() {
        if mask[i] && labels[i] == 0 {
            next += 1;
            labels[i] = next;
            stack.push(i);
            while let Some(p) = stack.pop() {
                for q in grid.neighbours8(p) {
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
    let pixels: Vec<u32> = (0..labels.len() as u32).filter(|&i| labels[i as usize] != 0).collect();
    let mut foreground = Foreground {
        labels: labels_at(labels, &pixels),
        pixels,
    };
    let (count, _) = filter_and_relabel_counted(&mut foreground, min_area, max_area);
    for (&p, &l) in foreground.pixels.iter().zip(&foreground.labels) {
        labels[p as usize] = l;
    }
    count
}

/// A frame's foreground pixels and the label of each, in one order (any; the split's groups
/// them by component): what the stages after the split (the cluster cut, the size filter, the
/// measures) read and relabel, so that none of them gathers the labels from a frame-sized
/// image, and the label image is written once, at the end ([`Foreground::label_image`]),
/// instead of at every stage that changes a label.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Foreground {
    /// Pixel indices in the frame.
    pub pixels: Vec<u32>,
    /// The label of each pixel (0 = background, e.g. a pixel that no seed's flood reached).
    pub labels: Vec<u32>,
}

impl Foreground {
    /// The label image of `len` pixels: each pixel's label, 0 outside the foreground.
    /// The image is the one given back on this thread ([`give_back_label_image`]) where it is
    /// large enough, already zeroed, so that a frame of zeros is not written again.
    pub fn label_image(&self, len: usize) -> Vec<u32> {
        let mut image = zeroed_label_image(len);
        for (&p, &l) in self.pixels.iter().zip(&self.labels) {
            image[p as usize] = l;
        }
        image
    }
}

thread_local! {
    /// A label image given back once used ([`give_back_label_image`]), zeroed, for the next
    /// frame labelled on this thread.
    static SPARE_LABEL_IMAGE: std::cell::RefCell<Vec<u32>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// A label image of `len` zeros: this thread's spare where it is large enough, else a new
/// one.
fn zeroed_label_image(len: usize) -> Vec<u32> {
    let mut image = crate::numeric::spare::take_or_new(&SPARE_LABEL_IMAGE, len, 0);
    image.truncate(len);
    image
}

/// Gives a label image no longer needed back to this thread, for the next
/// [`Foreground::label_image`] of its size: zeroed where it holds labels, found as runs of 64
/// pixels with any (one OR each), so that a frame of mostly background costs a read of it
/// rather than a write of a whole frame of zeros (on a 1024 x 1024 frame with 300 nuclei, the
/// frame of zeros was 1.8% of its segmentation's time).
pub fn give_back_label_image(mut image: Vec<u32>) {
    for run in image.chunks_mut(64) {
        if run.iter().fold(0, |any, &l| any | l) != 0 {
            run.fill(0);
        }
    }
    give_back_zeroed_label_image(image);
}

/// [`give_back_label_image`] of an image whose labelled pixels are all among `objects` (each
/// in any order; pixels of label 0 may be among them too, as in [`Foreground::pixels`]):
/// zeroed by clearing those alone, without reading the image (a frame's nuclei cover a few
/// percent of it).
pub fn give_back_label_image_of(mut image: Vec<u32>, objects: &[u32]) {
    for &p in objects {
        image[p as usize] = 0;
    }
    give_back_zeroed_label_image(image);
}

/// Keeps a label image whose every value is 0 for the next [`Foreground::label_image`] on
/// this thread.
fn give_back_zeroed_label_image(image: Vec<u32>) {
    crate::numeric::spare::keep(&SPARE_LABEL_IMAGE, image);
}

/// The label of each of `pixels`, in their order: gathered in a loop of loads that wait on
/// nothing else, so that a label image's lines missing from the cache are fetched together,
/// rather than one at a time behind a pass's sums or counts.
pub fn labels_at(labels: &[u32], pixels: &[u32]) -> Vec<u32> {
    pixels.iter().map(|&i| labels[i as usize]).collect()
}

/// [`filter_and_relabel`] of the objects of `foreground` (pixels in any order), its labels
/// rewritten; also returns how many objects there were before (the distinct non-zero
/// labels), counted from the same areas.
pub fn filter_and_relabel_counted(foreground: &mut Foreground, min_area: f64, max_area: f64) -> (u32, usize) {
    let Foreground { pixels, labels } = foreground;
    let top = labels.iter().copied().max().unwrap_or(0) as usize;
    let mut area = vec![0u64; top + 1];
    let mut first = vec![u32::MAX; top + 1];
    // A run of pixels with one label (most objects are one run) is counted at once: no chain
    // of stores and loads through its counters from pixel to pixel.
    let mut start = 0;
    for run in labels.chunk_by(|a, b| a == b) {
        let (l, end) = (run[0] as usize, start + run.len());
        let lowest = pixels[start..end].iter().copied().min().unwrap_or(u32::MAX);
        area[l] += run.len() as u64;
        first[l] = first[l].min(lowest);
        start = end;
    }
    let present = area.iter().skip(1).filter(|&&a| a > 0).count();
    let mut kept: Vec<usize> = (1..=top)
        .filter(|&l| area[l] > 0 && (min_area..=max_area).contains(&(area[l] as f64)))
        .collect();
    kept.sort_unstable_by_key(|&l| first[l]);
    let mut new_id = vec![0u32; top + 1];
    for (k, &l) in kept.iter().enumerate() {
        new_id[l] = k as u32 + 1;
    }
    for l in labels.iter_mut() {
        *l = new_id[*l as usize];
    }
    (kept.len() as u32, present)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The region of every pixel of `value` by a plain flood over 4 or 8 neighbours (the
    /// definition of connectivity), numbered in raster order of first pixel.
    fn flooded(mask: &[bool], w: usize, h: usize, value: bool, eight: bool) -> Vec<u32> {
        let mut region = vec![0u32; mask.len()];
        let mut next = 0;
        for start in 0..mask.len() {
            if mask[start] != value || region[start] != 0 {
                continue;
            }
            next += 1;
            region[start] = next;
            let mut stack = vec![start];
            while let Some(p) = stack.pop() {
                let (x, y) = ((p % w) as isize, (p / w) as isize);
                for dy in -1..=1isize {
                    for dx in -1..=1isize {
                        let (nx, ny) = (x + dx, y + dy);
                        let corner = dx != 0 && dy != 0;
                        if (corner && !eight) || nx < 0 || ny < 0 || nx >= w as isize || ny >= h as isize {
                            continue;
                        }
                        let q = ny as usize * w + nx as usize;
                        if mask[q] == value && region[q] == 0 {
                            region[q] = next;
                            stack.push(q);
                        }
                    }
                }
            }
        }
        region
    }

    #[test]
    fn joined_runs_are_the_connected_regions() {
        // Source: the definition of 4- and 8-connectivity, by a plain flood: for random masks
        // (rows wider than the 32-pixel skip, densities from sparse to dense), two pixels share
        // a run set exactly when the flood puts them in one region, for both values; and the
        // run found at a pixel is the one that holds it (none off the value).
        let mut rng = crate::numeric::Rng::new(5);
        let (w, h) = (75, 31);
        for density in [0.01, 0.05, 0.3, 0.5, 0.8, 0.99] {
            let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() < density).collect();
            for value in [true, false] {
                for connectivity in [Connectivity::Four, Connectivity::Eight] {
                    let runs = Runs::of(&mask, w, h, value);
                    let mut sets = runs.joined(connectivity);
                    let mut root_of = vec![usize::MAX; mask.len()];
                    for (k, &(y, s, e)) in runs.spans.iter().enumerate() {
                        let root = sets.find(k);
                        (s..e).for_each(|x| root_of[y * w + x] = root);
                    }
                    // Each pixel's run by binary search, as the runs themselves place it.
                    for p in 0..mask.len() {
                        let found = runs.run_at(p % w, p / w).map(|k| sets.find(k));
                        assert_eq!(found, (mask[p] == value).then_some(root_of[p]), "pixel {p}");
                    }
                    let want = flooded(&mask, w, h, value, connectivity == Connectivity::Eight);
                    let mut pairs = std::collections::HashMap::new();
                    for p in (0..mask.len()).filter(|&p| mask[p] == value) {
                        assert_ne!(root_of[p], usize::MAX, "pixel {p} in no run");
                        assert_eq!(*pairs.entry(root_of[p]).or_insert(want[p]), want[p], "{connectivity:?}");
                    }
                    let regions = want.iter().copied().max().unwrap_or(0) as usize;
                    assert_eq!(pairs.len(), regions, "{density} {value} {connectivity:?}");
                }
            }
        }
    }

    #[test]
    fn the_next_pixel_of_a_value_is_the_first_at_or_after_the_start() {
        // Source: the definition (the first column at or after `from` holding the value, the
        // row's length if none), by a plain scan: rows shorter and longer than the 8-pixel
        // words, the value alone at a word's first or last pixel, and every start.
        let mut rng = crate::numeric::Rng::new(11);
        let mut rows: Vec<Vec<bool>> = [0usize, 1, 31, 32, 33, 64, 100]
            .iter()
            .map(|&n| vec![false; n])
            .collect();
        for n in [40usize, 96, 130] {
            for at in [0, 31, 32, 63, n - 1] {
                let mut row = vec![false; n];
                row[at.min(n - 1)] = true;
                rows.push(row);
            }
            rows.push((0..n).map(|_| rng.uniform() < 0.1).collect());
            rows.push((0..n).map(|_| rng.uniform() < 0.9).collect());
        }
        for row in &rows {
            for value in [true, false] {
                for from in 0..=row.len() {
                    let want = (from..row.len()).find(|&x| row[x] == value).unwrap_or(row.len());
                    assert_eq!(next_equal(row, from, value), want, "{} px, from {from}", row.len());
                }
            }
        }
    }

    #[test]
    fn holes_are_filled_and_the_foreground_runs_given_by_definition() {
        // Source: definition. The background pixels that a 4-connected flood from the border
        // reaches stay background, every other pixel is foreground; the runs given back are
        // the maximal stretches of foreground in each row, found pixel by pixel. Random masks
        // of every density (rings, holes, rows all foreground, rows all background) and sizes
        // down to one pixel.
        let mut rng = crate::numeric::Rng::new(23);
        for (w, h) in [(1usize, 1usize), (1, 7), (9, 1), (17, 13), (40, 31)] {
            for fill in [0.0, 0.3, 0.55, 0.7, 0.9, 1.0] {
                let mask: Vec<bool> = (0..w * h).map(|_| rng.uniform() < fill).collect();
                let mut reached = vec![false; w * h];
                let mut stack: Vec<usize> = (0..w * h)
                    .filter(|&p| !mask[p] && (p % w == 0 || p % w == w - 1 || p / w == 0 || p / w == h - 1))
                    .collect();
                stack.iter().for_each(|&p| reached[p] = true);
                while let Some(p) = stack.pop() {
                    let (x, y) = (p % w, p / w);
                    let near = [
                        (x > 0).then(|| p - 1),
                        (x + 1 < w).then(|| p + 1),
                        (y > 0).then(|| p - w),
                        (y + 1 < h).then(|| p + w),
                    ];
                    for q in near.into_iter().flatten() {
                        if !mask[q] && !reached[q] {
                            reached[q] = true;
                            stack.push(q);
                        }
                    }
                }
                let filled: Vec<bool> = reached.iter().map(|&r| !r).collect();
                let mut defined = Vec::new();
                for y in 0..h {
                    let mut x = 0;
                    while x < w {
                        if filled[y * w + x] {
                            let start = x;
                            while x < w && filled[y * w + x] {
                                x += 1;
                            }
                            defined.push((y, start, x));
                        } else {
                            x += 1;
                        }
                    }
                }
                let mut got = mask.clone();
                let runs = fill_holes_giving_runs(&mut got, w, h);
                assert_eq!(got, filled, "{w} x {h}, fill {fill}");
                assert_eq!(runs.spans, defined, "{w} x {h}, fill {fill}");
                for (y, row) in defined.chunk_by(|a, b| a.0 == b.0).map(|r| (r[0].0, r)) {
                    assert_eq!(&runs.spans[runs.row_start[y]..runs.row_start[y + 1]], row);
                }
                assert_eq!(runs.row_start.len(), h + 1);
            }
        }
    }

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
        // The same with the pixels listed out of order: three objects before (7, 3 and 5).
        let mut foreground = Foreground {
            pixels: vec![7, 5, 1, 4, 2, 3],
            labels: vec![3, 5, 7, 7, 3, 3],
        };
        assert_eq!(filter_and_relabel_counted(&mut foreground, 2.0, 10.0), (2, 3));
        assert_eq!(foreground.label_image(8), vec![0, 1, 2, 2, 1, 0, 0, 2]);
        // A label's first pixel in raster order need not come first in the list: label 2's
        // pixels come as 6 then 4, so it starts before label 1 (pixel 5) and becomes 1.
        let mut foreground = Foreground {
            pixels: vec![5, 6, 4],
            labels: vec![1, 2, 2],
        };
        assert_eq!(filter_and_relabel_counted(&mut foreground, 1.0, 10.0), (2, 2));
        assert_eq!(foreground.labels, vec![2, 1, 1]);
    }

    #[test]
    fn a_label_image_given_back_is_zeroed_before_reuse() {
        // Source: the definition (0 outside the foreground, each pixel's label inside), on a
        // thread of its own (the spares are per thread): label images given back holding
        // labels in scattered runs (the first and last pixel, a run across 64-pixel pieces,
        // a lone pixel, a size that is not a multiple of 64), then taken again for other
        // objects, must hold the new labels and zeros elsewhere.
        std::thread::spawn(|| {
            let len = 1000;
            let mut rng = crate::numeric::Rng::new(5);
            for round in 0..6 {
                let mut dirty = vec![0u32; len];
                for i in [0, len - 1, 63, 64, 65, 500, 999 - round] {
                    dirty[i] = 9 + round as u32;
                }
                dirty[120..260].iter_mut().for_each(|l| *l = 4);
                give_back_label_image(dirty);
                let pixels: Vec<u32> = (0..len as u32).filter(|_| rng.uniform() < 0.05).collect();
                let labels: Vec<u32> = (0..pixels.len()).map(|k| 1 + (k % 7) as u32).collect();
                let mut want = vec![0u32; len];
                pixels.iter().zip(&labels).for_each(|(&p, &l)| want[p as usize] = l);
                let got = Foreground { pixels, labels }.label_image(len);
                assert_eq!(got, want, "round {round}");
                if round % 2 == 0 {
                    give_back_label_image(got);
                }
            }
            // A spare too small is not taken; one large enough is, zeroed and cut to size.
            let _ = Foreground::default().label_image(len);
            give_back_label_image(vec![3; 10]);
            assert_eq!(Foreground::default().label_image(11), vec![0; 11]);
            assert_eq!(Foreground::default().label_image(10), vec![0; 10]);
            give_back_label_image(vec![3; 10]);
            assert_eq!(
                Foreground::label_image(
                    &Foreground {
                        pixels: vec![2],
                        labels: vec![4]
                    },
                    6
                ),
                vec![0, 0, 4, 0, 0, 0]
            );
        })
        .join()
        .unwrap();
    }
}
