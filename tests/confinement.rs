//! Stream geometry, border response, lane profiles and a statistic against a numeric factor,
//! through the command line on track sets built here with known geometry; the expected
//! values come from the construction, and a Python reader (numpy, scipy) recomputes every
//! table from the same tracks in CI.

mod common;
use common::{caravan, ci_python, run_python};
use std::path::Path;

fn write(path: &Path, rows: impl Iterator<Item = (u32, usize, f64, f64)>) {
    let mut text = String::from("track_id,frame,x,y\n");
    for (id, f, x, y) in rows {
        text.push_str(&format!("{id},{f},{x},{y}\n"));
    }
    std::fs::write(path, text).unwrap();
}

/// A stream in a lane from y = 100 to 140: cell k at y = 100 + 2k (k = 0..19) moving +x at 2
/// px per frame for 30 frames from x = 10 + 5 (k mod 4).
fn stream(path: &Path) {
    write(
        path,
        (0..20u32).flat_map(|k| {
            (0..30).map(move |f| {
                (
                    k + 1,
                    f,
                    10.0 + 5.0 * (k % 4) as f64 + 2.0 * f as f64,
                    100.0 + 2.0 * k as f64,
                )
            })
        }),
    );
}

/// Six cells meeting a border at x = 200 (zone 10): each comes in along +x at 3 px per frame
/// from x = 170 to 194; the even ones turn straight back, the odd ones go on across.
fn bouncing(path: &Path) {
    write(
        path,
        (0..6u32).flat_map(|k| {
            (0..16).map(move |f| {
                let forward = 170.0 + 3.0 * f as f64;
                let x = if k % 2 == 0 && f > 8 {
                    194.0 - 3.0 * (f - 8) as f64
                } else {
                    forward
                };
                (k + 1, f, x, 300.0 + 20.0 * k as f64)
            })
        }),
    );
}

