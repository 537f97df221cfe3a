//! Scoring from the Cell Tracking Challenge's layouts: a ground-truth folder (`TRA/`) and a
//! result folder (`maskTTT.tif`, `res_track.txt`), with vertices matched by mask overlap as
//! the published evaluation matches them: a result object matches a reference object when it
//! covers more than half of it.
//!
//! # Method
//! P. Matula, M. Maška, D. V. Sorokin, P. Matula, C. Ortiz-de-Solórzano & M. Kozubek (2015),
//! "Cell tracking accuracy measurement based on comparison of acyclic oriented graphs",
//! PLoS ONE 10(12):e0144959, doi:10.1371/journal.pone.0144959 (the overlap rule and AOGM);
//! the layouts of Maška et al. (2014), see [`crate::export`].

use super::tracking::{score_tracks_matched, FrameMatching, FrameOverlap, TrackingScore};
use crate::error::{Error, Result};
use crate::export::Layout;
use crate::segment::masks::{equivalent_diameters, mask_labels};
use crate::stack::{OpenOptions, Stack};
use crate::tracks::TrackPoint;
use std::collections::{BTreeMap, HashMap};

/// A sequence read from one of the layouts: its label images and its points (one per label
/// and frame, at the object's centroid, carrying the track file's parent on its first frame).
#[derive(Debug, Clone)]
pub struct Sequence {
    /// Label image per frame.
    pub masks: Vec<Vec<u32>>,
    /// Width and height.
    pub size: (usize, usize),
    /// The objects as track points.
    pub points: Vec<TrackPoint>,
}

/// Reads the masks of a folder [`crate::export::recognise_layout`] found, in frame order.
///
/// # Errors
/// Unreadable masks, a frame missing, masks of different sizes.
pub fn read_sequence(layout: &Layout) -> Result<Sequence> {
    let mut masks = Vec::with_capacity(layout.mask_files.len());
    let mut size = None;
    for (t, path) in &layout.mask_files {
        if *t != masks.len() {
            return Err(Error::input(
                path,
                format!("frame {} is missing before it", masks.len()),
            ));
        }
        let frame = Stack::open(path, &OpenOptions::default())?.read_frame(0)?;
        let dims = (frame.width, frame.height);
        if size.is_some_and(|s| s != dims) {
            return Err(Error::input(path, "masks of one sequence differ in size"));
        }
        size = Some(dims);
        masks.push(mask_labels(&frame, path)?);
    }
    let parents: HashMap<u32, (usize, u32)> = layout.tracks.iter().map(|c| (c.label, (c.begin, c.parent))).collect();
    let size = size.unwrap_or((0, 0));
    let points = centroids(&masks, size.0, &parents);
    Ok(Sequence { masks, size, points })
}

/// One point per label and frame at the object's centroid (x = column, y = row).
fn centroids(masks: &[Vec<u32>], width: usize, parents: &HashMap<u32, (usize, u32)>) -> Vec<TrackPoint> {
    let mut out = Vec::new();
    for (t, mask) in masks.iter().enumerate() {
        let mut sums: BTreeMap<u32, (f64, f64, f64)> = BTreeMap::new();
        for (i, &l) in mask.iter().enumerate().filter(|(_, &l)| l != 0) {
            let s = sums.entry(l).or_default();
            s.0 += (i % width) as f64;
            s.1 += (i / width) as f64;
            s.2 += 1.0;
        }
        for (l, (sx, sy, n)) in sums {
            let parent = parents
                .get(&l)
                .filter(|&&(begin, p)| begin == t && p != 0)
                .map(|&(_, p)| p);
            out.push(TrackPoint {
                track_id: l,
                parent_id: parent,
                frame: t,
                x: sx / n,
                y: sy / n,
            });
        }
    }
    out
}

