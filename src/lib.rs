//! Caravan: segment and track fluorescently labelled nuclei in time-lapse TIFF recordings.
//!
//! The crate is a library with a thin command-line front end (`caravan`). Each stage of the
//! pipeline is a module of plain functions over plain types:
//!
//! | module | owns |
//! |---|---|
//! | [`stack`] | reading TIFF/BigTIFF stacks and folders of frames, one frame at a time, with calibration |
//! | [`preprocess`] | smoothing and background subtraction |
//! | [`segment`] | thresholds, distance transform, seeds, seeded watershed, object measurements |
//! | [`synth`] | synthetic recordings with ground truth (our own scenarios) |
//! | [`link`] | frame-to-frame assignment, Kalman prediction, gap closing, divisions |
//! | [`score`] | accuracy of detections and tracks against ground truth (TRA/DET, MOTA, divisions) |
//! | [`render`] | drawing overlays (the preview PNG, the QC movie) |
//! | [`tracks`] | the `Detection` type and its CSV form |
//! | [`pipeline`] | streaming orchestration over a whole recording, progress, run records |
//! | [`params`] | every tunable parameter with its default, unit and valid range |
//!
//! Conventions, stated once: images are indexed `(row, column)` = `(y, x)`; pixel centres sit at
//! integer coordinates, 0-based; `x` is the column and `y` the row. Frames are numbered from 0.
//! Lengths carry their unit in the name (`pixel_size_um`), times too (`frame_interval_s`).

pub mod analyze;
pub mod batch;
pub mod checkpoint;
pub mod error;
pub mod image2d;
pub mod link;
pub mod output;
pub mod params;
pub mod pipeline;
pub mod preprocess;
pub mod render;
pub mod score;
pub mod segment;
pub mod shard;
pub mod stack;
pub mod synth;
pub mod tracks;

pub use error::{Error, Result};

/// The tool's version, written into every run record.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
