//! `caravan analyze RUN_DIR | TRACKS.csv`: migration statistics, tidy tables and a report.

use caravan::analyze::geometry::{Border, Lane};
use caravan::analyze::population::{AnalysisOptions, Confinement};
use caravan::analyze::run::default_output_dir;
use caravan::analyze::table::{CalibrationOverride, Filters, Region};
use caravan::params::{parse_pixel_size_um, parse_seconds};
use caravan::reports::run_analysis;
use caravan::{Error, Result};
use clap::{Args, ValueEnum};
use std::path::PathBuf;

#[derive(Clone, Copy, ValueEnum)]
enum RoiUnits {
    /// Pixels of the recording.
    Px,
    /// Micrometres (needs a calibration).
    Um,
}

/// Filters and choices shared by `analyze` and `compare`.
#[derive(Args, Clone)]
pub struct AnalysisArgs {
    /// Direction of interest in degrees from +x toward +y (forward migration index, V-test).
    #[arg(long, default_value_t = 0.0)]
    axis: f64,
    /// Leave out tracks with fewer points (after the other filters).
    #[arg(long, default_value_t = 10)]
    min_points: usize,
    /// Half-open frame range A..B (frames A to B−1).
    #[arg(long)]
    frames: Option<String>,
    /// Region of interest: rect:x0,y0,x1,y1 or poly:x,y;x,y;x,y (each track keeps its longest
    /// run inside).
    #[arg(long)]
    roi: Option<String>,
    /// Units of --roi, --lane, a poly: --border and --border-zone.
    #[arg(long, value_enum, default_value = "px")]
    roi_units: RoiUnits,
    /// A lane A,B: the band between two lines parallel to --axis, at A and B across it;
    /// writes profiles across and along it (profiles.csv) and the stream per frame.
    #[arg(long)]
    lane: Option<String>,
    /// The stream per frame (stream.csv: width, front, density) without a lane.
    #[arg(long)]
    stream: bool,
    /// A region cells should not enter: a mask TIFF (non-zero pixels) or poly:x,y;x,y;x,y;
    /// writes every approach to it (border.csv) and the response by distance.
    #[arg(long)]
    border: Option<String>,
    /// How near the border counts as an approach (default: one nucleus diameter of the run).
    #[arg(long)]
    border_zone: Option<f64>,
    /// Elapsed frames of the fixed-time directionality ratio.
    #[arg(long, default_value_t = 10)]
    fixed_time_frames: usize,
    /// Lags A..B (frames, inclusive) of the MSD fits (default 1 to a quarter of the median
    /// track span).
    #[arg(long)]
    fit_lags: Option<String>,
    /// Subtract the motion all cells share (the mean displacement per frame) before the
    /// statistics: for stage drift or tissue flow.
    #[arg(long)]
    remove_drift: bool,
    /// Pixel size (e.g. 0.65um); wins over run.json and the CSV.
    #[arg(long, value_parser = parse_pixel_size_um)]
    pixel_size: Option<f64>,
    /// Frame interval (e.g. 5min); wins over run.json and the CSV.
    #[arg(long, value_parser = parse_seconds)]
    interval: Option<f64>,
}

#[derive(Args)]
pub struct AnalyzeArgs {
    /// A run folder (tracks.csv, run.json) or any CSV with track_id, frame, x, y.
    input: PathBuf,
    /// Output folder (default: analysis/ in a run folder, NAME_analysis/ beside a CSV).
    #[arg(short, long)]
    output: Option<PathBuf>,
    /// Replace an earlier analysis in the output folder.
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    analysis: AnalysisArgs,
}

impl AnalysisArgs {
    /// The calibration given on the command line.
    pub fn calibration(&self) -> CalibrationOverride {
        CalibrationOverride {
            pixel_size_um: self.pixel_size,
            frame_interval_s: self.interval,
        }
    }

    /// Options and filters, validated; the region is scaled to analysis units when those are
    /// µm (`length_per_px`), which the caller learns from the input.
    pub fn resolve(&self, length_per_px: Option<f64>) -> Result<(AnalysisOptions, Filters)> {
        if !self.axis.is_finite() {
            return Err(Error::parameter("--axis", self.axis, "must be a number of degrees"));
        }
        let fit_lags = self
            .fit_lags
            .as_deref()
            .map(|t| super::half_open_range("--fit-lags", t))
            .transpose()?;
        if fit_lags.is_some_and(|(a, b)| a == 0 || b - a < 2) {
            return Err(Error::parameter(
                "--fit-lags",
                self.fit_lags.as_deref().unwrap_or_default(),
                "needs lags from 1 on and at least three of them",
            ));
        }
        let scale = match (self.roi_units, length_per_px) {
            (RoiUnits::Px, Some(s)) => s,
            (RoiUnits::Px, None) => 1.0,
            (RoiUnits::Um, Some(_)) => 1.0,
            (RoiUnits::Um, None) if self.uses_roi_units() => {
                return Err(Error::parameter(
                    "--roi-units",
                    "um",
                    "the tracks are not calibrated; give --pixel-size and --interval or use px",
                ))
            }
            (RoiUnits::Um, None) => 1.0,
        };
        let region = self
            .roi
            .as_deref()
            .map(|t| Region::parse(t, scale).map_err(|e| Error::parameter("--roi", t, e)))
            .transpose()?;
        let options = AnalysisOptions {
            axis_deg: self.axis,
            fixed_elapsed_frames: self.fixed_time_frames.max(1),
            fit_lags,
            remove_drift: self.remove_drift,
            confinement: self.confinement(scale, length_per_px.unwrap_or(1.0))?,
            ..AnalysisOptions::default()
        };
        let filters = Filters {
            min_points: self.min_points.max(2),
            frames: self
                .frames
                .as_deref()
                .map(|t| super::half_open_range("--frames", t))
                .transpose()?,
            region,
        };
        Ok((options, filters))
    }
}

