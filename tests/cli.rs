//! The `caravan` command end to end: outputs, determinism across thread counts, and clear
//! one-line errors with documented exit codes for bad input.

mod common;
use common::{ci_python, run_python};
use std::path::Path;
use std::process::{Command, Output};

fn caravan(args: &[&str], threads: &str) -> Output {
    common::output_within(
        Command::new(env!("CARGO_BIN_EXE_caravan"))
            .args(args)
            .env("RAYON_NUM_THREADS", threads),
    )
}

fn ok(out: &Output) -> String {
    assert!(out.status.success(), "stderr: {}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout.clone()).unwrap()
}

/// `caravan synth -o FOLDER OPTIONS...`; returns the recording's path.
fn synth_into(folder: &Path, options: &[&str]) -> String {
    let mut args = vec!["synth", "-o", folder.to_str().unwrap()];
    args.extend_from_slice(options);
    ok(&caravan(&args, "1"));
    folder.join("recording.tif").to_str().unwrap().to_string()
}

fn synth(dir: &Path) -> String {
    synth_into(
        &dir.join("syn"),
        &[
            "--scenario",
            "crowded",
            "--size",
            "160x128",
            "--frames",
            "5",
            "--seed",
            "4",
        ],
    )
}

#[test]
fn track_is_identical_on_every_instruction_level() {
    // Source: IEEE 754 and Rust's no-fusion rule (crate::simd): the vector copies of the
    // per-pixel loops must give the portable build's numbers, so a default run (diameter
    // estimated, movie, review page, analysis) writes the same bytes with the wider
    // instructions as with `CARAVAN_SIMD=portable`. A width of 250 px leaves partial blocks.
    let dir = tempfile::tempdir().unwrap();
    let rec = synth_into(
        &dir.path().join("syn"),
        &[
            "--scenario",
            "crowded",
            "--size",
            "250x200",
            "--frames",
            "6",
            "--seed",
            "9",
        ],
    );
    let run = |level: Option<&str>, name: &str| {
        let out = dir.path().join(name);
        let mut command = Command::new(env!("CARGO_BIN_EXE_caravan"));
        command.args(["track", &rec, "-o", out.to_str().unwrap()]);
        if let Some(level) = level {
            command.env("CARAVAN_SIMD", level);
        }
        ok(&common::output_within(&mut command));
        out
    };
    let (wide, portable) = (run(None, "wide"), run(Some("portable"), "portable"));
    let files = |root: &Path| -> Vec<std::path::PathBuf> {
        let mut found = Vec::new();
        let mut stack = vec![root.to_path_buf()];
        while let Some(d) = stack.pop() {
            for e in std::fs::read_dir(&d).unwrap() {
                let p = e.unwrap().path();
                if p.is_dir() {
                    stack.push(p);
                } else {
                    found.push(p.strip_prefix(root).unwrap().to_path_buf());
                }
            }
        }
        found.sort();
        found
    };
    let names = files(&wide);
    assert_eq!(names, files(&portable));
    assert!(
        names.iter().any(|n| n.ends_with("qc_movie.gif")) && names.len() > 10,
        "{names:?}"
    );
    // The run record (timings), the lock (process id) and the analysis's summary and page
    // (which name the run's folder) are left out.
    let kept = |n: &&std::path::PathBuf| {
        !["run.json", ".caravan.lock", "summary.json", "report.html"]
            .iter()
            .any(|x| n.ends_with(x))
    };
    for name in names.iter().filter(kept) {
        let (a, b) = (
            std::fs::read(wide.join(name)).unwrap(),
            std::fs::read(portable.join(name)).unwrap(),
        );
        assert!(a == b, "{} differs between the instruction levels", name.display());
    }
}

#[test]
fn the_analysis_of_a_track_run_is_the_one_its_folder_gives() {
    // Source: `caravan analyze` reading the finished run folder (tracks.csv and run.json as
    // written), an independent path to the same figures: `caravan track` works its analysis
    // out while the movie is drawn, from the tracks file and the calibration in memory, and
    // must write the same folder byte for byte. The scene is calibrated (OME-XML pixel size
    // and interval), so the units come from the run record.
    let dir = tempfile::tempdir().unwrap();
    let rec = synth_into(
        &dir.path().join("syn"),
        &[
            "--scenario",
            "stripe",
            "--size",
            "256x160",
            "--frames",
            "24",
            "--seed",
            "3",
        ],
    );
    let run = dir.path().join("run");
    ok(&caravan(&["track", &rec, "-o", run.to_str().unwrap()], "2"));
    let summary = std::fs::read_to_string(run.join("analysis/summary.json")).unwrap();
    assert!(summary.contains("\"length\": \"um\""), "{summary}");
    // The run hands the report the points its review page read; the frames worth a look made
    // from them must be there, as reading the folder makes them.
    let report = std::fs::read_to_string(run.join("analysis/report.html")).unwrap();
    assert!(
        report.contains("class=\"flagged\""),
        "frames worth a look in the report"
    );
    assert_analysis_as_its_folder_gives(&run, &dir.path().join("early"));
}

/// The run folder's `analysis/` (kept in `keep`) equals, file for file and byte for byte,
/// what `caravan analyze` writes when it reads the finished folder.
fn assert_analysis_as_its_folder_gives(run: &Path, keep: &Path) {
    copy_folder(&run.join("analysis"), keep);
    ok(&caravan(&["analyze", run.to_str().unwrap(), "--force"], "2"));
    let mut names: Vec<_> = std::fs::read_dir(keep)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    names.sort();
    assert!(names.len() >= 8, "{names:?}");
    for name in &names {
        let (a, b) = (
            std::fs::read(keep.join(name)).unwrap(),
            std::fs::read(run.join("analysis").join(name)).unwrap(),
        );
        assert!(a == b, "{name:?} differs");
    }
    assert_eq!(std::fs::read_dir(run.join("analysis")).unwrap().count(), names.len());
}

#[test]
fn track_is_identical_whatever_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let rec = synth(dir.path());
    let inspect = ok(&caravan(&["inspect", &rec], "1"));
    assert!(
        inspect.contains("5 of 160 x 128 px") && inspect.contains("0.65 µm (ome-xml)"),
        "{inspect}"
    );
    let mut outputs = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.path().join(format!("seg{threads}"));
        let text = ok(&caravan(
            &[
                "track",
                &rec,
                "-o",
                out.to_str().unwrap(),
                "--labels",
                "--diameter",
                "14px",
            ],
            threads,
        ));
        assert!(text.contains("5 frames") && text.contains("tracks"), "{text}");
        outputs.push(out);
    }
    for name in ["detections.csv", "labels.tif", "tracks.csv", "per_track.csv"] {
        let a = std::fs::read(outputs[0].join(name)).unwrap();
        let b = std::fs::read(outputs[1].join(name)).unwrap();
        assert!(a == b, "{name} differs between 1 and 2 threads");
    }
    let mut runs: Vec<serde_json::Value> = outputs
        .iter()
        .map(|o| serde_json::from_slice(&std::fs::read(o.join("run.json")).unwrap()).unwrap())
        .collect();
    for r in runs.iter_mut() {
        r.as_object_mut().unwrap().remove("timings_s");
    }
    assert_eq!(runs[0], runs[1], "run.json differs beyond timings");
    assert!(!dir.path().join("seg1").read_dir().unwrap().any(|e| e
        .unwrap()
        .file_name()
        .to_string_lossy()
        .contains("partial")));
}

