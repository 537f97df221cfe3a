//! `caravan track FILE -o DIR`: segment every frame and link the nuclei into tracks.

use super::{describe_diameter, InputArgs, SegmentationArgs};
use caravan::link::online::{LinkParams, Prediction};
use caravan::params::Length;
use caravan::pipeline::{run_segment, SegmentOutputs};
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct TrackArgs {
    #[command(flatten)]
    input: InputArgs,
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
    /// Also write labels.tif, one 32-bit label image per frame.
    #[arg(long)]
    labels: bool,
    /// Longest step between frames (e.g. 8px or 5um; default 0.6 x diameter).
    #[arg(long)]
    max_step: Option<Length>,
    /// Constant-velocity motion prediction: on or off.
    #[arg(long, default_value = "on")]
    prediction: Prediction,
    #[command(flatten)]
    segmentation: SegmentationArgs,
}

pub fn run(args: TrackArgs) -> Result<()> {
    let mut stack = args.input.open()?;
    let (diameter, params) = args.segmentation.resolve(&mut stack)?;
    let mut link = LinkParams::for_diameter(params.diameter_px);
    link.prediction = args.prediction;
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
    let outputs = SegmentOutputs {
        labels: args.labels,
        linking: Some(link),
    };
    let run = run_segment(&mut stack, diameter, &params, &args.output, &outputs, "track")?;
    println!(
        "{} frames, {} detections, {} tracks, diameter {}",
        run.frames.len(),
        run.detections(),
        run.tracks.len(),
        describe_diameter(diameter)
    );
    for w in &run.warnings {
        println!("warning: {w}");
    }
    println!("wrote {}", run.dir.display());
    Ok(())
}
