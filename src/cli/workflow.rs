//! `caravan workflow MANIFEST.csv -o DIR`: a Snakemake workflow (Snakefile and config.json)
//! that segments every recording in frame shards, links each recording, and compares the
//! conditions, for a lab's cluster with its usual executor profile. The results land where
//! `caravan batch` puts them, and are identical to its.

use super::track::LinkingArgs;
use super::SegmentationArgs;
use caravan::analyze::compare::read_manifest_entries;
use caravan::batch::{run_folders, write_runs_manifest};
use caravan::output::{ensure_dir, write_atomic};
use caravan::stack::{OpenOptions, Stack};
use caravan::{Error, Result};
use clap::{Args, Parser};
use std::fmt::Write;
use std::path::{Path, PathBuf};

#[derive(Args)]
pub struct WorkflowArgs {
    /// CSV with columns path (a recording), condition, replicate; other columns are labels.
    manifest: PathBuf,
    /// Folder for the Snakefile, config.json and every result.
    #[arg(short, long)]
    output: PathBuf,
    /// Frames per segmentation job.
    #[arg(long, default_value_t = 200)]
    shard_frames: usize,
    /// Segmentation options for every recording, as on the command line (e.g. "--diameter 14px").
    #[arg(long, default_value = "", allow_hyphen_values = true)]
    segment_args: String,
    /// Linking options for every recording (e.g. "--max-gap 1 --no-movie").
    #[arg(long, default_value = "", allow_hyphen_values = true)]
    link_args: String,
}

#[derive(Parser)]
struct SegmentFlags {
    #[command(flatten)]
    _s: SegmentationArgs,
}

#[derive(Parser)]
struct LinkFlags {
    #[command(flatten)]
    l: LinkingArgs,
}

/// Refuses options that the segment or join step would refuse, before anything is written.
fn check_flags(args: &WorkflowArgs) -> Result<bool> {
    let words = |s: &str| s.split_whitespace().map(String::from).collect::<Vec<_>>();
    SegmentFlags::try_parse_from(std::iter::once("segment".to_string()).chain(words(&args.segment_args)))
        .map_err(|e| Error::parameter("--segment-args", &args.segment_args, first_line(&e.to_string())))?;
    let link = LinkFlags::try_parse_from(std::iter::once("link".to_string()).chain(words(&args.link_args)))
        .map_err(|e| Error::parameter("--link-args", &args.link_args, first_line(&e.to_string())))?;
    link.l.validate()?;
    Ok(link.l.no_analysis)
}

fn first_line(s: &str) -> String {
    s.lines()
        .next()
        .unwrap_or_default()
        .trim_start_matches("error: ")
        .to_string()
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

pub fn run(args: WorkflowArgs) -> Result<()> {
    if args.shard_frames == 0 {
        return Err(Error::parameter("--shard-frames", 0, "must be at least 1"));
    }
    let no_analysis = check_flags(&args)?;
    let entries = read_manifest_entries(&args.manifest)?;
    ensure_dir(&args.output)?;
    let out = std::fs::canonicalize(&args.output).map_err(|e| Error::output(&args.output, e))?;
    let folders = run_folders(&entries, Path::new(""));
    write_runs_manifest(
        &entries,
        &folders.iter().map(|f| out.join(f)).collect::<Vec<_>>(),
        &[],
        &out,
    )?;
    let caravan = std::env::current_exe().map_err(|e| Error::output(Path::new("caravan"), e))?;
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
        for a in (0..frames).step_by(args.shard_frames) {
            let b = (a + args.shard_frames).min(frames);
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
                    args.segment_args.replace('{', "{{").replace('}', "}}")
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
                args.link_args.replace('{', "{{").replace('}', "}}")
            ))
        );
        final_inputs.push(py(&format!("{run_dir}/run.json")));
        config.push(serde_json::json!({ "line": entry.line, "input": input, "frames": frames, "run": run_dir }));
    }
    let conditions: std::collections::BTreeSet<&str> = entries.iter().map(|e| e.condition.as_str()).collect();
    let target = if conditions.len() >= 2 && !no_analysis {
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
    let config = serde_json::json!({ "caravan": caravan, "recordings": config, "shard_frames": args.shard_frames });
    write_atomic(
        &out.join("config.json"),
        &serde_json::to_vec_pretty(&config).expect("serialisable"),
    )?;
    write_atomic(&out.join("Snakefile"), snake.as_bytes())?;
    println!(
        "wrote {} for {} recordings; run: snakemake --cores 2 --snakefile {} --directory {}",
        out.join("Snakefile").display(),
        entries.len(),
        out.join("Snakefile").display(),
        out.display()
    );
    Ok(())
}
