//! Shared by the integration tests that track synthetic recordings.

use caravan::link::online::LinkParams;
use caravan::params::SegmentParams;
use caravan::pipeline::{run_recording, DiameterSource, SegmentOutputs};
use caravan::stack::{OpenOptions, Stack};
use caravan::synth::{write_recording, SynthParams};
use std::path::PathBuf;

/// A synthetic recording tracked into a temporary folder: `syn/` holds the recording and its
/// truth, `run/` the tracks.
pub struct TrackedScene {
    /// Keeps the folder alive until the scene is dropped.
    _dir: tempfile::TempDir,
    /// The synth folder (not every test crate that shares this module reads it).
    #[allow(dead_code)]
    pub syn: PathBuf,
    /// The run folder.
    pub run: PathBuf,
}

/// Synthesizes `p` and tracks it with `link` at the true diameter (no movie).
pub fn track_synthetic(p: &SynthParams, link: LinkParams) -> TrackedScene {
    let dir = tempfile::tempdir().unwrap();
    let syn = dir.path().join("syn");
    let synth = write_recording(&syn, p).unwrap();
    let mut stack = Stack::open(&synth.recording, &OpenOptions::default()).unwrap();
    let outputs = SegmentOutputs {
        labels: false,
        linking: Some(link),
        movie: None,
        replace: false,
        checkpoint_every: None,
        resume: false,
    };
    let run = dir.path().join("run");
    run_recording(
        &mut stack,
        DiameterSource::Given(p.diameter_px),
        &SegmentParams::for_diameter(p.diameter_px),
        &run,
        &outputs,
        "test",
    )
    .unwrap();
    TrackedScene { _dir: dir, syn, run }
}
