//! `caravan score` on the Cell Tracking Challenge's layouts, vertices matched by mask overlap,
//! against an outside implementation of the published evaluation (py-ctcmetrics, in CI): on
//! the exported runs of four synthetic scenes (a dividing dish with dropouts, a dense field,
//! crowded tissue with frequent divisions, a dividing stream) TRA, DET and every AOGM count
//! must agree.

mod common;
use common::{caravan, ci_python, run_python};
use std::path::Path;

fn ok(out: std::process::Output) {
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
}

fn arg(p: &Path) -> String {
    p.to_str().unwrap().to_string()
}

#[test]
fn overlap_scores_agree_with_the_published_evaluation() {
    let Some(python) = ci_python() else { return };
    let dir = tempfile::tempdir().unwrap();
    let scenes = [
        "--scenario dish --divisions 0.01 --dropouts 0.05 --seed 105",
        "--scenario crowded --seed 102",
        "--scenario crowded --look tissue --divisions 0.008 --mitosis-frames 2 --seed 114",
        "--scenario stripe --nuclei 80 --divisions 0.005 --seed 106",
    ];
    for (k, scene) in scenes.iter().enumerate() {
        let d = dir.path().join(format!("scene{k}"));
        let (syn, run, res) = (d.join("syn"), d.join("run"), d.join("res"));
        let mut args = vec![
            "synth",
            "-o",
            syn.to_str().unwrap(),
            "--size",
            "256x256",
            "--frames",
            "20",
        ];
        args.extend(scene.split(' '));
        ok(caravan(&args));
        ok(caravan(&[
            "track",
            &arg(&syn.join("recording.tif")),
            "-o",
            &arg(&run),
            "--labels",
            "--no-movie",
            "--no-analysis",
        ]));
        ok(caravan(&["export", &arg(&run), "--to", "ctc", "-o", &arg(&res)]));
        run_python(
            &python,
            "check_ctc.py",
            &["score", env!("CARGO_BIN_EXE_caravan"), &arg(&syn), &arg(&res), &arg(&d)],
        );
    }
}
