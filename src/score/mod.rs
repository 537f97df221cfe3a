//! Accuracy of detections against ground truth: one-to-one centroid matching (optimal, by
//! Hungarian assignment) and IoU matching of label images; the tracking measures are in
//! [`tracking`].

pub mod breaks;
pub mod files;
pub mod layout;
pub mod tracking;

use crate::tracks::TrackPoint;
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

/// Link accuracy of tracks against ground truth.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
pub struct LinkScores {
    /// Links in the truth (consecutive frames of one true track).
    pub true_links: usize,
    /// Links in the result (consecutive frames of one result track).
    pub found_links: usize,
    /// Result links whose two ends match the same true track.
    pub correct_links: usize,
    /// Result links whose two ends match two different true tracks.
    pub identity_switches: usize,
}

impl LinkScores {
    /// Correct links / result links.
    pub fn precision(&self) -> f64 {
        ratio(self.correct_links, self.found_links)
    }
    /// Correct links / true links.
    pub fn recall(&self) -> f64 {
        ratio(self.correct_links, self.true_links)
    }
}

/// Scores the links of `found` tracks against `truth` tracks: per frame, points are matched
/// one to one within `max_distance` ([`matched_pairs`]); a result link is correct when both of
/// its ends match points of the same true track in consecutive frames.
pub fn link_scores(truth: &[TrackPoint], found: &[TrackPoint], max_distance: f64) -> LinkScores {
    let mut by_frame: std::collections::BTreeMap<usize, (Vec<&TrackPoint>, Vec<&TrackPoint>)> = Default::default();
    for p in truth {
        by_frame.entry(p.frame).or_default().0.push(p);
    }
    for p in found {
        by_frame.entry(p.frame).or_default().1.push(p);
    }
    let mut truth_of: HashMap<(usize, u32), u32> = HashMap::new();
    for (&t, (tr, fo)) in &by_frame {
        let xy = |v: &[&TrackPoint]| v.iter().map(|p| (p.x, p.y)).collect::<Vec<_>>();
        for (i, j) in matched_pairs(&xy(tr), &xy(fo), max_distance) {
            truth_of.insert((t, fo[j].track_id), tr[i].track_id);
        }
    }
    let mut scores = LinkScores {
        true_links: consecutive(truth).len(),
        ..LinkScores::default()
    };
    for (a, b) in consecutive(found) {
        scores.found_links += 1;
        match (
            truth_of.get(&(a.frame, a.track_id)),
            truth_of.get(&(b.frame, b.track_id)),
        ) {
            (Some(x), Some(y)) if x == y => scores.correct_links += 1,
            (Some(_), Some(_)) => scores.identity_switches += 1,
            _ => {}
        }
    }
    scores
}

/// Pairs of points of one track in consecutive frames.
fn consecutive(points: &[TrackPoint]) -> Vec<(&TrackPoint, &TrackPoint)> {
    let mut sorted: Vec<&TrackPoint> = points.iter().collect();
    sorted.sort_by_key(|p| (p.track_id, p.frame));
    sorted
        .windows(2)
        .filter(|w| w[0].track_id == w[1].track_id && w[1].frame == w[0].frame + 1)
        .map(|w| (w[0], w[1]))
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
/// optimal matching (fixtures/methods/check_values.md §5).
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
    fn precision_recall_and_f1_follow_their_definitions() {
        // Source: the definitions (precision TP/(TP+FP), recall TP/(TP+FN), F1 their harmonic
        // mean 2TP/(2TP+FP+FN)), with TP 8, FP 2, FN 4.
        let c = MatchCounts {
            true_positives: 8,
            false_positives: 2,
            false_negatives: 4,
        };
        assert!((c.precision() - 0.8).abs() < 1e-12);
        assert!((c.recall() - 8.0 / 12.0).abs() < 1e-12);
        assert!((c.f1() - 16.0 / 22.0).abs() < 1e-12);
    }

    #[test]
    fn link_scores_count_correct_links_and_switches() {
        // Hand-built: two true tracks moving right at y = 0 and y = 10 over frames 0..3 (6 true
        // links); the result swaps identities between frames 1 and 2: 4 correct links, 2 switches.
        let p = |id, frame, x: f64, y: f64| TrackPoint {
            track_id: id,
            parent_id: None,
            frame,
            x,
            y,
        };
        let truth: Vec<TrackPoint> = (0..4)
            .flat_map(|f| [p(1, f, f as f64, 0.0), p(2, f, f as f64, 10.0)])
            .collect();
        let found: Vec<TrackPoint> = (0..4)
            .flat_map(|f| {
                let (a, b) = if f < 2 { (7, 8) } else { (8, 7) };
                [p(a, f, f as f64 + 0.2, 0.0), p(b, f, f as f64, 10.3)]
            })
            .collect();
        let s = link_scores(&truth, &found, 2.0);
        assert_eq!(
            s,
            LinkScores {
                true_links: 6,
                found_links: 6,
                correct_links: 4,
                identity_switches: 2
            }
        );
        assert!((s.precision() - 4.0 / 6.0).abs() < 1e-12);
    }

    #[test]
    fn iou_matching_catches_a_split() {
        // Source: fixtures/methods/check_values.md §5 worked example on a 4x9 image: IoU(A1,B7) = 0.75, A2 split
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