/// Per frame, the published overlap rule: reference object `g` is matched by the result
/// object covering more than half of its pixels (at most one can). A result object matching
/// several reference objects needs splits: it is paired with the one it covers most, the
/// others count as covered twice.
pub(crate) fn overlap_matching(truth: &Sequence, found: &Sequence) -> FrameMatching {
    let mut pairs_per_frame = Vec::new();
    for (t, tm) in truth.masks.iter().enumerate() {
        let fm = found.masks.get(t);
        let mut area: HashMap<u32, usize> = HashMap::new();
        let mut overlap: HashMap<(u32, u32), usize> = HashMap::new();
        for (i, &g) in tm.iter().enumerate().filter(|(_, &g)| g != 0) {
            *area.entry(g).or_default() += 1;
            if let Some(&r) = fm.and_then(|m| m.get(i)).filter(|&&r| r != 0) {
                *overlap.entry((g, r)).or_default() += 1;
            }
        }
        let mut covered: Vec<(u32, u32, usize)> = overlap
            .into_iter()
            .filter(|&((g, _), n)| 2 * n > area[&g])
            .map(|((g, r), n)| (g, r, n))
            .collect();
        covered.sort_unstable();
        let truth_labels: Vec<u32> = {
            let mut v: Vec<u32> = area.keys().copied().collect();
            v.sort_unstable();
            v
        };
        let found_labels: Vec<u32> = {
            let mut v: Vec<u32> = fm.map_or(Vec::new(), |m| m.iter().copied().filter(|&r| r != 0).collect());
            v.sort_unstable();
            v.dedup();
            v
        };
        pairs_per_frame.push(FrameOverlap {
            frame: t,
            truth: truth_labels,
            found: found_labels,
            covered,
        });
    }
    FrameMatching::from_overlaps(&pairs_per_frame)
}

/// Scores a result sequence against a reference sequence (both read from the layouts),
/// vertices matched by overlap; CLEAR-MOT and links use the centroids within `radius`
/// (default: half the median equivalent diameter of the reference objects).
pub fn score_layouts(truth: &Sequence, found: &Sequence, radius: Option<f64>) -> (f64, TrackingScore) {
    let radius = radius.unwrap_or_else(|| half_diameter(truth));
    let matching = overlap_matching(truth, found);
    (
        radius,
        score_tracks_matched(&truth.points, &found.points, radius, matching),
    )
}

/// Half the median equivalent diameter of the reference objects (at least 1 px).
fn half_diameter(s: &Sequence) -> f64 {
    let mut diameters: Vec<f64> = s.masks.iter().flat_map(|m| equivalent_diameters(m)).collect();
    (crate::numeric::median(&mut diameters).unwrap_or(2.0) / 2.0).max(1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sequence(masks: Vec<Vec<u32>>, parents: &[(u32, usize, u32)]) -> Sequence {
        let parents: HashMap<u32, (usize, u32)> = parents.iter().map(|&(l, b, p)| (l, (b, p))).collect();
        let points = centroids(&masks, 4, &parents);
        Sequence {
            masks,
            size: (4, 1),
            points,
        }
    }

    #[test]
    fn a_result_object_over_two_nuclei_needs_a_split_and_its_edges_do_not_count() {
        // Hand-derived from the published rules (Matula et al. 2015): references 1 and 2 in a
        // 4 x 1 frame for two frames; the result's object 5 covers both in frame 0 (a vertex
        // that needs one split, NS = 1), objects 5 and 6 match them in frame 1. The result
        // edge out of the split vertex is not in the induced subgraph of uniquely matched
        // vertices, so both reference edges are missing (EA = 2) and nothing is deleted.
        // AOGM = 5·1 + 1.5·2 = 8; AOGM₀ = 10·4 + 1.5·2 = 43: TRA = 1 − 8/43; DET = 1 − 5/40.
        let truth = sequence(vec![vec![1, 1, 2, 2], vec![1, 1, 2, 2]], &[(1, 0, 0), (2, 0, 0)]);
        let found = sequence(vec![vec![5, 5, 5, 5], vec![5, 5, 6, 6]], &[(5, 0, 0), (6, 1, 0)]);
        let (_, s) = score_layouts(&truth, &found, Some(1.0));
        let c = s.aogm_counts;
        assert_eq!(
            (
                c.splits,
                c.false_negatives,
                c.false_positives,
                c.edges_to_delete,
                c.edges_to_add
            ),
            (1, 0, 0, 0, 2),
            "{c:?}"
        );
        assert!((s.tra - (1.0 - 8.0 / 43.0)).abs() < 1e-12 && (s.det - 0.875).abs() < 1e-12);
        // The deliberate difference of the position matching (CSV inputs): every result edge
        // counts, so the edge out of the split vertex covers the reference edge of the
        // nucleus it is paired with: one edge missing, not two.
        let by_position = crate::score::tracking::score_tracks(&truth.points, &found.points, 1.0);
        assert_eq!(by_position.aogm_counts.edges_to_add, 1, "{:?}", by_position.aogm_counts);
        // A result object covering exactly half of a reference does not match it (more than
        // half is needed): reference 1 missed, the object a false positive.
        let half = sequence(vec![vec![0, 7, 0, 0], vec![0, 7, 0, 0]], &[(7, 0, 0)]);
        let (_, s) = score_layouts(&truth, &half, Some(1.0));
        assert_eq!((s.aogm_counts.false_negatives, s.aogm_counts.false_positives), (4, 2));
    }
}
