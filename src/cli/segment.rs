//! `caravan segment FILE -o DIR`: every frame's nuclei into detections.csv and run.json.

use super::{describe_diameter, InputArgs, SegmentationArgs};
use caravan::pipeline::{run_segment, SegmentOutputs};
use caravan::Result;
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct SegmentArgs {
    #[command(flatten)]
    input: InputArgs,
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
    /// Also write labels.tif, one 32-bit label image per frame.
    #[arg(long)]
    labels: bool,
    #[command(flatten)]
    segmentation: SegmentationArgs,
}

pub fn run(args: SegmentArgs) -> Result<()> {
    let mut stack = args.input.open()?;
    let (diameter, params) = args.segmentation.resolve(&mut stack)?;
    let run = run_segment(
        &mut stack,
        diameter,
        &params,
        &args.output,
        &SegmentOutputs {
            labels: args.labels,
            linking: None,
            movie: None,
        },
        "segment",
    )?;
    println!(
        "{} frames, {} detections, diameter {}",
        run.frames.len(),
        run.detections(),
        describe_diameter(diameter)
    );
    for w in &run.warnings {
        println!("warning: {w}");
    }
    println!("wrote {}", run.dir.display());
    Ok(())
}
