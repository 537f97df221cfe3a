//! `caravan review RUN`: write (or rewrite) the review page of a finished run folder.

use caravan::render::review::ReviewOptions;
use caravan::review::write_review;
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct ReviewArgs {
    /// A run folder of `caravan track` (with run.json and tracks.csv).
    run: PathBuf,
    /// The recording, when it is no longer where run.json says.
    #[arg(long)]
    recording: Option<PathBuf>,
    /// Longest side of the page's frames in px.
    #[arg(long, default_value_t = 512)]
    review_size: usize,
}

pub fn run(args: ReviewArgs) -> Result<()> {
    if args.review_size < 64 {
        return Err(Error::parameter(
            "--review-size",
            args.review_size,
            "the review page needs at least 64 px",
        ));
    }
    let options = ReviewOptions {
        display_side_px: args.review_size,
    };
    let out = write_review(&args.run, args.recording.as_deref(), &options)?;
    println!(
        "review page: {} ({} frames at full resolution, {:.1} MB)",
        out.page.display(),
        out.full_frames,
        out.bytes as f64 / 1e6
    );
    Ok(())
}
