//! Tracking accuracy against ground truth with the field's published measures: the acyclic
//! oriented graph matching measure (AOGM) and its normalised TRA and DET, CLEAR-MOT MOTA and
//! MOTP, mostly tracked and mostly lost, and division events recovered.
//!
//! Detections are matched to reference points per frame by position (one to one, optimal,
//! within a radius; [`super::matched_pairs`]), since a tracks table carries points, not masks.

use super::{link_scores, matched_pairs, LinkScores, MatchCounts};
use crate::tracks::TrackPoint;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet, HashMap};

/// A vertex of a tracking graph: (frame, track id).
pub(crate) type Vertex = (usize, u32);

/// Per-frame matching of result points to reference points.
pub(crate) struct FrameMatching {
    /// Reference vertex of each matched result vertex.
    pub(crate) truth_of: HashMap<Vertex, Vertex>,
    /// Reference vertices not matched one to one but lying within the radius of a result point
    /// that is matched to another reference: that result point covers several references.
    covered_twice: usize,
    /// Those reference vertices.
    pub(crate) merged: BTreeSet<Vertex>,
    counts: MatchCounts,
    /// Result vertices matched to several references (set by the overlap matching).
    split_results: BTreeSet<Vertex>,
    /// Count edge errors on the subgraph of uniquely matched result vertices only, as the
    /// published evaluation does (Matula et al. 2015): an edge of a false-positive or split
    /// vertex is neither deleted nor covering. The position matching keeps every edge.
    induced_edges: bool,
}

fn by_frame(points: &[TrackPoint]) -> BTreeMap<usize, Vec<&TrackPoint>> {
    let mut m: BTreeMap<usize, Vec<&TrackPoint>> = BTreeMap::new();
    for p in points {
        m.entry(p.frame).or_default().push(p);
    }
    m
}

fn xy(v: &[&TrackPoint]) -> Vec<(f64, f64)> {
    v.iter().map(|p| (p.x, p.y)).collect()
}

/// One frame's overlaps between reference and result objects.
pub(crate) struct FrameOverlap {
    /// Frame.
    pub(crate) frame: usize,
    /// Reference labels present.
    pub(crate) truth: Vec<u32>,
    /// Result labels present.
    pub(crate) found: Vec<u32>,
    /// `(reference, result, pixels)` for each reference covered more than half by a result.
    pub(crate) covered: Vec<(u32, u32, usize)>,
}

impl FrameMatching {
    fn empty(induced_edges: bool) -> FrameMatching {
        FrameMatching {
            truth_of: HashMap::new(),
            covered_twice: 0,
            merged: BTreeSet::new(),
            counts: MatchCounts::default(),
            split_results: BTreeSet::new(),
            induced_edges,
        }
    }

    /// The matching from per-frame overlaps. A result object covering several references is
    /// paired with the one it covers most (then the lowest label); the others count as
    /// covered twice (splits), not as misses.
    pub(crate) fn from_overlaps(frames: &[FrameOverlap]) -> FrameMatching {
        let mut out = FrameMatching::empty(true);
        for FrameOverlap {
            frame: t,
            truth,
            found,
            covered,
        } in frames
        {
            let mut by_result: BTreeMap<u32, Vec<(usize, u32)>> = BTreeMap::new();
            for &(g, r, n) in covered {
                by_result.entry(r).or_default().push((n, g));
            }
            for (&r, gs) in &by_result {
                let best = gs
                    .iter()
                    .max_by(|a, b| a.0.cmp(&b.0).then(b.1.cmp(&a.1)))
                    .expect("at least one");
                out.truth_of.insert((*t, r), (*t, best.1));
                if gs.len() > 1 {
                    out.split_results.insert((*t, r));
                }
                for &(_, g) in gs.iter().filter(|x| x.1 != best.1) {
                    out.covered_twice += 1;
                    out.merged.insert((*t, g));
                }
            }
            let matched = by_result.len();
            out.counts.add(MatchCounts {
                true_positives: matched,
                false_positives: found.len() - matched,
                false_negatives: truth.len() - covered.len(),
            });
        }
        out
    }
}

