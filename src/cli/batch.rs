//! `caravan batch MANIFEST.csv -o DIR`: track every recording of a manifest (skipping those
//! already complete, resuming interrupted ones), then compare the conditions.

use super::analyze::analyze_run_folder;
use super::track::LinkingArgs;
use super::SegmentationArgs;
use caravan::analyze::compare::{compare, read_manifest, read_manifest_entries, write_comparison};
use caravan::analyze::population::AnalysisOptions;
use caravan::analyze::table::{CalibrationOverride, Filters};
use caravan::batch::{run_folders, write_runs_manifest};
use caravan::pipeline::run_recording;
use caravan::stack::{OpenOptions, Stack};
use caravan::{Error, Result};
use clap::Args;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

#[derive(Args)]
pub struct BatchArgs {
    /// CSV with columns path (a recording), condition, replicate; other columns are labels.
    manifest: PathBuf,
    /// Output folder: runs/CONDITION/REPLICATE/NAME per recording, runs.csv, comparison/.
    #[arg(short, long)]
    output: PathBuf,
    /// Recordings tracked at once (default: one per two cores, each using two threads).
    #[arg(long)]
    jobs: Option<usize>,
    #[command(flatten)]
    segmentation: SegmentationArgs,
    #[command(flatten)]
    linking: LinkingArgs,
}

/// What happened to one recording.
enum Outcome {
    Done,
    Skipped,
    Failed(String),
}

pub fn run(args: BatchArgs) -> Result<()> {
    args.linking.validate()?;
    let entries = read_manifest_entries(&args.manifest)?;
    let folders = run_folders(&entries, &args.output);
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let jobs = args.jobs.unwrap_or((cores / 2).max(1)).clamp(1, entries.len().max(1));
    let next = AtomicUsize::new(0);
    let outcomes: Mutex<Vec<(usize, Outcome)>> = Mutex::new(Vec::new());
    std::thread::scope(|s| {
        for _ in 0..jobs {
            s.spawn(|| loop {
                let k = next.fetch_add(1, Ordering::SeqCst);
                let Some(entry) = entries.get(k) else { break };
                let outcome = match track_one(&entry.path, &folders[k], &args) {
                    Ok(true) => Outcome::Done,
                    Ok(false) => Outcome::Skipped,
                    Err(e) => Outcome::Failed(e.to_string()),
                };
                report(&entry.path, &folders[k], &outcome);
                outcomes.lock().expect("no panics while held").push((k, outcome));
            });
        }
    });
    let outcomes = outcomes.into_inner().expect("threads joined");
    let failed = outcomes.iter().filter(|o| matches!(o.1, Outcome::Failed(_))).count();
    let runs = write_runs_manifest(&entries, &folders, &args.output)?;
    if failed == 0 && !args.linking.no_analysis {
        compare_runs(&runs, &args.output);
    }
    if failed > 0 {
        return Err(Error::input(
            &args.manifest,
            format!(
                "{failed} of {} recordings failed (see above); the others are complete",
                entries.len()
            ),
        ));
    }
    println!("wrote {}", args.output.display());
    Ok(())
}

fn report(input: &Path, folder: &Path, outcome: &Outcome) {
    match outcome {
        Outcome::Done => println!("tracked {} -> {}", input.display(), folder.display()),
        Outcome::Skipped => println!("already complete: {}", folder.display()),
        Outcome::Failed(e) => println!("failed: {e}"),
    }
}

/// Tracks one recording into `folder`; `Ok(false)` when it was complete already.
fn track_one(input: &Path, folder: &Path, args: &BatchArgs) -> Result<bool> {
    if folder.join("run.json").exists() {
        return Ok(false);
    }
    let resume = caravan::checkpoint::checkpoint_dir(folder).join("state.json").exists();
    let mut stack = Stack::open(input, &OpenOptions::default())?;
    let (diameter, params) = args.segmentation.resolve(&mut stack)?;
    let mut outputs = args
        .linking
        .outputs(params.diameter_px, stack.info().calibration.pixel_size_um, resume)?;
    outputs.checkpoint_every = Some(25);
    outputs.resume = resume;
    run_recording(&mut stack, diameter, &params, folder, &outputs, "track")?;
    if !args.linking.no_analysis {
        analyze_run_folder(folder);
    }
    Ok(true)
}

/// Compares the conditions of the finished runs into `out/comparison`, when there are two or
/// more; a failure here is reported, not fatal (the runs stand on their own).
fn compare_runs(runs: &Path, out: &Path) {
    let Ok(entries) = read_manifest(runs) else {
        println!("one condition only: no comparison");
        return;
    };
    let dir = out.join("comparison");
    let result = compare(
        entries,
        CalibrationOverride::default(),
        &Filters::default(),
        &AnalysisOptions::default(),
        2020,
    )
    .and_then(|c| write_comparison(&c, runs, &dir).map(|_| c));
    match result {
        Ok(c) => {
            for w in &c.warnings {
                println!("warning: {w}");
            }
            println!("comparison: {}", dir.join("report.html").display());
        }
        Err(e) => println!("warning: no comparison: {e}"),
    }
}