#[test]
fn preview_writes_a_png_with_the_count() {
    let dir = tempfile::tempdir().unwrap();
    let rec = synth(dir.path());
    let png = dir.path().join("p.png");
    let text = ok(&caravan(
        &["preview", &rec, "--frame", "2", "-o", png.to_str().unwrap()],
        "2",
    ));
    assert!(text.starts_with("frame 2: "), "{text}");
    // Source: PNG signature, ISO/IEC 15948 §5.2.
    assert_eq!(&std::fs::read(&png).unwrap()[..8], b"\x89PNG\r\n\x1a\n");
    let out = caravan(&["preview", &rec, "--frame", "9", "-o", png.to_str().unwrap()], "1");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--frame"));
}

#[test]
fn bad_input_gives_one_line_exit_2_and_no_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let not_tiff = dir.path().join("notes.tif");
    std::fs::write(&not_tiff, "plain text").unwrap();
    let empty = dir.path().join("empty.tif");
    std::fs::write(&empty, "").unwrap();
    let missing = dir.path().join("missing.tif");
    for (file, words) in [
        (&not_tiff, "is not a TIFF file"),
        (&empty, "is empty"),
        (&missing, "no such file"),
    ] {
        let out_dir = dir.path().join("out");
        let out = caravan(
            &["segment", file.to_str().unwrap(), "-o", out_dir.to_str().unwrap()],
            "1",
        );
        assert_eq!(out.status.code(), Some(2), "{}", file.display());
        let err = String::from_utf8(out.stderr).unwrap();
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(
            err.starts_with(&format!("caravan: {}", file.display())) && err.contains(words),
            "{err}"
        );
        assert!(!out_dir.exists(), "no outputs for refused input");
    }
    let rec = synth(dir.path());
    let out = caravan(
        &[
            "segment",
            &rec,
            "-o",
            dir.path().join("o2").to_str().unwrap(),
            "--diameter",
            "-3px",
        ],
        "1",
    );
    assert_eq!(out.status.code(), Some(2));
    let out = caravan(
        &[
            "segment",
            &rec,
            "-o",
            dir.path().join("o3").to_str().unwrap(),
            "--diameter",
            "9um",
            "--min-area",
            "500",
            "--max-area",
            "100",
        ],
        "1",
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--max-area"));
}