fn match_frames(truth: &[TrackPoint], found: &[TrackPoint], radius: f64) -> FrameMatching {
    let (tf, ff) = (by_frame(truth), by_frame(found));
    let frames: BTreeSet<usize> = tf.keys().chain(ff.keys()).copied().collect();
    let empty = Vec::new();
    let mut out = FrameMatching::empty(false);
    for t in frames {
        let (tr, fo) = (tf.get(&t).unwrap_or(&empty), ff.get(&t).unwrap_or(&empty));
        let pairs = matched_pairs(&xy(tr), &xy(fo), radius);
        let mut matched_truth = vec![false; tr.len()];
        let mut matched_found = vec![false; fo.len()];
        for &(i, j) in &pairs {
            matched_truth[i] = true;
            matched_found[j] = true;
            out.truth_of.insert((t, fo[j].track_id), (t, tr[i].track_id));
        }
        for (i, r) in tr.iter().enumerate() {
            if matched_truth[i] {
                continue;
            }
            let near_matched = fo
                .iter()
                .enumerate()
                .any(|(j, f)| matched_found[j] && (f.x - r.x).powi(2) + (f.y - r.y).powi(2) <= radius * radius);
            if near_matched {
                out.covered_twice += 1;
                out.merged.insert((t, r.track_id));
                matched_truth[i] = true;
            }
        }
        out.counts.add(MatchCounts {
            true_positives: pairs.len(),
            false_positives: matched_found.iter().filter(|m| !**m).count(),
            false_negatives: matched_truth.iter().filter(|m| !**m).count(),
        });
    }
    out
}

/// Whether an edge continues one track or links a mother to a daughter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum EdgeKind {
    Continuation,
    Division,
}

/// Edges of a tracking graph: consecutive points of a track (gaps allowed), and from a
/// mother's last point to each daughter's first point.
fn edges(points: &[TrackPoint]) -> HashMap<(Vertex, Vertex), EdgeKind> {
    let mut tracks: BTreeMap<u32, Vec<&TrackPoint>> = BTreeMap::new();
    for p in points {
        tracks.entry(p.track_id).or_default().push(p);
    }
    for v in tracks.values_mut() {
        v.sort_by_key(|p| p.frame);
    }
    let mut out = HashMap::new();
    for (&id, pts) in &tracks {
        for w in pts.windows(2) {
            out.insert(((w[0].frame, id), (w[1].frame, id)), EdgeKind::Continuation);
        }
        if let Some(mother) = pts[0].parent_id.and_then(|m| tracks.get(&m)) {
            let last = mother[mother.len() - 1];
            out.insert(((last.frame, last.track_id), (pts[0].frame, id)), EdgeKind::Division);
        }
    }
    out
}

/// The error counts of the AOGM measure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct AogmCounts {
    /// Vertex splits needed: a result point covering k reference points needs k − 1.
    pub splits: usize,
    /// Reference points missed.
    pub false_negatives: usize,
    /// Result points matching no reference point.
    pub false_positives: usize,
    /// Result edges to delete.
    pub edges_to_delete: usize,
    /// Reference edges to add.
    pub edges_to_add: usize,
    /// Result edges of the wrong kind (continuation instead of division or vice versa).
    pub edges_to_change: usize,
    /// Reference points.
    pub reference_vertices: usize,
    /// Reference edges.
    pub reference_edges: usize,
}

/// Weights of the AOGM terms for TRA: NS 5, FN 10, FP 1, ED 1, EA 1.5, EC 1 (fixtures/methods/check_values.md §8,
/// from memory there, as published by Matula et al. 2015).
pub const TRA_WEIGHTS: [f64; 6] = [5.0, 10.0, 1.0, 1.0, 1.5, 1.0];

impl AogmCounts {
    /// The weighted sum `w·(NS, FN, FP, ED, EA, EC)` with [`TRA_WEIGHTS`].
    pub fn aogm(&self) -> f64 {
        let c = [
            self.splits,
            self.false_negatives,
            self.false_positives,
            self.edges_to_delete,
            self.edges_to_add,
            self.edges_to_change,
        ];
        c.iter().zip(TRA_WEIGHTS).map(|(&n, w)| n as f64 * w).sum()
    }

