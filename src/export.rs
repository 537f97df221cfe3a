//! A run in the result layout of the Cell Tracking Challenge, so that its published
//! evaluation (and any tool that reads the layout) can score it: one 16-bit mask per frame,
//! `maskTTT.tif`, whose labels are track labels, and `res_track.txt`, one line `L B E P` per
//! track (label, first frame, last frame, parent label or 0).
//!
//! # Method
//! The layout of M. Maška et al. (2014), "A benchmark for comparison of cell tracking
//! algorithms", Bioinformatics 30(11):1609–1617, doi:10.1093/bioinformatics/btu080, and
//! V. Ulman et al. (2017), "An objective comparison of cell-tracking algorithms", Nat. Methods
//! 14(12):1141–1152, doi:10.1038/nmeth.4473. A track there is present in every frame from its
//! first to its last, so a track of ours with missing frames becomes one track per stretch,
//! each later stretch the child of the one before (the layout's own convention for gaps).

use crate::error::{Error, Result};
use crate::output::{ensure_dir, write_atomic};
use crate::stack::write::{write_stack, TiffCompression};
use crate::stack::{OpenOptions, Pixels, Stack};
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

/// One track of the layout: its label, first and last frame, parent label (0: none).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CtcTrack {
    /// Label in the masks.
    pub label: u32,
    /// First frame.
    pub begin: usize,
    /// Last frame.
    pub end: usize,
    /// Parent label, 0 for none.
    pub parent: u32,
}

/// A tracked object: `(track_id, parent_id, frame, object label in labels.tif)`.
pub type TrackedObject = (u32, Option<u32>, usize, u32);

/// The layout's tracks for `objects`, and for each `(frame, object)` its layout label: tracks
/// cut where frames are missing, labels from 1 in order of track id then frame. An object two
/// tracks share (one that time repair split in two, whose pixels the label image holds
/// once) goes to the lower track id; the other track misses that frame, so it is cut there.
pub fn ctc_tracks(objects: &[TrackedObject]) -> (Vec<CtcTrack>, HashMap<(usize, u32), u32>) {
    let mut by_track: BTreeMap<u32, Vec<(usize, u32, Option<u32>)>> = BTreeMap::new();
    let mut claimed: HashMap<(usize, u32), u32> = HashMap::new();
    let mut sorted: Vec<TrackedObject> = objects.to_vec();
    sorted.sort_unstable_by_key(|o| (o.0, o.2));
    for &(id, parent, frame, object) in &sorted {
        // Every row of a daughter names her mother, so a daughter whose first point is left
        // out keeps the link on the next.
        if *claimed.entry((frame, object)).or_insert(id) == id {
            by_track.entry(id).or_default().push((frame, object, parent));
        }
    }
    let mut tracks: Vec<CtcTrack> = Vec::new();
    let mut label_of = HashMap::new();
    let mut last_label: HashMap<u32, u32> = HashMap::new();
    let mut mothers: Vec<(usize, u32)> = Vec::new();
    for (&id, points) in by_track.iter_mut() {
        points.sort_unstable();
        let mut previous: Option<(usize, u32)> = None;
        for &(frame, object, parent) in points.iter() {
            let continues = previous.is_some_and(|(f, _)| frame == f + 1);
            let label = if continues {
                previous.expect("continues").1
            } else {
                let label = tracks.len() as u32 + 1;
                let parent_label = previous.map_or(0, |p| p.1);
                tracks.push(CtcTrack {
                    label,
                    begin: frame,
                    end: frame,
                    parent: parent_label,
                });
                if previous.is_none() {
                    if let Some(mother) = parent {
                        mothers.push((tracks.len() - 1, mother));
                    }
                }
                label
            };
            tracks[label as usize - 1].end = frame;
            label_of.insert((frame, object), label);
            previous = Some((frame, label));
        }
        if let Some((_, label)) = previous {
            last_label.insert(id, label);
        }
    }
    for (k, mother) in mothers {
        tracks[k].parent = last_label.get(&mother).copied().unwrap_or(0);
    }
    (tracks, label_of)
}