#[test]
fn outputs_pass_independent_python_readers() {
    // tifffile, numpy, scikit-image and the csv/json modules read what Caravan wrote and
    // recompute the measurements; CI provides CARAVAN_PYTHON (a venv with those packages).
    let Some(python) = ci_python() else { return };
    let dir = tempfile::tempdir().unwrap();
    let rec = synth(dir.path());
    let seg = dir.path().join("seg");
    ok(&caravan(&["track", &rec, "-o", seg.to_str().unwrap(), "--labels"], "2"));
    let png = dir.path().join("p.png");
    let said = ok(&caravan(
        &["preview", &rec, "--frame", "1", "-o", png.to_str().unwrap()],
        "2",
    ));
    // The preview segments the frame as the run does (same defaults, same estimate): the
    // objects it counts are frame 1's rows of the run's detections.csv.
    let rows = std::fs::read_to_string(seg.join("detections.csv"))
        .unwrap()
        .lines()
        .filter(|l| l.starts_with("1,"))
        .count();
    assert!(rows > 0);
    assert!(said.starts_with(&format!("frame 1: {rows} objects,")), "{said}");
    run_python(
        &python,
        "check_outputs.py",
        &[
            dir.path().join("syn").to_str().unwrap(),
            seg.to_str().unwrap(),
            png.to_str().unwrap(),
        ],
    );
}

#[test]
fn objects_split_by_time_pass_an_independent_reader() {
    // A crowded, pressed scene where the segmentation merges neighbours: the csv and json
    // modules check that every split shares its object's area, brightness and centroid and
    // that run.json counts the splits (tests/python/check_shared.py).
    let Some(python) = ci_python() else { return };
    let dir = tempfile::tempdir().unwrap();
    let rec = synth_into(
        &dir.path().join("syn"),
        &[
            "--size",
            "256x256",
            "--scenario",
            "crowded",
            "--nuclei",
            "128",
            "--look",
            "tissue",
            "--brightness-spread",
            "0.25",
            "--separation",
            "0.7",
            "--frames",
            "8",
            "--seed",
            "7",
        ],
    );
    let run = dir.path().join("run");
    ok(&caravan(
        &[
            "track",
            &rec,
            "-o",
            run.to_str().unwrap(),
            "--no-movie",
            "--no-analysis",
        ],
        "2",
    ));
    run_python(&python, "check_shared.py", &[run.to_str().unwrap()]);
}

#[test]
fn synth_is_deterministic_for_a_seed() {
    let dir = tempfile::tempdir().unwrap();
    let run = |name: &str, seed: &str| {
        let out = dir.path().join(name);
        ok(&caravan(
            &[
                "synth",
                "-o",
                out.to_str().unwrap(),
                "--scenario",
                "stripe",
                "--size",
                "96x64",
                "--frames",
                "3",
                "--seed",
                seed,
            ],
            "2",
        ));
        (
            std::fs::read(out.join("recording.tif")).unwrap(),
            std::fs::read(out.join("truth.csv")).unwrap(),
        )
    };
    let (a, b, c) = (run("a", "5"), run("b", "5"), run("c", "6"));
    assert!(a == b, "same seed, same bytes");
    assert!(a.0 != c.0, "another seed, another recording");
}

#[test]
fn an_earlier_run_is_kept_unless_forced() {
    let dir = tempfile::tempdir().unwrap();
    let rec = synth(dir.path());
    let out = dir.path().join("run");
    let out_s = out.to_str().unwrap();
    ok(&caravan(&["track", &rec, "-o", out_s, "--diameter", "14px"], "2"));
    let before = std::fs::read(out.join("tracks.csv")).unwrap();
    let again = caravan(&["track", &rec, "-o", out_s, "--diameter", "12px"], "2");
    assert_eq!(again.status.code(), Some(2));
    let err = String::from_utf8_lossy(&again.stderr);
    assert!(err.contains("earlier run") && err.contains("--force"), "{err}");
    assert_eq!(
        std::fs::read(out.join("tracks.csv")).unwrap(),
        before,
        "earlier outputs intact"
    );
    ok(&caravan(
        &[
            "track",
            &rec,
            "-o",
            out_s,
            "--diameter",
            "14px",
            "--force",
            "--no-movie",
        ],
        "2",
    ));
    assert!(
        out.join("tracks.csv").exists() && !out.join("qc_movie.gif").exists(),
        "no stale movie from the earlier run"
    );
    // The replaced outputs are removed before the command ends.
    let hidden: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(".staging"))
        .collect();
    assert!(hidden.is_empty(), "{hidden:?}");
}

