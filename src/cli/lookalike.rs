//! `caravan lookalike RUN`: the accuracy to expect on a run's recording, from look-alike
//! recordings with its statistics and a known truth.

use caravan::lookalike::{write_lookalike, LookalikeOptions};
use caravan::Result;
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Args)]
pub struct LookalikeArgs {
    /// A run folder of `caravan track` (with run.json and tracks.csv).
    run: PathBuf,
    /// Output folder (default: RUN/lookalike).
    #[arg(short, long)]
    output: Option<PathBuf>,
    /// Look-alike recordings to make.
    #[arg(long, default_value_t = 3)]
    count: usize,
    /// Frames in each (default: enough for 2000 nucleus-frames together, 4 to 8).
    #[arg(long)]
    frames: Option<usize>,
    /// Seed of the first look-alike.
    #[arg(long, default_value_t = 1)]
    seed: u64,
}

pub fn run(args: LookalikeArgs) -> Result<()> {
    let out = args.output.clone().unwrap_or_else(|| args.run.join("lookalike"));
    let options = LookalikeOptions {
        count: args.count.max(1),
        frames: args.frames.map(|f| f.max(2)),
        seed: args.seed,
    };
    make(&args.run, &out, &options)
}

/// Makes the look-alikes and prints the expected accuracy.
pub fn make(run: &Path, out: &Path, options: &LookalikeOptions) -> Result<()> {
    let summary = write_lookalike(run, out, options)?;
    let e = &summary.expected;
    let show = |name: &str, s: Option<caravan::lookalike::Spread>| {
        if let Some(s) = s {
            println!("  {name:<22} {:.3} ({:.3} to {:.3})", s.mean, s.min, s.max);
        }
    };
    println!(
        "expected accuracy on this recording ({} look-alikes of {} frames):",
        options.count, summary.synth_parameters.frames
    );
    show("detection F1", e.detection_f1);
    show("MOTA", e.mota);
    show("link recall", e.link_recall);
    show("mostly tracked", e.mostly_tracked);
    show("divisions recovered", e.divisions_recovered);
    println!("look-alike report: {}", out.join("report.html").display());
    Ok(())
}
