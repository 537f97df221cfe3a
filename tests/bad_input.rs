//! Broken and hostile input through the command line: each failure is one line on stderr
//! naming the file (and frame where known) with exit code 2 and no output files; valid but
//! empty recordings run and end with a failed verdict. And a run that cannot write (a file-size limit, as on
//! a full disk) fails with exit code 3 and leaves the earlier outputs untouched.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use tiff::encoder::{colortype, TiffEncoder};

mod common;

use common::caravan;

fn track(input: &Path, out: &Path) -> Output {
    track_with(input, out, &[])
}

/// `track` with the usual options and `extra` ones.
fn track_with(input: &Path, out: &Path, extra: &[&str]) -> Output {
    let (input, out) = (input.to_str().unwrap(), out.to_str().unwrap());
    let mut args = vec!["track", input, "-o", out, "--diameter", "14px", "--no-analysis"];
    args.extend_from_slice(extra);
    caravan(&args)
}

/// Exit code 2, one line on stderr naming `what`, and nothing written in `out`.
fn refused(out_dir: &Path, result: &Output, what: &str) -> String {
    let stderr = String::from_utf8_lossy(&result.stderr).to_string();
    assert_eq!(result.status.code(), Some(2), "{what}: {stderr}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "{what}: {stderr}");
    assert!(stderr.contains(what), "{what}: {stderr}");
    let written: Vec<PathBuf> = std::fs::read_dir(out_dir)
        .map(|d| d.map(|e| e.unwrap().path()).collect())
        .unwrap_or_default();
    assert!(written.is_empty(), "{what}: left {written:?}");
    stderr
}

fn write_pages<C: colortype::ColorType>(path: &Path, pages: &[(u32, u32, Vec<C::Inner>)])
where
    [C::Inner]: tiff::encoder::TiffValue,
{
    let mut file = std::fs::File::create(path).unwrap();
    let mut enc = TiffEncoder::new(&mut file).unwrap();
    for (w, h, data) in pages {
        enc.write_image::<C>(*w, *h, data).unwrap();
    }
}

/// A valid uncompressed 3-frame synthetic recording.
fn good_recording(dir: &Path) -> PathBuf {
    let syn = dir.join("syn");
    let out = caravan(&[
        "synth",
        "-o",
        syn.to_str().unwrap(),
        "--size",
        "64x64",
        "--frames",
        "3",
        "--compression",
        "none",
        "--seed",
        "3",
    ]);
    assert!(out.status.success());
    syn.join("recording.tif")
}

/// Offsets of the classic little-endian TIFF's IFDs, and where the last next-IFD link sits.
fn ifd_chain(bytes: &[u8]) -> (Vec<usize>, usize) {
    let u16_at = |o: usize| u16::from_le_bytes([bytes[o], bytes[o + 1]]) as usize;
    let u32_at = |o: usize| u32::from_le_bytes(bytes[o..o + 4].try_into().unwrap()) as usize;
    let mut chain = Vec::new();
    let (mut offset, mut link) = (u32_at(4), 4);
    while offset != 0 {
        chain.push(offset);
        link = offset + 2 + 12 * u16_at(offset);
        offset = u32_at(link);
    }
    (chain, link)
}

#[test]
fn damaged_files_are_refused_with_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = d.join("out");
    let cases: Vec<(&str, Vec<u8>)> = {
        let good = std::fs::read(good_recording(d)).unwrap();
        let (chain, last_link) = ifd_chain(&good);
        let mut looping = good.clone();
        looping[last_link..last_link + 4].copy_from_slice(&(chain[0] as u32).to_le_bytes());
        let mut outside = good.clone();
        outside[4..8].copy_from_slice(&2_000_000_000u32.to_le_bytes());
        let mut huge = good.clone();
        // Width tag (256) of the first IFD set to 60000 and length (257) to 60000: 7.2 GB.
        for entry in 0..12 {
            let at = chain[0] + 2 + 12 * entry;
            let tag = u16::from_le_bytes([huge[at], huge[at + 1]]);
            if tag == 256 || tag == 257 {
                huge[at + 2..at + 4].copy_from_slice(&4u16.to_le_bytes()); // LONG
                huge[at + 8..at + 12].copy_from_slice(&60_000u32.to_le_bytes());
            }
        }
        vec![
            ("not a TIFF", b"frame,x,y\n1,2,3\n".to_vec()),
            ("empty", Vec::new()),
            ("cut in the header", good[..5].to_vec()),
            ("cut in a directory", good[..chain[0] + 20].to_vec()),
            ("cut in the first frame's pixels", good[..chain[0] / 2].to_vec()),
            ("cut in the last frame's pixels", good[..good.len() - 1000].to_vec()),
            ("directory loop", looping),
            ("directory outside the file", outside),
            ("absurd size", huge),
        ]
    };
    for (k, (what, bytes)) in cases.iter().enumerate() {
        let file = d.join(format!("case{k}.tif"));
        std::fs::write(&file, bytes).unwrap();
        let stderr = refused(&out, &track(&file, &out), &format!("case{k}.tif"));
        eprintln!("{what}: {}", stderr.trim());
    }
}