#[test]
fn a_replacing_run_leaves_no_report_of_the_earlier_tracks() {
    // The run folder's promise (a folder never mixes two runs) for the analysis and the
    // look-alikes, made after the run is published: a replacing run without them, asked away
    // or with tracks too short to analyse, must not leave the earlier run's beside its tracks,
    // nor its report show the earlier run's expected accuracy.
    let dir = tempfile::tempdir().unwrap();
    let long = synth_into(
        &dir.path().join("long"),
        &["--size", "160x128", "--frames", "12", "--nuclei", "6", "--seed", "8"],
    );
    let out = dir.path().join("run");
    let out_s = out.to_str().unwrap();
    let report = out.join("analysis").join("report.html");
    ok(&caravan(
        &["track", &long, "-o", out_s, "--diameter", "14px", "--lookalike"],
        "2",
    ));
    assert!(report.exists() && out.join("lookalike").exists(), "the first run's");
    ok(&caravan(
        &["track", &long, "-o", out_s, "--diameter", "12px", "--force"],
        "2",
    ));
    let second = std::fs::read_to_string(&report).unwrap();
    assert!(
        !out.join("lookalike").exists() && !second.contains("lookalike/"),
        "no look-alikes of the earlier run, in the folder or the report"
    );
    let without = [
        "track",
        &long,
        "-o",
        out_s,
        "--diameter",
        "14px",
        "--force",
        "--no-analysis",
    ];
    ok(&caravan(&without, "2"));
    assert!(
        out.join("tracks.csv").exists() && !out.join("analysis").exists(),
        "asked away"
    );
    // Five frames: every track is shorter than the analysis asks for.
    let short = synth(dir.path());
    let again = caravan(&["track", &short, "-o", out_s, "--diameter", "14px", "--force"], "2");
    ok(&again);
    assert!(String::from_utf8_lossy(&again.stdout).contains("no migration analysis"));
    assert!(
        out.join("tracks.csv").exists() && !out.join("analysis").exists(),
        "too short"
    );
}

#[test]
fn score_writes_json_that_an_independent_reader_confirms() {
    // A dividing dish, tracked and scored through the command line; then scipy's
    // linear_sum_assignment re-derives the detection counts, and the published AOGM and
    // CLEAR-MOT formulas re-derive TRA, DET and MOTA from the written counts.
    let dir = tempfile::tempdir().unwrap();
    let syn = dir.path().join("div");
    let run = dir.path().join("run");
    let (syn_s, run_s) = (syn.to_str().unwrap(), run.to_str().unwrap());
    synth_into(
        Path::new(syn_s),
        &[
            "--size",
            "192x192",
            "--frames",
            "30",
            "--divisions",
            "0.02",
            "--seed",
            "9",
        ],
    );
    let rec = syn.join("recording.tif");
    ok(&caravan(
        &[
            "track",
            rec.to_str().unwrap(),
            "-o",
            run_s,
            "--diameter",
            "14px",
            "--no-movie",
        ],
        "2",
    ));
    let printed = ok(&caravan(&["score", "--truth", syn_s, "--tracks", run_s], "1"));
    assert!(printed.contains("TRA") && printed.contains("MOTA"), "{printed}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("score.json")).unwrap()).unwrap();
    assert!(json["score"]["tra"].as_f64().unwrap() > 0.9);
    let bad = caravan(
        &[
            "score",
            "--truth",
            dir.path().join("nothing").to_str().unwrap(),
            "--tracks",
            run_s,
        ],
        "1",
    );
    assert_eq!(bad.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&bad.stderr);
    assert_eq!(stderr.trim().lines().count(), 1, "{stderr}");
    assert!(stderr.contains("nothing"), "{stderr}");
    // A crowded recording with pressed nuclei and dropouts, tracked without gap closing, so
    // that tracks break for every reason the breakdown names.
    let hard = dir.path().join("hard");
    let hard_run = dir.path().join("hard_run");
    let options = [
        "--scenario",
        "crowded",
        "--size",
        "192x192",
        "--frames",
        "30",
        "--look",
        "tissue",
        "--separation",
        "0.75",
        "--dropouts",
        "0.05",
        "--divisions",
        "0.01",
        "--seed",
        "10",
    ];
    let hard_rec = synth_into(&hard, &options);
    let args = [
        "track",
        &hard_rec,
        "-o",
        hard_run.to_str().unwrap(),
        "--max-gap",
        "0",
        "--no-movie",
        "--no-analysis",
    ];
    ok(&caravan(&args, "2"));
    let args = [
        "score",
        "--truth",
        hard.to_str().unwrap(),
        "--tracks",
        hard_run.to_str().unwrap(),
    ];
    ok(&caravan(&args, "1"));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(hard_run.join("score.json")).unwrap()).unwrap();
    let events = &json["score"]["breaks"]["events"];
    assert!(
        events["missed_detection"].as_u64().unwrap() > 0 && events["wrong_link"].as_u64().unwrap() > 0,
        "{events}"
    );
    let Some(python) = ci_python() else { return };
    run_python(
        &python,
        "check_score.py",
        &[syn_s, run_s, run.join("score.json").to_str().unwrap()],
    );
    let hard_score = hard_run.join("score.json");
    run_python(
        &python,
        "check_score.py",
        &[
            hard.to_str().unwrap(),
            hard_run.to_str().unwrap(),
            hard_score.to_str().unwrap(),
        ],
    );
}

