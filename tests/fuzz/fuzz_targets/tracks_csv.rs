//! Any bytes as a tracks CSV: the analysis reader, the truth reader and, when they accept the
//! input, the whole migration analysis must end in a value or an error, never a panic.
#![no_main]

use caravan::analyze::population::{analyze_tracks, AnalysisOptions};
use caravan::analyze::table::{apply_filters, read_tracks, CalibrationOverride, Filters};
use caravan::tracks::read_track_points;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = read_track_points(text);
    }
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("tracks.csv");
    std::fs::write(&path, data).expect("written");
    if let Ok(table) = read_tracks(&path, CalibrationOverride::default()) {
        let filters = Filters { min_points: 2, ..Filters::default() };
        let kept = apply_filters(&table.tracks, &filters);
        if !kept.is_empty() && kept.iter().map(|t| t.path.len()).sum::<usize>() < 5000 {
            let _ = analyze_tracks(&kept, &table.units, &AnalysisOptions::default());
        }
    }
});
