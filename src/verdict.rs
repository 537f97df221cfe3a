//! The verdict on a run: `ok`, `doubtful` or `failed`, from measures the run already has, each
//! finding with the reason and the option that would fix it. A run whose segmentation found
//! noise, or whose links are guesses, must say so rather than hand over tables that look like
//! results. Every limit below is our own choice, set from the synthetic scenes of
//! `benches/accuracy.sh` and pure-noise recordings (the figures are in the doc of each check),
//! not a published rule.

use serde::{Deserialize, Serialize};

/// How far a run can be trusted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// No check found a problem.
    Ok,
    /// Some check found a problem: look before trusting the numbers.
    Doubtful,
    /// The outputs are most likely not nuclei or not their tracks.
    Failed,
}

impl Verdict {
    /// The word written in summaries.
    pub fn word(self) -> &'static str {
        match self {
            Verdict::Ok => "ok",
            Verdict::Doubtful => "doubtful",
            Verdict::Failed => "failed",
        }
    }
}

/// The checks behind a verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Check {
    /// The diameter estimate's confidence.
    DiameterConfidence,
    /// Objects per frame against how many nuclei of that diameter the frame can hold.
    Crowding,
    /// Share of objects barely above the minimum area (noise fragments pile up there).
    SmallObjects,
    /// Share of detections with an unambiguous counterpart in the next frame.
    Persistence,
    /// Frames without any object.
    EmptyFrames,
    /// Sudden changes of the object count.
    CountJumps,
    /// Median step over median neighbour distance.
    Ambiguity,
    /// Share of links near the maximum step.
    LinksNearMaximumStep,
    /// Share of tracks under 10 points.
    ShortTracks,
    /// Whether the motion could be measured from the recording.
    MotionMeasured,
}

/// One problem found.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Finding {
    /// Which check.
    pub check: Check,
    /// How serious.
    pub level: Verdict,
    /// What was measured, in words and numbers.
    pub reason: String,
    /// What would fix it.
    pub fix: String,
}

/// A run's verdict with its findings (worst first).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunVerdict {
    /// The worst level among the findings (`ok` without findings).
    pub verdict: Verdict,
    /// The findings, worst first.
    pub findings: Vec<Finding>,
}

/// The figures a verdict is made from.
#[derive(Debug, Clone, Default)]
pub struct RunFigures {
    /// Objects found in each frame.
    pub objects_per_frame: Vec<usize>,
    /// Frame area, px².
    pub frame_area_px: f64,
    /// Typical nucleus diameter used, px.
    pub diameter_px: f64,
    /// Smallest object kept, px.
    pub min_area_px: f64,
    /// Share of detections with an area at most 1.5 x the minimum.
    pub small_object_share: Option<f64>,
    /// The diameter estimate was made and its confidence is low (`Some(reasons)`).
    pub low_diameter_confidence: Option<Vec<String>>,
    /// Frames with a sudden object-count change.
    pub count_jumps: Vec<usize>,
    /// With linking: confident steps over detections that have a next frame.
    pub persistence: Option<f64>,
    /// With linking: median step / median neighbour distance.
    pub ambiguity_ratio: Option<f64>,
    /// With linking: share of links above 80% of the maximum step.
    pub near_max_step_fraction: Option<f64>,
    /// With linking: the maximum step used and whether it was given.
    pub max_step: Option<(f64, bool)>,
    /// With linking: share of tracks under 10 points.
    pub short_track_fraction: Option<f64>,
    /// With linking: the motion could not be measured (too few confident links).
    pub motion_unmeasured: bool,
}

/// Share of the frame's area that nuclei of the run's diameter would cover, from the median
/// object count: above this the objects cannot all be nuclei (discs pack at most about 0.91,
/// and tissue rarely exceeds 0.6).
pub const MAX_COVERAGE: f64 = 0.9;
/// Coverage above which a run is doubtful.
pub const DOUBTFUL_COVERAGE: f64 = 0.6;
/// Shares of objects within 1.5 x the minimum area: on our scenes at most 0.02; on pure noise
/// segmented at a 14 px diameter 0.25.
pub const SMALL_OBJECTS: (f64, f64) = (0.15, 0.4);
/// Persistence below these is doubtful / failed: detections of pure noise (segmented at a
/// given 14 px diameter) have a confident counterpart in the next frame 27% of the time by
/// chance; our scenes 0.77 (fast persistent movers) to 1.0. Below 0.4 links are no better
/// than guesses whatever the cause (noise, or nuclei moving farther than their spacing).
pub const PERSISTENCE: (f64, f64) = (0.6, 0.4);

