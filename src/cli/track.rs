//! `caravan track FILE -o DIR`: segment every frame and link the nuclei into tracks.

use super::{print_summary, RunArgs};
use caravan::link::online::{Divisions, LinkParams, Prediction};
use caravan::params::Length;
use caravan::pipeline::{run_recording, SegmentOutputs};
use caravan::render::movie::MovieOptions;
use caravan::{Error, Result};
use clap::Args;

/// Linking, movie and analysis options, shared by `track` and `link`.
#[derive(Args, Clone)]
pub struct LinkingArgs {
    /// Longest step between frames (e.g. 8px or 5um; default 0.6 x diameter).
    #[arg(long)]
    max_step: Option<Length>,
    /// Constant-velocity motion prediction: on or off.
    #[arg(long, default_value = "on")]
    prediction: Prediction,
    /// Longest run of missing frames that gap closing may bridge (0 switches gap closing off).
    #[arg(long, default_value_t = 2)]
    max_gap: usize,
    /// Division detection: on or off.
    #[arg(long, default_value = "on")]
    divisions: Divisions,
    /// Longest side of the QC movie in px (larger recordings are downscaled).
    #[arg(long, default_value_t = 512)]
    qc_size: usize,
    /// Put every k-th frame in the QC movie (for long recordings).
    #[arg(long, default_value_t = 1)]
    qc_every: usize,
    /// Skip the QC movie and contact sheet.
    #[arg(long)]
    no_movie: bool,
    /// Skip the migration analysis (analysis/ with report.html) that follows tracking.
    #[arg(long)]
    pub no_analysis: bool,
}

impl LinkingArgs {
    /// Checks the options that do not depend on the recording.
    pub fn validate(&self) -> Result<()> {
        if self.max_gap > 50 {
            return Err(Error::parameter(
                "--max-gap",
                self.max_gap,
                "gap closing bridges at most 50 missing frames",
            ));
        }
        if self.qc_size < 64 || self.qc_every == 0 {
            return Err(Error::parameter(
                "--qc-size/--qc-every",
                format!("{}/{}", self.qc_size, self.qc_every),
                "the movie needs at least 64 px and every >= 1",
            ));
        }
        Ok(())
    }

    /// The run's outputs for a nucleus diameter and pixel size (for `--max-step` in µm).
    pub fn outputs(&self, diameter_px: f64, pixel_size_um: Option<f64>, replace: bool) -> Result<SegmentOutputs> {
        let mut link = LinkParams::for_diameter(diameter_px);
        link.prediction = self.prediction;
        link.max_gap_frames = self.max_gap;
        link.divisions = self.divisions;
        if let Some(step) = self.max_step {
            link.max_step_px = step.to_pixels("--max-step", pixel_size_um)?;
            if link.max_step_px < 0.5 {
                return Err(Error::parameter(
                    "--max-step",
                    link.max_step_px,
                    "must be at least 0.5 px",
                ));
            }
        }
        let movie = MovieOptions {
            max_side_px: self.qc_size,
            every: self.qc_every,
            ..MovieOptions::default()
        };
        Ok(SegmentOutputs {
            labels: false,
            linking: Some(link),
            movie: (!self.no_movie).then_some(movie),
            replace,
            checkpoint_every: None,
            resume: false,
        })
    }
}

#[derive(Args)]
pub struct TrackArgs {
    #[command(flatten)]
    run: RunArgs,
    #[command(flatten)]
    linking: LinkingArgs,
    /// Make the run resumable: log progress to the folder's .checkpoint/ every K frames
    /// (0: no checkpoints; not kept with --labels).
    #[arg(long, default_value_t = 25)]
    checkpoint_every: usize,
    /// Continue an interrupted run from its checkpoint (same input and parameters); the
    /// outputs are byte-identical to an uninterrupted run's.
    #[arg(long)]
    resume: bool,
}

pub fn run(mut args: TrackArgs) -> Result<()> {
    // Resuming continues a run in the same folder, so its partial outputs are expected.
    args.run.force |= args.resume;
    args.linking.validate()?;
    let (mut stack, diameter, params) = args.run.start()?;
    let mut outputs = args.linking.outputs(
        params.diameter_px,
        stack.info().calibration.pixel_size_um,
        args.run.force,
    )?;
    outputs.labels = args.run.labels;
    outputs.checkpoint_every = (args.checkpoint_every > 0).then_some(args.checkpoint_every);
    outputs.resume = args.resume;
    let run = run_recording(&mut stack, diameter, &params, &args.run.output, &outputs, "track")?;
    print_summary(&run);
    if !args.linking.no_analysis {
        super::analyze::analyze_run_folder(&args.run.output);
    }
    Ok(())
}
