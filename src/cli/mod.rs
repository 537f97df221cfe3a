//! Argument parsing and the mapping of errors to one-line messages and exit codes.
//! Exit codes: 0 done; 1 done, but the run's verdict is `failed`; 2 bad input or parameters;
//! 3 an output could not be written.

mod analyze;
mod batch;
mod compare;
mod demo;
mod export;
mod inspect;
mod join;
mod lookalike;
mod param_file;
mod preview;
mod review;
mod score;
mod segment;
mod synth;
mod track;
mod workflow;

use caravan::params::{parse_pixel_size_um, parse_seconds, BackgroundMethod, Length, SegmentParams, ThresholdMethod};
use caravan::pipeline::DiameterSource;
use caravan::stack::{OpenOptions, Stack, ZMode};
use caravan::verdict::Verdict;
use caravan::Result;
use clap::{Args, CommandFactory, FromArgMatches, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

#[derive(Parser)]
#[command(
    name = "caravan",
    after_help = "Any command also takes --params FILE.toml: its options from a file (keys as the long options); the command line wins.",
    version,
    about = "Segment and track fluorescent nuclei in time-lapse TIFF recordings (research software)"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Describe a recording: size, sample type, compression, calibration, typical nucleus size.
    Inspect(inspect::InspectArgs),
    /// Write one frame with its segmentation outlines as a PNG, for tuning parameters.
    Preview(preview::PreviewArgs),
    /// Segment every frame and write detections.csv and run.json.
    Segment(segment::SegmentArgs),
    /// Segment every frame and link nuclei into tracks (tracks.csv, per_track.csv, run.json).
    Track(track::TrackArgs),
    /// Write a Snakemake workflow (Snakefile, config.json) that runs a manifest on a cluster.
    Workflow(workflow::WorkflowArgs),
    /// Join shards from `segment --frames` into tracks, tables and the QC movie.
    Join(join::JoinArgs),
    /// Write a synthetic recording with ground truth.
    Synth(synth::SynthArgs),
    /// Migration statistics of a run or any tracks CSV: tables, summary.json, report.html.
    Analyze(analyze::AnalyzeArgs),
    /// Track every recording of a manifest (path, condition, replicate), then compare them.
    Batch(batch::BatchArgs),
    /// Compare conditions from a manifest (path, condition, replicate), replicates as the unit.
    Compare(compare::CompareArgs),
    /// Compare tracks with ground truth: detection, TRA/DET, MOTA/MOTP, links, divisions.
    Score(score::ScoreArgs),
    /// Synthesize a recording, track it, and score the result against the truth.
    Demo(demo::DemoArgs),
    /// Write a run in another layout (the Cell Tracking Challenge's result layout).
    Export(export::ExportArgs),
    /// The accuracy to expect on a run's recording: look-alikes with its statistics and a truth.
    Lookalike(lookalike::LookalikeArgs),
    /// Write the review page of a finished run (review/index.html: scrub, zoom, click tracks).
    Review(review::ReviewArgs),
}

/// Runs the command line and returns the process exit code.
pub fn run() -> i32 {
    let args = match param_file::expand(std::env::args_os().collect()) {
        Ok(a) => a,
        Err(e) => {
            eprintln!("caravan: {e}");
            return e.exit_code();
        }
    };
    // A later occurrence of an option wins, so the command line overrides a parameter file.
    let mut command = Cli::command();
    let names: Vec<String> = command.get_subcommands().map(|s| s.get_name().to_string()).collect();
    for name in names {
        command = command.mut_subcommand(name, |s| s.args_override_self(true));
    }
    let cli = match Cli::from_arg_matches(&command.get_matches_from(args)) {
        Ok(c) => c,
        Err(e) => e.exit(),
    };
    let done = |r: Result<()>| r.map(|()| Completion::Done);
    let result = match cli.command {
        Command::Inspect(a) => done(inspect::run(a)),
        Command::Preview(a) => done(preview::run(a)),
        Command::Segment(a) => segment::run(a),
        Command::Track(a) => track::run(a),
        Command::Synth(a) => done(synth::run(a)),
        Command::Join(a) => join::run(a),
        Command::Score(a) => done(score::run(a)),
        Command::Analyze(a) => done(analyze::run(a)),
        Command::Compare(a) => done(compare::run(a)),
        Command::Batch(a) => batch::run(a),
        Command::Workflow(a) => done(workflow::run(a)),
        Command::Review(a) => done(review::run(a)),
        Command::Lookalike(a) => done(lookalike::run(a)),
        Command::Demo(a) => done(demo::run(a)),
        Command::Export(a) => done(export::run(a)),
    };
    match result {
        Ok(Completion::Done) => 0,
        Ok(Completion::VerdictFailed) => VERDICT_FAILED_EXIT,
        Err(e) => {
            eprintln!("caravan: {e}");
            e.exit_code()
        }
    }
}

