//! `caravan join SHARD... -o DIR`: join the shards of one recording (from `segment --frames`)
//! into tracks, tables and the QC movie, identical to one `track` run.

use super::track::LinkingArgs;
use super::{print_summary, Completion};
use caravan::shard::{join_shards, read_shards};
use caravan::stack::Stack;
use caravan::Result;
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct JoinArgs {
    /// Shard folders written by `caravan segment --frames A..B`, covering the recording.
    #[arg(required = true)]
    shards: Vec<PathBuf>,
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
    /// The recording, when it is not where the shards were made (the movie reads it again).
    #[arg(long)]
    recording: Option<PathBuf>,
    /// Replace the outputs of an earlier run in the output folder.
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    linking: LinkingArgs,
}

pub fn run(args: JoinArgs) -> Result<Completion> {
    args.linking.validate()?;
    caravan::pipeline::check_output_dir(&args.output, args.force)?;
    let shards = read_shards(&args.shards)?;
    let first = &shards[0].1;
    let path = args
        .recording
        .clone()
        .unwrap_or_else(|| PathBuf::from(&first.fingerprint.input));
    let mut stack = Stack::open(&path, &first.open)?;
    let outputs = args
        .linking
        .outputs(stack.info().calibration.pixel_size_um, args.force)?;
    let mut run = join_shards(&mut stack, &args.shards, &args.output, &outputs)?;
    print_summary(&run);
    if !args.linking.no_analysis {
        super::analyze::analyze_run_folder(&args.output, run.analysis.take());
    }
    Ok(Completion::of(run.verdict.verdict))
}
