//! Any bytes as a TIFF recording: opening and reading every frame must end in a value or an
//! error, never a panic, a hang or an unbounded allocation (frames capped at 16 MiB).
#![no_main]

use caravan::stack::{OpenOptions, Stack};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("input.tif");
    std::fs::write(&path, data).expect("written");
    let options = OpenOptions {
        max_frame_bytes: 16 << 20,
        ..OpenOptions::default()
    };
    if let Ok(mut stack) = Stack::open(&path, &options) {
        for t in 0..stack.info().frames.min(64) {
            if stack.read_frame(t).is_err() {
                break;
            }
        }
    }
});
