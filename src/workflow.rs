//! A Snakemake workflow for a manifest of recordings (the library side of `caravan
//! workflow`): one job per frame shard (`caravan segment --frames A..B`), one per recording
//! joining its shards (`caravan join`), and the comparison of the conditions. Its results land
//! where `caravan batch` puts them (`crate::batch::run_folders`) and are identical to its.

use crate::analyze::compare::ManifestEntry;
use crate::batch::{run_folders, write_runs_manifest};
use crate::error::{Error, Result};
use crate::output::{ensure_dir, write_atomic};
use crate::stack::{OpenOptions, Stack};
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// What a workflow runs.
pub struct WorkflowPlan<'a> {
    /// The recordings, from the manifest.
    pub entries: &'a [ManifestEntry],
    /// Frames per segmentation job.
    pub shard_frames: usize,
    /// Segmentation options, as on the command line.
    pub segment_args: &'a str,
    /// Linking options, as on the command line.
    pub link_args: &'a str,
    /// Whether to end with the comparison (when there are two conditions or more).
    pub compare: bool,
    /// The `caravan` binary the jobs run (written into config.json, so a lab can point it
    /// elsewhere on its cluster).
    pub caravan: PathBuf,
}

/// A Python string literal (for the Snakefile), JSON escaping being valid Python.
fn py(s: &str) -> String {
    serde_json::to_string(s).expect("a string")
}

/// A shell word in single quotes, with braces doubled for Snakemake's formatting.
fn sh(s: &str) -> String {
    format!("'{}'", s.replace('\'', "'\\''"))
        .replace('{', "{{")
        .replace('}', "}}")
}

/// Writes `Snakefile`, `config.json` and `runs.csv` into `out` and returns the Snakefile's
/// path.
///
/// # Errors
/// A recording that cannot be opened; outputs not writable.
pub fn write_workflow(plan: &WorkflowPlan, out: &Path) -> Result<PathBuf> {
    let entries = plan.entries;
    ensure_dir(out)?;
    let out = std::fs::canonicalize(out).map_err(|e| Error::output(out, e))?;
    let folders = run_folders(entries, Path::new(""));
    write_runs_manifest(
        entries,
        &folders.iter().map(|f| out.join(f)).collect::<Vec<_>>(),
        &[],
        &out,
    )?;
    // The binary is read from config.json, so a lab can point it elsewhere on its cluster.
    const CARAVAN: &str = "'{CARAVAN}'";
    let mut snake = String::from(
        "# Written by `caravan workflow`: segment each recording in frame shards, join each\n\
         # recording, then compare the conditions. Run with: snakemake --cores N (or a profile).\n\n",
    );
    let mut final_inputs = Vec::new();
    let mut config = Vec::new();
    for (k, (entry, folder)) in entries.iter().zip(&folders).enumerate() {
        let input = std::fs::canonicalize(&entry.path).map_err(|e| Error::input(&entry.path, e.to_string()))?;
        let frames = Stack::open(&input, &OpenOptions::default())?.info().frames;
        let mut shard_dirs = Vec::new();
        for a in (0..frames).step_by(plan.shard_frames) {
            let b = (a + plan.shard_frames).min(frames);
            let dir = format!("shards/{k}/{a}_{b}");
            let _ = write!(
                snake,
                "rule segment_{k}_{a}:\n    output: {}\n    threads: 2\n    shell: {}\n\n",
                py(&format!("{dir}/shard.json")),
                py(&format!(
                    "{} segment {} --frames {a}..{b} -o {} --force {}",
                    CARAVAN,
                    sh(&input.display().to_string()),
                    sh(&dir),
                    plan.segment_args.replace('{', "{{").replace('}', "}}")
                ))
            );
            shard_dirs.push(dir);
        }
        let run_dir = folder.display().to_string();
        let inputs: Vec<String> = shard_dirs.iter().map(|d| py(&format!("{d}/shard.json"))).collect();
        let shards: Vec<String> = shard_dirs.iter().map(|d| sh(d)).collect();
        let _ = write!(
            snake,
            "rule join_{k}:\n    input: [{}]\n    output: {}\n    threads: 2\n    shell: {}\n\n",
            inputs.join(", "),
            py(&format!("{run_dir}/run.json")),
            py(&format!(
                "{} join {} --recording {} -o {} --force {}",
                CARAVAN,
                shards.join(" "),
                sh(&input.display().to_string()),
                sh(&run_dir),
                plan.link_args.replace('{', "{{").replace('}', "}}")
            ))
        );
        final_inputs.push(py(&format!("{run_dir}/run.json")));
        config.push(serde_json::json!({ "line": entry.line, "input": input, "frames": frames, "run": run_dir }));
    }
    let conditions: std::collections::BTreeSet<&str> = entries.iter().map(|e| e.condition.as_str()).collect();
    let target = if conditions.len() >= 2 && plan.compare {
        let _ = write!(
            snake,
            "rule compare:\n    input: [{}]\n    output: \"comparison/summary.json\"\n    shell: {}\n\n",
            final_inputs.join(", "),
            py(&format!("{} compare runs.csv -o comparison --force", CARAVAN))
        );
        vec![py("comparison/summary.json")]
    } else {
        final_inputs
    };
    snake = format!(
        "{}configfile: \"config.json\"\nCARAVAN = config[\"caravan\"]\n\nrule all:\n    input: [{}]\n\n{}",
        &snake[..snake.find("\n\n").map_or(0, |i| i + 2)],
        target.join(", "),
        &snake[snake.find("\n\n").map_or(0, |i| i + 2)..]
    );
    let config =
        serde_json::json!({ "caravan": plan.caravan, "recordings": config, "shard_frames": plan.shard_frames });
    write_atomic(
        &out.join("config.json"),
        &serde_json::to_vec_pretty(&config).expect("serialisable"),
    )?;
    write_atomic(&out.join("Snakefile"), snake.as_bytes())?;
    Ok(out.join("Snakefile"))
}
