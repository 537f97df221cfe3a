//! Migration statistics end to end: a directed stream and a random-wandering dish from our own
//! synthetic scenarios are told apart, a hand-written tracks CSV is analysed with values
//! derived by hand, and the HTML report opens in a real headless browser without console
//! errors and with every chart present.

mod common;

use caravan::analyze::population::AnalysisOptions;
use caravan::analyze::table::{CalibrationOverride, Filters};
use caravan::link::LinkOptions;
use caravan::reports::run_analysis;
use caravan::synth::{Scenario, SynthParams};
use common::track_synthetic;
use std::path::Path;
use std::process::Command;

/// Analyses `input` with the defaults into `out`.
fn analyse_into(input: &Path, out: &Path) -> caravan::analyze::run::AnalysisRun {
    run_analysis(
        input,
        CalibrationOverride::default(),
        &Filters::default(),
        &AnalysisOptions::default(),
        out,
    )
    .unwrap()
}

fn analyse(run: &Path) -> serde_json::Value {
    let out = run.join("analysis");
    analyse_into(run, &out);
    serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap()
}

#[test]
fn a_directed_stream_and_a_wandering_dish_are_told_apart() {
    // Target: Rayleigh p < 0.01 for the stream; its directionality ratio clearly higher.
    let stream = SynthParams::new(Scenario::Stripe, 384, 256, 30);
    let dish = SynthParams::new(Scenario::Dish, 384, 256, 30);
    let s = track_synthetic(&stream, LinkOptions::default());
    let d = track_synthetic(&dish, LinkOptions::default());
    let (s, d) = (analyse(&s.run), analyse(&d.run));
    let p = |v: &serde_json::Value| {
        v["population"]["directions"]["rayleigh_test"]["p_value"]
            .as_f64()
            .unwrap()
    };
    let ratio = |v: &serde_json::Value| v["population"]["directionality_ratio"]["mean"].as_f64().unwrap();
    eprintln!(
        "stream p {:.3e} ratio {:.3}; dish p {:.3e} ratio {:.3}",
        p(&s),
        ratio(&s),
        p(&d),
        ratio(&d)
    );
    assert!(p(&s) < 0.01);
    assert!(ratio(&s) > ratio(&d) + 0.2);
    // The stream moves along +x (0°): its V-test toward 0° is significant too.
    assert!(s["population"]["v_test"]["p_value"].as_f64().unwrap() < 0.01);
}

/// Tracks of `frames` frames `interval_min` apart, moving +x at 1 µm/min for their first 10 min
/// and back along −x after (0.5 µm pixels), 20 µm apart.
fn out_and_back_csv(path: &Path, tracks: usize, interval_min: f64, frames: usize) {
    let mut text = String::from("track_id,frame,x,y,x_um,y_um,time_s\n");
    for id in 1..=tracks {
        for f in 0..frames {
            let t = f as f64 * interval_min;
            let um = if t <= 10.0 { t } else { 20.0 - t };
            let (x, y) = (20.0 + 2.0 * um, 40.0 * id as f64);
            text.push_str(&format!("{id},{f},{x},{y},{},{},{}\n", x * 0.5, y * 0.5, t * 60.0));
        }
    }
    std::fs::write(path, text).unwrap();
}