#[test]
fn unusual_recordings_are_refused_or_run_with_a_failed_verdict() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = d.join("out");
    // Frames of different sizes in one stack, and in a folder.
    let mixed = d.join("mixed.tif");
    write_pages::<colortype::Gray16>(&mixed, &[(32, 32, vec![0; 1024]), (16, 16, vec![0; 256])]);
    let e = refused(&out, &track(&mixed, &out), "frame 1");
    assert!(e.contains("16x16") && e.contains("32x32"), "{e}");
    let folder = d.join("frames");
    std::fs::create_dir(&folder).unwrap();
    write_pages::<colortype::Gray16>(&folder.join("t1.tif"), &[(32, 32, vec![0; 1024])]);
    write_pages::<colortype::Gray16>(&folder.join("t2.tif"), &[(20, 32, vec![0; 640])]);
    refused(&out, &track(&folder, &out), "t2.tif");
    // Pages of several samples (RGB) need a channel.
    let rgb = d.join("rgb.tif");
    write_pages::<colortype::RGB16>(&rgb, &[(16, 16, vec![0; 768])]);
    let e = refused(&out, &track(&rgb, &out), "rgb.tif");
    assert!(e.contains("--channel"), "{e}");
    // A folder without frames, and sample types Caravan does not read.
    let empty = d.join("nothing");
    std::fs::create_dir(&empty).unwrap();
    refused(&out, &track(&empty, &out), "nothing");
    let f64s = d.join("f64.tif");
    write_pages::<colortype::Gray64Float>(&f64s, &[(16, 16, vec![0.5; 256])]);
    refused(&out, &track(&f64s, &out), "64-bit float");
    let i8s = d.join("i8.tif");
    write_pages::<colortype::GrayI8>(&i8s, &[(16, 16, vec![0; 256])]);
    refused(&out, &track(&i8s, &out), "signed");
    // Valid but empty: 1x1 frames, all-zero and all-saturated frames run, write their
    // outputs, and end with a failed verdict (exit code 1, README) that says why.
    for (name, pages) in [
        ("one.tif", vec![(1u32, 1u32, vec![7u16]); 3]),
        ("zero.tif", vec![(64, 64, vec![0u16; 4096]); 3]),
        ("saturated.tif", vec![(64, 64, vec![65535u16; 4096]); 3]),
    ] {
        let file = d.join(name);
        write_pages::<colortype::Gray16>(&file, &pages);
        let run = d.join(format!("run_{name}"));
        let result = track(&file, &run);
        let stdout = String::from_utf8_lossy(&result.stdout);
        assert_eq!(
            result.status.code(),
            Some(1),
            "{name}: {}",
            String::from_utf8_lossy(&result.stderr)
        );
        assert!(stdout.starts_with("verdict: failed"), "{name}: {stdout}");
        assert!(stdout.contains("no object was found in any frame"), "{name}: {stdout}");
        assert!(run.join("run.json").exists());
    }
}

#[test]
fn a_frame_that_is_foreground_wall_to_wall_is_one_object() {
    // Bright everywhere but a dark spot inside the frame: without background subtraction the
    // spot is the only background, hole filling closes it, and the mask covers the whole
    // frame. There is then no distance to any background pixel; this once asked for 16 GiB
    // and aborted. Now the frame is one object touching the border.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("bright.tif");
    let page: Vec<u16> = (0..64 * 64)
        .map(|i| {
            if (30..35).contains(&(i % 64)) && (30..35).contains(&(i / 64)) {
                0
            } else {
                1000
            }
        })
        .collect();
    write_pages::<colortype::Gray16>(&file, &vec![(64, 64, page); 3]);
    let run = dir.path().join("run");
    let result = track_with(&file, &run, &["--background", "none", "--max-area", "10000"]);
    assert!(result.status.success(), "{}", String::from_utf8_lossy(&result.stderr));
    let detections = std::fs::read_to_string(run.join("detections.csv")).unwrap();
    let rows: Vec<&str> = detections.lines().skip(1).collect();
    assert_eq!(rows.len(), 3, "{detections}");
    // Area 64 x 64 = 4096 px, centroid (31.5, 31.5), touching the border.
    assert!(
        rows.iter()
            .all(|r| r.contains(",31.5000,31.5000,") && r.contains(",4096,") && r.ends_with(",1")),
        "{detections}"
    );
}

