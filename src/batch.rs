//! Many recordings of a screen from one manifest: the run folder of each recording, and the
//! manifest of run folders that `compare` reads afterwards. Used by `caravan batch` and by the
//! workflow that `caravan workflow` writes, so both put every result in the same place.

use crate::analyze::compare::ManifestEntry;
use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// A name safe as one path component: letters, digits, `-`, `_` and `.` kept, the rest `_`.
pub fn slug(text: &str) -> String {
    let s: String = text
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    let s = s.trim_matches('.').to_string();
    if s.is_empty() {
        "_".into()
    } else {
        s
    }
}

/// The run folder of a manifest entry inside `out`: `runs/CONDITION/REPLICATE/NAME` with the
/// recording's file name (without extension); the manifest line is added when two entries
/// would share a folder.
pub fn run_folders(entries: &[ManifestEntry], out: &Path) -> Vec<PathBuf> {
    let base: Vec<PathBuf> = entries
        .iter()
        .map(|e| {
            let stem = e
                .path
                .file_stem()
                .map(|s| s.to_string_lossy().trim_end_matches(".ome").to_string())
                .unwrap_or_default();
            out.join("runs")
                .join(slug(&e.condition))
                .join(slug(&e.replicate))
                .join(slug(&stem))
        })
        .collect();
    base.iter()
        .zip(entries)
        .map(|(p, e)| {
            if base.iter().filter(|q| *q == p).count() > 1 {
                p.with_file_name(format!(
                    "{}-line{}",
                    p.file_name().unwrap_or_default().to_string_lossy(),
                    e.line
                ))
            } else {
                p.clone()
            }
        })
        .collect()
}

/// Writes `runs.csv` in `out`: the manifest with each path replaced by its run folder
/// (relative to `out`), other columns kept, and with `verdicts` (one per entry) a `verdict`
/// column (empty for a recording that could not be tracked); the input of the final
/// comparison.
pub fn write_runs_manifest(
    entries: &[ManifestEntry],
    folders: &[PathBuf],
    verdicts: &[Option<crate::verdict::Verdict>],
    out: &Path,
) -> Result<PathBuf> {
    let path = out.join("runs.csv");
    let mut labels: Vec<&String> = entries
        .iter()
        .flat_map(|e| e.labels.keys())
        .filter(|l| *l != "verdict")
        .collect();
    labels.sort();
    labels.dedup();
    let with_verdict = !verdicts.is_empty();
    let mut w = csv::Writer::from_writer(Vec::new());
    let header = ["path", "condition", "replicate"]
        .into_iter()
        .map(String::from)
        .chain(labels.iter().map(|l| l.to_string()))
        .chain(with_verdict.then(|| "verdict".to_string()));
    w.write_record(header).map_err(|e| Error::output(&path, e.into()))?;
    for (k, (e, folder)) in entries.iter().zip(folders).enumerate() {
        let rel = folder.strip_prefix(out).unwrap_or(folder).display().to_string();
        let verdict = verdicts.get(k).copied().flatten().map(|v| v.word().to_string());
        let row = [rel, e.condition.clone(), e.replicate.clone()]
            .into_iter()
            .chain(labels.iter().map(|l| e.labels.get(*l).cloned().unwrap_or_default()))
            .chain(with_verdict.then(|| verdict.unwrap_or_default()));
        w.write_record(row).map_err(|e| Error::output(&path, e.into()))?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::output(&path, std::io::Error::other(e.to_string())))?;
    crate::output::write_atomic(&path, &bytes)?;
    Ok(path)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folder_names_are_safe_and_unique() {
        // Hand-derived: markup and separators become '_'; two rows of one recording in one
        // condition and replicate get their manifest line appended.
        assert_eq!(slug("ctrl <b>/../x"), "ctrl__b__.._x");
        assert_eq!(slug("..."), "_");
        let entry = |line: usize, path: &str| ManifestEntry {
            line,
            path: PathBuf::from(path),
            condition: "kd 1".into(),
            replicate: "e1".into(),
            labels: Default::default(),
        };
        let f = run_folders(
            &[entry(2, "a/m.ome.tif"), entry(3, "b/m.ome.tif"), entry(4, "c/n.tif")],
            Path::new("out"),
        );
        assert_eq!(f[0], PathBuf::from("out/runs/kd_1/e1/m-line2"));
        assert_eq!(f[1], PathBuf::from("out/runs/kd_1/e1/m-line3"));
        assert_eq!(f[2], PathBuf::from("out/runs/kd_1/e1/n"));
    }
}