#[test]
fn conditions_filmed_at_different_intervals_are_compared_over_the_same_minutes() {
    // Construction: the same motion (out along +x for 10 min, then back) filmed every 1 min
    // and every 2 min. With the fixed time counted in frames (10), the 2-min films were judged
    // over 20 min (directionality 0: out and back) against 10 min (1: straight); in physical
    // time both are judged over the first 10 min (10 and 5 frames): directionality 1 in both,
    // no difference, and a warning that the intervals differ. A 3-min film cannot span 10 min
    // in whole frames and is refused, naming its file.
    let dir = tempfile::tempdir().unwrap();
    let mut manifest = String::from("path,condition,replicate\n");
    for (cond, interval, frames) in [("every1", 1.0, 21), ("every2", 2.0, 11)] {
        for r in 0..3 {
            let name = format!("{cond}_{r}.csv");
            out_and_back_csv(&dir.path().join(&name), 3, interval, frames);
            manifest.push_str(&format!("{name},{cond},{r}\n"));
        }
    }
    std::fs::write(dir.path().join("m.csv"), &manifest).unwrap();
    let compare = |manifest: &Path| {
        let entries = caravan::analyze::compare::read_manifest(manifest).unwrap();
        let filters = Filters {
            min_points: 5,
            ..Filters::default()
        };
        caravan::analyze::compare::compare(
            entries,
            CalibrationOverride::default(),
            &filters,
            &AnalysisOptions::default(),
            1,
        )
    };
    let c = compare(&dir.path().join("m.csv")).unwrap();
    let d = c
        .differences
        .iter()
        .find(|d| d.statistic == "directionality_ratio_at_10_min")
        .expect("the fixed time in minutes");
    assert!(d.difference.abs() < 1e-9, "{}", d.difference);
    for r in &c.replicates["directionality_ratio_at_10_min"] {
        assert!(r.values.iter().all(|v| (v - 1.0).abs() < 1e-9), "{r:?}");
    }
    assert!(
        c.warnings.iter().any(|w| w.starts_with("frame intervals differ")),
        "{:?}",
        c.warnings
    );
    out_and_back_csv(&dir.path().join("every3.csv"), 3, 3.0, 8);
    std::fs::write(dir.path().join("m3.csv"), format!("{manifest}every3.csv,every3,0\n")).unwrap();
    let e = compare(&dir.path().join("m3.csv")).err().unwrap().to_string();
    assert!(
        e.contains("every3.csv") && e.contains("does not divide the 10 min"),
        "{e}"
    );
}

/// Straight tracks at 2 px/frame along +x with 0.5 µm pixels and 1-minute frames: speed
/// 1 µm/min, directionality 1, forward migration index 1 along 0°, MSD(lag n) = n² µm²
/// (ballistic), order parameter 1 (hand-derived).
fn straight_tracks_csv(path: &Path, tracks: usize, speed_px: f64) {
    let mut text = String::from("track_id,frame,x,y,x_um,y_um,time_s\n");
    for id in 1..=tracks {
        for f in 0..12 {
            let (x, y) = (10.0 + speed_px * f as f64, 20.0 * id as f64);
            text.push_str(&format!("{id},{f},{x},{y},{},{},{}\n", x * 0.5, y * 0.5, 60 * f));
        }
    }
    std::fs::write(path, text).unwrap();
}