#[test]
fn nan_and_infinite_pixels_are_replaced_and_reported() {
    // A float recording with a NaN pixel, an infinite square and a whole NaN frame: the run
    // completes, warns with counts per frame, and no table holds a NaN or infinity.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("float.tif");
    let frame = |t: usize| -> Vec<f32> {
        (0..64 * 64)
            .map(|i| {
                let (x, y) = (i % 64, i / 64);
                match (t, x, y) {
                    (1, _, _) => f32::NAN,
                    (_, 5, 5) => f32::NAN,
                    (_, 40..=44, 40..=44) => f32::INFINITY,
                    (_, 20..=30, 20..=30) => 100.0,
                    _ => 0.0,
                }
            })
            .collect()
    };
    write_pages::<colortype::Gray32Float>(&file, &[(64, 64, frame(0)), (64, 64, frame(1)), (64, 64, frame(2))]);
    let run = dir.path().join("run");
    let result = track(&file, &run);
    assert!(result.status.success(), "{}", String::from_utf8_lossy(&result.stderr));
    let stdout = String::from_utf8_lossy(&result.stdout);
    assert!(stdout.contains("0 (26 px) 1 (4096 px) 2 (26 px)"), "{stdout}");
    for name in ["detections.csv", "tracks.csv", "per_track.csv"] {
        let text = std::fs::read_to_string(run.join(name)).unwrap().to_lowercase();
        assert!(!text.contains("nan") && !text.contains("inf"), "{name}: {text}");
    }
}

#[test]
fn a_run_that_cannot_write_leaves_the_earlier_outputs() {
    // A file-size limit (ulimit -f, with SIGXFSZ ignored so writes fail with EFBIG as on a
    // full device): a forced second run into the folder of a complete run fails with exit
    // code 3 naming the file, and the first run's outputs are byte for byte as they were. Only
    // its checkpoint stays (to resume once there is room); no staged or half-written file.
    let dir = tempfile::tempdir().unwrap();
    let rec = good_recording(dir.path());
    let run = dir.path().join("run");
    assert!(track(&rec, &run).status.success());
    let before: Vec<(String, Vec<u8>)> = ["detections.csv", "tracks.csv", "run.json", "qc_movie.gif"]
        .iter()
        .map(|n| (n.to_string(), std::fs::read(run.join(n)).unwrap()))
        .collect();
    let script = format!(
        "trap '' XFSZ; ulimit -f 8; exec '{}' track '{}' -o '{}' --diameter 14px --no-analysis --force",
        env!("CARGO_BIN_EXE_caravan"),
        rec.display(),
        run.display()
    );
    let failed = common::output_within(Command::new("sh").args(["-c", &script]));
    let stderr = String::from_utf8_lossy(&failed.stderr);
    assert_eq!(failed.status.code(), Some(3), "{stderr}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
    assert!(stderr.contains("too large") || stderr.contains("No space"), "{stderr}");
    for (name, bytes) in before {
        assert_eq!(std::fs::read(run.join(&name)).unwrap(), bytes, "{name} changed");
    }
    let hidden: Vec<String> = std::fs::read_dir(&run)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.') && n != ".checkpoint" && n != ".caravan.lock")
        .collect();
    assert!(hidden.is_empty(), "{hidden:?}");
}

#[test]
fn nonsense_parameters_are_refused_before_any_work() {
    // Zero or unknown-unit lengths, a maximum step of 0, gaps and movie sizes out of range, a
    // frame range beyond the recording, and a parameter file with a misspelt key (the closest
    // valid key suggested): exit code 2 and no output folder content.
    let dir = tempfile::tempdir().unwrap();
    let rec = good_recording(dir.path());
    let rec = rec.to_str().unwrap();
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let toml = dir.path().join("p.toml");
    std::fs::write(&toml, "diameter = \"14px\"\nmax_gpa = 1\n").unwrap();
    let t = toml.to_str().unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["track", rec, "-o", o, "--diameter", "0px"], "positive"),
        (
            vec!["track", rec, "-o", o, "--diameter", "14parsecs"],
            "unknown length unit",
        ),
        (
            vec!["track", rec, "-o", o, "--diameter", "14px", "--max-step", "0px"],
            "positive",
        ),
        (
            vec!["track", rec, "-o", o, "--diameter", "14px", "--max-gap", "99"],
            "--max-gap",
        ),
        (
            vec!["track", rec, "-o", o, "--diameter", "14px", "--qc-size", "10"],
            "--qc-size",
        ),
        (
            vec!["segment", rec, "-o", o, "--diameter", "14px", "--frames", "0..99"],
            "3 frames",
        ),
        (vec!["track", rec, "-o", o, "--params", t], "did you mean \"max_gap\""),
    ];
    for (args, message) in cases {
        let result = caravan(&args);
        let stderr = String::from_utf8_lossy(&result.stderr);
        assert_eq!(result.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(message), "{args:?}: {stderr}");
        let written = std::fs::read_dir(&out).map(|d| d.count()).unwrap_or(0);
        assert_eq!(written, 0, "{args:?} wrote outputs");
    }
    // A valid file applies, and the command line wins over it.
    std::fs::write(
        &toml,
        "diameter = \"14px\"\nmax_gap = 1\nno_movie = true\nno_analysis = true\n",
    )
    .unwrap();
    let result = caravan(&["track", rec, "-o", o, "--params", t, "--max-gap", "0"]);
    assert!(result.status.success(), "{}", String::from_utf8_lossy(&result.stderr));
    let record: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert_eq!(record["parameters"]["link"]["params"]["max_gap_frames"], 0);
    assert_eq!(record["parameters"]["diameter"]["px"], 14.0);
    assert!(!out.join("qc_movie.gif").exists());
}

