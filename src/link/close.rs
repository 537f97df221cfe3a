//! Gap closing: the second, global step of the LAP framework. Frame-to-frame linking breaks a
//! track wherever a nucleus is missed for a frame or two (it dims, leaves focus, or is merged
//! with a neighbour by the segmentation); here the end of one track segment may be joined to
//! the start of another that begins up to `max_gap_frames` missing frames later.

use super::assign_with_alternatives;
use super::motion::{MotionFilter, MotionNoise};
use super::online::confidence;
use super::params::{LinkParams, Prediction};
use crate::tracks::TrackedDetection;
use std::collections::BTreeMap;

/// The first or last point of a track segment.
#[derive(Debug, Clone, Copy)]
struct SegmentEnd {
    track_id: u32,
    frame: usize,
    position: [f64; 2],
    /// Velocity at the end (px/frame), zero without prediction or history.
    velocity: [f64; 2],
}

/// A join made by gap closing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GapJoin {
    /// The segment that ends.
    pub from_track: u32,
    /// The segment that continues it (renamed to `from_track`).
    pub to_track: u32,
    /// Last frame before the gap.
    pub from_frame: usize,
    /// First frame after the gap.
    pub to_frame: usize,
}

/// Joins track segments across gaps of 1 to `params.max_gap_frames` missing frames and
/// renames joined segments to the id of the segment they continue. Returns the joins made.
///
/// A candidate join from the end of segment *i* (frame `fₑ`, position `pₑ`, velocity `v`) to the
/// start of segment *j* (frame `fₛ`, position `pₛ`) costs the squared distance from the
/// predicted position divided by the elapsed frames, `|pₛ − (pₑ + v·Δt)|² / Δt` with
/// `Δt = fₛ − fₑ`: a random walk's displacement variance grows in proportion to the elapsed
/// time, so the cost is on the scale of a one-frame step whatever the gap, and it is gated by
/// the same maximum step (the search radius grows as √Δt). Every end and start may instead stay
/// unjoined at the alternative cost, so no join is forced.
///
/// # Method
/// The gap-closing part of the segment step of K. Jaqaman, D. Loerke, M. Mettlen, H. Kuwata,
/// S. Grinstein, S. L. Schmid & G. Danuser (2008), "Robust single-particle tracking in live-cell
/// time-lapse sequences", Nat. Methods 5(8):695–702, doi:10.1038/nmeth.1237, solved as one LAP
/// with the same alternative rule as the frame-to-frame step (1.05 x the largest candidate
/// cost) instead of the paper's percentile; merges and splits are handled separately (transient
/// merges are bridged as gaps here; divisions in [`super::divide`]).
pub fn close_gaps(points: &mut [TrackedDetection], params: &LinkParams) -> Vec<GapJoin> {
    if params.max_gap_frames == 0 {
        return Vec::new();
    }
    let (starts, ends) = segment_ends(points, params);
    let mut starts_by_frame: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for (j, s) in starts.iter().enumerate() {
        starts_by_frame.entry(s.frame).or_default().push(j);
    }
    let max_cost = params.max_step_px * params.max_step_px;
    let mut candidates = Vec::new();
    for (i, e) in ends.iter().enumerate() {
        for (_, js) in starts_by_frame.range(e.frame + 2..=e.frame + 1 + params.max_gap_frames) {
            for &j in js {
                let s = &starts[j];
                let cost = join_cost(e, s);
                if cost <= max_cost {
                    candidates.push((i, j, cost));
                }
            }
        }
    }
    let alternative = 1.05 * candidates.iter().map(|c| c.2).fold(0.0, f64::max);
    let result = assign_with_alternatives(ends.len(), starts.len(), &candidates, alternative);
    let mut joins: Vec<GapJoin> = result
        .links
        .iter()
        .map(|&(i, j, _)| GapJoin {
            from_track: ends[i].track_id,
            to_track: starts[j].track_id,
            from_frame: ends[i].frame,
            to_frame: starts[j].frame,
        })
        .collect();
    joins.sort_by_key(|j| (j.to_frame, j.to_track));
    apply_joins(points, &joins, &result.links, &result.second_best, &ends, &starts);
    joins
}

/// Joining cost: squared distance from the predicted position over the elapsed frames.
fn join_cost(end: &SegmentEnd, start: &SegmentEnd) -> f64 {
    let dt = (start.frame - end.frame) as f64;
    let pred = [
        end.position[0] + end.velocity[0] * dt,
        end.position[1] + end.velocity[1] * dt,
    ];
    ((start.position[0] - pred[0]).powi(2) + (start.position[1] - pred[1]).powi(2)) / dt
}

