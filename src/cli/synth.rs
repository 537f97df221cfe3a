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
    /// Drift along +x in px per frame (default: 2.5 for the stripe, 0 otherwise).
    #[arg(long)]
    drift: Option<f64>,
    /// Probability per nucleus and frame of dividing.
    #[arg(long, default_value_t = 0.0)]
    divisions: f64,
    /// Probability per nucleus and frame of being missed for one frame.
    #[arg(long, default_value_t = 0.0)]
    dropouts: f64,
    /// Peak nucleus signal in photons at frame 0 (background is 60).
    #[arg(long, default_value_t = 600.0)]
    signal: f64,
    /// Fraction of signal lost per frame to photobleaching.
    #[arg(long, default_value_t = 0.002)]
    bleach: f64,
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
    if let Some(v) = args.drift {
        p.drift_px_per_frame = v;
    }
    p.division_rate = args.divisions;
    p.dropout_rate = args.dropouts;
    p.signal_photons = args.signal;
    if !(0.0..0.5).contains(&args.bleach) {
        return Err(Error::parameter(
            "--bleach",
            args.bleach,
            "must be from 0 to 0.5 per frame",
        ));
    }
    p.bleach_per_frame = args.bleach;
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
