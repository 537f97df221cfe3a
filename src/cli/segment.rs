//! `caravan segment FILE -o DIR`: every frame's nuclei into detections.csv and run.json; with
//! `--frames A..B`, a shard of frames A to B−1 for `caravan join` (split stages).

use super::{print_summary, Completion, RunArgs};
use caravan::pipeline::{run_recording, RunOptions};
use caravan::shard::write_shard;
use caravan::{Error, Result};
use clap::Args;

#[derive(Args)]
pub struct SegmentArgs {
    #[command(flatten)]
    run: RunArgs,
    /// Segment only frames A to B−1 (half-open A..B) into a shard for `caravan join`.
    #[arg(long)]
    frames: Option<String>,
}

pub fn run(args: SegmentArgs) -> Result<Completion> {
    if let Some(range) = &args.frames {
        return run_shard(&args, range).map(|()| Completion::Done);
    }
    let (mut stack, diameter, params) = args.run.start()?;
    let outputs = RunOptions {
        labels: args.run.labels,
        linking: None,
        movie: None,
        review: None,
        replace: args.run.force,
        checkpoint_every: None,
        resume: false,
        masks: None,
        masks_without_intensities: false,
        analysis: false,
    };
    let run = run_recording(&mut stack, diameter, &params, &args.run.output, &outputs, "segment")?;
    print_summary(&run);
    Ok(Completion::of(run.verdict.verdict))
}

fn run_shard(args: &SegmentArgs, text: &str) -> Result<()> {
    let range = super::half_open_range("--frames", text)?;
    if args.run.labels {
        return Err(Error::parameter(
            "--labels",
            "",
            "shards do not carry labels.tif; segment without --frames for labels",
        ));
    }
    let mut run = args.run.clone();
    run.force = true; // a shard folder is checked for an earlier shard instead
    let (mut stack, diameter, params) = run.start()?;
    let info = write_shard(
        &mut stack,
        &args.run.input.options(),
        diameter,
        &params,
        range,
        &args.run.output,
        args.run.force,
    )?;
    println!(
        "shard of frames {}..{} written to {}",
        info.frames.0,
        info.frames.1,
        args.run.output.display()
    );
    Ok(())
}
