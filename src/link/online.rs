//! Tracks built frame by frame: each new frame's detections are linked to the tracks alive in
//! the previous frame; unlinked detections start new tracks, unlinked tracks end. The
//! segments it makes are joined afterwards by gap closing and division detection
//! ([`super::close`], [`super::divide`]).

use super::link_frames_gated;
use super::motion::MotionFilter;
use super::params::{LinkParams, Prediction};
use super::repair::{min_part_px, split_shared_objects, Expected};
use crate::tracks::{Detection, TrackedDetection};

#[derive(Debug, Clone)]
struct LiveTrack {
    id: u32,
    motion: MotionFilter,
    /// Position of the last detection, px.
    position: [f64; 2],
    /// Area of the last detection taken as a single nucleus, px.
    area_px: f64,
}

/// A detection this much larger than its track's nucleus is taken to be two nuclei segmented
/// as one (a transient merge): the track keeps it, but its motion model takes the merged
/// centroid only as a loose measurement (off by about a nucleus radius) instead of following
/// it, so that it separates on its own side afterwards. Our own
/// rule: two similar nuclei merged have about twice the area; 1.6 leaves room for size noise.
const MERGE_AREA_RATIO: f64 = 1.6;

impl LiveTrack {
    /// The track after taking a detection at `position` of `area_px`; `shared` where the
    /// detection is half of an object split because two tracks entered it, whose area is a
    /// share of the object's and is not remembered as the nucleus's own (were it remembered,
    /// two tracks on one nucleus would keep splitting it, their shares always summing to it).
    fn followed_to(&self, position: [f64; 2], area_px: f64, shared: bool) -> LiveTrack {
        let mut next = self.clone();
        next.position = position;
        if shared {
            next.motion.step(position);
        } else if area_px > MERGE_AREA_RATIO * self.area_px {
            // The merged centroid lies about a nucleus radius from this nucleus.
            next.motion
                .step_uncertain(position, self.area_px / std::f64::consts::PI);
        } else {
            next.motion.step(position);
            next.area_px = area_px;
        }
        next
    }
}

/// The online linker: feed it each frame's detections in frame order.
#[derive(Debug, Clone)]
pub struct OnlineLinker {
    params: LinkParams,
    live: Vec<LiveTrack>,
    next_id: u32,
    /// Objects split because two tracks entered them ([`super::repair`]).
    shared_objects_split: usize,
}

impl OnlineLinker {
    /// A linker with no tracks yet.
    pub fn new(params: LinkParams) -> Self {
        OnlineLinker {
            params,
            live: Vec::new(),
            next_id: 1,
            shared_objects_split: 0,
        }
    }

    /// Objects split so far because two tracks entered them.
    pub fn shared_objects_split(&self) -> usize {
        self.shared_objects_split
    }

    /// Links one frame's detections and returns them with their track ids. New tracks get
    /// consecutive ids in order of first appearance (frame, then detection order), so ids are
    /// stable and independent of the thread count.
    ///
    /// With prediction on, a track is searched for around its motion model's prediction,
    /// within the model's 99% gate capped at the maximum step (a new track's model predicts
    /// its last position, with the gate of an unknown velocity); with prediction off, around
    /// its last position within the maximum step.
    pub fn push(&mut self, detections: Vec<Detection>) -> Vec<TrackedDetection> {
        let (sources, radii): (Vec<[f64; 2]>, Vec<f64>) = self.live.iter().map(|t| self.search_area(t)).unzip();
        let expected: Vec<Expected> = self
            .live
            .iter()
            .zip(&sources)
            .map(|(t, &predicted)| Expected {
                predicted,
                area_px: t.area_px,
            })
            .collect();
        let (detections, splits) = split_shared_objects(detections, &expected, min_part_px(self.params.diameter_px));
        self.shared_objects_split += splits;
        let shared = shared_labels(&detections);
        let targets: Vec<[f64; 2]> = detections.iter().map(|d| [d.x, d.y]).collect();
        let links = link_frames_gated(&sources, &radii, &targets);
        let mut assigned: Vec<Option<(usize, f64, f64)>> = vec![None; targets.len()];
        for (k, &(s, t, cost)) in links.links.iter().enumerate() {
            assigned[t] = Some((s, cost, confidence(cost, links.second_best[k])));
        }
        let mut live = Vec::with_capacity(targets.len());
        let mut out = Vec::with_capacity(targets.len());
        for (t, d) in detections.into_iter().enumerate() {
            let here = [d.x, d.y];
            let (track, cost, confidence) = match assigned[t] {
                Some((s, squared, confidence)) => (
                    self.live[s].followed_to(here, d.area_px, shared.contains(&d.label)),
                    Some(squared),
                    Some(confidence),
                ),
                None => {
                    self.next_id += 1;
                    let track = LiveTrack {
                        id: self.next_id - 1,
                        motion: MotionFilter::started_at(here, self.params.motion_noise),
                        position: here,
                        area_px: d.area_px,
                    };
                    (track, None, None)
                }
            };
            let id = track.id;
            live.push(track);
            out.push(TrackedDetection {
                track_id: id,
                parent_id: None,
                detection: d,
                distance_from_prediction_px: cost.map(f64::sqrt),
                link_confidence: confidence,
            });
        }
        self.live = live;
        out
    }

    /// Where to look for a track's next point: centre and radius. With prediction on, around
    /// the motion model's prediction, within its 99.9% gate, at least the narrowest search
    /// radius and at most the maximum step; with prediction off, around the last position
    /// within the maximum step.
    ///
    /// Costs stay squared distances (from the prediction). Weighing them by each track's
    /// predicted variance (Mahalanobis distances) was tried and lost links on the fast
    /// persistent scene of `benches/accuracy.sh` (link recall 0.979 → 0.974): a new track, whose
    /// variance is large, then takes far detections too cheaply.
    fn search_area(&self, t: &LiveTrack) -> ([f64; 2], f64) {
        let max = self.params.max_step_px;
        if self.params.prediction == Prediction::On {
            let radius = t.motion.gate_radius().max(self.params.min_search_px).min(max);
            (t.motion.predicted_position(), radius)
        } else {
            (t.position, max)
        }
    }
}

/// Labels that two detections of a frame carry: objects split in two.
fn shared_labels(detections: &[Detection]) -> std::collections::BTreeSet<u32> {
    let mut seen = std::collections::BTreeSet::new();
    detections
        .iter()
        .map(|d| d.label)
        .filter(|&l| !seen.insert(l))
        .collect()
}

/// Link confidence, our own definition: `1 − cost / second_best`, 1 when the link is far
/// cheaper than any competing choice (another candidate of either end, or ending/starting a
/// track), 0 when a competitor is as cheap. A zero-cost link with a zero-cost competitor is 0.
pub fn confidence(cost: f64, second_best: f64) -> f64 {
    if second_best <= 0.0 {
        0.0
    } else {
        (1.0 - cost / second_best).clamp(0.0, 1.0)
    }
}
