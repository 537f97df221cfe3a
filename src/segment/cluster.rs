//! Objects too large to be one nucleus: clusters that the seeds could not divide. They are
//! cut into as many parts as nuclei of the expected size they could hold, never dropped, so a
//! packed group of nuclei leaves detections (perhaps imperfectly outlined) instead of a hole.

use super::label::Foreground;
use crate::numeric::squared_distance;

/// Cuts every object of `foreground` whose area exceeds `max_area` into
/// `k = round(area / expected_area)` parts (at least 2) by k-means on its pixel coordinates
/// (in a frame `width` wide); the new parts get labels above the current highest. Returns how
/// many objects were cut. The areas are counted from the pixels' labels; only the pixels of
/// oversized objects, rare in most frames, are then listed (listing every object's cost more
/// than the cuts).
///
/// # Method
/// k-means by Lloyd's iterations, S. P. Lloyd (1982), "Least squares quantization in PCM",
/// IEEE Trans. Inf. Theory 28(2):129–137, doi:10.1109/TIT.1982.1056489, started from the
/// farthest-point (maximin) choice of T. F. Gonzalez (1985), "Clustering to minimize the
/// maximum intercluster distance", Theor. Comput. Sci. 38:293–306, so the result is
/// deterministic. On pixel coordinates, k-means cuts a blob into compact parts of similar
/// area, which is what nuclei of one size packed together look like; where they differ in
/// size the cut is approximate, but each nucleus keeps a detection near its centre.
pub fn cut_oversized(foreground: &mut Foreground, width: usize, max_area: f64, expected_area: f64) -> usize {
    let top = foreground.labels.iter().copied().max().unwrap_or(0) as usize;
    let mut area = vec![0usize; top + 1];
    // Counted a run of one label at a time (most objects are one run in the foreground's
    // order), not a store and a load of a counter per pixel.
    for run in foreground.labels.chunk_by(|a, b| a == b) {
        area[run[0] as usize] += run.len();
    }
    let oversized = |l: usize| l > 0 && area[l] as f64 > max_area && expected_area > 0.0;
    if !(0..=top).any(oversized) {
        return 0;
    }
    // Each oversized object's members, as positions in the foreground's lists.
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); top + 1];
    for (k, &l) in foreground.labels.iter().enumerate() {
        if oversized(l as usize) {
            members[l as usize].push(k);
        }
    }
    let mut next = top as u32;
    let mut cut = 0;
    for own in members.iter().skip(1) {
        if own.is_empty() {
            continue;
        }
        let area = own.len() as f64;
        let k = ((area / expected_area).round() as usize).max(2);
        let points: Vec<[f64; 2]> = own
            .iter()
            .map(|&m| {
                let i = foreground.pixels[m] as usize;
                [(i % width) as f64, (i / width) as f64]
            })
            .collect();
        let parts = k_means(&points, k);
        for (&m, &part) in own.iter().zip(&parts) {
            if part > 0 {
                foreground.labels[m] = next + part as u32;
            }
        }
        next += k as u32 - 1;
        cut += 1;
    }
    cut
}

/// Lloyd's k-means of `points` into `k` groups from a maximin start; returns each point's
/// group (0..k). Stops when no point changes group, after at most 50 rounds.
pub fn k_means(points: &[[f64; 2]], k: usize) -> Vec<usize> {
    let mut centres = maximin_start(points, k);
    let mut group = vec![usize::MAX; points.len()];
    for _ in 0..50 {
        let mut changed = false;
        for (p, g) in points.iter().zip(group.iter_mut()) {
            let nearest = nearest_centre(p, &centres);
            if nearest != *g {
                *g = nearest;
                changed = true;
            }
        }
        if !changed {
            break;
        }
        let mut sums = vec![[0.0f64; 3]; centres.len()];
        for (p, &g) in points.iter().zip(&group) {
            sums[g][0] += p[0];
            sums[g][1] += p[1];
            sums[g][2] += 1.0;
        }
        for (c, s) in centres.iter_mut().zip(&sums) {
            if s[2] > 0.0 {
                *c = [s[0] / s[2], s[1] / s[2]];
            }
        }
    }
    group
}

/// The first centre is the point farthest from the centroid; each next one the point
/// farthest from the centres chosen so far (ties: the first in order).
fn maximin_start(points: &[[f64; 2]], k: usize) -> Vec<[f64; 2]> {
    let n = points.len() as f64;
    let centroid = points
        .iter()
        .fold([0.0, 0.0], |a, p| [a[0] + p[0] / n, a[1] + p[1] / n]);
    let mut centres = vec![farthest(points, |p| squared_distance(p, &centroid))];
    while centres.len() < k.min(points.len()) {
        let next = farthest(points, |p| {
            centres
                .iter()
                .map(|c| squared_distance(p, c))
                .fold(f64::INFINITY, f64::min)
        });
        centres.push(next);
    }
    centres
}

