//! The run record (`run.json`): one typed structure that the run writes and every reader
//! (the analysis, the report, `batch`) reads back, so a renamed field fails to compile instead
//! of blanking a report. Its parameter block is also what a checkpoint's fingerprint is made
//! of. Objects are written with their keys in alphabetical order (the record passes through a
//! `serde_json::Value`, whose maps are sorted), so the file does not depend on field order.

use crate::error::{Error, Result};
use crate::link::divide::DivisionEvent;
use crate::link::ResolvedLinking;
use crate::params::SegmentParams;
use crate::params::{MovieOptions, ReviewOptions};
use crate::segment::diameter::DiameterEstimate;
use crate::stack::StackInfo;
use crate::verdict::RunVerdict;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// What every run record says about its use.
pub const RESEARCH_USE: &str =
    "Caravan is research software; statistics are only as good as the segmentation they rest on.";

/// The record of one `segment`, `track` or `join` run.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunRecord {
    /// Version of Caravan that wrote it.
    pub caravan_version: String,
    /// The command (`segment`, `track`, `join`).
    pub command: String,
    /// Whether the run can be trusted, with the reasons (absent in records of versions before
    /// verdicts).
    #[serde(default)]
    pub verdict: Option<RunVerdict>,
    /// The recording and its checksum.
    pub input: RunInput,
    /// Every parameter used, with where estimated ones came from.
    pub parameters: RunParameters<ResolvedLinking>,
    /// How much was found.
    pub counts: RunCounts,
    /// Figures that tell whether linking can be trusted (with linking).
    pub linking_qc: Option<LinkingQc>,
    /// Gaps closed (with linking).
    pub gaps_closed: Option<usize>,
    /// Objects split because two tracks entered them (with linking; `link::repair`).
    pub shared_objects_split: Option<usize>,
    /// Divisions found (with linking).
    pub divisions: Option<Vec<DivisionEvent>>,
    /// Frames whose object count jumps.
    pub count_jumps: Vec<usize>,
    /// One summary per frame.
    pub per_frame: Vec<FrameSummary>,
    /// Warnings for the user.
    pub warnings: Vec<String>,
    /// Wall-clock time of each stage, s.
    pub timings_s: Timings,
    /// [`RESEARCH_USE`].
    pub research_use: String,
}

/// The recording a run read.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunInput {
    /// Its description (path, size, type, calibration).
    pub stack: StackInfo,
    /// CRC-32 of the file's bytes, as `zlib.crc32` computes it, in hexadecimal.
    pub crc32: Option<String>,
    /// The file's modification time, seconds since 1970 (absent for folders of frames and in
    /// records of older versions): a quick first check that the input is unchanged.
    #[serde(default)]
    pub modified_unix_s: Option<u64>,
    /// The label masks that replaced segmentation, when given (absent otherwise and in
    /// records of older versions).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub masks: Option<PathBuf>,
}

/// Every parameter of a run; `L` is the linking block (the options as given in a checkpoint's
/// fingerprint, the resolved parameters in the record).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunParameters<L> {
    /// The nucleus diameter and where it came from.
    pub diameter: DiameterSource,
    /// Segmentation.
    pub segment: SegmentParams,
    /// Linking (absent without linking).
    pub link: Option<L>,
    /// The QC movie (absent without one).
    pub movie: Option<MovieOptions>,
    /// The review page (absent without one, and in records of versions before it).
    #[serde(default)]
    pub review: Option<ReviewOptions>,
}

/// The parameters a shard of segmentation depends on (its fingerprint's block): the
/// diameter and the segmentation parameters.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SegmentationParameters {
    /// The nucleus diameter and where it came from.
    pub diameter: DiameterSource,
    /// Segmentation.
    pub segment: SegmentParams,
}

/// How much a run found.
#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
pub struct RunCounts {
    /// Frames.
    pub frames: usize,
    /// Detections over all frames.
    pub detections: usize,
    /// Tracks (0 without linking).
    pub tracks: usize,
}

/// Wall-clock time of each stage, s.
#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
pub struct Timings {
    /// Reading, segmenting and linking.
    pub read_segment_link: f64,
    /// The QC movie and the review page (one pass over the frames).
    pub movie: f64,
    /// The whole run.
    pub total: f64,
}

impl RunRecord {
    /// The record as written: pretty JSON with sorted keys.
    pub fn to_bytes(&self) -> Vec<u8> {
        let value = serde_json::to_value(self).expect("a record is plain data");
        serde_json::to_vec_pretty(&value).expect("a JSON value serialises")
    }

    /// Reads `run.json` at `path`.
    ///
    /// # Errors
    /// An unreadable file, invalid JSON, or JSON that is not a run record of this version (the
    /// message names the first field that differs).
    pub fn read(path: &Path) -> Result<RunRecord> {
        let bytes = std::fs::read(path).map_err(|e| Error::input(path, e.to_string()))?;
        serde_json::from_slice(&bytes)
            .map_err(|e| Error::input(path, format!("not a run record of Caravan {}: {e}", crate::VERSION)))
    }
}

/// How the nucleus diameter was obtained.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case", tag = "source")]
pub enum DiameterSource {
    /// Given with `--diameter`.
    Given {
        /// The diameter, px.
        px: f64,
    },
    /// Estimated from the recording, with its evidence and confidence.
    Estimated(DiameterEstimate),
    /// Measured from the user's masks: the median equivalent diameter of their objects.
    Masks {
        /// The diameter, px.
        px: f64,
        /// Objects measured.
        objects: usize,
    },
}

impl DiameterSource {
    /// The diameter in pixels.
    pub fn px(&self) -> f64 {
        match self {
            DiameterSource::Given { px } => *px,
            DiameterSource::Estimated(e) => e.px,
            DiameterSource::Masks { px, .. } => *px,
        }
    }
}

/// Per-frame facts kept for the run record.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct FrameSummary {
    /// Frame number.
    pub frame: usize,
    /// Threshold used (null when the frame had no contrast).
    pub threshold: Option<f64>,
    /// Objects found.
    pub objects: usize,
    /// NaN or infinite pixels replaced before segmentation.
    pub nonfinite_pixels: usize,
    /// Objects the size filter dropped (too small) or cut (too large).
    #[serde(default)]
    pub size_filter: crate::segment::SizeFilterCounts,
}

/// Figures that tell whether linking can be trusted.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct LinkingQc {
    /// Median displacement of accepted links, px.
    pub median_step_px: Option<f64>,
    /// Median nearest-neighbour distance over all detections, px.
    pub median_neighbour_distance_px: Option<f64>,
    /// Median step / median neighbour distance; above 0.5 linking is ambiguous (common practice).
    pub ambiguity_ratio: Option<f64>,
    /// Share of links longer than 80% of the maximum step (many suggest raising it).
    pub near_max_step_fraction: Option<f64>,
    /// Share of tracks with fewer than 10 points (common practice: too short for statistics).
    pub short_track_fraction: Option<f64>,
}
