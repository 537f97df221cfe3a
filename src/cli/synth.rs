//! `caravan synth -o DIR`: a synthetic recording with its ground truth.

use caravan::stack::write::TiffCompression;
use caravan::synth::{write_recording, Look, PersistentMotion, Scenario, SynthParams};
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
    /// Peak nucleus signal as a multiple of the background noise (sets --signal; e.g. 3 for a
    /// dim recording).
    #[arg(long, conflicts_with = "signal")]
    snr: Option<f64>,
    /// Appearance: plain (smooth) or tissue (texture 0.3, PSF 1.2 px, brightness spread 0.3,
    /// axis ratio up to 1.3); the four options below override single values.
    #[arg(long, default_value = "plain")]
    look: Look,
    /// Chromatin-like texture amplitude inside nuclei (0 to 1).
    #[arg(long)]
    texture: Option<f64>,
    /// Standard deviation of the point-spread function, px.
    #[arg(long)]
    psf: Option<f64>,
    /// Standard deviation of log brightness between nuclei (lognormal).
    #[arg(long)]
    brightness_spread: Option<f64>,
    /// Largest long-to-short axis ratio of a nucleus.
    #[arg(long)]
    max_axis_ratio: Option<f64>,
    /// Mean speed in px per frame of a persistent random walk (replaces the scenario's motion).
    #[arg(long, requires = "persistence")]
    speed: Option<f64>,
    /// Persistence time of that walk, frames.
    #[arg(long, requires = "speed")]
    persistence: Option<f64>,
    /// Frames before a division during which the mother rounds up and brightens (0: divides
    /// at once).
    #[arg(long, default_value_t = 0)]
    mitosis_frames: usize,
    /// Probability per nucleus and frame of dimming to 35% for one frame (still in the truth).
    #[arg(long, default_value_t = 0.0)]
    dimming: f64,
    /// Closest approach of two nuclei's centres as a share of the sum of their radii (default:
    /// the scenario's, 0.85 for crowded); below 1 nuclei press into each other.
    #[arg(long)]
    separation: Option<f64>,
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
    if let Some(snr) = args.snr {
        p.signal_photons = snr * p.background_noise_sd();
    }
    p.look = args.look;
    let look = &mut p.look;
    look.texture = args.texture.unwrap_or(look.texture);
    look.psf_sigma_px = args.psf.unwrap_or(look.psf_sigma_px);
    look.brightness_spread = args.brightness_spread.unwrap_or(look.brightness_spread);
    look.max_axis_ratio = args.max_axis_ratio.unwrap_or(look.max_axis_ratio);
    if let (Some(speed), Some(persistence)) = (args.speed, args.persistence) {
        p.motion = Some(PersistentMotion {
            speed_px_per_frame: speed,
            persistence_frames: persistence,
        });
    }
    if !(0.0..0.5).contains(&args.bleach) {
        return Err(Error::parameter(
            "--bleach",
            args.bleach,
            "must be from 0 to 0.5 per frame",
        ));
    }
    p.bleach_per_frame = args.bleach;
    p.separation = args.separation;
    p.mitosis_frames = args.mitosis_frames;
    p.dimming_rate = args.dimming;
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