/// Tracks with fewer points than this count as short (the limit of [`RunFigures::short_track_fraction`]).
pub const SHORT_TRACK_POINTS: usize = 10;

/// Judges a run from its figures.
pub fn judge(f: &RunFigures) -> RunVerdict {
    let mut findings = Vec::new();
    let mut add = |check, level, reason: String, fix: &str| {
        findings.push(Finding {
            check,
            level,
            reason,
            fix: fix.to_string(),
        })
    };
    let frames = f.objects_per_frame.len();
    let empty = f.objects_per_frame.iter().filter(|&&n| n == 0).count();
    if frames > 0 && empty == frames {
        add(
            Check::EmptyFrames,
            Verdict::Failed,
            "no object was found in any frame".into(),
            "look at a frame with `caravan preview`; give --diameter or --threshold",
        );
    } else if empty > 0 {
        add(
            Check::EmptyFrames,
            Verdict::Doubtful,
            format!("{empty} of {frames} frames have no object"),
            "look at those frames with `caravan preview`",
        );
    }
    if let Some(reasons) = &f.low_diameter_confidence {
        add(
            Check::DiameterConfidence,
            Verdict::Doubtful,
            format!(
                "the diameter estimate ({:.1} px) is uncertain: {}",
                f.diameter_px,
                reasons.join("; ")
            ),
            "give the typical nucleus diameter with --diameter",
        );
    }
    crowding(f, &mut add);
    if let Some(share) = f.small_object_share {
        let level = level_above(share, SMALL_OBJECTS);
        if level != Verdict::Ok {
            add(
                Check::SmallObjects,
                level,
                format!(
                    "{:.0}% of objects are barely larger than the minimum area ({:.0} px), as fragments of noise are",
                    100.0 * share,
                    f.min_area_px
                ),
                "check the diameter (--diameter) and the threshold (--threshold) with `caravan preview`",
            );
        }
    }
    linking_checks(f, &mut add);
    if !f.count_jumps.is_empty() {
        let list: Vec<String> = f.count_jumps.iter().take(10).map(|t| t.to_string()).collect();
        add(
            Check::CountJumps,
            Verdict::Doubtful,
            format!("the object count jumps at frame(s) {}", list.join(" ")),
            "look at those frames with `caravan preview --frame N`",
        );
    }
    findings.sort_by_key(|f| std::cmp::Reverse(f.level));
    RunVerdict {
        verdict: findings.iter().map(|x| x.level).max().unwrap_or(Verdict::Ok),
        findings,
    }
}

/// `Failed` above the second limit, `Doubtful` above the first.
fn level_above(value: f64, (doubtful, failed): (f64, f64)) -> Verdict {
    if value > failed {
        Verdict::Failed
    } else if value > doubtful {
        Verdict::Doubtful
    } else {
        Verdict::Ok
    }
}

fn crowding(f: &RunFigures, add: &mut impl FnMut(Check, Verdict, String, &str)) {
    if f.objects_per_frame.is_empty() || f.frame_area_px <= 0.0 || f.diameter_px <= 0.0 {
        return;
    }
    let mut counts = f.objects_per_frame.clone();
    counts.sort_unstable();
    let median = counts[(counts.len() - 1) / 2] as f64;
    let disc = std::f64::consts::PI * f.diameter_px * f.diameter_px / 4.0;
    let coverage = median * disc / f.frame_area_px;
    let level = level_above(coverage, (DOUBTFUL_COVERAGE, MAX_COVERAGE));
    if level != Verdict::Ok {
        add(
            Check::Crowding,
            level,
            format!(
                "{median:.0} objects per frame would cover {:.0}% of the frame as nuclei of {:.1} px",
                100.0 * coverage,
                f.diameter_px
            ),
            "check the diameter with `caravan preview` and give --diameter",
        );
    }
}

