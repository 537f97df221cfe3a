//! Look-alikes (issue 14): the accuracy they predict against the accuracy measured against
//! the known truth of our own scenes, the estimators against the parameters a recording was
//! made with, the outputs read back by an independent reader, and bad input.

mod common;

use caravan::link::LinkOptions;
use caravan::lookalike::measure::{measure, read_measured};
use caravan::lookalike::{synth_parameters, write_lookalike, LookalikeOptions};
use caravan::score::files::score_files;
use caravan::stack::{OpenOptions, Stack};
use caravan::synth::{PersistentMotion, Scenario, SynthParams};
use common::{caravan, caravan_ok, ci_python, run_python, synth_recording, track_synthetic};
use std::path::{Path, PathBuf};

/// Synthesizes a scene with `caravan synth` and tracks it with `caravan track` and its
/// defaults (as a user runs it), tables only.
fn tracked_scene(dir: &Path, name: &str, synth: &[&str]) -> (PathBuf, PathBuf) {
    let (syn, run) = (dir.join(format!("{name}_syn")), dir.join(format!("{name}_run")));
    let mut args = vec!["--size", "384x384"];
    args.extend(synth);
    let recording = synth_recording(&syn, &args);
    let (recording, out) = (recording.to_str().unwrap(), run.to_str().unwrap());
    caravan_ok(&[
        "track",
        recording,
        "-o",
        out,
        "--no-analysis",
        "--no-movie",
        "--no-review",
    ]);
    (syn, run)
}

#[test]
fn predicted_accuracy_is_within_five_hundredths_of_the_measured_on_five_scenes() {
    // The measured accuracy: the run scored against the scene's own truth (the synthetic
    // engine's positions and lineage). The target, 0.05 for MOTA and detection F1, is the
    // issue's; the scenes are the README's kinds (sparse, crowded, dim, fast, dividing) with
    // their own seeds.
    let dir = tempfile::tempdir().unwrap();
    let scenes: [(&str, &[&str]); 5] = [
        ("sparse", &["--scenario", "dish", "--frames", "30", "--seed", "201"]),
        (
            "crowded",
            &[
                "--scenario",
                "crowded",
                "--nuclei",
                "287",
                "--look",
                "tissue",
                "--brightness-spread",
                "0.25",
                "--separation",
                "0.7",
                "--frames",
                "20",
                "--seed",
                "202",
            ],
        ),
        (
            "dim",
            &[
                "--scenario",
                "dish",
                "--frames",
                "30",
                "--snr",
                "3",
                "--look",
                "tissue",
                "--seed",
                "203",
            ],
        ),
        (
            "fast",
            &[
                "--scenario",
                "dish",
                "--nuclei",
                "47",
                "--speed",
                "11.2",
                "--persistence",
                "5",
                "--frames",
                "20",
                "--seed",
                "204",
            ],
        ),
        (
            "dividing",
            &[
                "--scenario",
                "dish",
                "--frames",
                "30",
                "--divisions",
                "0.01",
                "--seed",
                "205",
            ],
        ),
    ];
    let mut report = Vec::new();
    for (name, synth) in scenes {
        let (syn, run) = tracked_scene(dir.path(), name, synth);
        let (_, real) = score_files(&syn, &run, None, None).unwrap();
        let summary = write_lookalike(&run, &run.join("lookalike"), &LookalikeOptions::default()).unwrap();
        let (f1, mota) = (
            summary.expected.detection_f1.unwrap().mean,
            summary.expected.mota.unwrap().mean,
        );
        report.push(format!(
            "{name}: F1 {:.3} predicted {f1:.3}, MOTA {:.3} predicted {mota:.3}",
            real.detection_f1, real.clear_mot.mota
        ));
        assert!((f1 - real.detection_f1).abs() <= 0.05, "{report:?}");
        assert!((mota - real.clear_mot.mota).abs() <= 0.05, "{report:?}");
    }
    eprintln!("{}", report.join("\n"));
}

