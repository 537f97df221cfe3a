//! `caravan synth -o DIR`: a synthetic recording with its ground truth.

use caravan::stack::write::TiffCompression;
use caravan::synth::{write_recording, Scenario, SynthParams};
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct SynthArgs {
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
    /// dish, crowded or stripe.
    #[arg(long, default_value = "dish")]
    scenario: Scenario,
    /// Frame size as WIDTHxHEIGHT.
    #[arg(long, default_value = "512x512")]
    size: String,
    /// Number of frames.
    #[arg(long, default_value_t = 20)]
    frames: usize,
    /// Nuclei at the start (default depends on the scenario and size).
    #[arg(long)]
    nuclei: Option<usize>,
    /// Mean nucleus diameter in px.
    #[arg(long, default_value_t = 14.0)]
    diameter: f64,
    /// Seed of every random choice.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Compression: none, lzw, deflate or packbits.
    #[arg(long, default_value = "deflate")]
    compression: TiffCompression,
}

pub fn run(args: SynthArgs) -> Result<()> {
    let (w, h) = parse_size(&args.size)?;
    let mut p = SynthParams::new(args.scenario, w, h, args.frames);
    if let Some(n) = args.nuclei {
        p.nuclei = n;
    }
    p.diameter_px = args.diameter;
    p.seed = args.seed;
    p.compression = args.compression;
    let out = write_recording(&args.output, &p)?;
    println!(
        "wrote {} ({} frames of {}x{}), {}, {}",
        out.recording.display(),
        p.frames,
        w,
        h,
        out.truth_csv.display(),
        out.truth_labels.display()
    );
    Ok(())
}

fn parse_size(s: &str) -> Result<(usize, usize)> {
    let bad = || Error::parameter("--size", s, "expected WIDTHxHEIGHT, e.g. 512x512");
    let (a, b) = s.split_once('x').ok_or_else(bad)?;
    Ok((
        a.trim().parse().map_err(|_| bad())?,
        b.trim().parse().map_err(|_| bad())?,
    ))
}