impl AnalysisArgs {
    /// Whether any option is given in --roi-units.
    fn uses_roi_units(&self) -> bool {
        self.roi.is_some()
            || self.lane.is_some()
            || self.border_zone.is_some()
            || self.border.as_deref().is_some_and(|b| b.starts_with("poly:"))
    }

    /// The lane, border and stream options, in analysis units (`scale`: analysis units per
    /// unit of --roi-units; `length_per_px`: analysis units per mask pixel).
    fn confinement(&self, scale: f64, length_per_px: f64) -> Result<Confinement> {
        let lane = self
            .lane
            .as_deref()
            .map(|t| Lane::parse(t, scale).map_err(|e| Error::parameter("--lane", t, e)))
            .transpose()?;
        let border = self
            .border
            .as_deref()
            .map(|t| Border::parse(t, scale, length_per_px))
            .transpose()?;
        if let Some(z) = self.border_zone.filter(|z| !(z.is_finite() && *z > 0.0)) {
            return Err(Error::parameter("--border-zone", z, "must be a positive distance"));
        }
        Ok(Confinement {
            lane,
            stream: self.stream,
            border,
            border_zone: self.border_zone.map(|z| z * scale),
        })
    }
}

pub fn run(args: AnalyzeArgs) -> Result<()> {
    let dir = args.output.clone().unwrap_or_else(|| default_output_dir(&args.input));
    if !args.force && dir.join("summary.json").exists() {
        return Err(Error::input(
            &dir,
            "holds an earlier analysis (summary.json); choose another folder or give --force",
        ));
    }
    // The region's scale depends on the calibration, which reading the tracks decides.
    let table = caravan::analyze::table::read_tracks(&args.input, args.analysis.calibration())?;
    let calibrated =
        (table.units.length == caravan::analyze::table::LengthUnit::Micrometre).then_some(table.units.length_per_px);
    let (options, filters) = args.analysis.resolve(calibrated)?;
    let run = run_analysis(&args.input, args.analysis.calibration(), &filters, &options, &dir)?;
    print_analysis(&run);
    Ok(())
}

/// The default analysis of a fresh run folder into its `analysis/`, reported but not fatal:
/// a run whose tracks are all short still has its tracking outputs. `early` is the analysis
/// the run worked out while drawing its movie, if any (the same folder results).
pub fn analyze_run_folder(
    dir: &std::path::Path,
    early: Option<caravan::reports::RunAnalysis>,
) -> Option<caravan::analyze::run::AnalysisRun> {
    let out = default_output_dir(dir);
    let done = match early {
        Some(early) => caravan::reports::run_early_analysis(early, dir, &out),
        None => run_analysis(
            dir,
            CalibrationOverride::default(),
            &Filters::default(),
            &AnalysisOptions::default(),
            &out,
        ),
    };
    match done {
        Ok(run) => {
            println!("report: {}", out.join("report.html").display());
            Some(run)
        }
        Err(e) => {
            println!("warning: no migration analysis: {e}");
            None
        }
    }
}

/// A few headline numbers and where everything went.
pub fn print_analysis(run: &caravan::analyze::run::AnalysisRun) {
    let a = &run.analysis;
    let s = &run.summary;
    let speed = format!("mean_speed_{}", a.units.speed());
    println!(
        "{} of {} tracks analysed ({} and {}); mean speed {:.3} {}/{}, directionality {:.3}",
        a.tracks.len(),
        run.table.tracks.len(),
        a.units.length,
        a.units.time,
        s[&speed]["mean"].as_f64().unwrap_or(f64::NAN),
        a.units.length,
        a.units.time,
        s["directionality_ratio"]["mean"].as_f64().unwrap_or(f64::NAN)
    );
    match a.models.best() {
        Some(f) => {
            let p = &f.parameters;
            let persistence = p
                .persistence
                .map(|pt| format!(", persistence {pt:.3} {}", a.units.time))
                .unwrap_or_default();
            let drift = p
                .drift_speed
                .map(|v| format!(", drift {v:.4} {}/{}", a.units.length, a.units.time))
                .unwrap_or_default();
            println!(
                "motion model (lags {}-{}, by AICc): {}, D = {:.4} {}²/{}{persistence}{drift}",
                a.fit_lags.0,
                a.fit_lags.1,
                f.model.name(),
                p.diffusion,
                a.units.length,
                a.units.time,
            );
        }
        None => println!("motion model: none could be fitted (summary.json says why)"),
    }
    for w in &a.warnings {
        println!("warning: {w}");
    }
    if let Some(s) = &a.stream {
        if let Some(v) = s.front_speed {
            println!(
                "stream: front advances {v:.4} {}/{}, mean width {:.3} {} (stream.csv)",
                a.units.length,
                a.units.time,
                s.means.width.unwrap_or(f64::NAN),
                a.units.length
            );
        }
    }
    if let Some(b) = &a.border {
        println!(
            "border: {} approaches by {} cells, share crossing {:.3} (border.csv)",
            b.approaches.len(),
            b.approaching_cells,
            b.share_crossing.unwrap_or(f64::NAN)
        );
    }
    if let Some(d) = &a.directions {
        println!(
            "directions: mean resultant length {:.3}, Rayleigh p = {:.3e}",
            d.mean_resultant_length, d.rayleigh_p
        );
    }
    println!("wrote {} (report.html, summary.json, tables)", run.dir.display());
}
