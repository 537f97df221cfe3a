//! Tracks built frame by frame: each new frame's detections are linked to the tracks alive in
//! the previous frame; unlinked detections start new tracks, unlinked tracks end. The
//! segments it makes are joined afterwards by gap closing and division detection
//! ([`super::close`], [`super::divide`]).

use super::kalman::{ConstantVelocity, MotionNoise};
use super::link_frames_gated;
use crate::tracks::{Detection, TrackedDetection};
use serde::Serialize;

/// Whether link costs are measured from the last position or from a constant-velocity
/// prediction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Prediction {
    /// Cost = squared distance from the last position.
    Off,
    /// Cost = squared distance from a constant-velocity Kalman prediction, within the filter's
    /// 99% gate (capped at the maximum step), for tracks with a history.
    On,
}

/// Parses a switch written `on` or `off`.
fn on_off(s: &str) -> Result<bool, String> {
    match s {
        "on" => Ok(true),
        "off" => Ok(false),
        _ => Err(format!("{s:?}: expected on or off")),
    }
}

impl std::str::FromStr for Prediction {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        Ok(if on_off(s)? { Prediction::On } else { Prediction::Off })
    }
}

/// Parameters of frame-to-frame linking, in pixels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LinkParams {
    /// Longest allowed displacement between consecutive frames (from the prediction when on).
    pub max_step_px: f64,
    /// Motion prediction.
    pub prediction: Prediction,
    /// Noise model of the Kalman prediction.
    pub motion_noise: MotionNoise,
    /// Longest run of missing frames that gap closing may bridge (0 = no gap closing).
    pub max_gap_frames: usize,
    /// Whether to look for divisions.
    pub divisions: Divisions,
}

/// Whether division events are detected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Divisions {
    /// Daughters are separate tracks without a parent.
    Off,
    /// A mother that splits into two consistent daughters is recorded as a division.
    On,
}

impl std::str::FromStr for Divisions {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        Ok(if on_off(s)? { Divisions::On } else { Divisions::Off })
    }
}

impl LinkParams {
    /// Defaults from the nucleus diameter: a maximum step of 0.6 diameters, below the spacing
    /// of touching nuclei (common practice: max step < nearest-neighbour distance), with
    /// prediction on, gaps of up to 2 missing frames closed (common practice: 1–3, METHODS.md
    /// §7) and divisions detected.
    pub fn for_diameter(diameter_px: f64) -> Self {
        LinkParams {
            max_step_px: 0.6 * diameter_px,
            prediction: Prediction::On,
            motion_noise: MotionNoise::for_diameter(diameter_px),
            max_gap_frames: 2,
            divisions: Divisions::On,
        }
    }
}

#[derive(Debug, Clone)]
struct LiveTrack {
    id: u32,
    motion: ConstantVelocity,
    /// Position of the last detection, px.
    position: [f64; 2],
    /// Area of the last detection taken as a single nucleus, px.
    area_px: f64,
}

/// A detection this much larger than its track's nucleus is taken to be two nuclei segmented
/// as one (a transient merge): the track keeps it, but its motion model coasts instead of
/// following the merged centroid, so that it separates on its own side afterwards. Our own
/// rule: two similar nuclei merged have about twice the area; 1.6 leaves room for size noise.
const MERGE_AREA_RATIO: f64 = 1.6;

impl LiveTrack {
    /// The track after taking a detection at `position` of `area_px`.
    fn followed_to(&self, position: [f64; 2], area_px: f64) -> LiveTrack {
        let mut next = self.clone();
        next.position = position;
        if area_px > MERGE_AREA_RATIO * self.area_px {
            next.motion.coast();
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
}

impl OnlineLinker {
    /// A linker with no tracks yet.
    pub fn new(params: LinkParams) -> Self {
        OnlineLinker {
            params,
            live: Vec::new(),
            next_id: 1,
        }
    }

    /// Links one frame's detections and returns them with their track ids. New tracks get
    /// consecutive ids in order of first appearance (frame, then detection order), so ids are
    /// stable and independent of the thread count.
    ///
    /// With prediction on, a track with at least two points is searched for around its Kalman
    /// prediction, within the filter's 99% gate capped at the maximum step; a new track is
    /// searched for around its last position within the maximum step.
    pub fn push(&mut self, detections: Vec<Detection>) -> Vec<TrackedDetection> {
        let (sources, radii): (Vec<[f64; 2]>, Vec<f64>) = self.live.iter().map(|t| self.search_area(t)).unzip();
        let targets: Vec<[f64; 2]> = detections.iter().map(|d| [d.x, d.y]).collect();
        let links = link_frames_gated(&sources, &radii, &targets);
        let mut assigned: Vec<Option<(usize, f64, f64)>> = vec![None; targets.len()];
        for (k, &(s, t, cost)) in links.links.iter().enumerate() {
            assigned[t] = Some((s, cost, links.second_best[k]));
        }
        let mut live = Vec::with_capacity(targets.len());
        let mut out = Vec::with_capacity(targets.len());
        for (t, d) in detections.into_iter().enumerate() {
            let here = [d.x, d.y];
            let (track, cost, confidence) = match assigned[t] {
                Some((s, cost, second)) => (
                    self.live[s].followed_to(here, d.area_px),
                    Some(cost),
                    Some(confidence(cost, second)),
                ),
                None => {
                    self.next_id += 1;
                    let track = LiveTrack {
                        id: self.next_id - 1,
                        motion: ConstantVelocity::started_at(here, self.params.motion_noise),
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
                link_cost_px2: cost,
                link_confidence: confidence,
            });
        }
        self.live = live;
        out
    }

    /// Where to look for a track's next point: centre and radius.
    fn search_area(&self, t: &LiveTrack) -> ([f64; 2], f64) {
        let max = self.params.max_step_px;
        if self.params.prediction == Prediction::On && t.motion.updates() >= 2 {
            (t.motion.predicted_position(), t.motion.gate_radius().min(max))
        } else {
            (t.position, max)
        }
    }
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