/// Starts and ends of every segment, in ascending track id. Velocities come from a Kalman
/// filter run over the segment when prediction is on.
fn segment_ends(points: &[TrackedDetection], params: &LinkParams) -> (Vec<SegmentEnd>, Vec<SegmentEnd>) {
    let mut by_track: BTreeMap<u32, Vec<&TrackedDetection>> = BTreeMap::new();
    for p in points {
        by_track.entry(p.track_id).or_default().push(p);
    }
    let mut starts = Vec::with_capacity(by_track.len());
    let mut ends = Vec::with_capacity(by_track.len());
    for (&track_id, seg) in by_track.iter_mut() {
        seg.sort_by_key(|p| p.detection.frame);
        let at = |p: &TrackedDetection| [p.detection.x, p.detection.y];
        let (first, last) = (seg[0], seg[seg.len() - 1]);
        let velocity = match params.prediction {
            Prediction::On if seg.len() >= 2 => end_velocity(seg, params.motion_noise),
            _ => [0.0, 0.0],
        };
        starts.push(SegmentEnd {
            track_id,
            frame: first.detection.frame,
            position: at(first),
            velocity: [0.0, 0.0],
        });
        ends.push(SegmentEnd {
            track_id,
            frame: last.detection.frame,
            position: at(last),
            velocity,
        });
    }
    (starts, ends)
}

/// Velocity at the end of a segment, from the motion model run over its points.
fn end_velocity(seg: &[&TrackedDetection], noise: MotionNoise) -> [f64; 2] {
    let points = seg.iter().map(|p| (p.detection.frame, [p.detection.x, p.detection.y]));
    MotionFilter::replay(points, noise).map_or([0.0, 0.0], |f| f.velocity())
}

