//! `caravan demo`: our own scenario end to end, as a first look at what the tool does.

use caravan::params::SegmentParams;
use caravan::pipeline::{resolve_diameter, run_segment, DiameterSource, SegmentOutputs};
use caravan::score::match_points;
use caravan::stack::{OpenOptions, Stack};
use caravan::synth::{write_recording, Scenario, SynthParams};
use caravan::tracks::read_track_points;
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct DemoArgs {
    /// Output folder.
    #[arg(short, long, default_value = "caravan-demo")]
    output: PathBuf,
}

pub fn run(args: DemoArgs) -> Result<()> {
    let mut p = SynthParams::new(Scenario::Stripe, 512, 384, 30);
    p.seed = 2026;
    println!("Synthesizing a stripe of migrating nuclei (our own invented scenario) ...");
    let synth = write_recording(&args.output.join("synthetic"), &p)?;
    let mut stack = Stack::open(&synth.recording, &OpenOptions::default())?;
    let diameter = resolve_diameter(&mut stack, None)?;
    let d = match diameter {
        DiameterSource::Given(d) | DiameterSource::Estimated(d) => d,
    };
    println!("Estimated nucleus diameter: {d:.1} px (truth: {:.1} px)", p.diameter_px);
    let run_dir = args.output.join("segmentation");
    let run = run_segment(
        &mut stack,
        diameter,
        &SegmentParams::for_diameter(d),
        &run_dir,
        &SegmentOutputs { labels: true },
        "demo",
    )?;
    let truth_text =
        std::fs::read_to_string(&synth.truth_csv).map_err(|e| Error::input(&synth.truth_csv, e.to_string()))?;
    let truth = read_track_points(&truth_text).map_err(|e| Error::input(&synth.truth_csv, e))?;
    let detections =
        std::fs::read_to_string(run_dir.join("detections.csv")).map_err(|e| Error::input(&run_dir, e.to_string()))?;
    let mut counts = caravan::score::MatchCounts::default();
    for t in 0..p.frames {
        let r: Vec<(f64, f64)> = truth.iter().filter(|q| q.frame == t).map(|q| (q.x, q.y)).collect();
        let f: Vec<(f64, f64)> = detections
            .lines()
            .skip(1)
            .filter_map(|l| {
                let c: Vec<&str> = l.split(',').collect();
                (c[0].parse::<usize>().ok()? == t).then(|| Some((c[2].parse().ok()?, c[3].parse().ok()?)))?
            })
            .collect();
        counts.add(match_points(&r, &f, d / 2.0));
    }
    println!(
        "{} frames, {:.1} nuclei per frame on average",
        run.frames.len(),
        run.detections() as f64 / run.frames.len() as f64
    );
    println!(
        "detection F1 against the truth: {:.3} (precision {:.3}, recall {:.3})",
        counts.f1(),
        counts.precision(),
        counts.recall()
    );
    println!(
        "outputs:\n  recording   {}\n  truth       {}\n  detections  {}\n  labels      {}\n  run record  {}",
        synth.recording.display(),
        synth.truth_csv.display(),
        run_dir.join("detections.csv").display(),
        run_dir.join("labels.tif").display(),
        run_dir.join("run.json").display()
    );
    println!("Research software: statistics are only as good as the segmentation they rest on.");
    Ok(())
}