fn ok(out: std::process::Output) -> String {
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn stream_border_lane_and_factor_from_known_geometry() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (s, b) = (d.join("stream.csv"), d.join("bounce.csv"));
    stream(&s);
    bouncing(&b);
    let arg = |p: &Path| p.to_str().unwrap().to_string();
    ok(caravan(&[
        "analyze",
        &arg(&s),
        "-o",
        &arg(&d.join("s")),
        "--lane",
        "100,140",
    ]));
    ok(caravan(&[
        "analyze",
        &arg(&b),
        "-o",
        &arg(&d.join("b")),
        "--border",
        "poly:200,0;1000,0;1000,1000;200,1000",
        "--border-zone",
        "10",
    ]));
    // The same border as a mask TIFF (non-zero where x >= 200): its edge lies between pixel
    // centres 199 and 200, so distances are 0.5 less than the polygon's, and every approach
    // ends the same way.
    let mask = d.join("mask.tif");
    caravan::stack::write::write_stack::<u16, _>(
        &mask,
        500,
        450,
        1,
        caravan::stack::write::TiffCompression::None,
        None,
        |_| Ok((0..500 * 450).map(|i| if i % 500 >= 200 { 1 } else { 0 }).collect()),
    )
    .unwrap();
    ok(caravan(&[
        "analyze",
        &arg(&b),
        "-o",
        &arg(&d.join("bm")),
        "--border",
        &arg(&mask),
        "--border-zone",
        "10",
    ]));
    let outcomes = |dir: &str| -> Vec<String> {
        let text = std::fs::read_to_string(d.join(dir).join("border.csv")).unwrap();
        text.lines()
            .map(|l| l.split(',').take(4).collect::<Vec<_>>().join(","))
            .collect()
    };
    assert_eq!(outcomes("b"), outcomes("bm"));
    // Removing the common drift changes the motion analysed, not where the cells are: the
    // approaches to the border stay the same.
    ok(caravan(&[
        "analyze",
        &arg(&b),
        "-o",
        &arg(&d.join("bd")),
        "--border",
        "poly:200,0;1000,0;1000,1000;200,1000",
        "--border-zone",
        "10",
        "--remove-drift",
    ]));
    assert_eq!(outcomes("b"), outcomes("bd"));
    // Stream (construction): y = 100..138 in steps of 2, so the 5th to 95th percentile span
    // (numpy's linear rule) is 2 × (18.05 − 0.95) = 34.2 px; the front advances at the cells'
    // 2 px per frame.
    let summary: serde_json::Value = serde_json::from_slice(&std::fs::read(d.join("s/summary.json")).unwrap()).unwrap();
    let st = &summary["confinement"]["stream"];
    assert!(
        (st["mean_width_p5_p95_px"]["value"].as_f64().unwrap() - 34.2).abs() < 1e-9,
        "{st}"
    );
    assert!((st["front_speed_px_per_frame"]["value"].as_f64().unwrap() - 2.0).abs() < 1e-9);
    // Lane profile: every step is 2 px per frame straight along the axis.
    let profiles = std::fs::read_to_string(d.join("s/profiles.csv")).unwrap();
    assert!(
        profiles
            .lines()
            .skip(1)
            .all(|l| l.contains(",2.000000,1.000000,") || l.contains(",0,,,")),
        "{profiles}"
    );
    // Border (construction): three cells turned back (180°), three crossed; half of the
    // approaching cells crossed.
    let summary: serde_json::Value = serde_json::from_slice(&std::fs::read(d.join("b/summary.json")).unwrap()).unwrap();
    let br = &summary["confinement"]["border"];
    assert_eq!(
        (br["turned_back"].as_u64(), br["crossed"].as_u64()),
        (Some(3), Some(3)),
        "{br}"
    );
    assert_eq!(br["share_of_approaching_cells_crossing"]["value"].as_f64(), Some(0.5));
    assert!((br["mean_turning_away_deg"].as_f64().unwrap() - 180.0).abs() < 1e-9);
    // A statistic against a numeric factor: twelve recordings at widths 10-70, each of
    // cells moving at 3 − ((w − 40)/20)² px per frame: the mean speed peaks at width 40.
    let mut manifest = String::from("path,condition,replicate,width\n");
    for (k, w) in [10.0, 20.0, 30.0, 40.0, 50.0, 60.0, 70.0, 25.0, 35.0, 45.0, 55.0, 65.0]
        .iter()
        .enumerate()
    {
        let speed = 3.0 - ((w - 40.0) / 20.0f64).powi(2);
        let name = format!("w{k}.csv");
        write(
            &d.join(&name),
            (0..5u32).flat_map(move |c| (0..12).map(move |f| (c + 1, f, speed * f as f64, 50.0 * c as f64))),
        );
        manifest.push_str(&format!("{name},lanes,r{k},{w}\n"));
    }
    std::fs::write(d.join("m.csv"), manifest).unwrap();
    let out = ok(caravan(&[
        "compare",
        &arg(&d.join("m.csv")),
        "-o",
        &arg(&d.join("f")),
        "--by",
        "width",
    ]));
    let summary: serde_json::Value = serde_json::from_slice(&std::fs::read(d.join("f/summary.json")).unwrap()).unwrap();
    let speed = summary["factor"]["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["statistic"] == "mean_speed_px_per_frame")
        .unwrap()
        .clone();
    assert!((speed["peak"].as_f64().unwrap() - 40.0).abs() < 1e-6, "{speed}\n{out}");
    assert_eq!(speed["optimum_supported"], true);
    // The pages show what was asked for: the stream (2 charts) and the lane (4), the border
    // (2), and one chart per statistic against the factor after the two overlaid curves.
    let page = |p: &str| std::fs::read_to_string(d.join(p)).unwrap();
    let (sp, bp, fp) = (page("s/report.html"), page("b/report.html"), page("f/report.html"));
    assert!(sp.contains("id=\"confinement-5\"") && !sp.contains("id=\"confinement-6\""));
    assert!(bp.contains("id=\"confinement-1\"") && !bp.contains("id=\"confinement-2\""));
    assert!(fp.contains("Mean speed per track (px/frame) against width"));
    for p in [&sp, &bp, &fp] {
        assert!(!p.contains("chart could not be drawn"));
    }
    // A border file that does not exist: one line naming it, exit 2, nothing written.
    let bad = caravan(&[
        "analyze",
        &arg(&b),
        "-o",
        &arg(&d.join("bad")),
        "--border",
        &arg(&d.join("none.tif")),
    ]);
    let stderr = String::from_utf8_lossy(&bad.stderr);
    assert_eq!(bad.status.code(), Some(2));
    assert!(
        stderr.contains("none.tif") && stderr.trim().lines().count() == 1,
        "{stderr}"
    );
    assert!(!d.join("bad").exists());
    // Without the options: no section and none of their tables.
    ok(caravan(&["analyze", &arg(&s), "-o", &arg(&d.join("plain"))]));
    assert!(!page("plain/report.html").contains("id=\"confinement\""));
    assert!(!d.join("plain/stream.csv").exists() && !d.join("plain/border.csv").exists());
    let Some(python) = ci_python() else { return };
    run_python(
        &python,
        "check_confinement.py",
        &[
            &arg(&s),
            &arg(&d.join("s")),
            &arg(&b),
            &arg(&d.join("b")),
            &arg(&d.join("f")),
        ],
    );
}