/// Writes the result layout of the run folder `run` into `out`: `res_track.txt` and one
/// `maskTTT.tif` per frame (three digits, four beyond 1000 frames), from the run's
/// `labels.tif` and `tracks.csv`. Returns the number of tracks written.
///
/// # Errors
/// A run without `labels.tif` (tracked without `--labels`) or `tracks.csv`, more tracks than
/// 16-bit labels hold, or outputs that cannot be written.
pub fn export_ctc(run: &Path, out: &Path) -> Result<usize> {
    let labels_path = run.join("labels.tif");
    if !labels_path.exists() {
        return Err(Error::input(
            run,
            "has no labels.tif: track with --labels to export masks in the benchmark's layout",
        ));
    }
    let objects = read_tracked_objects(&run.join("tracks.csv"))?;
    let (tracks, label_of) = ctc_tracks(&objects);
    if tracks.len() > u16::MAX as usize {
        return Err(Error::input(
            run,
            format!("{} tracks do not fit the layout's 16-bit masks", tracks.len()),
        ));
    }
    let mut labels = Stack::open(&labels_path, &OpenOptions::default())?;
    let info = labels.info().clone();
    ensure_dir(out)?;
    let digits = if info.frames > 1000 { 4 } else { 3 };
    for t in 0..info.frames {
        let frame = labels.read_frame(t)?;
        let Pixels::U32(objects) = frame.pixels else {
            return Err(Error::input(&labels_path, "is not a 32-bit label stack"));
        };
        let mask: Vec<u16> = objects
            .iter()
            .map(|&o| {
                if o == 0 {
                    0
                } else {
                    label_of.get(&(t, o)).map_or(0, |&l| l as u16)
                }
            })
            .collect();
        let path = out.join(format!("mask{t:0digits$}.tif"));
        write_stack::<u16, _>(
            &path,
            info.width,
            info.height,
            1,
            TiffCompression::Deflate,
            None,
            |_| Ok(mask.clone()),
        )?;
    }
    let text: String = tracks
        .iter()
        .map(|c| format!("{} {} {} {}\n", c.label, c.begin, c.end, c.parent))
        .collect();
    write_atomic(&out.join("res_track.txt"), text.as_bytes())?;
    Ok(tracks.len())
}

/// `(track_id, parent_id, frame, object)` of every row of a run's `tracks.csv` (read as the
/// review page reads it).
fn read_tracked_objects(path: &Path) -> Result<Vec<TrackedObject>> {
    Ok(crate::review::read_linked_points(path)?
        .into_iter()
        .map(|p| (p.track, p.parent, p.point.frame, p.object))
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaps_split_tracks_and_daughters_name_their_mother() {
        // Construction, by the layout's conventions (Maška et al. 2014): track 1 in frames
        // 0-2 and 4-5 (frame 3 missing) is labels 1 (0-2) and 2 (4-5, parent 1); its
        // daughters 2 and 3 start at frame 6 with parent 2 (the mother's last stretch); the
        // objects keep their labels per frame.
        let mut objects: Vec<TrackedObject> = [0, 1, 2, 4, 5].iter().map(|&f| (1, None, f, 10)).collect();
        objects.push((2, Some(1), 6, 11));
        objects.push((3, Some(1), 6, 12));
        objects.push((2, Some(1), 7, 11));
        let (tracks, label_of) = ctc_tracks(&objects);
        let rows: Vec<(u32, usize, usize, u32)> = tracks.iter().map(|c| (c.label, c.begin, c.end, c.parent)).collect();
        assert_eq!(rows, vec![(1, 0, 2, 0), (2, 4, 5, 1), (3, 6, 7, 2), (4, 6, 6, 2)]);
        assert_eq!((label_of[&(4, 10)], label_of[&(7, 11)], label_of[&(6, 12)]), (2, 3, 4));
        // Construction: tracks 5 and 6 share object 20 at frame 1 (a merge time repair split):
        // the object goes to track 5; track 6 is cut around the frame it lost.
        let shared: Vec<TrackedObject> = vec![
            (5, None, 0, 20),
            (5, None, 1, 20),
            (6, None, 0, 21),
            (6, None, 1, 20),
            (6, None, 2, 21),
        ];
        let (tracks, label_of) = ctc_tracks(&shared);
        let rows: Vec<(u32, usize, usize, u32)> = tracks.iter().map(|c| (c.label, c.begin, c.end, c.parent)).collect();
        assert_eq!(rows, vec![(1, 0, 1, 0), (2, 0, 0, 0), (3, 2, 2, 2)]);
        assert_eq!(label_of[&(1, 20)], 1);
    }
}

/// A folder in one of the benchmark's layouts, as [`recognise_layout`] found it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Layout {
    /// `result` (maskTTT.tif, res_track.txt) or `ground truth` (TRA/, optionally SEG/).
    pub kind: &'static str,
    /// `(frame, path)` of the track masks (result masks, or TRA/man_trackTTT.tif), in frame
    /// order.
    pub mask_files: Vec<(usize, PathBuf)>,
    /// The track file's lines.
    pub tracks: Vec<CtcTrack>,
    /// Frames with segmentation truth (SEG/man_segTTT.tif; ground truth only).
    pub segmentation_frames: usize,
}

