//! Accuracy of detections against ground truth: one-to-one centroid matching (optimal, by
//! Hungarian assignment) and IoU matching of label images. The tracking measures come later.

use pathfinding::prelude::{kuhn_munkres, Matrix};
use std::collections::HashMap;

/// True positives, false positives and false negatives of a matching.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
pub struct MatchCounts {
    /// Matched pairs.
    pub true_positives: usize,
    /// Found objects without a partner.
    pub false_positives: usize,
    /// Reference objects without a partner.
    pub false_negatives: usize,
}

impl MatchCounts {
    /// F1 = 2TP / (2TP + FP + FN) (1 when both sides are empty).
    pub fn f1(&self) -> f64 {
        let d = 2 * self.true_positives + self.false_positives + self.false_negatives;
        if d == 0 {
            1.0
        } else {
            2.0 * self.true_positives as f64 / d as f64
        }
    }

    /// Precision TP / (TP + FP).
    pub fn precision(&self) -> f64 {
        ratio(self.true_positives, self.true_positives + self.false_positives)
    }

    /// Recall TP / (TP + FN).
    pub fn recall(&self) -> f64 {
        ratio(self.true_positives, self.true_positives + self.false_negatives)
    }

    /// Adds another frame's counts.
    pub fn add(&mut self, other: MatchCounts) {
        self.true_positives += other.true_positives;
        self.false_positives += other.false_positives;
        self.false_negatives += other.false_negatives;
    }
}

fn ratio(a: usize, b: usize) -> f64 {
    if b == 0 {
        1.0
    } else {
        a as f64 / b as f64
    }
}

/// Optimal one-to-one matching of points within `max_distance`: the largest number of pairs,
/// and among those the smallest total distance.
///
/// # Method
/// H. W. Kuhn (1955), "The Hungarian method for the assignment problem", Naval Res. Logist. Q.
/// 2:83–97, doi:10.1002/nav.3800020109; J. Munkres (1957), J. SIAM 5(1):32–38 (via the
/// `pathfinding` crate's `kuhn_munkres`, integer weights).
pub fn match_points(reference: &[(f64, f64)], found: &[(f64, f64)], max_distance: f64) -> MatchCounts {
    let pairs = matched_pairs(reference, found, max_distance);
    MatchCounts {
        true_positives: pairs.len(),
        false_positives: found.len() - pairs.len(),
        false_negatives: reference.len() - pairs.len(),
    }
}

/// The matched `(reference index, found index)` pairs of [`match_points`].
pub fn matched_pairs(reference: &[(f64, f64)], found: &[(f64, f64)], max_distance: f64) -> Vec<(usize, usize)> {
    if reference.is_empty() || found.is_empty() {
        return Vec::new();
    }
    // Rows must not outnumber columns.
    let swap = reference.len() > found.len();
    let (rows, cols) = if swap { (found, reference) } else { (reference, found) };
    const SCALE: f64 = 1000.0;
    let big = ((max_distance * SCALE) as i64 + 1) * 4;
    let r2 = max_distance * max_distance;
    let mut weights = Matrix::new(rows.len(), cols.len(), 0i64);
    for (i, a) in rows.iter().enumerate() {
        for (j, b) in cols.iter().enumerate() {
            let d2 = (a.0 - b.0).powi(2) + (a.1 - b.1).powi(2);
            if d2 <= r2 {
                weights[(i, j)] = big - (d2.sqrt() * SCALE).round() as i64;
            }
        }
    }
    let (_, assignment) = kuhn_munkres(&weights);
    assignment
        .iter()
        .enumerate()
        .filter(|&(i, &j)| weights[(i, j)] > 0)
        .map(|(i, &j)| if swap { (j, i) } else { (i, j) })
        .collect()
}

/// Result of matching two label images by intersection over union.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct IouScore {
    /// Counts of the matching.
    pub counts: MatchCounts,
    /// Mean IoU of matched pairs (0 if none).
    pub mean_iou: f64,
}

/// Matches objects of two label images (0 = background) whose IoU exceeds 0.5; for
/// non-overlapping label images such partners are unique, so this greedy rule equals the
/// optimal matching (METHODS.md §5).
pub fn iou_match(reference: &[u32], test: &[u32]) -> IouScore {
    let mut area_r: HashMap<u32, u64> = HashMap::new();
    let mut area_t: HashMap<u32, u64> = HashMap::new();
    let mut overlap: HashMap<(u32, u32), u64> = HashMap::new();
    for (&r, &t) in reference.iter().zip(test) {
        if r != 0 {
            *area_r.entry(r).or_default() += 1;
        }
        if t != 0 {
            *area_t.entry(t).or_default() += 1;
        }
        if r != 0 && t != 0 {
            *overlap.entry((r, t)).or_default() += 1;
        }
    }
    let mut ious = Vec::new();
    for (&(r, t), &inter) in &overlap {
        let union = area_r[&r] + area_t[&t] - inter;
        let iou = inter as f64 / union as f64;
        if iou > 0.5 {
            ious.push(iou);
        }
    }
    let tp = ious.len();
    IouScore {
        counts: MatchCounts {
            true_positives: tp,
            false_positives: area_t.len() - tp,
            false_negatives: area_r.len() - tp,
        },
        mean_iou: if tp == 0 {
            0.0
        } else {
            ious.iter().sum::<f64>() / tp as f64
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn iou_matching_catches_a_split() {
        // Source: METHODS.md §5 worked example on a 4x9 image: IoU(A1,B7) = 0.75, A2 split
        // into B8 and B9 with IoU 0.5 each (not > 0.5): TP 1, FP 2, FN 1, F1 = 0.4.
        let (w, h) = (9, 4);
        let mut a = vec![0u32; w * h];
        let mut b = vec![0u32; w * h];
        for y in 0..h {
            for x in 0..w {
                let i = y * w + x;
                a[i] = if x < 4 {
                    1
                } else if x >= 5 {
                    2
                } else {
                    0
                };
                b[i] = if x < 3 {
                    7
                } else if (5..7).contains(&x) {
                    8
                } else if x >= 7 {
                    9
                } else {
                    0
                };
            }
        }
        let s = iou_match(&a, &b);
        assert_eq!(
            s.counts,
            MatchCounts {
                true_positives: 1,
                false_positives: 2,
                false_negatives: 1
            }
        );
        assert!((s.counts.f1() - 0.4).abs() < 1e-12);
        assert!((s.mean_iou - 0.75).abs() < 1e-12);
    }

    #[test]
    fn hungarian_matching_beats_greedy() {
        // Source: hand-derived. Greedy nearest-first would pair r0 with f0 (distance 0.9) and
        // leave r1 without a partner within 1.0; the optimal one-to-one matching pairs both
        // (r0-f1 at 0.5, r1-f0 at 0.1).
        let r = [(0.0, 0.0), (1.0, 0.0)];
        let f = [(0.9, 0.0), (-0.5, 0.0)];
        let m = match_points(&r, &f, 1.0);
        assert_eq!(m.true_positives, 2);
        assert_eq!(matched_pairs(&r, &f, 1.0), vec![(0, 1), (1, 0)]);
        assert_eq!(match_points(&r, &[], 1.0).false_negatives, 2);
    }
}