    /// TRA = 1 − min(AOGM, AOGM₀)/AOGM₀ with AOGM₀ = 10|V| + 1.5|E|, the cost of building the
    /// reference from nothing (1 for an empty reference).
    pub fn tra(&self) -> f64 {
        let empty = self.reference_vertices as f64 * TRA_WEIGHTS[1] + self.reference_edges as f64 * TRA_WEIGHTS[4];
        normalised(self.aogm(), empty)
    }

    /// DET = 1 − min(AOGM-D, 10|V|)/(10|V|), with AOGM-D = 5 NS + 10 FN + 1 FP.
    pub fn det(&self) -> f64 {
        let d = self.splits as f64 * TRA_WEIGHTS[0]
            + self.false_negatives as f64 * TRA_WEIGHTS[1]
            + self.false_positives as f64 * TRA_WEIGHTS[2];
        normalised(d, self.reference_vertices as f64 * TRA_WEIGHTS[1])
    }
}

fn normalised(cost: f64, empty: f64) -> f64 {
    if empty <= 0.0 {
        1.0
    } else {
        1.0 - cost.min(empty) / empty
    }
}

/// Counts the graph edits that turn the result's tracking graph into the reference's.
///
/// # Method
/// P. Matula, M. Maška, D. V. Sorokin, P. Matula, C. Ortiz-de-Solórzano & M. Kozubek (2015),
/// "Cell tracking accuracy measurement based on comparison of acyclic oriented graphs", PLoS ONE
/// 10(12):e0144959, doi:10.1371/journal.pone.0144959. Departure: a result point matches a
/// reference point by position (one to one within a radius), not by mask overlap; a reference
/// point left unmatched but within the radius of a result point matched to another reference
/// counts as a needed split rather than a miss. Edges to or from a false-positive point are
/// counted as edges to delete.
fn aogm_counts(truth: &[TrackPoint], found: &[TrackPoint], matching: &FrameMatching) -> AogmCounts {
    let reference = edges(truth);
    let result = edges(found);
    let mut covered: BTreeSet<(Vertex, Vertex)> = BTreeSet::new();
    let (mut delete, mut change) = (0, 0);
    let unique = |x: &Vertex| matching.truth_of.contains_key(x) && !matching.split_results.contains(x);
    for (&(u, v), &kind) in &result {
        if matching.induced_edges && !(unique(&u) && unique(&v)) {
            continue;
        }
        let mapped = matching.truth_of.get(&u).zip(matching.truth_of.get(&v));
        match mapped.and_then(|(a, b)| reference.get(&(*a, *b)).map(|k| ((*a, *b), k))) {
            Some((edge, &ref_kind)) => {
                covered.insert(edge);
                if ref_kind != kind {
                    change += 1;
                }
            }
            None => delete += 1,
        }
    }
    AogmCounts {
        splits: matching.covered_twice,
        false_negatives: matching.counts.false_negatives,
        false_positives: matching.counts.false_positives,
        edges_to_delete: delete,
        edges_to_add: reference.len() - covered.len(),
        edges_to_change: change,
        reference_vertices: truth.len(),
        reference_edges: reference.len(),
    }
}

/// CLEAR-MOT figures.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize)]
pub struct ClearMot {
    /// Multiple object tracking accuracy, 1 − (FN + FP + IDSW)/GT.
    pub mota: f64,
    /// Multiple object tracking precision: mean distance of matched pairs, px.
    pub motp_px: f64,
    /// Reference points over all frames.
    pub reference_points: usize,
    /// Matched pairs.
    pub matches: usize,
    /// Missed reference points.
    pub false_negatives: usize,
    /// Result points without a reference.
    pub false_positives: usize,
    /// Times a reference object's partner changed.
    pub identity_switches: usize,
}