/// Recognises a folder in the benchmark's result layout (`res_track.txt` beside `mask*.tif`)
/// or ground-truth layout (`TRA/man_track.txt` beside `TRA/man_track*.tif`, and `SEG/` where
/// present), listing its masks and reading its track file; `Ok(None)` for any other folder.
///
/// # Errors
/// A track file whose lines are not four whole numbers (naming the line), an unreadable
/// folder.
pub fn recognise_layout(dir: &Path) -> Result<Option<Layout>> {
    let (kind, track_file, masks, prefix) = if dir.join("res_track.txt").is_file() {
        ("result", dir.join("res_track.txt"), dir.to_path_buf(), "mask")
    } else if dir.join("TRA/man_track.txt").is_file() {
        (
            "ground truth",
            dir.join("TRA/man_track.txt"),
            dir.join("TRA"),
            "man_track",
        )
    } else {
        return Ok(None);
    };
    let segmentation_frames = match kind {
        "ground truth" if dir.join("SEG").is_dir() => numbered_masks(&dir.join("SEG"), "man_seg")?.len(),
        _ => 0,
    };
    Ok(Some(Layout {
        kind,
        mask_files: numbered_masks(&masks, prefix)?,
        tracks: read_track_file(&track_file)?,
        segmentation_frames,
    }))
}

/// `(frame number, path)` of the files `PREFIX<digits>.tif` in `dir`, in frame order.
fn numbered_masks(dir: &Path, prefix: &str) -> Result<Vec<(usize, PathBuf)>> {
    let entries = std::fs::read_dir(dir).map_err(|e| Error::input(dir, format!("cannot read: {e}")))?;
    let mut out: Vec<(usize, PathBuf)> = entries
        .flatten()
        .filter_map(|e| {
            let name = e.file_name().to_string_lossy().into_owned();
            let digits = name.strip_prefix(prefix)?.strip_suffix(".tif")?;
            Some((digits.parse().ok()?, e.path()))
        })
        .collect();
    out.sort();
    Ok(out)
}

/// The `L B E P` lines of a track file.
fn read_track_file(path: &Path) -> Result<Vec<CtcTrack>> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::input(path, format!("cannot read: {e}")))?;
    let mut out = Vec::new();
    for (k, line) in text.lines().enumerate().filter(|(_, l)| !l.trim().is_empty()) {
        let v: Option<Vec<u64>> = line.split_whitespace().map(|f| f.parse().ok()).collect();
        match v.as_deref() {
            Some(&[label, begin, end, parent]) => out.push(CtcTrack {
                label: label as u32,
                begin: begin as usize,
                end: end as usize,
                parent: parent as u32,
            }),
            _ => {
                return Err(Error::input(
                    path,
                    format!("line {}: expected four whole numbers L B E P", k + 1),
                ))
            }
        }
    }
    Ok(out)
}
