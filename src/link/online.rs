//! Tracks built frame by frame: each new frame's detections are linked to the tracks alive in
//! the previous frame; unlinked detections start new tracks, unlinked tracks end.

use super::link_frames;
use crate::tracks::{Detection, TrackedDetection};
use serde::Serialize;

/// Whether link costs are measured from the last position or from a constant-velocity
/// prediction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Prediction {
    /// Cost = squared distance from the last position.
    Off,
    /// Cost = squared distance from last position + smoothed velocity (tracks with a history).
    On,
}

impl std::str::FromStr for Prediction {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "on" => Ok(Prediction::On),
            "off" => Ok(Prediction::Off),
            _ => Err(format!("{s:?}: expected on or off")),
        }
    }
}

/// Parameters of frame-to-frame linking, in pixels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LinkParams {
    /// Longest allowed displacement between consecutive frames (from the prediction when on).
    pub max_step_px: f64,
    /// Motion prediction.
    pub prediction: Prediction,
}

impl LinkParams {
    /// Defaults from the nucleus diameter: a maximum step of 0.6 diameters, below the spacing
    /// of touching nuclei (common practice: max step < nearest-neighbour distance), with
    /// prediction on.
    pub fn for_diameter(diameter_px: f64) -> Self {
        LinkParams {
            max_step_px: 0.6 * diameter_px,
            prediction: Prediction::On,
        }
    }
}

#[derive(Debug, Clone)]
struct LiveTrack {
    id: u32,
    position: [f64; 2],
    velocity: Option<[f64; 2]>,
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
    /// Velocity is smoothed exponentially (`v ← ½v + ½Δr`), a constant-velocity prediction
    /// that follows collective drift without trusting a single noisy step.
    pub fn push(&mut self, detections: Vec<Detection>) -> Vec<TrackedDetection> {
        let sources: Vec<[f64; 2]> = self.live.iter().map(|t| self.predicted(t)).collect();
        let targets: Vec<[f64; 2]> = detections.iter().map(|d| [d.x, d.y]).collect();
        let links = link_frames(&sources, &targets, self.params.max_step_px);
        let mut assigned: Vec<Option<(usize, f64, f64)>> = vec![None; targets.len()];
        for (k, &(s, t, cost)) in links.links.iter().enumerate() {
            assigned[t] = Some((s, cost, links.second_best[k]));
        }
        let mut live = Vec::with_capacity(targets.len());
        let mut out = Vec::with_capacity(targets.len());
        for (t, d) in detections.into_iter().enumerate() {
            let here = [d.x, d.y];
            let (id, velocity, cost, confidence) = match assigned[t] {
                Some((s, cost, second)) => {
                    let prev = &self.live[s];
                    let step = [here[0] - prev.position[0], here[1] - prev.position[1]];
                    let v = match prev.velocity {
                        Some(v) => [0.5 * v[0] + 0.5 * step[0], 0.5 * v[1] + 0.5 * step[1]],
                        None => step,
                    };
                    (prev.id, Some(v), Some(cost), Some(confidence(cost, second)))
                }
                None => {
                    self.next_id += 1;
                    (self.next_id - 1, None, None, None)
                }
            };
            live.push(LiveTrack {
                id,
                position: here,
                velocity,
            });
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

    fn predicted(&self, t: &LiveTrack) -> [f64; 2] {
        match (self.params.prediction, t.velocity) {
            (Prediction::On, Some(v)) => [t.position[0] + v[0], t.position[1] + v[1]],
            _ => t.position,
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