#[test]
fn a_hand_written_csv_gives_hand_derived_statistics() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("model_output.csv");
    straight_tracks_csv(&csv, 4, 2.0);
    let out = dir.path().join("a");
    let run = analyse_into(&csv, &out);
    let s = &run.summary;
    assert_eq!(run.analysis.units.length.as_str(), "um");
    assert!((s["mean_speed_um_per_min"]["mean"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    assert!((s["directionality_ratio"]["mean"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    assert!((s["forward_migration_index"]["mean"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    assert!((s["order_parameter"]["mean"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    for q in &run.analysis.msd {
        let n = q.lag_frames as f64;
        assert!((q.msd - n * n).abs() < 1e-9, "{q:?}");
    }
    assert!((run.analysis.anomalous_exponent.unwrap() - 2.0).abs() < 1e-9);
    for name in caravan::reports::ANALYSIS_OUTPUTS {
        assert!(out.join(name).exists(), "{name}");
    }
    // neighbour_correlation.csv, read back with the csv crate: the 8 distance bins of one
    // median neighbour distance each (the documented binning), with their pair counts (none
    // here: identical velocities leave no fluctuation to correlate).
    let mut reader = csv::Reader::from_path(out.join("neighbour_correlation.csv")).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header, ["from_um", "to_um", "correlation", "pairs"]);
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 8);
    for (row, bin) in rows.iter().zip(&run.analysis.neighbour_correlation) {
        assert_eq!(row[3].parse::<usize>().unwrap(), bin.pairs);
    }
    // Straight motion has MSD = t² (exponent 2): the persistent random walk does not describe
    // it, and summary.json and the report say so.
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let warnings: Vec<&str> = summary["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .collect();
    assert!(
        warnings.iter().any(|w| w.contains("near 2 (ballistic)")),
        "{warnings:?}"
    );
    let page = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(page.contains("near 2 (ballistic)"));
}

#[test]
fn the_analysis_page_shows_a_path_with_markup_as_text() {
    // Source: the HTML standard's escaping of &, < and > in text. A tracks file whose name
    // holds markup appears escaped on the page, never as a tag.
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("cells <b>&<b> more.csv");
    straight_tracks_csv(&csv, 3, 2.0);
    let out = dir.path().join("a");
    analyse_into(&csv, &out);
    let page = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        page.contains("cells &lt;b&gt;&amp;&lt;b&gt; more.csv"),
        "the name, escaped"
    );
    assert!(!page.contains("<b>&<b>"), "no raw markup from the name");
}

/// Chromium from the distribution (installed by .ci/run); `None` outside CI when absent.
fn chromium() -> Option<String> {
    let path = std::env::var("CARAVAN_CHROMIUM").unwrap_or_else(|_| "/usr/bin/chromium".into());
    if Path::new(&path).exists() {
        return Some(path);
    }
    assert!(std::env::var("CI").is_err(), "CI must provide Chromium at {path}");
    eprintln!("no Chromium at {path}: browser check skipped outside CI");
    None
}

/// Opens `page` headless and returns the DOM after scripts ran, failing on console messages.
fn open_in_browser(browser: &str, page: &Path, profile: &Path) -> String {
    let out = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
            "--virtual-time-budget=3000",
            &format!("--user-data-dir={}", profile.display()),
            "--dump-dom",
            &format!("file://{}", page.display()),
        ])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    let console: Vec<&str> = stderr.lines().filter(|l| l.contains("CONSOLE")).collect();
    assert!(console.is_empty(), "console messages: {console:?}");
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn reports_open_in_a_browser_with_every_chart() {
    let dir = tempfile::tempdir().unwrap();
    let scene = track_synthetic(
        &SynthParams::new(Scenario::Stripe, 256, 192, 20),
        LinkOptions::default(),
    );
    analyse(&scene.run);
    // A hand-written comparison: two conditions of three replicates (straight tracks at two
    // speeds), one file name carrying markup that must show as text.
    let mut manifest = String::from("path,condition,replicate\n");
    for (k, (cond, speed)) in [("slow", 1.0), ("fast", 2.0)].iter().enumerate() {
        for r in 0..3 {
            let name = format!("{cond}{r}<b>.csv");
            straight_tracks_csv(&dir.path().join(&name), 3 + r, *speed + 0.1 * r as f64);
            manifest.push_str(&format!("{name},{cond},{}\n", 10 * k + r));
        }
    }
    std::fs::write(dir.path().join("m.csv"), manifest).unwrap();
    let entries = caravan::analyze::compare::read_manifest(&dir.path().join("m.csv")).unwrap();
    let c = caravan::analyze::compare::compare(
        entries,
        CalibrationOverride::default(),
        &Filters::default(),
        &AnalysisOptions::default(),
        1,
    )
    .unwrap();
    caravan::reports::write_comparison(&c, &dir.path().join("m.csv"), &dir.path().join("cmp")).unwrap();
    let Some(browser) = chromium() else { return };
    // 8 analysis charts plus objects and threshold per frame of the tracking run.
    let dom = open_in_browser(
        &browser,
        &scene.run.join("analysis/report.html"),
        &dir.path().join("p1"),
    );
    // Charts drawn, not placeholders saying a chart could not be drawn (issue 21).
    assert!(
        dom.contains("data-charts=\"10\"") && dom.contains("data-charts-failed=\"0\""),
        "{}",
        &dom[dom.len().saturating_sub(300)..]
    );
    // The tracking run's verdict is the first section (README, "the run's verdict"): this
    // clean stripe is `ok`, as its run.json says.
    let verdict = dom.find("id=\"verdict\"").expect("a verdict section");
    assert!(verdict < dom.find("Population statistics").unwrap());
    assert!(
        dom.contains("Tracking run verdict: ok"),
        "{}",
        &dom[verdict..verdict + 200]
    );
    for id in [
        "trajectories",
        "rose",
        "msd",
        "speed",
        "directionality",
        "order",
        "autocorrelation",
        "neighbours",
        "objects",
        "threshold",
    ] {
        assert!(dom.contains(&format!("id=\"{id}\"")), "{id}");
    }
    assert!(dom.contains("id=\"models\""), "the motion-model table");
    // The conditions' MSD and direction autocorrelation overlaid (2), and one strip chart per
    // compared statistic (6: four per-track ones, the walk's D and P).
    let dom = open_in_browser(&browser, &dir.path().join("cmp/report.html"), &dir.path().join("p2"));
    assert!(
        dom.contains("data-charts=\"8\"") && dom.contains("data-charts-failed=\"0\""),
        "{}",
        &dom[dom.len().saturating_sub(300)..]
    );
    assert!(dom.contains("id=\"curves-0\"") && dom.contains("id=\"curves-1\""));
    // Written for a reader (issue 16): statistics and columns in words, not the CSV's keys.
    for key in [
        "mean_speed_",
        "permutation_p",
        "walk_diffusion",
        "hedges_g",
        "ci95_low",
        "directionality_ratio_at",
    ] {
        assert!(!dom.contains(key), "raw key {key} on the comparison page");
    }
    assert!(dom.contains("Mean speed per track") && dom.contains("p, permutation (Holm-adjusted)"));
    assert!(
        dom.contains("slow0&lt;b&gt;.csv"),
        "file names with markup show as text"
    );
}

#[test]
fn a_run_record_of_another_version_is_not_used_and_the_units_say_so() {
    // A run.json from an earlier version (its link block has other fields; here a record
    // with only a calibration of 2 µm/px) beside hand-written tracks whose columns say 0.5
    // µm/px and 60 s per frame (straight_tracks_csv): the record is not read, the CSV's own
    // calibration is used, and the units say why.
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("tracks.csv");
    straight_tracks_csv(&csv, 3, 2.0);
    let old = r#"{"input": {"stack": {"calibration": {"pixel_size_um": 2.0, "frame_interval_s": 10.0}}}}"#;
    std::fs::write(dir.path().join("run.json"), old).unwrap();
    let table = caravan::analyze::table::read_tracks(dir.path(), CalibrationOverride::default()).unwrap();
    assert!(table.run_record.is_none());
    assert!((table.units.length_per_px - 0.5).abs() < 1e-12, "{:?}", table.units);
    assert!(
        table.units.source.contains("run.json beside the tracks not used"),
        "{}",
        table.units.source
    );
    // Not JSON at all is an error naming the file.
    std::fs::write(dir.path().join("run.json"), "{ cut").unwrap();
    let e = caravan::analyze::table::read_tracks(dir.path(), CalibrationOverride::default()).unwrap_err();
    assert!(e.to_string().contains("run.json"), "{e}");
}

#[test]
fn the_analysis_page_shows_a_run_warning_with_markup_as_text() {
    // Source: the HTML standard's escaping of < and > in text. A run folder whose run.json
    // holds a warning with markup (as a file name in a warning could): the analysis page
    // shows it escaped, never as a tag.
    let mut p = SynthParams::new(Scenario::Dish, 256, 256, 12);
    p.nuclei = 30;
    p.seed = 41;
    let scene = track_synthetic(&p, LinkOptions::default());
    let record_path = scene.run.join("run.json");
    let mut record: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&record_path).unwrap()).unwrap();
    record["warnings"] = serde_json::json!(["frame <script>alert(1)</script> was odd"]);
    std::fs::write(&record_path, record.to_string()).unwrap();
    analyse(&scene.run);
    let page = std::fs::read_to_string(scene.run.join("analysis/report.html")).unwrap();
    assert!(
        page.contains("frame &lt;script&gt;alert(1)&lt;/script&gt; was odd"),
        "escaped"
    );
    assert!(!page.contains("<script>alert(1)"), "no raw markup from the warning");
}
