//! `caravan segment FILE -o DIR`: every frame's nuclei into detections.csv and run.json.

use super::{print_summary, RunArgs};
use caravan::pipeline::{run_recording, SegmentOutputs};
use caravan::Result;
use clap::Args;

#[derive(Args)]
pub struct SegmentArgs {
    #[command(flatten)]
    run: RunArgs,
}

pub fn run(args: SegmentArgs) -> Result<()> {
    let (mut stack, diameter, params) = args.run.start()?;
    let outputs = SegmentOutputs {
        labels: args.run.labels,
        linking: None,
        movie: None,
        replace: args.run.force,
        checkpoint_every: None,
        resume: false,
    };
    let run = run_recording(&mut stack, diameter, &params, &args.run.output, &outputs, "segment")?;
    print_summary(&run);
    Ok(())
}
