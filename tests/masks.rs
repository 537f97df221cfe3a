//! Tracking from the user's own label masks (`caravan track --masks`): the masks' objects are
//! measured as they are, on the recording's intensities, and refused with one line when they
//! do not fit the recording. Checked against the synthetic truth that drew them and, in CI,
//! by scikit-image's regionprops on the same masks; the run exported in the Cell Tracking
//! Challenge's layout is validated and scored by py-ctcmetrics.

mod common;
use common::{caravan, ci_python, run_python};
use std::path::Path;

fn ok(out: std::process::Output) -> String {
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).unwrap()
}

fn arg(p: &Path) -> String {
    p.to_str().unwrap().to_string()
}

#[test]
fn truth_masks_give_the_truth_and_bad_masks_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let synth = |name: &str, size: &str, frames: &str| {
        ok(caravan(&[
            "synth",
            "-o",
            &arg(&d.join(name)),
            "--size",
            size,
            "--frames",
            frames,
            "--seed",
            "5",
        ]));
    };
    synth("syn", "256x256", "12");
    let (recording, masks) = (d.join("syn/recording.tif"), d.join("syn/truth_labels.tif"));
    let out = ok(caravan(&[
        "track",
        &arg(&recording),
        "--masks",
        &arg(&masks),
        "-o",
        &arg(&d.join("run")),
        "--labels",
        "--no-movie",
        "--no-analysis",
    ]));
    assert!(out.contains("mask objects"), "{out}");
    ok(caravan(&[
        "export",
        &arg(&d.join("run")),
        "--to",
        "ctc",
        "-o",
        &arg(&d.join("ctc")),
    ]));
    let track_file = std::fs::read_to_string(d.join("ctc/res_track.txt")).unwrap();
    assert!(d.join("ctc/mask000.tif").exists() && d.join("ctc/mask011.tif").exists());
    assert!(track_file.lines().all(|l| l.split(' ').count() == 4), "{track_file}");
    // inspect recognises the result layout, and a ground-truth folder (TRA/ with its track
    // file and masks).
    let said = ok(caravan(&["inspect", &arg(&d.join("ctc"))]));
    let tracks = track_file.lines().count();
    assert!(
        said.contains("Cell Tracking Challenge, result") && said.contains(&format!("12 track masks, {tracks} tracks")),
        "{said}"
    );
    std::fs::create_dir_all(d.join("gt/TRA")).unwrap();
    std::fs::write(d.join("gt/TRA/man_track.txt"), "1 0 0 0\n2 0 0 0\n").unwrap();
    std::fs::copy(d.join("ctc/mask000.tif"), d.join("gt/TRA/man_track000.tif")).unwrap();
    let said = ok(caravan(&["inspect", &arg(&d.join("gt"))]));
    assert!(
        said.contains("ground truth") && said.contains("1 track masks, 2 tracks"),
        "{said}"
    );
    std::fs::write(d.join("gt/TRA/man_track.txt"), "1 0 x 0\n").unwrap();
    let bad = caravan(&["inspect", &arg(&d.join("gt"))]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("line 1: expected four whole numbers"));
    // The truth's own masks reproduce the truth (construction: the synthetic truth drew them):
    // every nucleus found, linked as the truth links it.
    ok(caravan(&[
        "score",
        "--truth",
        &arg(&d.join("syn")),
        "--tracks",
        &arg(&d.join("run")),
        "-o",
        &arg(&d.join("score.json")),
    ]));
    let score: serde_json::Value = serde_json::from_slice(&std::fs::read(d.join("score.json")).unwrap()).unwrap();
    let s = &score["score"];
    assert_eq!(s["detection_f1"].as_f64(), Some(1.0), "{s}");
    assert_eq!(s["clear_mot"]["mota"].as_f64(), Some(1.0));
    let record: serde_json::Value = serde_json::from_slice(&std::fs::read(d.join("run/run.json")).unwrap()).unwrap();
    assert_eq!(record["parameters"]["diameter"]["source"], "masks");
    assert!(record["input"]["masks"].as_str().unwrap().ends_with("truth_labels.tif"));
    // The masks alone, without a recording: the same objects, measured without intensities
    // (empty cells).
    ok(caravan(&[
        "track",
        "--masks",
        &arg(&masks),
        "-o",
        &arg(&d.join("alone")),
        "--no-movie",
        "--no-analysis",
    ]));
    let alone = std::fs::read_to_string(d.join("alone/detections.csv")).unwrap();
    let with = std::fs::read_to_string(d.join("run/detections.csv")).unwrap();
    assert_eq!(alone.lines().count(), with.lines().count());
    assert!(alone
        .lines()
        .skip(1)
        .all(|l| l.split(',').nth(9) == Some("") && l.split(',').nth(10) == Some("")));
    // Masks of another size or length: one line naming the masks, exit 2, nothing written.
    synth("small", "128x256", "12");
    synth("short", "256x256", "8");
    for (name, problem) in [("small", "masks are 128x256"), ("short", "8 mask frames")] {
        let out_dir = d.join(format!("bad_{name}"));
        let bad = caravan(&[
            "track",
            &arg(&recording),
            "--masks",
            &arg(&d.join(name).join("truth_labels.tif")),
            "-o",
            &arg(&out_dir),
        ]);
        let stderr = String::from_utf8_lossy(&bad.stderr);
        assert_eq!(bad.status.code(), Some(2), "{stderr}");
        assert!(
            stderr.contains(problem) && stderr.trim().lines().count() == 1,
            "{stderr}"
        );
        assert!(!out_dir.exists());
    }
    // Labels need not be consecutive: two square objects labelled 7 and 60000 in a 16-bit
    // stack of 3 frames (and the recording cut to match) are two detections per frame.
    let odd = d.join("odd.tif");
    let labels = |_: usize| -> caravan::Result<Vec<u16>> {
        Ok((0..64 * 64)
            .map(|i| {
                let (x, y) = (i % 64, i / 64);
                if (10..16).contains(&x) && (10..16).contains(&y) {
                    7
                } else if (40..46).contains(&x) && (30..38).contains(&y) {
                    60000
                } else {
                    0
                }
            })
            .collect())
    };
    let none = caravan::stack::write::TiffCompression::None;
    caravan::stack::write::write_stack::<u16, _>(&odd, 64, 64, 3, none, None, labels).unwrap();
    let plain = d.join("plain.tif");
    caravan::stack::write::write_stack::<u16, _>(&plain, 64, 64, 3, none, None, |_| Ok(vec![100u16; 64 * 64])).unwrap();
    ok(caravan(&[
        "track",
        &arg(&plain),
        "--masks",
        &arg(&odd),
        "-o",
        &arg(&d.join("odd_run")),
        "--no-movie",
        "--no-analysis",
    ]));
    let detections = std::fs::read_to_string(d.join("odd_run/detections.csv")).unwrap();
    let areas: Vec<&str> = detections
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(7).unwrap())
        .collect();
    assert_eq!(areas, ["36", "48", "36", "48", "36", "48"], "{detections}");
    let Some(python) = ci_python() else { return };
    run_python(&python, "check_masks.py", &[&arg(&masks), &arg(&d.join("run"))]);
    run_python(&python, "check_masks.py", &[&arg(&masks), &arg(&d.join("alone"))]);
    run_python(
        &python,
        "check_ctc.py",
        &["export", &arg(&d.join("syn")), &arg(&d.join("ctc")), &arg(d)],
    );
}
