//! `caravan export RUN --to ctc -o DIR`: a run in another tool's layout.

use caravan::Result;
use clap::{Args, ValueEnum};
use std::path::PathBuf;

#[derive(Clone, Copy, ValueEnum)]
enum Layout {
    /// The Cell Tracking Challenge's result layout (maskTTT.tif, res_track.txt).
    Ctc,
}

#[derive(Args)]
pub struct ExportArgs {
    /// A run folder tracked with --labels.
    run: PathBuf,
    /// The layout to write.
    #[arg(long, value_enum)]
    to: Layout,
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
}

pub fn run(args: ExportArgs) -> Result<()> {
    match args.to {
        Layout::Ctc => {
            let tracks = caravan::export::export_ctc(&args.run, &args.output)?;
            println!(
                "wrote {} tracks in the benchmark's result layout to {}",
                tracks,
                args.output.display()
            );
        }
    }
    Ok(())
}
