//! `caravan demo`: our own scenario end to end, as a first look at what the tool does.

use caravan::link::LinkOptions;
use caravan::params::SegmentParams;
use caravan::pipeline::{resolve_diameter, run_recording, RunOptions};
use caravan::render::movie::MovieOptions;
use caravan::render::review::ReviewOptions;
use caravan::score::files::score_files;
use caravan::stack::{OpenOptions, Stack};
use caravan::synth::{write_recording, Scenario, SynthParams};
use caravan::Result;
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
    p.division_rate = 0.005;
    p.dropout_rate = 0.01;
    println!("Synthesizing a stripe of migrating, occasionally dividing nuclei (our own invented scenario) ...");
    let synth = write_recording(&args.output.join("synthetic"), &p)?;
    let mut stack = Stack::open(&synth.recording, &OpenOptions::default())?;
    let diameter = resolve_diameter(&mut stack, None, &SegmentParams::for_diameter)?;
    let d = diameter.px();
    println!("Estimated nucleus diameter: {d:.1} px (truth: {:.1} px)", p.diameter_px);
    let run_dir = args.output.join("tracking");
    let outputs = RunOptions {
        labels: true,
        linking: Some(LinkOptions::default()),
        movie: Some(MovieOptions::default()),
        review: Some(ReviewOptions::default()),
        replace: true,
        checkpoint_every: None,
        resume: false,
        masks: None,
        masks_without_intensities: false,
        analysis: true,
    };
    let run = run_recording(
        &mut stack,
        diameter,
        &SegmentParams::for_diameter(d),
        &run_dir,
        &outputs,
        "demo",
    )?;
    let (_, score) = score_files(&args.output.join("synthetic"), &run_dir, None, None)?;
    super::print_verdict(&run.verdict);
    println!(
        "{} frames, {:.1} nuclei per frame, {} tracks",
        run.frames.len(),
        run.detections() as f64 / run.frames.len() as f64,
        run.tracks.len()
    );
    if let Some(r) = &run.resolution {
        println!("{} gaps closed, {} divisions found", r.gaps_closed, r.divisions.len());
    }
    println!("against the truth (caravan score):");
    super::score::print_score(&score);
    for w in &run.warnings {
        println!("warning: {}", w.message());
    }
    let show = |name: &str| run_dir.join(name).display().to_string();
    if let Some(m) = &run.movie {
        println!("QC movie: {} frames of {}x{} px", m.frames, m.size.0, m.size.1);
    }
    println!("outputs:\n  recording   {}\n  truth       {}\n  tracks      {}\n  per track   {}\n  detections  {}\n  labels      {}\n  run record  {}\n  QC movie    {}\n  QC sheet    {}\n  review page {}", synth.recording.display(), synth.truth_csv.display(), show("tracks.csv"), show("per_track.csv"), show("detections.csv"), show("labels.tif"), show("run.json"), show("qc_movie.gif"), show("qc_sheet.png"), show("review/index.html"));
    if let Some(analysis) = super::analyze::analyze_run_folder(&run_dir, run.analysis) {
        println!("migration statistics (tracks of 10+ points):");
        super::analyze::print_analysis(&analysis);
    }
    println!("Research software: statistics are only as good as the segmentation they rest on.");
    Ok(())
}