fn linking_checks(f: &RunFigures, add: &mut impl FnMut(Check, Verdict, String, &str)) {
    if let Some(p) = f.persistence {
        let level = if p < PERSISTENCE.1 {
            Verdict::Failed
        } else if p < PERSISTENCE.0 {
            Verdict::Doubtful
        } else {
            Verdict::Ok
        };
        if level != Verdict::Ok {
            add(
                Check::Persistence,
                level,
                format!(
                    "only {:.0}% of detections have an unambiguous counterpart in the next frame (detections of pure noise: about 27%)",
                    100.0 * p
                ),
                "check the segmentation with `caravan preview`; if nuclei move farther than their spacing, image more often",
            );
        }
    }
    if f.motion_unmeasured {
        add(
            Check::MotionMeasured,
            Verdict::Doubtful,
            "too few unambiguous links to measure how far nuclei move; the maximum step is 0.6 diameters".into(),
            "give --max-step if nuclei move farther between frames",
        );
    }
    if let Some(r) = f.ambiguity_ratio.filter(|&r| r > 0.5) {
        add(
            Check::Ambiguity,
            Verdict::Doubtful,
            format!("the median step is {r:.2} of the median neighbour distance (above 0.5, common practice)"),
            "image more often; keep --prediction on",
        );
    }
    if let (Some(share), Some((step, given))) = (f.near_max_step_fraction.filter(|&s| s > 0.05), f.max_step) {
        let fix = if given {
            "raise --max-step"
        } else {
            "give a larger --max-step"
        };
        add(
            Check::LinksNearMaximumStep,
            Verdict::Doubtful,
            format!(
                "{:.0}% of links are longer than 80% of the maximum step ({step:.1} px)",
                100.0 * share
            ),
            fix,
        );
    }
    // A recording shorter than twice the limit holds only short tracks: nothing to judge.
    let long_enough = f.objects_per_frame.len() >= 2 * SHORT_TRACK_POINTS;
    if let Some(share) = f.short_track_fraction.filter(|&s| s > 0.5 && long_enough) {
        add(
            Check::ShortTracks,
            Verdict::Doubtful,
            format!(
                "{:.0}% of tracks have fewer than {SHORT_TRACK_POINTS} points",
                100.0 * share
            ),
            "check the QC movie for broken tracks; raise --max-gap if nuclei are missed for a few frames",
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn healthy() -> RunFigures {
        RunFigures {
            objects_per_frame: vec![100; 20],
            frame_area_px: 512.0 * 512.0,
            diameter_px: 14.0,
            min_area_px: 30.0,
            small_object_share: Some(0.01),
            persistence: Some(0.95),
            ambiguity_ratio: Some(0.05),
            near_max_step_fraction: Some(0.0),
            max_step: Some((8.4, false)),
            short_track_fraction: Some(0.1),
            ..RunFigures::default()
        }
    }

    #[test]
    fn a_healthy_run_is_ok() {
        // Figures like those of the sparse scene of benches/accuracy.sh.
        assert_eq!(
            judge(&healthy()),
            RunVerdict {
                verdict: Verdict::Ok,
                findings: vec![]
            }
        );
    }

    #[test]
    fn noise_like_figures_fail_and_say_why() {
        // Figures measured on a pure-noise recording segmented at a given 14 px diameter
        // (caravan synth --nuclei 0, then track --diameter 14px): 27% persistence, 25% small
        // objects.
        let mut f = healthy();
        f.persistence = Some(0.27);
        f.small_object_share = Some(0.25);
        let v = judge(&f);
        assert_eq!(v.verdict, Verdict::Failed);
        assert_eq!(v.findings[0].check, Check::Persistence);
        assert!(v
            .findings
            .iter()
            .any(|x| x.check == Check::SmallObjects && x.level == Verdict::Doubtful));
    }

    #[test]
    fn impossible_crowding_fails() {
        // Construction: 1500 objects of 14 px would cover 88% of a 512² frame (doubtful);
        // 1800 would cover 106% (failed).
        let mut f = healthy();
        f.objects_per_frame = vec![1500; 5];
        assert_eq!(judge(&f).verdict, Verdict::Doubtful);
        f.objects_per_frame = vec![1800; 5];
        assert_eq!(judge(&f).verdict, Verdict::Failed);
    }

    #[test]
    fn empty_recordings_fail() {
        let mut f = healthy();
        f.objects_per_frame = vec![0; 4];
        assert_eq!(judge(&f).verdict, Verdict::Failed);
    }
}