/// MOTA and MOTP: per frame, correspondences of the previous frames are kept while still within
/// the radius; the rest are matched optimally; an identity switch is counted when a reference
/// object is matched to another result track than at its last match.
///
/// # Method
/// K. Bernardin & R. Stiefelhagen (2008), "Evaluating multiple object tracking performance:
/// the CLEAR MOT metrics", EURASIP J. Image Video Process. 2008:246309,
/// doi:10.1155/2008/246309.
pub fn clear_mot(truth: &[TrackPoint], found: &[TrackPoint], radius: f64) -> ClearMot {
    let (tf, ff) = (by_frame(truth), by_frame(found));
    let frames: BTreeSet<usize> = tf.keys().chain(ff.keys()).copied().collect();
    let empty = Vec::new();
    let mut last_partner: HashMap<u32, u32> = HashMap::new();
    let mut m = ClearMot::default();
    let mut distance_sum = 0.0;
    for t in frames {
        let (tr, fo) = (tf.get(&t).unwrap_or(&empty), ff.get(&t).unwrap_or(&empty));
        let dist = |i: usize, j: usize| (tr[i].x - fo[j].x).hypot(tr[i].y - fo[j].y);
        let mut pairs: Vec<(usize, usize)> = Vec::new();
        let (mut used_t, mut used_f) = (vec![false; tr.len()], vec![false; fo.len()]);
        for (i, r) in tr.iter().enumerate() {
            let kept = last_partner
                .get(&r.track_id)
                .and_then(|h| fo.iter().position(|f| f.track_id == *h))
                .filter(|&j| !used_f[j] && dist(i, j) <= radius);
            if let Some(j) = kept {
                pairs.push((i, j));
                used_t[i] = true;
                used_f[j] = true;
            }
        }
        let rest_t: Vec<usize> = (0..tr.len()).filter(|&i| !used_t[i]).collect();
        let rest_f: Vec<usize> = (0..fo.len()).filter(|&j| !used_f[j]).collect();
        let pick = |v: &[&TrackPoint], idx: &[usize]| idx.iter().map(|&k| (v[k].x, v[k].y)).collect::<Vec<_>>();
        for (a, b) in matched_pairs(&pick(tr, &rest_t), &pick(fo, &rest_f), radius) {
            pairs.push((rest_t[a], rest_f[b]));
        }
        for &(i, j) in &pairs {
            if let Some(previous) = last_partner.insert(tr[i].track_id, fo[j].track_id) {
                if previous != fo[j].track_id {
                    m.identity_switches += 1;
                }
            }
            distance_sum += dist(i, j);
        }
        m.reference_points += tr.len();
        m.matches += pairs.len();
        m.false_negatives += tr.len() - pairs.len();
        m.false_positives += fo.len() - pairs.len();
    }
    let errors = (m.false_negatives + m.false_positives + m.identity_switches) as f64;
    m.mota = if m.reference_points == 0 {
        1.0
    } else {
        1.0 - errors / m.reference_points as f64
    };
    m.motp_px = if m.matches == 0 {
        0.0
    } else {
        distance_sum / m.matches as f64
    };
    m
}

/// How whole reference tracks were followed.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize)]
pub struct TrackCoverage {
    /// Reference tracks.
    pub reference_tracks: usize,
    /// Share of reference tracks of which one result track follows at least 80% of the points.
    pub mostly_tracked: f64,
    /// Share of reference tracks of which no result track follows more than 20% of the points.
    pub mostly_lost: f64,
}

/// Mostly tracked and mostly lost.
///
/// # Method
/// Y. Li, C. Huang & R. Nevatia (2009), "Learning to associate: HybridBoosting multi-target
/// tracker", Proc. IEEE CVPR, pp. 2953–2960, doi:10.1109/CVPR.2009.5206735 (80% and 20% of a
/// trajectory). Stricter than coverage by any result: the points must belong to one result
/// track, so a track broken in two halves is not mostly tracked.
fn coverage(truth: &[TrackPoint], matching: &FrameMatching) -> TrackCoverage {
    let mut length: BTreeMap<u32, usize> = BTreeMap::new();
    for p in truth {
        *length.entry(p.track_id).or_default() += 1;
    }
    let mut followed: HashMap<(u32, u32), usize> = HashMap::new();
    for (&(_, found_id), &(_, truth_id)) in &matching.truth_of {
        *followed.entry((truth_id, found_id)).or_default() += 1;
    }
    let mut best: BTreeMap<u32, usize> = BTreeMap::new();
    for (&(truth_id, _), &n) in &followed {
        let b = best.entry(truth_id).or_default();
        *b = (*b).max(n);
    }
    let n = length.len();
    let share = |pred: &dyn Fn(f64) -> bool| {
        let k = length
            .iter()
            .filter(|(id, &len)| pred(best.get(id).copied().unwrap_or(0) as f64 / len as f64))
            .count();
        if n == 0 {
            0.0
        } else {
            k as f64 / n as f64
        }
    };
    TrackCoverage {
        reference_tracks: n,
        mostly_tracked: share(&|f| f >= 0.8),
        mostly_lost: share(&|f| f <= 0.2),
    }
}