#[test]
fn analyze_and_compare_pass_independent_readers() {
    // Two invented conditions (a drifting stripe and a wandering dish), three replicates each,
    // tracked (which also analyses each run into analysis/), then compared from a manifest;
    // numpy and scipy recompute the statistics from tracks.csv and replicates.csv.
    let dir = tempfile::tempdir().unwrap();
    let mut manifest = String::from("path,condition,replicate,label\n");
    for seed in 1..=3 {
        for scenario in ["stripe", "dish"] {
            let name = format!("{scenario}{seed}");
            let syn = dir.path().join(format!("syn_{name}"));
            let seed_text = seed.to_string();
            synth_into(
                &syn,
                &[
                    "--scenario",
                    scenario,
                    "--size",
                    "192x192",
                    "--frames",
                    "20",
                    "--seed",
                    &seed_text,
                ],
            );
            let run = dir.path().join(&name);
            let rec = syn.join("recording.tif");
            let out = ok(&caravan(
                &[
                    "track",
                    rec.to_str().unwrap(),
                    "-o",
                    run.to_str().unwrap(),
                    "--diameter",
                    "14px",
                    "--no-movie",
                ],
                "2",
            ));
            assert!(out.contains("report:"), "{out}");
            assert!(run.join("analysis/report.html").exists() && run.join("analysis/summary.json").exists());
            manifest.push_str(&format!("{name},{scenario},embryo{seed},<i>{name}</i>\n"));
        }
    }
    let manifest_path = dir.path().join("manifest.csv");
    std::fs::write(&manifest_path, manifest).unwrap();
    let cmp = dir.path().join("cmp");
    let printed = ok(&caravan(
        &["compare", manifest_path.to_str().unwrap(), "-o", cmp.to_str().unwrap()],
        "2",
    ));
    assert!(printed.contains("no Mann-Whitney test can reach p < 0.05"), "{printed}");
    let html = std::fs::read_to_string(cmp.join("report.html")).unwrap();
    assert!(html.contains("&lt;i&gt;stripe1&lt;/i&gt;") && !html.contains("<i>stripe1</i>"));
    // A manifest naming a missing file is refused before any work, naming the line.
    std::fs::write(&manifest_path, "path,condition,replicate\nstripe1,a,1\nnowhere,b,1\n").unwrap();
    let bad = caravan(
        &[
            "compare",
            manifest_path.to_str().unwrap(),
            "-o",
            dir.path().join("c2").to_str().unwrap(),
        ],
        "1",
    );
    assert_eq!(bad.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&bad.stderr);
    assert!(stderr.contains("line 3") && stderr.contains("nowhere"), "{stderr}");
    assert!(!dir.path().join("c2").exists());
    let Some(python) = ci_python() else { return };
    run_python(
        &python,
        "check_analysis.py",
        &[
            dir.path().join("stripe1").to_str().unwrap(),
            dir.path().join("stripe1/analysis").to_str().unwrap(),
            cmp.to_str().unwrap(),
        ],
    );
}