fn farthest(points: &[[f64; 2]], score: impl Fn(&[f64; 2]) -> f64) -> [f64; 2] {
    let mut best = (f64::NEG_INFINITY, points[0]);
    for p in points {
        let s = score(p);
        if s > best.0 {
            best = (s, *p);
        }
    }
    best.1
}

fn nearest_centre(p: &[f64; 2], centres: &[[f64; 2]]) -> usize {
    let mut best = (f64::INFINITY, 0);
    for (g, c) in centres.iter().enumerate() {
        let d = squared_distance(p, c);
        if d < best.0 {
            best = (d, g);
        }
    }
    best.1
}

#[cfg(test)]
mod tests {
    use super::*;

    /// [`cut_oversized`] of the objects of a label image (zero outside `pixels`), asserting
    /// that it cut `expected_cuts` of them; the label image after the cut.
    fn cut_image(
        labels: &[u32],
        pixels: Vec<u32>,
        w: usize,
        max: f64,
        expected: f64,
        expected_cuts: usize,
    ) -> Vec<u32> {
        let mut foreground = Foreground {
            labels: crate::segment::label::labels_at(labels, &pixels),
            pixels,
        };
        assert_eq!(cut_oversized(&mut foreground, w, max, expected), expected_cuts);
        foreground.label_image(labels.len())
    }

    #[test]
    fn a_row_of_squares_is_cut_into_its_squares() {
        // Source: construction. Three 10x10 squares side by side form one 30x10 object of 300
        // px; with an expected area of 100 and a maximum of 150 it is cut into 3 parts, each
        // exactly one square (k-means on a regular grid of three equal squares converges to
        // their centres).
        let (w, h) = (40, 12);
        let mut labels = vec![0u32; w * h];
        let mut pixels = Vec::new();
        for y in 1..11 {
            for x in 5..35 {
                labels[y * w + x] = 1;
                pixels.push((y * w + x) as u32);
            }
        }
        let labels = cut_image(&labels, pixels.clone(), w, 150.0, 100.0, 1);
        for y in 1..11 {
            for x in 5..35 {
                let first_of_square = labels[y * w + 5 + 10 * ((x - 5) / 10)];
                assert_eq!(labels[y * w + x], first_of_square, "({x}, {y})");
            }
        }
        let mut distinct: Vec<u32> = pixels.iter().map(|&i| labels[i as usize]).collect();
        distinct.sort_unstable();
        distinct.dedup();
        assert_eq!(distinct.len(), 3);
    }

    #[test]
    fn only_oversized_objects_are_cut_and_their_parts_numbered_above_the_highest_in_label_order() {
        // Source: the function's contract (its doc) and construction: object 1 is three 10x10
        // squares in a row, object 2 one square, object 3 two squares in a row; with an
        // expected area of 100 and a maximum of 150, object 1 becomes three parts (its own
        // label and 4, 5), object 2 stays, object 3 becomes two parts (3 and 6), each part one
        // square.
        let (w, h) = (40, 40);
        let mut labels = vec![0u32; w * h];
        let mut pixels = Vec::new();
        let mut square = |label: u32, x0: usize, y0: usize, squares: usize| {
            for y in y0..y0 + 10 {
                for x in x0..x0 + 10 * squares {
                    labels[y * w + x] = label;
                    pixels.push((y * w + x) as u32);
                }
            }
        };
        square(1, 2, 1, 3);
        square(2, 2, 14, 1);
        square(3, 2, 27, 2);
        let labels = cut_image(&labels, pixels, w, 150.0, 100.0, 2);
        let square_labels = |x0: usize, y0: usize, squares: usize| -> Vec<u32> {
            let mut found: Vec<u32> = (0..squares)
                .map(|k| {
                    let first = labels[y0 * w + x0 + 10 * k];
                    let whole = (y0..y0 + 10).all(|y| (0..10).all(|x| labels[y * w + x0 + 10 * k + x] == first));
                    assert!(whole, "square {k} at ({x0}, {y0}) is one part");
                    first
                })
                .collect();
            found.sort_unstable();
            found
        };
        assert_eq!(square_labels(2, 1, 3), vec![1, 4, 5]);
        assert_eq!(square_labels(2, 14, 1), vec![2]);
        assert_eq!(square_labels(2, 27, 2), vec![3, 6]);
    }

    #[test]
    fn objects_within_the_limit_are_left_alone() {
        let labels = cut_image(&vec![1u32; 100], (0..100).collect(), 10, 100.0, 30.0, 0);
        assert!(labels.iter().all(|&l| l == 1));
    }
}