/// Division events found against the reference.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize)]
pub struct DivisionScore {
    /// Divisions in the reference.
    pub reference_events: usize,
    /// Divisions in the result.
    pub found_events: usize,
    /// Reference divisions found with the right mother and both daughters, within a frame.
    pub recovered: usize,
    /// Result divisions matching no reference division.
    pub spurious: usize,
}

impl DivisionScore {
    /// Recovered / reference events (1 when there are none).
    pub fn recovered_fraction(&self) -> f64 {
        super::ratio(self.recovered, self.reference_events)
    }
    /// Spurious / found events (0 when none were found).
    pub fn spurious_fraction(&self) -> f64 {
        1.0 - super::ratio(self.found_events - self.spurious, self.found_events)
    }
}

/// A division as (mother's last vertex, the daughters' first vertices).
type Event = (Vertex, [Vertex; 2]);

fn division_events(points: &[TrackPoint]) -> Vec<Event> {
    let mut first: BTreeMap<u32, &TrackPoint> = BTreeMap::new();
    let mut last: BTreeMap<u32, &TrackPoint> = BTreeMap::new();
    for p in points {
        let f = first.entry(p.track_id).or_insert(p);
        if p.frame < f.frame {
            *f = p;
        }
        let l = last.entry(p.track_id).or_insert(p);
        if p.frame > l.frame {
            *l = p;
        }
    }
    let mut daughters: BTreeMap<u32, Vec<Vertex>> = BTreeMap::new();
    for (&id, p) in &first {
        if let Some(m) = p.parent_id {
            daughters.entry(m).or_default().push((p.frame, id));
        }
    }
    daughters
        .into_iter()
        .filter_map(|(m, d)| {
            let mother = last.get(&m)?;
            (d.len() == 2).then(|| ((mother.frame, m), [d[0], d[1]]))
        })
        .collect()
}

/// Scores division events: a result division recovers a reference division when its mother's
/// last point matches a point of the reference mother, its daughters' first points match the
/// two reference daughters, and the division frames differ by at most one.
fn division_score(truth: &[TrackPoint], found: &[TrackPoint], matching: &FrameMatching) -> DivisionScore {
    let reference = division_events(truth);
    let result = division_events(found);
    let mut recovered = BTreeSet::new();
    let mut spurious = 0;
    for (mother, daughters) in &result {
        let truth_id = |v: &Vertex| matching.truth_of.get(v).map(|t| t.1);
        let hit = reference.iter().position(|(rm, rd)| {
            let ids: BTreeSet<u32> = rd.iter().map(|v| v.1).collect();
            let found_ids: BTreeSet<u32> = daughters.iter().filter_map(truth_id).collect();
            truth_id(mother) == Some(rm.1) && rm.0.abs_diff(mother.0) <= 1 && found_ids == ids
        });
        match hit {
            Some(k) => {
                recovered.insert(k);
            }
            None => spurious += 1,
        }
    }
    DivisionScore {
        reference_events: reference.len(),
        found_events: result.len(),
        recovered: recovered.len(),
        spurious,
    }
}

