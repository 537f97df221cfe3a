//! `caravan score --truth DIR --tracks FILE`: accuracy of tracks against ground truth.

use caravan::output::write_atomic;
use caravan::score::files::score_files;
use caravan::score::tracking::TrackingScore;
use caravan::Result;
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct ScoreArgs {
    /// Ground truth: a folder from `caravan synth` (truth.csv, scenario.json) or a CSV with
    /// track_id, parent_id, frame, x, y.
    #[arg(long)]
    truth: PathBuf,
    /// Tracks to score: a run folder (tracks.csv) or any CSV with track_id, parent_id, frame, x, y.
    #[arg(long)]
    tracks: PathBuf,
    /// Largest distance at which a point matches a true nucleus, px (default: half the
    /// synthetic diameter, else half the median neighbour distance of the truth).
    #[arg(long)]
    match_radius: Option<f64>,
    /// Leave out points this close to the image border, px (default: half the synthetic
    /// diameter when the frame size is known, else 0).
    #[arg(long)]
    border_margin: Option<f64>,
    /// Where to write the scores as JSON (default: score.json beside the tracks).
    #[arg(short, long)]
    output: Option<PathBuf>,
}

pub fn run(args: ScoreArgs) -> Result<()> {
    let (setup, score) = score_files(&args.truth, &args.tracks, args.match_radius, args.border_margin)?;
    let output = args.output.unwrap_or_else(|| {
        setup
            .tracks_csv
            .parent()
            .map(|d| d.join("score.json"))
            .unwrap_or_else(|| PathBuf::from("score.json"))
    });
    let record = serde_json::json!({
        "caravan_version": caravan::VERSION,
        "setup": setup,
        "score": score,
    });
    write_atomic(&output, &serde_json::to_vec_pretty(&record).expect("serialisable"))?;
    print_score(&score);
    println!(
        "matching radius {:.2} px ({}), border margin {:.1} px; wrote {}",
        setup.match_radius_px,
        setup.match_radius_source,
        setup.border_margin_px,
        output.display()
    );
    Ok(())
}

/// The scores as a short plain-text block.
pub fn print_score(s: &TrackingScore) {
    let d = &s.divisions;
    println!(
        "detection  precision {:.3}  recall {:.3}  F1 {:.3}",
        s.detection_precision, s.detection_recall, s.detection_f1
    );
    println!("graph      TRA {:.4}  DET {:.4}  (AOGM {:.1})", s.tra, s.det, s.aogm);
    println!(
        "CLEAR-MOT  MOTA {:.4}  MOTP {:.2} px  identity switches {}",
        s.clear_mot.mota, s.clear_mot.motp_px, s.clear_mot.identity_switches
    );
    println!(
        "links      precision {:.3}  recall {:.3}  ({} of {} true links)",
        s.link_precision, s.link_recall, s.links.correct_links, s.links.true_links
    );
    println!(
        "tracks     mostly tracked {:.3}  mostly lost {:.3}  of {} true tracks",
        s.tracks.mostly_tracked, s.tracks.mostly_lost, s.tracks.reference_tracks
    );
    println!(
        "divisions  {} of {} recovered, {} spurious of {} found",
        d.recovered, d.reference_events, d.spurious, d.found_events
    );
    let (b, m) = (&s.breaks, &s.breaks.by_main_cause);
    println!(
        "breaks     {} tracks not mostly tracked, by main cause: missed detection {}, merged with a neighbour {}, wrong link {}, division missed {}, division spurious {}",
        b.tracks_not_mostly_tracked,
        m.missed_detection,
        m.merged_with_neighbour,
        m.wrong_link,
        m.division_missed,
        m.division_spurious
    );
}
