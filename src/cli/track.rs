//! `caravan track FILE -o DIR`: segment every frame and link the nuclei into tracks.

use super::{print_summary, Completion, RunArgs};
use caravan::link::{Divisions, LinkOptions, Prediction};
use caravan::params::Length;
use caravan::pipeline::{run_recording, RunOptions};
use caravan::render::movie::MovieOptions;
use caravan::render::review::ReviewOptions;
use caravan::{Error, Result};
use clap::Args;

/// Linking, movie and analysis options, shared by `track` and `join`.
#[derive(Args, Clone)]
pub struct LinkingArgs {
    /// Longest step between frames (e.g. 8px or 5um; default: measured from the recording's
    /// confident links, at least 0.6 x diameter).
    #[arg(long)]
    max_step: Option<Length>,
    /// Constant-velocity motion prediction: on or off.
    #[arg(long, default_value = "on")]
    prediction: Prediction,
    /// Longest run of missing frames that gap closing may bridge (0 switches gap closing off).
    #[arg(long, default_value_t = 2)]
    max_gap: usize,
    /// Division detection: on or off.
    #[arg(long, default_value = "on")]
    divisions: Divisions,
    /// Longest side of the QC movie in px (larger recordings are downscaled).
    #[arg(long, default_value_t = 512)]
    qc_size: usize,
    /// Put every k-th frame in the QC movie (for long recordings).
    #[arg(long, default_value_t = 1)]
    qc_every: usize,
    /// At most this many frames in the QC movie, sampled evenly (0: every frame; the review
    /// page always has every frame).
    #[arg(long, default_value_t = caravan::params::DEFAULT_MOVIE_FRAMES)]
    qc_frames: usize,
    /// Skip the QC movie and contact sheet.
    #[arg(long)]
    no_movie: bool,
    /// Longest side of the review page's frames in px (full resolution is kept for the
    /// moments worth a look and some frames besides).
    #[arg(long, default_value_t = 512)]
    review_size: usize,
    /// Skip the review page (review/index.html).
    #[arg(long)]
    no_review: bool,
    /// Skip the migration analysis (analysis/ with report.html) that follows tracking.
    #[arg(long)]
    pub no_analysis: bool,
}

impl LinkingArgs {
    /// Checks the options that do not depend on the recording.
    pub fn validate(&self) -> Result<()> {
        LinkOptions {
            max_step_px: None,
            ..self.link_options(None)?
        }
        .validate()?;
        if self.qc_size < 64 || self.qc_every == 0 {
            return Err(Error::parameter(
                "--qc-size/--qc-every",
                format!("{}/{}", self.qc_size, self.qc_every),
                "the movie needs at least 64 px and every >= 1",
            ));
        }
        if self.review_size < 64 {
            return Err(Error::parameter(
                "--review-size",
                self.review_size,
                "the review page needs at least 64 px",
            ));
        }
        Ok(())
    }

    /// The linking options, with `--max-step` in px (a length in µm needs the pixel size).
    fn link_options(&self, pixel_size_um: Option<f64>) -> Result<LinkOptions> {
        let max_step_px = match (self.max_step, pixel_size_um) {
            (Some(step), _) => Some(step.to_pixels("--max-step", pixel_size_um)?),
            (None, _) => None,
        };
        Ok(LinkOptions {
            max_step_px,
            prediction: self.prediction,
            max_gap_frames: self.max_gap,
            divisions: self.divisions,
        })
    }

    /// The run's outputs for a pixel size (for `--max-step` in µm).
    pub fn outputs(&self, pixel_size_um: Option<f64>, replace: bool) -> Result<RunOptions> {
        let link = self.link_options(pixel_size_um)?;
        link.validate()?;
        let movie = MovieOptions {
            max_side_px: self.qc_size,
            every: self.qc_every,
            max_frames: self.qc_frames,
            ..MovieOptions::default()
        };
        let review = ReviewOptions {
            display_side_px: self.review_size,
        };
        Ok(RunOptions {
            labels: false,
            linking: Some(link),
            movie: (!self.no_movie).then_some(movie),
            review: (!self.no_review).then_some(review),
            replace,
            checkpoint_every: None,
            resume: false,
            masks: None,
            masks_without_intensities: false,
            analysis: !self.no_analysis,
        })
    }
}

#[derive(Args)]
pub struct TrackArgs {
    #[command(flatten)]
    run: RunArgs,
    #[command(flatten)]
    linking: LinkingArgs,
    /// Make the run resumable: log progress to the folder's .checkpoint/ every K frames
    /// (0: no checkpoints; not kept with --labels).
    #[arg(long, default_value_t = 25)]
    checkpoint_every: usize,
    /// Continue an interrupted run from its checkpoint (same input and parameters); the
    /// outputs are byte-identical to an uninterrupted run's.
    #[arg(long)]
    resume: bool,
    /// Label masks to use instead of segmenting (a stack, or a folder of label images, one
    /// per frame, the recording's size; any labels, 0 = background). Such a run keeps no
    /// checkpoint.
    #[arg(long)]
    masks: Option<std::path::PathBuf>,
    /// After tracking, make look-alikes of the recording and report the accuracy to expect
    /// on it (RUN/lookalike/, shown in the analysis report).
    #[arg(long)]
    lookalike: bool,
}

pub fn run(mut args: TrackArgs) -> Result<Completion> {
    // Resuming continues a run in the same folder, so its partial outputs are expected.
    args.run.force |= args.resume;
    args.linking.validate()?;
    let (mut stack, diameter, params) = match &args.masks {
        Some(m) => args.run.start_with_masks(m)?,
        None => args.run.start()?,
    };
    let mut outputs = args
        .linking
        .outputs(stack.info().calibration.pixel_size_um, args.run.force)?;
    outputs.labels = args.run.labels;
    outputs.checkpoint_every = (args.checkpoint_every > 0).then_some(args.checkpoint_every);
    outputs.resume = args.resume;
    outputs.masks = args.masks.clone();
    outputs.masks_without_intensities = args.masks.is_some() && args.run.has_no_recording();
    let mut run = run_recording(&mut stack, diameter, &params, &args.run.output, &outputs, "track")?;
    print_summary(&run);
    if args.lookalike {
        let out = args.run.output.join("lookalike");
        super::lookalike::make(&args.run.output, &out, &caravan::lookalike::LookalikeOptions::default())?;
    }
    if !args.linking.no_analysis {
        super::analyze::analyze_run_folder(&args.run.output, run.analysis.take());
    }
    Ok(Completion::of(run.verdict.verdict))
}