/// Every accuracy measure of a result against a reference.
#[derive(Debug, Clone, Serialize)]
pub struct TrackingScore {
    /// Matching radius used, px.
    pub match_radius_px: f64,
    /// Detections matched per frame.
    pub detection: MatchCounts,
    /// Detection precision.
    pub detection_precision: f64,
    /// Detection recall.
    pub detection_recall: f64,
    /// Detection F1.
    pub detection_f1: f64,
    /// AOGM error counts.
    pub aogm_counts: AogmCounts,
    /// Weighted AOGM.
    pub aogm: f64,
    /// TRA (tracking accuracy, 0 to 1).
    pub tra: f64,
    /// DET (detection accuracy, 0 to 1).
    pub det: f64,
    /// CLEAR-MOT.
    pub clear_mot: ClearMot,
    /// Links between consecutive frames.
    pub links: LinkScores,
    /// Link precision.
    pub link_precision: f64,
    /// Link recall.
    pub link_recall: f64,
    /// Whole-track coverage.
    pub tracks: TrackCoverage,
    /// Division events.
    pub divisions: DivisionScore,
    /// Recovered / reference divisions.
    pub divisions_recovered_fraction: f64,
    /// Spurious / found divisions.
    pub divisions_spurious_fraction: f64,
    /// What broke the reference tracks that are not mostly tracked.
    pub breaks: super::breaks::TrackBreaks,
}

/// Scores `found` tracks against `truth` tracks, matching points within `radius` px.
pub fn score_tracks(truth: &[TrackPoint], found: &[TrackPoint], radius: f64) -> TrackingScore {
    let matching = match_frames(truth, found, radius);
    score_tracks_matched(truth, found, radius, matching)
}