/// The tables and the QC movie of two run folders are byte-identical.
fn assert_same_run_outputs(a: &Path, b: &Path) {
    let mut names: Vec<String> = [
        "detections.csv",
        "tracks.csv",
        "per_track.csv",
        "qc_movie.gif",
        "qc_sheet.png",
    ]
    .map(String::from)
    .to_vec();
    // Every file of the review page's folder too, the same files in both.
    let review_files = |run: &Path| -> Vec<String> {
        let mut files = Vec::new();
        for sub in ["", "frames", "full", "data"] {
            for entry in std::fs::read_dir(run.join("review").join(sub)).unwrap() {
                let path = entry.unwrap().path();
                if path.is_file() {
                    files.push(path.strip_prefix(run).unwrap().to_string_lossy().into_owned());
                }
            }
        }
        files.sort();
        files
    };
    let reviewed = review_files(a);
    assert_eq!(reviewed, review_files(b));
    names.extend(reviewed);
    assert!(names.len() > 8, "{names:?}");
    for name in names {
        assert_eq!(
            std::fs::read(a.join(&name)).unwrap(),
            std::fs::read(b.join(&name)).unwrap(),
            "{name}"
        );
    }
}

/// run.json without its timings (the one part that differs between runs).
fn run_record_without_timings(dir: &Path) -> serde_json::Value {
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("run.json")).unwrap()).unwrap();
    v.as_object_mut().unwrap().remove("timings_s");
    v
}

#[test]
fn a_run_killed_mid_way_resumes_to_identical_outputs() {
    // SIGKILL once the checkpoint holds 10 frames, then --resume: every output equals that of
    // an uninterrupted run byte for byte (run.json but for its timings), and no half-written
    // or checkpoint file is left behind. Copies of the killed folder show that the logged
    // frames are replayed, not segmented again (a value planted in the log comes out in
    // detections.csv), and that another recording of the same size is refused; while the
    // first run writes, a second into its folder is refused, and the resume after the kill
    // shows that the lock a killed run leaves behind does not block (issue 21).
    let dir = tempfile::tempdir().unwrap();
    let syn = dir.path().join("syn");
    let stripe = |seed: &'static str| {
        [
            "--scenario",
            "stripe",
            "--size",
            "512x512",
            "--frames",
            "80",
            "--seed",
            seed,
            "--compression",
            "none",
        ]
    };
    synth_into(&syn, &stripe("5"));
    let other = synth_into(&dir.path().join("other"), &stripe("6"));
    let rec = syn.join("recording.tif");
    assert_eq!(
        std::fs::metadata(&rec).unwrap().len(),
        std::fs::metadata(&other).unwrap().len(),
        "two recordings of the same size"
    );
    let track_of = |input: &Path, out: &Path, extra: &[&str]| {
        let mut args = vec![
            "track".to_string(),
            input.to_str().unwrap().to_string(),
            "-o".into(),
            out.to_str().unwrap().to_string(),
            "--diameter".into(),
            "14px".into(),
            "--no-analysis".into(),
            "--checkpoint-every".into(),
            "5".into(),
            // Movie and review frames downscaled: frames segmented before the kill are decoded
            // again for them, the others were kept downscaled while segmenting.
            "--qc-size".into(),
            "256".into(),
            "--review-size".into(),
            "256".into(),
        ];
        args.extend(extra.iter().map(|s| s.to_string()));
        args
    };
    let track = |out: &Path, extra: &[&str]| track_of(&rec, out, extra);
    let run = |input: &Path, out: &Path, extra: &[&str], threads: &str| {
        caravan(
            &track_of(input, out, extra)
                .iter()
                .map(String::as_str)
                .collect::<Vec<_>>(),
            threads,
        )
    };
    let whole = dir.path().join("whole");
    ok(&run(&rec, &whole, &[], "2"));
    let killed = dir.path().join("killed");
    let mut child = Command::new(env!("CARGO_BIN_EXE_caravan"))
        .args(track(&killed, &[]))
        .env("RAYON_NUM_THREADS", "1")
        .stdout(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let state = killed.join(".checkpoint/state.json");
    let started = std::time::Instant::now();
    loop {
        let done = std::fs::read_to_string(&state)
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            .and_then(|v| v["frames_done"].as_u64())
            .unwrap_or(0);
        if done >= 10 {
            break;
        }
        assert!(started.elapsed().as_secs() < 60, "no checkpoint appeared");
        std::thread::sleep(std::time::Duration::from_millis(5));
    }
    // One run per folder: a second run into it is refused at once, naming the running process.
    let second = run(&rec, &killed, &[], "1");
    assert_eq!(second.status.code(), Some(2));
    let message = String::from_utf8_lossy(&second.stderr);
    assert!(
        message.contains(&format!("is in use by another caravan run (process {})", child.id())),
        "{message}"
    );
    child.kill().unwrap(); // SIGKILL on Unix
    let status = child.wait().unwrap();
    assert!(!status.success(), "the run was killed before it finished");
    assert!(!killed.join("run.json").exists());
    // Another recording of the same size is refused, naming the frame that differs.
    let replaced = dir.path().join("replaced");
    copy_folder(&killed, &replaced);
    let refused = run(Path::new(&other), &replaced, &["--resume"], "2");
    assert_eq!(refused.status.code(), Some(2));
    let message = String::from_utf8_lossy(&refused.stderr);
    assert!(
        message.contains("another recording of the same size (frame 0 differs)"),
        "{message}"
    );
    // The logged frames are replayed: a planted x comes out in detections.csv.
    let planted = dir.path().join("planted");
    copy_folder(&killed, &planted);
    let log = planted.join(".checkpoint/frames.jsonl");
    let state_path = planted.join(".checkpoint/state.json");
    let mut state: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&state_path).unwrap()).unwrap();
    // The killed run may have appended frames after its last state was written: only the
    // part of the log the state vouches for is kept, as a resume does.
    let vouched = state["log_bytes"].as_u64().unwrap() as usize;
    let text = std::fs::read_to_string(&log).unwrap()[..vouched].to_string();
    let mut first: serde_json::Value = serde_json::from_str(text.lines().next().unwrap()).unwrap();
    first["detections"][0]["x"] = serde_json::json!(1.2345);
    let rest: Vec<&str> = text.lines().skip(1).collect();
    std::fs::write(&log, format!("{}\n{}\n", first, rest.join("\n"))).unwrap();
    state["log_bytes"] = serde_json::json!(std::fs::metadata(&log).unwrap().len());
    std::fs::write(&state_path, state.to_string()).unwrap();
    ok(&run(&rec, &planted, &["--resume"], "2"));
    let detections = std::fs::read_to_string(planted.join("detections.csv")).unwrap();
    assert!(
        detections.lines().nth(1).unwrap().starts_with("0,1,1.2345,"),
        "{}",
        detections.lines().nth(1).unwrap()
    );
    ok(&run(&rec, &killed, &["--resume"], "2"));
    assert_same_run_outputs(&whole, &killed);
    assert_eq!(run_record_without_timings(&whole), run_record_without_timings(&killed));
    let leftovers: Vec<String> = std::fs::read_dir(&killed)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.') && n != ".caravan.lock")
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
    // A finished run keeps no checkpoint: resuming it is refused with exit code 2.
    let other = run(&rec, &dir.path().join("whole"), &["--resume", "--max-gap", "1"], "1");
    assert_eq!(other.status.code(), Some(2));
}