#[test]
fn the_estimators_recover_the_parameters_a_recording_was_made_with() {
    // A recording made with known camera, light, size, brightness spread, motion, drift,
    // bleaching and divisions (none of them the engine's defaults), tracked with the defaults;
    // each statistic measured from the run must come back within the tolerance beside it
    // (our own tolerances, set from what the estimator can resolve in 40 frames of ~40 nuclei).
    let mut p = SynthParams::new(Scenario::Dish, 384, 384, 40);
    p.seed = 301;
    p.gain = 2.5;
    p.offset = 300.0;
    p.read_noise = 4.0;
    p.background_photons = 40.0;
    p.signal_photons = 500.0;
    p.vignette = 0.2;
    p.diameter_px = 18.0;
    p.look.brightness_spread = 0.3;
    p.motion = Some(PersistentMotion {
        speed_px_per_frame: 3.0,
        persistence_frames: 4.0,
    });
    p.drift_px_per_frame = 1.5;
    p.bleach_per_frame = 0.01;
    p.division_rate = 0.01;
    let scene = track_synthetic(&p, LinkOptions::default());
    let mut stack = Stack::open(&scene.syn.join("recording.tif"), &OpenOptions::default()).unwrap();
    let m = measure(&mut stack, &read_measured(&scene.run.join("tracks.csv")).unwrap()).unwrap();
    let within = |what: &str, got: f64, want: f64, tolerance: f64| {
        assert!(
            (got - want).abs() <= tolerance,
            "{what}: {got} against {want} ± {tolerance}\n{m:#?}"
        );
    };
    eprintln!("{m:#?}");
    // Photon transfer (Janesick 2007): the variance grows by the gain per grey level.
    within("gain", m.gain, 2.5, 0.25 * 2.5);
    // The background's noise from the same camera: Poisson variance gain·(level − offset)
    // plus the read noise's variance, at the level measured.
    let noise = (2.5 * (m.background_grey - 300.0) + 16.0).sqrt();
    within("background noise", m.background_noise_sd, noise, 0.15 * noise);
    within("diameter", m.diameter_px, 18.0, 0.1 * 18.0);
    within("brightness spread", m.brightness_spread, 0.3, 0.1);
    within("speed", m.speed_px_per_frame, 3.0, 0.2 * 3.0);
    // A persistent random walk's velocities decorrelate by exp(−1/P) per frame (Uhlenbeck &
    // Ornstein 1930): −1/ln C gives P back.
    within("persistence", m.persistence_frames, 4.0, 0.3 * 4.0);
    // The mean velocity of ~40 walks of 40 frames varies by itself: a component's s.d. is
    // 3 / √(π/2) = 2.4 px/frame, about 40 / (2P) = 5 independent values per track, so the mean
    // over 40 tracks has an s.d. of 2.4 / √200 = 0.17; three of them allowed.
    within("drift along x", m.drift_px_per_frame.0, 1.5, 0.5);
    within("drift along y", m.drift_px_per_frame.1, 0.0, 0.5);
    within("bleaching", m.bleach_per_frame, 0.01, 0.004);
    within("divisions", m.division_rate, 0.01, 0.005);
    // The camera and light the look-alike is given, recovered from the statistics.
    let back = synth_parameters(&m, (384, 384), 8);
    within("gain given", back.gain, 2.5, 0.25 * 2.5);
    within("vignette given", back.vignette, 0.2, 0.1);
    within("signal given", back.signal_photons, 500.0, 0.3 * 500.0);
}

#[test]
fn track_with_lookalike_writes_what_an_independent_reader_reads_and_the_report_shows_it() {
    let dir = tempfile::tempdir().unwrap();
    let recording = synth_recording(
        &dir.path().join("syn"),
        &["--size", "256x256", "--frames", "12", "--seed", "7"],
    );
    let run = dir.path().join("run");
    let out = caravan(&[
        "track",
        recording.to_str().unwrap(),
        "-o",
        run.to_str().unwrap(),
        "--lookalike",
    ]);
    let printed = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{printed}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(printed.contains("expected accuracy on this recording"), "{printed}");
    let report = std::fs::read_to_string(run.join("analysis/report.html")).unwrap();
    assert!(report.contains("Expected tracking accuracy on this recording"));
    assert!(run.join("lookalike/report.html").exists());
    let leftovers: Vec<_> = std::fs::read_dir(run.join("lookalike"))
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().starts_with('.'))
        .collect();
    assert!(
        leftovers.is_empty(),
        "the look-alikes' working files are removed: {leftovers:?}"
    );
    let Some(python) = ci_python() else { return };
    run_python(&python, "check_lookalike.py", &[run.to_str().unwrap()]);
}

#[test]
fn lookalike_refuses_a_folder_without_tracks_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let out = caravan(&["lookalike", dir.path().join("nowhere").to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("run.json"), "{err}");
    // A run of `segment` (detections only): named, with what is needed.
    let syn = dir.path().join("syn");
    let recording = synth_recording(&syn, &["--size", "256x256", "--frames", "4"]);
    let seg = dir.path().join("seg");
    caravan_ok(&["segment", recording.to_str().unwrap(), "-o", seg.to_str().unwrap()]);
    let out = caravan(&["lookalike", seg.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("holds no tracks"), "{err}");
    assert!(!seg.join("lookalike").exists(), "nothing written for a refused run");
    // Masks tracked without a recording: no intensities to imitate, said so.
    let masked = dir.path().join("masked");
    let masks = syn.join("truth_labels.tif");
    caravan_ok(&[
        "track",
        "--masks",
        masks.to_str().unwrap(),
        "-o",
        masked.to_str().unwrap(),
        "--no-analysis",
    ]);
    let out = caravan(&["lookalike", masked.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("without a recording") && err.trim().lines().count() == 1,
        "{err}"
    );
}