/// [`score_tracks`] with the vertices already matched (e.g. by mask overlap,
/// [`super::layout::overlap_matching`]); CLEAR-MOT and links still match within `radius`.
pub(crate) fn score_tracks_matched(
    truth: &[TrackPoint],
    found: &[TrackPoint],
    radius: f64,
    matching: FrameMatching,
) -> TrackingScore {
    let aogm_counts = aogm_counts(truth, found, &matching);
    let links = link_scores(truth, found, radius);
    let divisions = division_score(truth, found, &matching);
    let d = matching.counts;
    TrackingScore {
        match_radius_px: radius,
        detection: d,
        detection_precision: d.precision(),
        detection_recall: d.recall(),
        detection_f1: d.f1(),
        aogm: aogm_counts.aogm(),
        tra: aogm_counts.tra(),
        det: aogm_counts.det(),
        aogm_counts,
        clear_mot: clear_mot(truth, found, radius),
        link_precision: links.precision(),
        link_recall: links.recall(),
        links,
        tracks: coverage(truth, &matching),
        breaks: super::breaks::track_breaks(truth, found, &matching),
        divisions_recovered_fraction: divisions.recovered_fraction(),
        divisions_spurious_fraction: divisions.spurious_fraction(),
        divisions,
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A track point, for hand-built cases (also used by the breakdown's tests).
    pub(crate) fn p(track_id: u32, parent_id: Option<u32>, frame: usize, x: f64, y: f64) -> TrackPoint {
        TrackPoint {
            track_id,
            parent_id,
            frame,
            x,
            y,
        }
    }

    #[test]
    fn methods_tra_det_check_1() {
        // Source: fixtures/methods/check_values.md §8 check 1 (formula: Matula et al. 2015 / the challenge's
        // evaluation page): reference 2 cells x 3 frames (|V| = 6, |E| = 4); the result misses
        // cell B at t = 2: FN = 1, EA = 1, AOGM = 11.5, AOGM₀ = 66, TRA = 0.825758,
        // DET = 1 − 10/60 = 0.833333.
        let truth: Vec<TrackPoint> = (0..3)
            .flat_map(|t| [p(1, None, t, t as f64, 0.0), p(2, None, t, t as f64, 10.0)])
            .collect();
        let found: Vec<TrackPoint> = truth
            .iter()
            .filter(|q| !(q.track_id == 2 && q.frame == 2))
            .cloned()
            .collect();
        let s = score_tracks(&truth, &found, 2.0);
        let c = s.aogm_counts;
        assert_eq!((c.false_negatives, c.edges_to_add, c.reference_edges), (1, 1, 4));
        assert_eq!(c.splits + c.false_positives + c.edges_to_delete + c.edges_to_change, 0);
        assert!((s.aogm - 11.5).abs() < 1e-12);
        assert!((s.tra - 0.825758).abs() < 1e-6, "{}", s.tra);
        assert!((s.det - 0.833333).abs() < 1e-6, "{}", s.det);
    }

    #[test]
    fn methods_tra_det_check_2_arithmetic() {
        // Source: fixtures/methods/check_values.md §8 check 2 (arithmetic only): NS 1, FP 2, ED 1, EA 2, EC 1 on the
        // same reference: AOGM = 12, TRA = 0.818182, DET = 1 − 7/60 = 0.883333.
        let c = AogmCounts {
            splits: 1,
            false_negatives: 0,
            false_positives: 2,
            edges_to_delete: 1,
            edges_to_add: 2,
            edges_to_change: 1,
            reference_vertices: 6,
            reference_edges: 4,
        };
        assert!((c.aogm() - 12.0).abs() < 1e-12);
        assert!((c.tra() - 0.818182).abs() < 1e-6);
        assert!((c.det() - 0.883333).abs() < 1e-6);
    }

    #[test]
    fn merged_detection_wrong_link_and_missing_division_are_counted() {
        // Hand-derived from the AOGM definitions (Matula et al. 2015). Reference: mother 1 at
        // frames 0-1, daughters 2 and 3 at frames 2-3 (|V| = 6; edges: 1→1, 1→2 division,
        // 1→3 division, 2→2, 3→3: |E| = 5). Result: the same points, but the daughters are not
        // linked to the mother, and at frame 3 one result point lies between the daughters
        // (1 px from daughter 2, 2 px from daughter 3, radius 2): it matches one and covers the
        // other (NS = 1). Edges: 7→7 and 8→8 are correct; the two division edges and 3→3 are
        // missing (EA = 3). AOGM = 5·1 + 1.5·3 = 9.5; AOGM₀ = 10·6 + 1.5·5 = 67.5;
        // TRA = 1 − 9.5/67.5 = 0.859259.
        let truth = vec![
            p(1, None, 0, 0.0, 0.0),
            p(1, None, 1, 1.0, 0.0),
            p(2, Some(1), 2, 2.0, -1.5),
            p(3, Some(1), 2, 2.0, 1.5),
            p(2, Some(1), 3, 3.0, -1.5),
            p(3, Some(1), 3, 3.0, 1.5),
        ];
        let found = vec![
            p(7, None, 0, 0.0, 0.0),
            p(7, None, 1, 1.0, 0.0),
            p(8, None, 2, 2.0, -1.5),
            p(9, None, 2, 2.0, 1.5),
            p(8, None, 3, 3.0, -0.5),
        ];
        let s = score_tracks(&truth, &found, 2.0);
        let c = s.aogm_counts;
        assert_eq!((c.reference_vertices, c.reference_edges), (6, 5));
        assert_eq!((c.splits, c.false_negatives, c.false_positives), (1, 0, 0));
        assert_eq!(
            (c.edges_to_delete, c.edges_to_add, c.edges_to_change),
            (0, 3, 0),
            "{c:?}"
        );
        assert!((s.tra - 0.859259).abs() < 1e-6);
        // The same result with the division recorded: edges 7→8 and 7→9 become division edges
        // that match the reference; only 3→3 is missing.
        let mut divided = found.clone();
        for q in divided.iter_mut().filter(|q| q.track_id != 7) {
            q.parent_id = Some(7);
        }
        let c = score_tracks(&truth, &divided, 2.0).aogm_counts;
        assert_eq!(
            (c.edges_to_delete, c.edges_to_add, c.edges_to_change),
            (0, 1, 0),
            "{c:?}"
        );
        // Recorded as a continuation (8 continues 7) instead: that edge has the wrong kind.
        let mut continued = found.clone();
        for q in continued.iter_mut().filter(|q| q.track_id == 8) {
            q.track_id = 7;
        }
        let c = score_tracks(&truth, &continued, 2.0).aogm_counts;
        assert_eq!(
            (c.edges_to_delete, c.edges_to_add, c.edges_to_change),
            (0, 2, 1),
            "{c:?}"
        );
        // Source: translation invariance: the same scene 30 px right and 20 px down scores the
        // same (the covered daughter is found by distance, wherever she lies).
        let shift = |v: &[TrackPoint]| -> Vec<TrackPoint> {
            v.iter()
                .map(|q| TrackPoint {
                    x: q.x + 30.0,
                    y: q.y + 20.0,
                    ..q.clone()
                })
                .collect()
        };
        let moved = score_tracks(&shift(&truth), &shift(&found), 2.0);
        assert_eq!(moved.aogm_counts.splits, 1);
        assert!((moved.tra - 0.859259).abs() < 1e-6);
    }

    #[test]
    fn methods_mota_motp_check() {
        // Source: fixtures/methods/check_values.md §8 CLEAR-MOT check (Bernardin & Stiefelhagen 2008): 4 frames x 2
        // reference objects (8), FN = 1, FP = 1, IDSW = 1 → MOTA = 0.625; 7 matches at distances
        // 0.5, 0.3, 0.2, 0.4, 0.1, 0.6, 0.2 → MOTP = 0.328571. Built here: result track 1
        // follows A; track 2 follows B at frames 0-1; at frame 2 B is missed and a spurious
        // point appears far away; at frame 3 track 3 takes B (a switch).
        let truth: Vec<TrackPoint> = (0..4)
            .flat_map(|t| [p(1, None, t, 0.0, 0.0), p(2, None, t, 0.0, 10.0)])
            .collect();
        let found = vec![
            p(1, None, 0, 0.5, 0.0),
            p(1, None, 1, 0.3, 0.0),
            p(1, None, 2, 0.2, 0.0),
            p(1, None, 3, 0.4, 0.0),
            p(2, None, 0, 0.0, 10.1),
            p(2, None, 1, 0.0, 10.6),
            p(5, None, 2, 50.0, 50.0),
            p(3, None, 3, 0.0, 10.2),
        ];
        let m = clear_mot(&truth, &found, 1.0);
        assert_eq!(
            (m.false_negatives, m.false_positives, m.identity_switches, m.matches),
            (1, 1, 1, 7)
        );
        assert!((m.mota - 0.625).abs() < 1e-12);
        assert!((m.motp_px - 0.328571).abs() < 1e-6);
    }

    #[test]
    fn divisions_and_coverage() {
        // Hand-derived: the reference divides once (mother 1 → daughters 2, 3 after frame 1).
        // A result with the same division recovers it; one whose daughters hang off another
        // mother is spurious; a reference track broken into two result halves is not mostly
        // tracked (each half 50%) but not mostly lost either.
        let truth = vec![
            p(1, None, 0, 0.0, 0.0),
            p(1, None, 1, 0.0, 0.0),
            p(2, Some(1), 2, 0.0, -3.0),
            p(3, Some(1), 2, 0.0, 3.0),
            p(4, None, 0, 50.0, 0.0),
            p(4, None, 1, 50.0, 0.0),
            p(4, None, 2, 50.0, 0.0),
            p(4, None, 3, 50.0, 0.0),
        ];
        let mut found = truth.clone();
        for q in found.iter_mut().filter(|q| q.track_id == 4 && q.frame >= 2) {
            q.track_id = 5;
        }
        let s = score_tracks(&truth, &found, 1.0);
        assert_eq!(
            (
                s.divisions.reference_events,
                s.divisions.recovered,
                s.divisions.spurious
            ),
            (1, 1, 0)
        );
        assert_eq!(s.tracks.reference_tracks, 4);
        assert!((s.tracks.mostly_tracked - 0.75).abs() < 1e-12);
        assert_eq!(s.tracks.mostly_lost, 0.0);
        for q in found.iter_mut().filter(|q| q.parent_id.is_some()) {
            q.parent_id = Some(5);
        }
        let s = score_tracks(&truth, &found, 1.0);
        assert_eq!((s.divisions.recovered, s.divisions.spurious), (0, 1));
        assert!((s.divisions_spurious_fraction - 1.0).abs() < 1e-12);
    }
}