#[test]
fn shards_linked_equal_one_track_run() {
    // Split stages: frames 0..12 and 12..30 segmented apart (even in the other order), then
    // linked: every output equals one `track` run byte for byte; run.json but for the command
    // name and timings; the analysis as `caravan analyze` of the joined folder gives it. Shards that leave a gap are refused with exit code 2, and so are
    // shards cut from one path before and after the file was replaced by another recording of
    // the same size (issue 21).
    let dir = tempfile::tempdir().unwrap();
    let syn = dir.path().join("syn");
    let dish = |seed: &'static str| {
        [
            "--scenario",
            "dish",
            "--size",
            "256x256",
            "--frames",
            "30",
            "--divisions",
            "0.01",
            "--seed",
            seed,
            "--compression",
            "none",
        ]
    };
    synth_into(&syn, &dish("8"));
    let other = synth_into(&dir.path().join("other"), &dish("9"));
    let rec = syn.join("recording.tif");
    let rec = rec.to_str().unwrap();
    let path = |name: &str| dir.path().join(name).to_str().unwrap().to_string();
    ok(&caravan(
        &[
            "track",
            rec,
            "-o",
            &path("whole"),
            "--diameter",
            "14px",
            "--no-analysis",
            "--qc-size",
            "128",
            "--review-size",
            "128",
        ],
        "2",
    ));
    ok(&caravan(
        &[
            "segment",
            rec,
            "--frames",
            "12..30",
            "-o",
            &path("b"),
            "--diameter",
            "14px",
        ],
        "2",
    ));
    ok(&caravan(
        &[
            "segment",
            rec,
            "--frames",
            "0..12",
            "-o",
            &path("a"),
            "--diameter",
            "14px",
        ],
        "1",
    ));
    ok(&caravan(
        &[
            "join",
            &path("b"),
            &path("a"),
            "-o",
            &path("linked"),
            // Downscaled movie and review frames: kept while segmenting in the one run, decoded
            // again after joining the shards.
            "--qc-size",
            "128",
            "--review-size",
            "128",
        ],
        "2",
    ));
    assert_same_run_outputs(&dir.path().join("whole"), &dir.path().join("linked"));
    // The joined run's analysis, worked out while its movie was drawn, is the folder's.
    assert_analysis_as_its_folder_gives(&dir.path().join("linked"), &dir.path().join("linked_analysis"));
    let strip = |name: &str| {
        let mut v = run_record_without_timings(&dir.path().join(name));
        v.as_object_mut().unwrap().remove("command");
        v
    };
    assert_eq!(strip("whole"), strip("linked"));
    let gap = caravan(&["join", &path("b"), "-o", &path("gap")], "1");
    assert_eq!(gap.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&gap.stderr).contains("frame 0"));
    // One path, two recordings: shard c before the file is replaced, shard d after.
    let moving = path("moving.tif");
    std::fs::copy(rec, &moving).unwrap();
    let segment = |range: &str, out: &str| {
        ok(&caravan(
            &[
                "segment",
                &moving,
                "--frames",
                range,
                "-o",
                &path(out),
                "--diameter",
                "14px",
            ],
            "2",
        ))
    };
    segment("0..12", "c");
    std::fs::copy(&other, &moving).unwrap();
    segment("12..30", "d");
    let mixed = caravan(&["join", &path("c"), &path("d"), "-o", &path("mixed")], "2");
    assert_eq!(mixed.status.code(), Some(2));
    let message = String::from_utf8_lossy(&mixed.stderr);
    assert!(
        message.contains("another recording of the same size (frame 0 differs)"),
        "{message}"
    );
    assert!(!dir.path().join("mixed/run.json").exists());
}

