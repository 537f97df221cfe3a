//! Every linking parameter in one place: what the user chose ([`LinkOptions`]), what a run
//! links with once the recording has been measured ([`LinkParams`]), the division rules, and
//! their validation.

use super::divide::DivisionRules;
use super::estimate::{estimate_motion, MotionEstimate, MotionSource};
use super::motion::MotionNoise;
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// Whether link costs are measured from the last position or from the motion model's
/// prediction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Prediction {
    /// Cost = squared distance from the last position, within the maximum step.
    Off,
    /// Cost = squared distance from the motion model's prediction (random walk and constant
    /// velocity mixed per track), within the model's 99% gate capped at the maximum step.
    On,
}

/// Parses a switch written `on` or `off`.
pub fn on_off(s: &str) -> std::result::Result<bool, String> {
    match s {
        "on" => Ok(true),
        "off" => Ok(false),
        _ => Err(format!("{s:?}: expected on or off")),
    }
}

impl std::str::FromStr for Prediction {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        Ok(if on_off(s)? { Prediction::On } else { Prediction::Off })
    }
}

/// Whether division events are detected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Divisions {
    /// Daughters are separate tracks without a parent.
    Off,
    /// A mother that splits into two consistent daughters is recorded as a division.
    On,
}

impl std::str::FromStr for Divisions {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        Ok(if on_off(s)? { Divisions::On } else { Divisions::Off })
    }
}

/// The linking choices of a run; what is not given is measured from the recording.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LinkOptions {
    /// Longest step between consecutive frames, px; `None`: from the recording's motion.
    pub max_step_px: Option<f64>,
    /// Motion prediction.
    pub prediction: Prediction,
    /// Longest run of missing frames that gap closing may bridge (0 = no gap closing).
    pub max_gap_frames: usize,
    /// Whether to look for divisions.
    pub divisions: Divisions,
}

impl Default for LinkOptions {
    /// Everything measured, prediction on, gaps of up to 2 missing frames closed (common
    /// practice: 1–3, fixtures/methods/check_values.md §7), divisions detected.
    fn default() -> Self {
        LinkOptions {
            max_step_px: None,
            prediction: Prediction::On,
            max_gap_frames: 2,
            divisions: Divisions::On,
        }
    }
}

/// Where the maximum step came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum MaxStepSource {
    /// `--max-step`.
    Given,
    /// The recording's confident steps.
    Recording,
    /// 0.6 diameters (too few confident steps to measure).
    Diameter,
}

impl LinkOptions {
    /// Refuses values that cannot link.
    ///
    /// # Errors
    /// A maximum step under 0.5 px or not finite; more than 50 missing frames bridged.
    pub fn validate(&self) -> Result<()> {
        if let Some(s) = self.max_step_px {
            if !(s.is_finite() && s >= 0.5) {
                return Err(Error::parameter("--max-step", s, "must be at least 0.5 px"));
            }
        }
        if self.max_gap_frames > 50 {
            return Err(Error::parameter(
                "--max-gap",
                self.max_gap_frames,
                "gap closing bridges at most 50 missing frames",
            ));
        }
        Ok(())
    }

    /// The parameters to link with: the recording's motion measured from its detections'
    /// positions (`frames[t]` = positions of frame t), overridden where the user chose.
    pub fn resolve(&self, diameter_px: f64, frames: &[Vec<[f64; 2]>]) -> ResolvedLinking {
        let motion = estimate_motion(frames, diameter_px);
        let (max_step_px, max_step_source) = match (self.max_step_px, motion.source) {
            (Some(s), _) => (s, MaxStepSource::Given),
            (None, MotionSource::Recording) => (motion.max_step_px, MaxStepSource::Recording),
            (None, MotionSource::Diameter) => (motion.max_step_px, MaxStepSource::Diameter),
        };
        ResolvedLinking {
            params: LinkParams {
                max_step_px,
                diameter_px,
                min_search_px: min_search_radius_px(diameter_px, max_step_px),
                prediction: self.prediction,
                motion_noise: motion.noise,
                max_gap_frames: self.max_gap_frames,
                divisions: self.divisions,
                division_rules: DivisionRules::default(),
            },
            max_step_source,
            motion,
        }
    }
}

