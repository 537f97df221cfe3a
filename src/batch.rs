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

/// Runs `work` once for every entry, `jobs` at a time (default: half the cores, at least one),
/// each job taking the next entry as it finishes one, and returns the results in manifest
/// order whatever order they finished in.
pub fn run_each<T: Send>(
    entries: &[ManifestEntry],
    jobs: Option<usize>,
    work: impl Fn(usize, &ManifestEntry) -> T + Sync,
) -> Vec<T> {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let jobs = jobs.unwrap_or((cores / 2).max(1)).clamp(1, entries.len().max(1));
    let next = std::sync::atomic::AtomicUsize::new(0);
    let done: std::sync::Mutex<Vec<(usize, T)>> = std::sync::Mutex::new(Vec::new());
    std::thread::scope(|s| {
        for _ in 0..jobs {
            s.spawn(|| loop {
                let k = next.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
                let Some(entry) = entries.get(k) else { break };
                let result = work(k, entry);
                done.lock().expect("no panics while held").push((k, result));
            });
        }
    });
    let mut done = done.into_inner().expect("threads joined");
    done.sort_by_key(|d| d.0);
    done.into_iter().map(|d| d.1).collect()
}

/// Why the input of a finished run (its `run.json`) is no longer the one it tracked, or `None`
/// when it is: a different size is a change; the same size and modification time is taken as
/// no change (the quick check); otherwise the file's CRC-32 decides (a copy or a touch keeps
/// it, another recording of the same size does not).
///
/// # Errors
/// An unreadable record or input.
pub fn input_changed_since(run_json: &Path, input: &Path) -> Result<Option<String>> {
    let record = crate::record::RunRecord::read(run_json)?;
    let meta = std::fs::metadata(input).map_err(|e| Error::input(input, e.to_string()))?;
    if !meta.is_file() {
        return Ok(None);
    }
    let recorded = &record.input;
    if meta.len() != recorded.stack.bytes_on_disk {
        return Ok(Some(format!(
            "{} bytes now, {} when tracked",
            meta.len(),
            recorded.stack.bytes_on_disk
        )));
    }
    if recorded.modified_unix_s.is_some() && recorded.modified_unix_s == crate::output::modified_unix_s(input) {
        return Ok(None);
    }
    let crc = crate::output::crc32_file(input).map_err(|e| Error::input(input, e.to_string()))?;
    let now = format!("{crc:08x}");
    Ok((recorded.crc32.as_deref() != Some(now.as_str())).then(|| {
        format!(
            "CRC-32 {now} now, {} when tracked",
            recorded.crc32.as_deref().unwrap_or("unknown")
        )
    }))
}

#[cfg(test)]
mod tests {

    #[test]
    fn results_come_back_in_manifest_order() {
        // Construction: the earlier entries take longer, so with two jobs they finish last; the
        // results must still come back in manifest order, each once.
        let entries: Vec<ManifestEntry> = (0..6)
            .map(|k| ManifestEntry {
                line: k + 2,
                path: format!("r{k}.tif").into(),
                condition: "c".into(),
                replicate: k.to_string(),
                labels: Default::default(),
            })
            .collect();
        let out = run_each(&entries, Some(2), |k, e| {
            std::thread::sleep(std::time::Duration::from_millis(5 * (6 - k as u64)));
            e.line
        });
        assert_eq!(out, vec![2, 3, 4, 5, 6, 7]);
    }
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
