//! `caravan compare MANIFEST.csv`: conditions compared with replicates as the unit.

use super::analyze::AnalysisArgs;
use caravan::analyze::compare::{compare, read_manifest, read_manifest_entries};
use caravan::analyze::factor::{against_factor, factor_values};
use caravan::reports::write_comparison;
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct CompareArgs {
    /// CSV with columns path, condition, replicate (others are kept as labels); paths are
    /// relative to the manifest's folder.
    manifest: PathBuf,
    /// Output folder (default: NAME_comparison/ beside the manifest).
    #[arg(short, long)]
    output: Option<PathBuf>,
    /// Replace an earlier comparison in the output folder.
    #[arg(long)]
    force: bool,
    /// Seed of the bootstrap.
    #[arg(long, default_value_t = 2020)]
    seed: u64,
    /// A numeric manifest column (e.g. lane_width_um): every statistic's replicate means
    /// against it, a quadratic fit and where it peaks (factor.csv); one condition is enough.
    #[arg(long)]
    by: Option<String>,
    #[command(flatten)]
    analysis: AnalysisArgs,
}

pub fn run(args: CompareArgs) -> Result<()> {
    let dir = args.output.clone().unwrap_or_else(|| {
        let stem = args
            .manifest
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        args.manifest.with_file_name(format!("{stem}_comparison"))
    });
    if !args.force && dir.join("summary.json").exists() {
        return Err(Error::input(
            &dir,
            "holds an earlier comparison (summary.json); choose another folder or give --force",
        ));
    }
    let entries = match &args.by {
        Some(_) => read_manifest_entries(&args.manifest)?,
        None => read_manifest(&args.manifest)?,
    };
    let first = caravan::analyze::table::read_tracks(&entries[0].path, args.analysis.calibration())?;
    let calibrated =
        (first.units.length == caravan::analyze::table::LengthUnit::Micrometre).then_some(first.units.length_per_px);
    let (options, filters) = args.analysis.resolve(calibrated)?;
    let mut c = compare(entries, args.analysis.calibration(), &filters, &options, args.seed)?;
    if let Some(column) = &args.by {
        let values = factor_values(&c, column, &args.manifest)?;
        c.factor = Some(against_factor(&c, column, &values, args.seed));
    }
    write_comparison(&c, &args.manifest, &dir)?;
    for d in &c.differences {
        println!(
            "{} {} vs {}: difference {:.4} (95% CI {:.4} to {:.4}), Mann-Whitney p on {} vs {} replicates = {}",
            d.statistic,
            d.condition,
            d.reference,
            d.difference,
            d.ci95.0,
            d.ci95.1,
            d.replicates.1,
            d.replicates.0,
            d.mann_whitney_p
                .map(|p| format!("{p:.4}"))
                .unwrap_or_else(|| "–".into())
        );
    }
    for f in c.factor.iter().flat_map(|f| &f.fits) {
        let peak = match (f.peak, f.peak_ci95) {
            (Some(p), Some(i)) => format!("peaks at {p:.4} (95% CI {:.4} to {:.4})", i.low, i.high),
            _ => "no peak inside the range".into(),
        };
        println!(
            "{} against {}: {peak}; {:.0}% of resamples peak inside the range{}",
            f.statistic,
            args.by.as_deref().unwrap_or_default(),
            100.0 * f.share_with_peak,
            if f.optimum_supported {
                ": an optimum"
            } else {
                ": no optimum claimed"
            }
        );
    }
    for w in &c.warnings {
        println!("warning: {w}");
    }
    println!(
        "wrote {} (report.html, comparison.csv, replicates.csv, summary.json)",
        dir.display()
    );
    Ok(())
}