#[test]
fn the_demo_runs_end_to_end_and_says_its_verdict() {
    // README's first set-up command: synthesize, track, score, analyse. Its scene is tracked
    // with defaults, judged `ok` (README, the run's verdict), scored against the truth synth
    // wrote (TRA above 0.95: our own bar for an easy stream; AOGM/TRA as Matula et al. 2015,
    // fixtures/methods/check_values.md §8) and analysed.
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    let stdout = ok(&caravan(&["demo", "-o", out.to_str().unwrap()], "2"));
    assert!(stdout.lines().any(|l| l == "verdict: ok"), "{stdout}");
    let tra: f64 = stdout
        .lines()
        .find_map(|l| l.strip_prefix("graph      TRA "))
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .expect("a TRA line");
    assert!(tra > 0.95, "{tra}");
    assert!(out.join("tracking/analysis/report.html").exists());
    let record: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("tracking/run.json")).unwrap()).unwrap();
    assert_eq!(record["verdict"]["verdict"], "ok");
}

/// Copies a run folder (files and one level of subfolders, hidden ones included).
fn copy_folder(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let target = to.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            copy_folder(&e.path(), &target);
        } else {
            std::fs::copy(e.path(), target).unwrap();
        }
    }
}

#[test]
fn a_command_is_run_as_the_standard_library_runs_it_and_killed_when_it_hangs() {
    // Source: the standard library's `Command::output` on the same command (exit code, both
    // streams, standard input closed) for the tests' watchdog; and a command that outlives
    // its limit fails the test naming it (common practice for a watchdog) rather than
    // holding CI until its time is out, as a hang once did.
    let script = "printf 'out'; printf 'err' >&2; read line; exit 3";
    let ours = common::output_within(Command::new("sh").args(["-c", script]));
    let std = Command::new("sh").args(["-c", script]).output().unwrap();
    assert_eq!(ours.status.code(), Some(3));
    assert_eq!(
        (ours.status.code(), &ours.stdout, &ours.stderr),
        (std.status.code(), &std.stdout, &std.stderr)
    );
    // A shell whose child hangs: the child is killed with it, not left running.
    let dir = tempfile::tempdir().unwrap();
    let pid_file = dir.path().join("pid");
    let script = format!("sleep 30 & echo $! > '{}'; wait", pid_file.display());
    let hung = std::panic::catch_unwind(|| {
        common::output_within_limit(
            Command::new("sh").args(["-c", &script]),
            std::time::Duration::from_millis(500),
        )
    });
    let pid = std::fs::read_to_string(&pid_file).unwrap();
    // Ended: no entry in /proc, or a zombie (state Z) waiting to be reaped.
    let ended = || {
        let stat = std::fs::read_to_string(format!("/proc/{}/stat", pid.trim())).unwrap_or_default();
        stat.is_empty() || stat.split(") ").nth(1).is_some_and(|rest| rest.starts_with('Z'))
    };
    let mut gone = ended();
    for _ in 0..100 {
        if gone {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
        gone = ended();
    }
    assert!(gone, "the shell's child {pid} still runs");
    let message = hung.expect_err("killed and failed");
    let message = message.downcast_ref::<String>().cloned().unwrap_or_default();
    assert!(
        message.contains("still running after") && message.contains("sleep 30 &"),
        "{message}"
    );
}
