//! Damaged files must give errors, never panics or unbounded allocations: random byte flips
//! and truncations of the valid fixtures (fixed seed), each opened and fully read.

use caravan::stack::{OpenOptions, Stack};
use caravan::synth::Rng;
use std::path::Path;

fn read_all(path: &Path) -> Result<(), String> {
    // A 64 MiB frame limit bounds what a damaged header can make us allocate.
    let options = OpenOptions {
        max_frame_bytes: 64 << 20,
        channel: Some(0),
        ..OpenOptions::default()
    };
    let mut s = Stack::open(path, &options).map_err(|e| e.to_string())?;
    for t in 0..s.info().frames {
        s.read_frame(t).map_err(|e| e.to_string())?;
    }
    Ok(())
}

#[test]
fn mutated_fixtures_never_panic() {
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/tiff");
    let names = [
        "u16_none_strips_le_classic.tif",
        "u16_lzw_tiles_be_bigtiff.tif",
        "f32_deflate_strips_le_bigtiff.tif",
        "u8_packbits_tiles_be_classic.tif",
        "ome_tzcyx.ome.tif",
        "rgb_planar.tif",
        "u16_deflate_predictor2.tif",
    ];
    let dir = tempfile::tempdir().unwrap();
    let target = dir.path().join("mutant.tif");
    let mut rng = Rng::new(2026);
    let mut errors = 0;
    let cases = 3000;
    for case in 0..cases {
        let original = std::fs::read(fixtures.join(names[case % names.len()])).unwrap();
        let mut bytes = original.clone();
        match case % 3 {
            0 => bytes.truncate((rng.uniform() * original.len() as f64) as usize),
            1 => {
                for _ in 0..1 + (rng.uniform() * 8.0) as usize {
                    let i = (rng.uniform() * bytes.len() as f64) as usize;
                    bytes[i] = (rng.next_u64() & 0xff) as u8;
                }
            }
            _ => {
                // Overwrite a 4-byte word inside the first 512 bytes (headers and directories).
                let i = (rng.uniform() * bytes.len().min(512).saturating_sub(4) as f64) as usize;
                bytes[i..i + 4].copy_from_slice(&(rng.next_u64() as u32).to_le_bytes());
            }
        }
        std::fs::write(&target, &bytes).unwrap();
        let outcome = std::panic::catch_unwind(|| read_all(&target));
        match outcome {
            Ok(Ok(())) => {}
            Ok(Err(message)) => {
                errors += 1;
                assert!(
                    message.starts_with(&target.display().to_string()),
                    "case {case}: error must name the file: {message}"
                );
            }
            Err(_) => panic!(
                "case {case} ({}, mutation {}) panicked",
                names[case % names.len()],
                case % 3
            ),
        }
    }
    // Most mutations must be caught as errors (not silently read): truncations always are.
    assert!(errors > cases / 3, "{errors} errors of {cases}");
}

#[test]
fn mutated_tracks_csv_never_panics() {
    // The tracks-CSV readers (analysis and truth) and the whole analysis behind them, on 1500
    // seeded truncations, byte flips and cell-breaking edits of a valid hand-written table.
    use caravan::analyze::population::{analyze_tracks, AnalysisOptions};
    use caravan::analyze::table::{apply_filters, read_tracks, CalibrationOverride, Filters};
    let mut original = String::from("track_id,parent_id,frame,x,y,x_um,time_s\n");
    for id in 1..=6u32 {
        let parent = if id > 4 { "2" } else { "" };
        for f in 0..15 {
            let (x, y) = (3.0 * f as f64 + id as f64, 10.0 * id as f64 + (f % 3) as f64);
            original.push_str(&format!("{id},{parent},{f},{x},{y},{},{}\n", x * 0.5, 60 * f));
        }
    }
    let original = original.into_bytes();
    let dir = tempfile::tempdir().unwrap();
    let target = dir.path().join("tracks.csv");
    let mut rng = Rng::new(7);
    for case in 0..1500 {
        let mut bytes = original.clone();
        match case % 3 {
            0 => bytes.truncate((rng.uniform() * original.len() as f64) as usize),
            1 => {
                for _ in 0..1 + (rng.uniform() * 6.0) as usize {
                    let i = (rng.uniform() * bytes.len() as f64) as usize;
                    bytes[i] = (rng.next_u64() & 0xff) as u8;
                }
            }
            _ => {
                let i = (rng.uniform() * bytes.len() as f64) as usize;
                let edit: &[u8] = [&b","[..], b"\n", b"-1e308", b"NaN", b"99999999999999999999"][case % 5];
                bytes.splice(i..i, edit.iter().copied());
            }
        }
        std::fs::write(&target, &bytes).unwrap();
        let outcome = std::panic::catch_unwind(|| {
            if let Ok(text) = std::str::from_utf8(&bytes) {
                let _ = caravan::tracks::read_track_points(text);
            }
            match read_tracks(&target, CalibrationOverride::default()) {
                Ok(table) => {
                    let kept = apply_filters(
                        &table.tracks,
                        &Filters {
                            min_points: 2,
                            ..Filters::default()
                        },
                    );
                    if !kept.is_empty() {
                        analyze_tracks(&kept, &table.units, &AnalysisOptions::default());
                    }
                    None
                }
                Err(e) => Some(e.to_string()),
            }
        });
        match outcome {
            Ok(Some(message)) => assert!(message.contains("tracks.csv"), "case {case}: {message}"),
            Ok(None) => {}
            Err(_) => panic!("case {case} panicked"),
        }
    }
}
