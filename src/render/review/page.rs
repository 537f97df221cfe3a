//! The review page's files: the HTML shell with its style and script (kept as assets beside
//! this file), and the data scripts it loads (`data/run.js`, `data/tracks.js`,
//! `data/shapes_NNNN.js`).

use super::{compact, push_numbers, FullFramePlan, MomentKind, ReviewInput, ReviewTrack};
use crate::render::PALETTE;
use std::fmt::Write as _;

const STYLE: &str = include_str!("page.css");
const SCRIPT: &str = include_str!("page.js");
const SHELL: &str = include_str!("page.html");

/// The page: the shell with the style, script and title filled in.
pub(super) fn html(title: &str) -> String {
    SHELL
        .replace("/*STYLE*/", STYLE)
        .replace("/*SCRIPT*/", SCRIPT)
        .replace("@@TITLE@@", &escape_html(title))
}

/// `data/run.js`: sizes, timing, the full-resolution frames, the verdict and the moments.
pub(super) fn run_script(input: &ReviewInput, factor: usize, plan: &FullFramePlan) -> String {
    let (w, h) = input.size;
    let moments: Vec<serde_json::Value> = input
        .moments
        .iter()
        .map(|m| {
            serde_json::json!({
                "frame": m.frame,
                "kind": kind_key(m.kind),
                "track": m.track,
                "note": m.note,
            })
        })
        .collect();
    let kinds: Vec<serde_json::Value> = MomentKind::ALL
        .iter()
        .map(|&k| serde_json::json!({"key": kind_key(k), "label": k.label()}))
        .collect();
    let palette: Vec<String> = PALETTE
        .iter()
        .map(|c| format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2]))
        .collect();
    let run = serde_json::json!({
        "title": input.title,
        "width": w,
        "height": h,
        "frames": input.frames,
        "interval_s": input.interval_s,
        "pixel_size_um": input.pixel_size_um,
        "display": {"width": w.div_ceil(factor), "height": h.div_ceil(factor), "factor": factor},
        "full": plan.frames.iter().collect::<Vec<_>>(),
        "full_every": plan.every,
        "chunk": super::FRAMES_PER_CHUNK,
        "verdict": input.verdict,
        "moments": moments,
        "kinds": kinds,
        "palette": palette,
    });
    format!("caravanRun({run});\n")
}

/// `data/tracks.js`: per track its id, mother, daughters, speed, directionality and points as
/// a flat list `frame, x, y, link confidence` (−1 where none).
pub(super) fn tracks_script(tracks: &[ReviewTrack]) -> String {
    let mut out = String::from("caravanTracks([\n");
    for (i, t) in tracks.iter().enumerate() {
        let parent = t.parent.map_or("null".into(), |p| p.to_string());
        let opt = |v: Option<f64>, d| v.map_or("null".into(), |v| compact(v, d));
        let _ = write!(out, "{{\"id\":{},\"parent\":{parent},\"daughters\":", t.id);
        push_numbers(&mut out, t.daughters.iter().map(u32::to_string));
        let _ = write!(
            out,
            ",\"speed\":{},\"straightness\":{},\"p\":",
            opt(t.speed_px_per_frame, 3),
            opt(t.directionality, 3)
        );
        push_numbers(
            &mut out,
            t.points.iter().flat_map(|p| {
                [
                    p.frame.to_string(),
                    compact(p.x, 1),
                    compact(p.y, 1),
                    p.link_confidence.map_or("-1".into(), |c| compact(c, 2)),
                ]
            }),
        );
        out.push('}');
        out.push_str(if i + 1 < tracks.len() { ",\n" } else { "\n" });
    }
    out.push_str("]);\n");
    out
}

/// `data/shapes_NNNN.js`, one per `chunk` frames: per frame a flat list `track, x, y, major,
/// minor, angle` of its objects, in ascending track id.
pub(super) fn shape_scripts(input: &ReviewInput, chunk: usize) -> Vec<String> {
    let mut per_frame: Vec<Vec<(u32, &super::ReviewPoint)>> = vec![Vec::new(); input.frames];
    for t in &input.tracks {
        for p in &t.points {
            if let Some(list) = per_frame.get_mut(p.frame) {
                list.push((t.id, p));
            }
        }
    }
    per_frame
        .chunks(chunk.max(1))
        .enumerate()
        .map(|(k, frames)| {
            let mut out = format!("caravanShapes({k},[\n");
            for (i, objects) in frames.iter().enumerate() {
                out.push_str(&frame_shapes(objects));
                out.push_str(if i + 1 < frames.len() { ",\n" } else { "\n" });
            }
            out.push_str("]);\n");
            out
        })
        .collect()
}

/// One frame's objects as a JSON array: for each, in track order, its track, centre, axes and
/// angle.
fn frame_shapes(objects: &[(u32, &super::ReviewPoint)]) -> String {
    let mut objects = objects.to_vec();
    objects.sort_by_key(|o| o.0);
    let mut out = String::new();
    push_numbers(
        &mut out,
        objects.iter().flat_map(|(id, p)| {
            [
                id.to_string(),
                compact(p.x, 1),
                compact(p.y, 1),
                compact(p.axes.0, 1),
                compact(p.axes.1, 1),
                compact(p.angle_deg, 0),
            ]
        }),
    );
    out
}

/// The key a moment kind has in the data (and in the page's filter).
fn kind_key(kind: MomentKind) -> &'static str {
    match kind {
        MomentKind::CountJump => "count_jump",
        MomentKind::Division => "division",
        MomentKind::TransientMerge => "merge",
        MomentKind::StartsInside => "start",
        MomentKind::EndsInside => "end",
        MomentKind::ClosedGap => "gap",
        MomentKind::LowConfidenceLink => "uncertain",
    }
}

fn escape_html(text: &str) -> String {
    text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}