/// Renames every joined segment (following chains) and records the join's cost and
/// confidence on the first point after the gap.
fn apply_joins(
    points: &mut [TrackedDetection],
    joins: &[GapJoin],
    links: &[(usize, usize, f64)],
    second_best: &[f64],
    ends: &[SegmentEnd],
    starts: &[SegmentEnd],
) {
    let mut continues: BTreeMap<u32, u32> = BTreeMap::new();
    for j in joins {
        continues.insert(j.to_track, j.from_track);
    }
    let root = |mut id: u32| {
        while let Some(&prev) = continues.get(&id) {
            id = prev;
        }
        id
    };
    let mut first_after_gap: BTreeMap<u32, (f64, f64)> = BTreeMap::new();
    for (k, &(i, j, cost)) in links.iter().enumerate() {
        let pred_distance2 = cost * (starts[j].frame - ends[i].frame) as f64;
        first_after_gap.insert(starts[j].track_id, (pred_distance2, confidence(cost, second_best[k])));
    }
    let renamed: BTreeMap<u32, u32> = continues.keys().map(|&id| (id, root(id))).collect();
    let mut seen_start: std::collections::BTreeSet<u32> = Default::default();
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by_key(|&k| (points[k].track_id, points[k].detection.frame));
    for k in order {
        let p = &mut points[k];
        let original = p.track_id;
        if let Some(&new_id) = renamed.get(&original) {
            if seen_start.insert(original) {
                let (cost, conf) = first_after_gap[&original];
                p.distance_from_prediction_px = Some(cost.sqrt());
                p.link_confidence = Some(conf);
            }
            p.track_id = new_id;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::online::OnlineLinker;
    use crate::tracks::Detection;

    pub(crate) fn detection(frame: usize, label: u32, x: f64, y: f64) -> Detection {
        Detection {
            frame,
            label,
            x,
            y,
            area_px: 150.0,
            equivalent_diameter_px: 13.8,
            mean_intensity: 500.0,
            total_intensity: 75000.0,
            major_axis_px: 14.0,
            minor_axis_px: 13.6,
            orientation_deg: 0.0,
            touches_border: false,
        }
    }

    fn link_all(frames: Vec<Vec<Detection>>, params: &LinkParams) -> Vec<TrackedDetection> {
        let mut linker = OnlineLinker::new(*params);
        frames.into_iter().flat_map(|f| linker.push(f)).collect()
    }

    #[test]
    fn a_one_frame_dropout_is_bridged() {
        // Hand-built: one nucleus moving +2 px/frame along x is missed at frame 6; online linking
        // makes two segments, gap closing makes one track with the cost measured from the
        // motion model's prediction (≈ 0 once six points have made the constant-velocity
        // model the likely one: the motion is exactly linear).
        let params = LinkParams::for_diameter(14.0);
        let frames: Vec<Vec<Detection>> = (0..10)
            .map(|t| {
                if t == 6 {
                    vec![]
                } else {
                    vec![detection(t, 1, 10.0 + 2.0 * t as f64, 50.0)]
                }
            })
            .collect();
        let mut points = link_all(frames, &params);
        assert_eq!(points.iter().filter(|p| p.track_id == 2).count(), 3);
        let joins = close_gaps(&mut points, &params);
        assert_eq!(joins.len(), 1);
        assert!(points.iter().all(|p| p.track_id == 1));
        let after = points.iter().find(|p| p.detection.frame == 7).unwrap();
        assert!(after.distance_from_prediction_px.unwrap() < 0.5f64.sqrt(), "{after:?}");
        // Switched off, the segments stay apart.
        let mut off = params;
        off.max_gap_frames = 0;
        let frames: Vec<Vec<Detection>> = (0..10)
            .filter(|&t| t != 6)
            .map(|t| vec![detection(t, 1, 10.0 + 2.0 * t as f64, 50.0)])
            .collect();
        let mut points = link_all(frames, &off);
        assert!(close_gaps(&mut points, &off).is_empty());
    }

    #[test]
    fn gaps_longer_than_allowed_or_too_far_stay_open() {
        // Hand-built: a gap of 3 missing frames with max gap 2; and a 1-frame gap whose restart
        // lies 30 px away (beyond the maximum step 8.4 px x √2).
        let params = LinkParams::for_diameter(14.0);
        let mut frames: Vec<Vec<Detection>> = (0..8).map(|_| Vec::new()).collect();
        for t in [0, 1, 2, 6, 7] {
            frames[t].push(detection(t, 1, 20.0, 20.0));
        }
        for t in [0, 1, 3, 4] {
            let x = if t < 2 { 100.0 } else { 130.0 };
            let label = frames[t].len() as u32 + 1;
            frames[t].push(detection(t, label, x, 100.0));
        }
        let mut points = link_all(frames, &params);
        assert!(close_gaps(&mut points, &params).is_empty());
    }

    #[test]
    fn a_transient_merge_is_bridged_for_the_hidden_nucleus() {
        // Hand-built: two nuclei approach along y = 50 and y = 62, are segmented as one object
        // (at the midpoint) in frames 4 and 5, then separate again. The object is three times
        // a nucleus (more than the two of them, so the online linker does not split it, see
        // `link::repair`): one track takes the merged object (its motion model coasts rather
        // than following the midpoint), the other bridges the two missing frames: one join,
        // two tracks in the end, each staying on its own side after the merge (no identity
        // swap).
        let params = LinkParams::for_diameter(14.0);
        let mut frames = Vec::new();
        for t in 0..10 {
            let x = 20.0 + 3.0 * t as f64;
            frames.push(if t == 4 || t == 5 {
                let mut merged = detection(t, 1, x, 56.0);
                merged.area_px *= 3.0;
                merged.total_intensity *= 3.0;
                vec![merged]
            } else {
                vec![detection(t, 1, x, 50.0), detection(t, 2, x, 62.0)]
            });
        }
        let mut points = link_all(frames, &params);
        let joins = close_gaps(&mut points, &params);
        assert_eq!(joins.len(), 1, "{joins:?}");
        let ids: std::collections::BTreeSet<u32> = points.iter().map(|p| p.track_id).collect();
        assert_eq!(ids.len(), 2);
        for id in ids {
            let ys: Vec<f64> = points
                .iter()
                .filter(|p| p.track_id == id && (p.detection.frame < 4 || p.detection.frame > 5))
                .map(|p| p.detection.y)
                .collect();
            assert!(ys.iter().all(|&y| y == ys[0]), "track {id} changes side: {ys:?}");
        }
    }

    #[test]
    fn a_chain_of_gaps_joins_into_one_track_and_competing_ends_go_to_the_nearer() {
        // Hand-built, per the LAP of Jaqaman et al. (2008): one nucleus at +2 px/frame missed
        // at frames 3 and 7 gives three segments; one assignment joins both gaps (a chain), so
        // one track remains. Then two ends compete for one start after a gap: the start lies
        // 1 px from where the first is predicted and 9 px from the second, so the first takes
        // it and the second stays an end.
        let params = LinkParams::for_diameter(14.0);
        let frames: Vec<Vec<Detection>> = (0..11)
            .map(|t| {
                if t == 3 || t == 7 {
                    Vec::new()
                } else {
                    vec![detection(t, 1, 10.0 + 2.0 * t as f64, 50.0)]
                }
            })
            .collect();
        let mut points = link_all(frames, &params);
        assert_eq!(
            points
                .iter()
                .map(|p| p.track_id)
                .collect::<std::collections::BTreeSet<_>>()
                .len(),
            3
        );
        assert_eq!(close_gaps(&mut points, &params).len(), 2);
        assert!(points.iter().all(|p| p.track_id == points[0].track_id));
        // Two still nuclei 10 px apart end at frame 4; one start at frame 6, 1 px from the first.
        let frames: Vec<Vec<Detection>> = (0..9)
            .map(|t| match t {
                0..=4 => vec![detection(t, 1, 30.0, 50.0), detection(t, 2, 40.0, 50.0)],
                5 => Vec::new(),
                _ => vec![detection(t, 1, 31.0, 50.0)],
            })
            .collect();
        let mut points = link_all(frames, &params);
        let joins = close_gaps(&mut points, &params);
        assert_eq!(joins.len(), 1, "{joins:?}");
        let at = |frame: usize, x: f64| {
            points
                .iter()
                .find(|p| p.detection.frame == frame && p.detection.x == x)
                .unwrap()
                .track_id
        };
        assert_eq!(at(6, 31.0), at(4, 30.0));
        assert_ne!(at(6, 31.0), at(4, 40.0));
    }
}