#[test]
fn unreadable_input_and_unwritable_output_are_named() {
    // File permissions bind everybody but root; as root (as in CI) the command runs as the
    // unprivileged user "nobody" through setpriv(1) (util-linux).
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o755)).unwrap();
    let rec = good_recording(dir.path());
    for p in [dir.path().join("syn"), rec.clone()] {
        std::fs::set_permissions(
            &p,
            std::fs::Permissions::from_mode(if p.is_dir() { 0o755 } else { 0o644 }),
        )
        .unwrap();
    }
    let secret = dir.path().join("secret.tif");
    std::fs::copy(&rec, &secret).unwrap();
    std::fs::set_permissions(&secret, std::fs::Permissions::from_mode(0o000)).unwrap();
    let locked = dir.path().join("locked");
    std::fs::create_dir(&locked).unwrap();
    std::fs::set_permissions(&locked, std::fs::Permissions::from_mode(0o555)).unwrap();
    let root = Command::new("id")
        .arg("-u")
        .output()
        .map(|o| o.stdout == b"0\n")
        .unwrap_or(false);
    // A copy of the binary inside the world-readable temp folder: the build folder's parents
    // may not be open to other users.
    let bin = dir.path().join("caravan");
    std::fs::copy(env!("CARGO_BIN_EXE_caravan"), &bin).unwrap();
    std::fs::set_permissions(&bin, std::fs::Permissions::from_mode(0o755)).unwrap();
    let run = |args: &[&str]| -> Output {
        if root {
            // setpriv (util-linux) runs the command as nobody.
            common::output_within(
                Command::new("setpriv")
                    .args(["--reuid=65534", "--regid=65534", "--clear-groups", "--"])
                    .arg(&bin)
                    .args(args),
            )
        } else {
            common::output_within(Command::new(&bin).args(args))
        }
    };
    let unreadable = run(&["inspect", secret.to_str().unwrap()]);
    let stderr = String::from_utf8_lossy(&unreadable.stderr);
    assert_eq!(unreadable.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("secret.tif") && stderr.contains("ermission denied"),
        "{stderr}"
    );
    let out = locked.join("run");
    let unwritable = run(&[
        "track",
        rec.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--diameter",
        "14px",
    ]);
    let stderr = String::from_utf8_lossy(&unwritable.stderr);
    assert_eq!(unwritable.status.code(), Some(3), "{stderr}");
    assert!(
        stderr.contains("locked") && stderr.contains("ermission denied"),
        "{stderr}"
    );
}
