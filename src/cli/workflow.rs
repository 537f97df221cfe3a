//! `caravan workflow MANIFEST.csv -o DIR`: a Snakemake workflow (Snakefile and config.json)
//! that segments every recording in frame shards, links each recording, and compares the
//! conditions, for a lab's cluster with its usual executor profile. The results land where
//! `caravan batch` puts them, and are identical to its.

use super::track::LinkingArgs;
use super::SegmentationArgs;
use caravan::analyze::compare::read_manifest_entries;
use caravan::workflow::{write_workflow, WorkflowPlan};
use caravan::{Error, Result};
use clap::{Args, Parser};
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

pub fn run(args: WorkflowArgs) -> Result<()> {
    if args.shard_frames == 0 {
        return Err(Error::parameter("--shard-frames", 0, "must be at least 1"));
    }
    let no_analysis = check_flags(&args)?;
    let entries = read_manifest_entries(&args.manifest)?;
    let caravan = std::env::current_exe().map_err(|e| Error::output(Path::new("caravan"), e))?;
    let plan = WorkflowPlan {
        entries: &entries,
        shard_frames: args.shard_frames,
        segment_args: &args.segment_args,
        link_args: &args.link_args,
        compare: !no_analysis,
        caravan,
    };
    let snakefile = write_workflow(&plan, &args.output)?;
    let out = snakefile.parent().unwrap_or(Path::new("."));
    println!(
        "wrote {} for {} recordings; run: snakemake --cores 2 --snakefile {} --directory {}",
        snakefile.display(),
        entries.len(),
        snakefile.display(),
        out.display()
    );
    Ok(())
}
