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
//! | [`columns`] | CSV tables from one list of columns (name and cell printer) |
//! | [`frames`] | frame production: decoding and segmenting in parallel, a few frames ahead, in frame order, with progress |
//! | [`pipeline`] | a run over a whole recording: parameters, first pass, linking, outputs, run record |
//! | [`qc`] | linking quality figures, object-count jumps, soft warnings of a run |
//! | [`workflow`] | the Snakemake workflow of a manifest (shards, joins, comparison) |
//! | [`verdict`] | whether a run can be trusted: `ok`, `doubtful` or `failed`, with reasons and fixes |
//! | [`reports`] | analysis and comparison folders: tables from `analyze`, pages from `render` |
//! | [`run_folder`] | the output folder's life: check, clear stale files, stage, publish |
//! | [`record`] | the run record (`run.json`), written and read as one typed structure |
//! | [`params`] | every tunable parameter with its default, unit and valid range |
//! | [`numeric`] | order statistics and the seeded random generator, shared by the stages |
//! | [`analyze`] | migration statistics of tracks (speed, directionality, MSD, order) and comparisons of conditions |
//! | [`batch`] | running many recordings of a manifest in turn |
//! | [`checkpoint`] | the frame log that lets an interrupted run resume |
//! | [`shard`] | segmenting a frame range on its own, for joining later |
//! | [`output`] | atomic files (temp then rename) and folder helpers |
//! | [`image2d`] | the 2-D float image type |
//! | [`simd`] | the vector instructions per-pixel loops run on, chosen at run time |
//! | [`error`] | the error type: one line naming the file and the problem |
//!
//! Conventions, stated once: images are indexed `(row, column)` = `(y, x)`; pixel centres sit at
//! integer coordinates, 0-based; `x` is the column and `y` the row. Frames are numbered from 0.
//! Lengths carry their unit in the name (`pixel_size_um`), times too (`frame_interval_s`).

pub mod analyze;
pub mod batch;
pub mod checkpoint;
pub mod columns;
pub mod error;
pub mod export;
pub mod frames;
pub mod image2d;
pub mod link;
pub mod lookalike;
pub mod numeric;
pub mod ordered;
pub mod output;
pub mod params;
pub mod pipeline;
pub mod preprocess;
pub mod qc;
pub mod record;
pub mod render;
pub mod report_text;
pub mod reports;
pub mod review;
pub mod run_folder;
pub mod score;
pub mod segment;
pub mod shard;
pub mod simd;
pub mod stack;
pub mod synth;
pub mod tracks;
pub mod verdict;
pub mod workflow;

pub use error::{Error, Result};

/// The tool's version, written into every run record.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// Every frame needs a few buffers of several MB; glibc returns such blocks to the kernel at
/// once (mmap/munmap) and faults them in again for the next frame, which costs time and makes
/// worker threads queue on the process's memory-map lock. Serving them from the heap instead
/// keeps the freed buffers for the next frame (measured in benches/versus_python.sh: 100
/// frames of 1024² px, 4.1 s → 3.6 s on 2 cores, peak memory +12 MB). And no more malloc
/// arenas than cores: glibc gives each new thread an arena of its own (up to 8 per core), and
/// each arena keeps the buffers its thread freed, so the run's threads (workers, reader,
/// linker) held several frames' worth each (the default run on 2 cores peaked at 117-130 MB
/// with glibc's arenas and 85-103 MB with two, same speed, 3 alternating rounds; with one, the
/// threads queued on it and the run took 10-25% longer). Call it first thing in a program (the
/// `caravan` binary and the stage benchmarks do).
#[cfg(all(target_os = "linux", target_env = "gnu"))]
pub fn keep_freed_memory_for_reuse() {
    extern "C" {
        fn mallopt(param: i32, value: i32) -> i32;
    }
    const M_TRIM_THRESHOLD: i32 = -1; // glibc malloc.h
    const M_MMAP_THRESHOLD: i32 = -3;
    const M_ARENA_MAX: i32 = -8;
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get()).min(64) as i32;
    // SAFETY: mallopt(3) with documented parameters, before any allocation-heavy work or thread.
    unsafe {
        mallopt(M_MMAP_THRESHOLD, 256 << 20);
        mallopt(M_TRIM_THRESHOLD, 512 << 20);
        mallopt(M_ARENA_MAX, cores);
    }
}

/// Nothing to tune outside glibc.
#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
pub fn keep_freed_memory_for_reuse() {}