/// The narrowest search radius a motion model may set: 0.6 diameters (at most the maximum
/// step). A centroid's error is not the Gaussian jitter the filter assumes: where two touching
/// nuclei merge in the segmentation for a frame, the merged centroid lies about half a
/// diameter from each, and a track must still reach it to coast through the merge; a gate
/// narrower than that cut true links on the crowded scene (MOTA 0.926 → 0.916 at 0.35
/// diameters; our own choice, measured with `benches/accuracy.sh`'s scenes). So the motion
/// model widens the search of fast movers and moves its centre, but never narrows it below
/// what a slow nucleus needs.
pub fn min_search_radius_px(diameter_px: f64, max_step_px: f64) -> f64 {
    (0.6 * diameter_px).min(max_step_px)
}

/// The linking parameters of a run and where they came from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResolvedLinking {
    /// What linking used.
    pub params: LinkParams,
    /// Where the maximum step came from.
    pub max_step_source: MaxStepSource,
    /// The recording's motion as measured (its values are used unless overridden).
    pub motion: MotionEstimate,
}

/// Parameters of linking, in pixels and frames.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LinkParams {
    /// Longest allowed displacement between consecutive frames (from the prediction when on).
    pub max_step_px: f64,
    /// The typical nucleus diameter the run used, px (how far a daughter may lie from her
    /// mother, see [`LinkParams::daughter_reach_px`]).
    pub diameter_px: f64,
    /// With prediction on, no track's search radius is narrower than this, px (see
    /// [`min_search_radius_px`]).
    pub min_search_px: f64,
    /// Motion prediction.
    pub prediction: Prediction,
    /// Noise levels of the motion models.
    pub motion_noise: MotionNoise,
    /// Longest run of missing frames that gap closing may bridge (0 = no gap closing).
    pub max_gap_frames: usize,
    /// Whether to look for divisions.
    pub divisions: Divisions,
    /// The rules a division must meet.
    pub division_rules: DivisionRules,
}

impl LinkParams {
    /// How far a daughter's first position may lie from her mother's last: the mother's own
    /// step (at most the maximum step) plus half a diameter, since two daughters that share
    /// the mother's volume side by side have their centres about a daughter's radius (0.35 to
    /// 0.5 of the mother's diameter) from the middle. Tied to the step alone, slow nuclei
    /// whose maximum step is 0.6 diameters lost daughters that had moved a little as well.
    pub fn daughter_reach_px(&self) -> f64 {
        self.max_step_px + 0.5 * self.diameter_px
    }

    /// Parameters from the nucleus diameter alone (when nothing has been measured): a maximum
    /// step of 0.6 diameters, below the spacing of touching nuclei (common practice: max step
    /// < nearest-neighbour distance), the diameter's motion noise, and the default options.
    pub fn for_diameter(diameter_px: f64) -> Self {
        let o = LinkOptions::default();
        LinkParams {
            max_step_px: 0.6 * diameter_px,
            diameter_px,
            min_search_px: min_search_radius_px(diameter_px, 0.6 * diameter_px),
            prediction: o.prediction,
            motion_noise: MotionNoise::for_diameter(diameter_px),
            max_gap_frames: o.max_gap_frames,
            divisions: o.divisions,
            division_rules: DivisionRules::default(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn switches_read_on_and_off_only() {
        // Source: the documented values of `--prediction` and `--divisions` (README options).
        assert_eq!(on_off("on"), Ok(true));
        assert_eq!(on_off("off"), Ok(false));
        assert!(on_off("yes").unwrap_err().contains("expected on or off"));
    }

    #[test]
    fn link_options_are_checked_against_their_documented_limits() {
        // Source: the documented limits of `LinkOptions::validate` (a maximum step of at least
        // 0.5 px, at most 50 missing frames bridged); the defaults pass.
        assert!(LinkOptions::default().validate().is_ok());
        let with = |max_step_px, max_gap_frames| LinkOptions {
            max_step_px,
            max_gap_frames,
            ..LinkOptions::default()
        };
        assert!(with(Some(0.5), 50).validate().is_ok());
        assert!(with(None, 0).validate().is_ok());
        let gap = with(None, 51).validate().unwrap_err().to_string();
        assert!(gap.contains("--max-gap"), "{gap}");
        for step in [0.4, f64::NAN, f64::INFINITY] {
            let e = with(Some(step), 3).validate().unwrap_err().to_string();
            assert!(e.contains("--max-step"), "{e}");
        }
    }
}
