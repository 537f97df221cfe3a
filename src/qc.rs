//! Quality figures of a run that the user reads beside its outputs: how ambiguous the linking
//! was, frames whose object count jumps, and soft warnings (the verdict, [`crate::verdict`],
//! judges them).

use crate::analyze::TrackSummary;
use crate::numeric::median;
use crate::record::{FrameSummary, LinkingQc};
use crate::tracks::TrackedDetection;

/// Figures that tell whether linking can be trusted: steps against neighbour distances, the
/// share of links near the maximum step, the share of short tracks.
pub fn linking_qc(
    tracked: &[TrackedDetection],
    tracks: &[TrackSummary],
    neighbour: &mut [f64],
    max_step_px: f64,
) -> LinkingQc {
    let mut steps: Vec<f64> = tracked.iter().filter_map(|p| p.distance_from_prediction_px).collect();
    let near = (!steps.is_empty())
        .then(|| steps.iter().filter(|&&s| s > 0.8 * max_step_px).count() as f64 / steps.len() as f64);
    let median_step_px = median(&mut steps);
    let median_neighbour_distance_px = median(neighbour);
    let ambiguity_ratio = match (median_step_px, median_neighbour_distance_px) {
        (Some(s), Some(n)) if n > 0.0 => Some(s / n),
        _ => None,
    };
    let short = (!tracks.is_empty()).then(|| {
        tracks
            .iter()
            .filter(|t| t.points < crate::verdict::SHORT_TRACK_POINTS)
            .count() as f64
            / tracks.len() as f64
    });
    LinkingQc {
        median_step_px,
        median_neighbour_distance_px,
        ambiguity_ratio,
        near_max_step_fraction: near,
        short_track_fraction: short,
    }
}

/// Frames whose object count changes from the previous frame by more than a quarter and by
/// more than 5 objects (our own rule: a segmentation failure, a focus jump or a shutter glitch
/// usually shows as such a jump, while real births and departures change counts slowly).
pub fn count_jumps(frames: &[FrameSummary]) -> Vec<usize> {
    frames
        .windows(2)
        .filter(|w| {
            let (a, b) = (w[0].objects as f64, w[1].objects as f64);
            (b - a).abs() > (0.25 * a).max(5.0)
        })
        .map(|w| w[1].frame)
        .collect()
}

/// A soft problem of a run: the outputs are written, but the user should know. (Problems that
/// make the outputs doubtful are the verdict's findings, [`crate::verdict`].)
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RunWarning {
    /// NaN or infinite pixels were replaced by the frame's lowest value: (frame, pixels) each.
    NonFinitePixels(Vec<(usize, usize)>),
    /// No pixel size: the physical columns are empty.
    NoPixelSize,
    /// No frame interval: `time_s` is empty.
    NoFrameInterval,
}

impl RunWarning {
    /// The message the console, run.json and the report show.
    pub fn message(&self) -> String {
        match self {
            RunWarning::NonFinitePixels(frames) => {
                let list: Vec<String> = frames.iter().map(|(t, n)| format!("{t} ({n} px)")).collect();
                format!(
                    "NaN or infinite pixels, replaced by the frame's lowest value, in {} frame(s): {}",
                    frames.len(),
                    list.join(" ")
                )
            }
            RunWarning::NoPixelSize => {
                "no pixel size in the metadata or on the command line: physical columns are empty".into()
            }
            RunWarning::NoFrameInterval => {
                "no frame interval in the metadata or on the command line: time_s is empty".into()
            }
        }
    }
}

/// The warnings a run's frames and calibration call for.
pub fn warnings_for(frames: &[FrameSummary], info: &crate::stack::StackInfo) -> Vec<RunWarning> {
    let mut w = Vec::new();
    let nonfinite: Vec<(usize, usize)> = frames
        .iter()
        .filter(|f| f.nonfinite_pixels > 0)
        .map(|f| (f.frame, f.nonfinite_pixels))
        .collect();
    if !nonfinite.is_empty() {
        w.push(RunWarning::NonFinitePixels(nonfinite));
    }
    if info.calibration.pixel_size_um.is_none() {
        w.push(RunWarning::NoPixelSize);
    }
    if info.calibration.frame_interval_s.is_none() {
        w.push(RunWarning::NoFrameInterval);
    }
    w
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn count_jumps_flag_sudden_changes_only() {
        // Hand-made counts: 100 -> 104 is normal, 104 -> 60 a jump, 60 -> 62 normal, 62 -> 3 a jump
        // (59 > 15.5), 3 -> 7 not (4 < 5).
        let frames: Vec<FrameSummary> = [100, 104, 60, 62, 3, 7]
            .iter()
            .enumerate()
            .map(|(frame, &objects)| FrameSummary {
                frame,
                threshold: None,
                objects,
                nonfinite_pixels: 0,
                size_filter: Default::default(),
            })
            .collect();
        assert_eq!(count_jumps(&frames), vec![2, 4]);
    }
}