/// Exit code of a run that wrote its outputs but whose verdict is `failed`.
pub const VERDICT_FAILED_EXIT: i32 = 1;

/// How a command that judges its run ended (errors aside).
pub(crate) enum Completion {
    /// Outputs written; the verdict is ok or doubtful (or there is none).
    Done,
    /// Outputs written, but the verdict is failed.
    VerdictFailed,
}

impl Completion {
    /// The completion of a run with this verdict.
    pub(crate) fn of(verdict: Verdict) -> Completion {
        if verdict == Verdict::Failed {
            Completion::VerdictFailed
        } else {
            Completion::Done
        }
    }
}

#[derive(Clone, Copy, ValueEnum)]
enum ZChoice {
    /// Refuse stacks with several Z planes.
    Refuse,
    /// Maximum-intensity projection over Z.
    Max,
}

/// How to open a recording.
#[derive(Args, Clone)]
struct InputArgs {
    /// A TIFF/BigTIFF stack or a folder of single-frame TIFFs (`track --masks` may go
    /// without one).
    input: Option<PathBuf>,
    /// Channel to read (0-based) when the recording has several.
    #[arg(long)]
    channel: Option<usize>,
    /// What to do with several Z planes per time point.
    #[arg(long, value_enum, default_value = "refuse")]
    z: ZChoice,
    /// Pixel size (e.g. 0.65um, 650nm); wins over the file's metadata.
    #[arg(long, value_parser = parse_pixel_size_um)]
    pixel_size: Option<f64>,
    /// Frame interval (e.g. 300s, 5min); wins over the file's metadata.
    #[arg(long, value_parser = parse_seconds)]
    interval: Option<f64>,
    /// Refuse frames that would decode to more than this many MiB (guards against damaged
    /// headers and decompression bombs).
    #[arg(long, default_value_t = 2048)]
    max_frame_mb: u64,
}

impl InputArgs {
    /// The recording's path as given.
    fn path(&self) -> Result<&std::path::Path> {
        self.input.as_deref().ok_or_else(|| {
            caravan::Error::parameter(
                "INPUT",
                "",
                "give a recording: a TIFF stack or a folder of single-frame TIFFs",
            )
        })
    }

    fn open(&self) -> Result<Stack> {
        Stack::open(self.path()?, &self.options())
    }

    fn options(&self) -> OpenOptions {
        OpenOptions {
            channel: self.channel,
            z: match self.z {
                ZChoice::Refuse => ZMode::Refuse,
                ZChoice::Max => ZMode::Max,
            },
            max_frame_bytes: self.max_frame_mb.saturating_mul(1 << 20),
            pixel_size_um: self.pixel_size,
            frame_interval_s: self.interval,
        }
    }
}

/// Segmentation parameters; unset ones are derived from the diameter.
#[derive(Args, Clone)]
pub(crate) struct SegmentationArgs {
    /// Typical nucleus diameter (e.g. 14px or 9um); estimated from the data when not given.
    #[arg(long)]
    diameter: Option<Length>,
    /// Threshold rule: otsu, triangle, li, or a fixed number.
    #[arg(long, default_value = "otsu")]
    threshold: ThresholdMethod,
    /// Background removal: tophat or none.
    #[arg(long, default_value = "tophat")]
    background: BackgroundMethod,
    /// Gaussian smoothing sigma in px (default: diameter/10, at least 1).
    #[arg(long)]
    smoothing: Option<f64>,
    /// Smallest seed dynamic in px of the intensity-weighted distance map: smaller splits more (default: 0.01 x diameter, at least 0.1; raised by the frame's noise).
    #[arg(long)]
    seed_h: Option<f64>,
    /// Smallest object kept, px (default: 20% of a disc of the diameter).
    #[arg(long)]
    min_area: Option<f64>,
    /// Largest object kept, px (default: 5 discs of the diameter).
    #[arg(long)]
    max_area: Option<f64>,
}

impl SegmentationArgs {
    /// Resolves the diameter (estimating it if needed) and builds validated parameters.
    pub(crate) fn resolve(&self, stack: &mut Stack) -> Result<(DiameterSource, SegmentParams)> {
        let diameter = caravan::pipeline::resolve_diameter(stack, self.diameter, &|d| self.params_for(d))?;
        let p = self.params_for(diameter.px());
        p.validate()?;
        Ok((diameter, p))
    }

    /// The segmentation parameters at diameter `d`: the defaults for it, with every option the
    /// user gave.
    fn params_for(&self, d: f64) -> SegmentParams {
        let mut p = SegmentParams::for_diameter(d);
        p.threshold = self.threshold;
        p.background = self.background;
        if let Some(v) = self.smoothing {
            p.smoothing_sigma_px = v;
        }
        if let Some(v) = self.seed_h {
            p.seed_h_px = v;
        }
        if let Some(v) = self.min_area {
            p.min_area_px = v;
        }
        if let Some(v) = self.max_area {
            p.max_area_px = v;
        }
        p
    }
}

