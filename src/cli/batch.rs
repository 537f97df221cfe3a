//! `caravan batch MANIFEST.csv -o DIR`: track every recording of a manifest (skipping those
//! already complete, resuming interrupted ones), then compare the conditions.

use super::analyze::analyze_run_folder;
use super::track::LinkingArgs;
use super::{Completion, SegmentationArgs};
use caravan::analyze::compare::{compare, read_manifest, read_manifest_entries};
use caravan::analyze::population::AnalysisOptions;
use caravan::analyze::table::{CalibrationOverride, Filters};
use caravan::batch::{run_each, run_folders, write_runs_manifest};
use caravan::pipeline::run_recording;
use caravan::reports::write_comparison;
use caravan::stack::{OpenOptions, Stack};
use caravan::verdict::Verdict;
use caravan::{Error, Result};
use clap::Args;
use std::path::{Path, PathBuf};

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
    /// Tracked now, with this verdict.
    Done(Verdict),
    /// Complete already, with this verdict (from its run.json).
    Skipped(Verdict),
    /// Could not be tracked.
    Failed(String),
}

impl Outcome {
    /// The run's verdict, when it has one.
    fn verdict(&self) -> Option<Verdict> {
        match self {
            Outcome::Done(v) | Outcome::Skipped(v) => Some(*v),
            Outcome::Failed(_) => None,
        }
    }
}

pub fn run(args: BatchArgs) -> Result<Completion> {
    args.linking.validate()?;
    let entries = read_manifest_entries(&args.manifest)?;
    let folders = run_folders(&entries, &args.output);
    let outcomes: Vec<(usize, Outcome)> = run_each(&entries, args.jobs, |k, entry| {
        let outcome = track_one(&entry.path, &folders[k], &args).unwrap_or_else(|e| Outcome::Failed(e.to_string()));
        report(&entry.path, &folders[k], &outcome);
        outcome
    })
    .into_iter()
    .enumerate()
    .collect();
    let failed = outcomes.iter().filter(|o| matches!(o.1, Outcome::Failed(_))).count();
    let verdicts: Vec<Option<Verdict>> = outcomes.iter().map(|o| o.1.verdict()).collect();
    let runs = write_runs_manifest(&entries, &folders, &verdicts, &args.output)?;
    let judged_failed: Vec<&Path> = outcomes
        .iter()
        .filter(|o| o.1.verdict() == Some(Verdict::Failed))
        .map(|o| folders[o.0].as_path())
        .collect();
    if !judged_failed.is_empty() {
        println!("runs whose verdict is failed (left out of the comparison; see the verdict in their run.json):");
        for f in &judged_failed {
            println!("  {}", f.display());
        }
    }
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
    Ok(if judged_failed.is_empty() {
        Completion::Done
    } else {
        Completion::VerdictFailed
    })
}

fn report(input: &Path, folder: &Path, outcome: &Outcome) {
    match outcome {
        Outcome::Done(v) => println!(
            "tracked {} -> {} (verdict: {})",
            input.display(),
            folder.display(),
            v.word()
        ),
        Outcome::Skipped(v) => println!("already complete: {} (verdict: {})", folder.display(), v.word()),
        Outcome::Failed(e) => println!("failed: {e}"),
    }
}

/// Tracks one recording into `folder`, or finds it complete already.
fn track_one(input: &Path, folder: &Path, args: &BatchArgs) -> Result<Outcome> {
    let record = folder.join("run.json");
    let mut replace = false;
    if record.exists() {
        match caravan::batch::input_changed_since(&record, input)? {
            None => return Ok(Outcome::Skipped(recorded_verdict(&record))),
            Some(why) => {
                println!(
                    "input changed since it was tracked ({why}): tracking {} again",
                    input.display()
                );
                replace = true;
            }
        }
    }
    let resume = !replace && caravan::checkpoint::checkpoint_dir(folder).join("state.json").exists();
    let mut stack = Stack::open(input, &OpenOptions::default())?;
    let (diameter, params) = args.segmentation.resolve(&mut stack)?;
    let mut outputs = args.linking.outputs(stack.info().calibration.pixel_size_um, resume)?;
    outputs.checkpoint_every = Some(25);
    outputs.resume = resume;
    outputs.replace = replace;
    let mut run = run_recording(&mut stack, diameter, &params, folder, &outputs, "track")?;
    if !args.linking.no_analysis {
        analyze_run_folder(folder, run.analysis.take());
    }
    Ok(Outcome::Done(run.verdict.verdict))
}

/// The verdict in a finished run's run.json (`ok` when its record has none or is of another version).
fn recorded_verdict(path: &Path) -> Verdict {
    caravan::record::RunRecord::read(path)
        .ok()
        .and_then(|r| r.verdict)
        .map_or(Verdict::Ok, |v| v.verdict)
}

/// Compares the conditions of the finished runs into `out/comparison`, when there are two or
/// more; a failure here is reported, not fatal (the runs stand on their own).
fn compare_runs(runs: &Path, out: &Path) {
    let Ok(mut entries) = read_manifest(runs) else {
        println!("one condition only: no comparison");
        return;
    };
    entries.retain(|e| e.labels.get("verdict").map(String::as_str) != Some(Verdict::Failed.word()));
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
