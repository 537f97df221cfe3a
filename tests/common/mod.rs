//! Shared by the integration tests: tracking synthetic recordings, and running the binary.

use caravan::link::LinkOptions;
use caravan::params::SegmentParams;
use caravan::pipeline::{resolve_diameter, run_recording, RunOptions};
use caravan::stack::{OpenOptions, Stack};
use caravan::synth::{write_recording, SynthParams};
use std::path::PathBuf;

/// A synthetic recording tracked into a temporary folder: `syn/` holds the recording and its
/// truth, `run/` the tracks (not every test crate that shares this module tracks one).
#[allow(dead_code)]
pub struct TrackedScene {
    /// Keeps the folder alive until the scene is dropped.
    _dir: tempfile::TempDir,
    /// The synth folder (not every test crate that shares this module reads it).
    #[allow(dead_code)]
    pub syn: PathBuf,
    /// The run folder.
    pub run: PathBuf,
}

/// Synthesizes `p` and tracks it with `link` as a user would: the diameter estimated from the
/// recording, everything else at its defaults (no movie).
#[allow(dead_code)]
pub fn track_synthetic(p: &SynthParams, link: LinkOptions) -> TrackedScene {
    let dir = tempfile::tempdir().unwrap();
    let syn = dir.path().join("syn");
    let synth = write_recording(&syn, p).unwrap();
    let mut stack = Stack::open(&synth.recording, &OpenOptions::default()).unwrap();
    let outputs = RunOptions {
        labels: false,
        linking: Some(link),
        movie: None,
        review: None,
        replace: false,
        checkpoint_every: None,
        resume: false,
        masks: None,
        masks_without_intensities: false,
        analysis: false,
    };
    let run = dir.path().join("run");
    let diameter = resolve_diameter(&mut stack, None, &SegmentParams::for_diameter).unwrap();
    let params = SegmentParams::for_diameter(diameter.px());
    run_recording(&mut stack, diameter, &params, &run, &outputs, "test").unwrap();
    TrackedScene { _dir: dir, syn, run }
}

/// Runs the `caravan` binary with `args` (not every test crate that shares this module runs
/// it).
#[allow(dead_code)]
pub fn caravan(args: &[&str]) -> std::process::Output {
    output_within(std::process::Command::new(env!("CARGO_BIN_EXE_caravan")).args(args))
}

/// How long one command of a test may run: far beyond the slowest (seconds), far short of
/// CI's own limit.
pub const COMMAND_LIMIT: std::time::Duration = std::time::Duration::from_secs(300);

/// `command.output()` (standard input closed, as there), but a command still running after
/// [`COMMAND_LIMIT`] is killed and fails the test with its command line: a hang (a deadlock in
/// the binary, say) then names the command within minutes instead of holding CI until its
/// time is out, as one did (not every test crate that shares this module runs a command).
#[allow(dead_code)]
pub fn output_within(command: &mut std::process::Command) -> std::process::Output {
    output_within_limit(command, COMMAND_LIMIT)
}

/// [`output_within`] with the given limit.
#[allow(dead_code)]
pub fn output_within_limit(command: &mut std::process::Command, limit: std::time::Duration) -> std::process::Output {
    use std::io::Read;
    use std::os::unix::process::CommandExt;
    use std::process::Stdio;
    // A process group of its own, so that a shell's or a workflow's children go with it.
    let mut child = command
        .process_group(0)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("{command:?} did not start: {e}"));
    let drain = |mut from: Box<dyn Read + Send>| {
        std::thread::spawn(move || {
            let mut bytes = Vec::new();
            let _ = from.read_to_end(&mut bytes);
            bytes
        })
    };
    let stdout = drain(Box::new(child.stdout.take().expect("piped")));
    let stderr = drain(Box::new(child.stderr.take().expect("piped")));
    let started = std::time::Instant::now();
    let mut pause = std::time::Duration::from_millis(1);
    let status = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break status;
        }
        if started.elapsed() > limit {
            // The shell's own `kill`, which every shell has (a `kill` program may be missing).
            let group = format!("kill -KILL -{}", child.id());
            let _ = std::process::Command::new("sh").args(["-c", &group]).status();
            let _ = child.kill();
            let _ = child.wait();
            panic!("{command:?} still running after {limit:?}: killed");
        }
        std::thread::sleep(pause);
        pause = (pause * 2).min(std::time::Duration::from_millis(20));
    };
    std::process::Output {
        status,
        stdout: stdout.join().expect("reader"),
        stderr: stderr.join().expect("reader"),
    }
}

/// Runs `caravan ARGS...`, failing the test with its error output unless it succeeds (not every
/// test crate that shares this module runs it).
#[allow(dead_code)]
pub fn caravan_ok(args: &[&str]) -> std::process::Output {
    let out = caravan(args);
    assert!(
        out.status.success(),
        "caravan {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// `caravan synth -o DIR ARGS...`; returns the recording's path.
#[allow(dead_code)]
pub fn synth_recording(dir: &std::path::Path, args: &[&str]) -> PathBuf {
    let mut all = vec!["synth", "-o", dir.to_str().unwrap()];
    all.extend(args);
    caravan_ok(&all);
    dir.join("recording.tif")
}

/// The Python of CI's virtual environment, or `None` outside CI (where the check is skipped).
#[allow(dead_code)]
pub fn ci_python() -> Option<String> {
    match std::env::var("CARAVAN_PYTHON") {
        Ok(p) => Some(p),
        Err(_) => {
            assert!(std::env::var("CI").is_err(), "CI must set CARAVAN_PYTHON");
            eprintln!("CARAVAN_PYTHON not set: independent-reader check skipped outside CI");
            None
        }
    }
}

/// Runs one of tests/python/ and fails with its output unless it succeeds.
#[allow(dead_code)]
pub fn run_python(python: &str, script: &str, args: &[&str]) {
    let path = format!("{}/tests/python/{script}", env!("CARGO_MANIFEST_DIR"));
    let out = std::process::Command::new(python)
        .arg(path)
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}