/// What every whole-recording run needs: the input, the output folder, label output and the
/// segmentation parameters.
#[derive(Args, Clone)]
struct RunArgs {
    #[command(flatten)]
    input: InputArgs,
    /// Output folder.
    #[arg(short, long)]
    output: PathBuf,
    /// Also write labels.tif, one 32-bit label image per frame.
    #[arg(long)]
    labels: bool,
    /// Replace the outputs of an earlier run in the output folder.
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    segmentation: SegmentationArgs,
}

impl RunArgs {
    /// Whether no recording was given (`track --masks` alone).
    fn has_no_recording(&self) -> bool {
        self.input.input.is_none()
    }

    /// Opens the recording and resolves the segmentation parameters (refusing bad ones before
    /// any long work starts).
    fn start(&self) -> Result<(Stack, DiameterSource, SegmentParams)> {
        caravan::pipeline::check_output_dir(&self.output, self.force)?;
        let mut stack = self.input.open()?;
        let (diameter, params) = self.segmentation.resolve(&mut stack)?;
        Ok((stack, diameter, params))
    }

    /// As [`RunArgs::start`] for a run whose segmentation comes from `masks`: they are checked
    /// against the recording, and the diameter (unless given) is measured from them. Without
    /// a recording the masks stand in for it (measured without intensities).
    fn start_with_masks(&self, masks: &std::path::Path) -> Result<(Stack, DiameterSource, SegmentParams)> {
        caravan::pipeline::check_output_dir(&self.output, self.force)?;
        let stack = match self.input.input {
            Some(_) => self.input.open()?,
            None => Stack::open(masks, &self.input.options())?,
        };
        let mut mask_stack = caravan::segment::masks::open_masks(masks, stack.info())?;
        let diameter = match self.segmentation.diameter {
            Some(d) => DiameterSource::Given {
                px: d.to_pixels("--diameter", stack.info().calibration.pixel_size_um)?,
            },
            None => {
                let (px, objects) = caravan::segment::masks::diameter_from_masks(&mut mask_stack)?;
                DiameterSource::Masks { px, objects }
            }
        };
        let params = self.segmentation.params_for(diameter.px());
        params.validate()?;
        Ok((stack, diameter, params))
    }
}

/// Parses `A..B` (whole numbers, A < B) for the option `name`.
pub(crate) fn half_open_range(name: &str, text: &str) -> Result<(usize, usize)> {
    let bad = || caravan::Error::parameter(name, text, "expected A..B with whole numbers A < B");
    let (a, b) = text.split_once("..").ok_or_else(bad)?;
    let (a, b): (usize, usize) = (
        a.trim().parse().map_err(|_| bad())?,
        b.trim().parse().map_err(|_| bad())?,
    );
    if a >= b {
        return Err(bad());
    }
    Ok((a, b))
}

/// Prints the run's verdict first (with each finding's reason and fix), then what it
/// produced, its warnings, and where it went.
/// The verdict line and one line per finding, as every run's summary begins.
pub(crate) fn print_verdict(verdict: &caravan::verdict::RunVerdict) {
    println!("verdict: {}", verdict.verdict.word());
    for f in &verdict.findings {
        println!("  {}: {} (fix: {})", f.level.word(), f.reason, f.fix);
    }
}

fn print_summary(run: &caravan::pipeline::RunOutcome) {
    print_verdict(&run.verdict);
    let tracks = match &run.resolution {
        Some(r) => format!(
            ", {} tracks ({} gaps closed, {} shared objects split, {} divisions)",
            run.tracks.len(),
            r.gaps_closed,
            r.shared_objects_split,
            r.divisions.len()
        ),
        None => String::new(),
    };
    println!(
        "{} frames, {} detections{tracks}, diameter {}",
        run.frames.len(),
        run.detections(),
        describe_diameter(&run.diameter)
    );
    for w in &run.warnings {
        println!("warning: {}", w.message());
    }
    println!("wrote {}", run.dir.display());
    if run.review.is_some() {
        println!("review page: {}", run.dir.join("review").join("index.html").display());
    }
}

fn describe_diameter(d: &DiameterSource) -> String {
    match d {
        DiameterSource::Given { px } => format!("{px:.1} px (given)"),
        DiameterSource::Masks { px, objects } => format!("{px:.1} px (median of {objects} mask objects)"),
        DiameterSource::Estimated(e) => {
            let confidence = serde_json::to_value(e.confidence)
                .ok()
                .and_then(|v| v.as_str().map(String::from))
                .unwrap_or_default();
            let why = if e.reasons.is_empty() {
                String::new()
            } else {
                format!(": {}", e.reasons.join("; "))
            };
            format!("{:.1} px (estimated, {confidence} confidence{why})", e.px)
        }
    }
}
