//! `caravan track FILE -o DIR`: segment every frame and link the nuclei into tracks.

use super::{print_summary, RunArgs};
use caravan::link::online::{Divisions, LinkParams, Prediction};
use caravan::params::Length;
use caravan::pipeline::{run_recording, SegmentOutputs};
use caravan::render::movie::MovieOptions;
use caravan::{Error, Result};
use clap::Args;

#[derive(Args)]
pub struct TrackArgs {
    #[command(flatten)]
    run: RunArgs,
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
    /// Make the run resumable: log progress to the folder's .checkpoint/ every K frames
    /// (0: no checkpoints; not kept with --labels).
    #[arg(long, default_value_t = 25)]
    checkpoint_every: usize,
    /// Continue an interrupted run from its checkpoint (same input and parameters); the
    /// outputs are byte-identical to an uninterrupted run's.
    #[arg(long)]
    resume: bool,
    /// Skip the migration analysis (analysis/ with report.html) that follows tracking.
    #[arg(long)]
    no_analysis: bool,
}

pub fn run(mut args: TrackArgs) -> Result<()> {
    // Resuming continues a run in the same folder, so its partial outputs are expected.
    args.run.force |= args.resume;
    if args.max_gap > 50 {
        return Err(Error::parameter(
            "--max-gap",
            args.max_gap,
            "gap closing bridges at most 50 missing frames",
        ));
    }
    if args.qc_size < 64 || args.qc_every == 0 {
        return Err(Error::parameter(
            "--qc-size/--qc-every",
            format!("{}/{}", args.qc_size, args.qc_every),
            "the movie needs at least 64 px and every >= 1",
        ));
    }
    let (mut stack, diameter, params) = args.run.start()?;
    let mut link = LinkParams::for_diameter(params.diameter_px);
    link.prediction = args.prediction;
    link.max_gap_frames = args.max_gap;
    link.divisions = args.divisions;
    if let Some(step) = args.max_step {
        link.max_step_px = step.to_pixels("--max-step", stack.info().calibration.pixel_size_um)?;
        if link.max_step_px < 0.5 {
            return Err(Error::parameter(
                "--max-step",
                link.max_step_px,
                "must be at least 0.5 px",
            ));
        }
    }
    let movie = MovieOptions {
        max_side_px: args.qc_size,
        every: args.qc_every,
        ..MovieOptions::default()
    };
    let outputs = SegmentOutputs {
        labels: args.run.labels,
        linking: Some(link),
        movie: (!args.no_movie).then_some(movie),
        replace: args.run.force,
        checkpoint_every: (args.checkpoint_every > 0).then_some(args.checkpoint_every),
        resume: args.resume,
    };
    let run = run_recording(&mut stack, diameter, &params, &args.run.output, &outputs, "track")?;
    print_summary(&run);
    if !args.no_analysis {
        super::analyze::analyze_run_folder(&args.run.output);
    }
    Ok(())
}
