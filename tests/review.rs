//! The review page (`RUN/review/`): written by `track` with its defaults, rewritten byte for
//! byte by `caravan review` whatever the thread count, opened in a real browser (Chromium
//! through Selenium, `tests/python/check_review.py`), and refused with one line on bad input.

mod common;

use common::{caravan, caravan_ok, ci_python, run_python, synth_recording};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// A 640 x 480 recording (downscaled 2:1 for display, so frames at full resolution are kept
/// too) with divisions, tracked by the binary with its defaults.
fn tracked_run(dir: &Path) -> PathBuf {
    let args = [
        "--size",
        "640x480",
        "--frames",
        "24",
        "--divisions",
        "0.01",
        "--seed",
        "5",
    ];
    let recording = synth_recording(&dir.join("syn"), &args);
    let run = dir.join("run");
    caravan_ok(&["track", recording.to_str().unwrap(), "-o", run.to_str().unwrap()]);
    run
}

/// Every file of a folder with its bytes.
fn files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut all = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in std::fs::read_dir(&d).unwrap().flatten() {
            let path = entry.path();
            if path.is_dir() {
                stack.push(path);
            } else {
                let name = path.strip_prefix(dir).unwrap().to_string_lossy().into_owned();
                all.insert(name, std::fs::read(&path).unwrap());
            }
        }
    }
    all
}

#[test]
fn the_review_page_is_written_rewritten_identically_and_works_in_a_browser() {
    let dir = tempfile::tempdir().unwrap();
    let run = tracked_run(dir.path());
    let written = files(&run.join("review"));
    // One display frame per recording frame (24), a few at full resolution: at 2:1 the budget
    // is 24 / 4 = 6 full frames (render::review::FullFramePlan).
    let display = written.keys().filter(|k| k.starts_with("frames/")).count();
    let full = written.keys().filter(|k| k.starts_with("full/")).count();
    assert_eq!(display, 24);
    assert!((1..=6).contains(&full), "{full} full frames");
    // JPEG files start with the SOI marker FF D8 (ITU-T T.81, Annex B).
    assert!(written
        .iter()
        .filter(|(k, _)| k.ends_with(".jpg"))
        .all(|(_, b)| b.starts_with(&[0xFF, 0xD8])));

    // `caravan review` on the finished folder, on one thread: the same page, byte for byte.
    std::fs::remove_dir_all(run.join("review")).unwrap();
    let out = common::output_within(
        std::process::Command::new(env!("CARGO_BIN_EXE_caravan"))
            .args(["review", run.to_str().unwrap()])
            .env("RAYON_NUM_THREADS", "1"),
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(
        files(&run.join("review")) == written,
        "caravan review wrote another page"
    );

    let Some(python) = ci_python() else { return };
    run_python(&python, "check_review.py", &[run.to_str().unwrap()]);
}

#[test]
fn review_refuses_bad_input_in_one_line_and_leaves_nothing_half_written() {
    let dir = tempfile::tempdir().unwrap();
    // A folder that holds no run.
    let empty = dir.path().join("empty");
    std::fs::create_dir(&empty).unwrap();
    let out = caravan(&["review", empty.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("run.json"), "{err}");

    // A run whose recording has moved: named, with the way out.
    let run = tracked_run(dir.path());
    let recording = dir.path().join("syn/recording.tif");
    let moved = dir.path().join("moved.tif");
    std::fs::rename(&recording, &moved).unwrap();
    std::fs::remove_dir_all(run.join("review")).unwrap();
    let out = caravan(&["review", run.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("recording.tif") && err.contains("--recording"), "{err}");
    assert!(!run.join("review").exists());
    let leftovers: Vec<_> = std::fs::read_dir(&run)
        .unwrap()
        .flatten()
        .filter(|e| e.file_name().to_string_lossy().contains("partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");

    // Another recording of another size given in its place: refused, naming both sizes.
    let other = dir.path().join("other");
    synth_recording(&other, &["--size", "128x128", "--frames", "3"]);
    let given = other.join("recording.tif");
    let out = caravan(&["review", run.to_str().unwrap(), "--recording", given.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("128x128") && err.contains("640x480"), "{err}");

    // Given where it went, the page is written.
    let out = caravan(&["review", run.to_str().unwrap(), "--recording", moved.to_str().unwrap()]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(run.join("review/index.html").exists());
}
