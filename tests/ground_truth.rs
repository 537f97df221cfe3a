//! Segmentation against ground truth on synthetic recordings generated here, in the test.
//! Targets (from the foundation issue): detection F1 ≥ 0.97 on an easy scenario, ≥ 0.93 on a
//! crowded one with touching nuclei; IoU-matched F1 ≥ 0.9 on the easy one.
//!
//! Scoring rule (common practice for centroid matching): a detection matches a true nucleus
//! when its centroid lies within half a diameter, one-to-one (optimal assignment). Nuclei and
//! detections whose centroid lies within half a diameter of the image border are left out of
//! the centroid score on both sides, since a nucleus cut by the border has no well-defined
//! centre.

use caravan::params::SegmentParams;
use caravan::score::{iou_match, match_points, IouScore, MatchCounts};
use caravan::segment::segment_frame;
use caravan::stack::{OpenOptions, Pixels, Stack};
use caravan::synth::{truth_points_of, write_recording, Scenario, SynthParams};

struct Scores {
    centroid: MatchCounts,
    iou: MatchCounts,
}

fn score_scenario(p: &SynthParams) -> Scores {
    let dir = tempfile::tempdir().unwrap();
    let out = write_recording(dir.path(), p).unwrap();
    let mut rec = Stack::open(&out.recording, &OpenOptions::default()).unwrap();
    let mut truth = Stack::open(&out.truth_labels, &OpenOptions::default()).unwrap();
    // As a user runs it: the diameter estimated from the recording, not the synthetic one.
    let diameter = caravan::pipeline::resolve_diameter(&mut rec, None, &SegmentParams::for_diameter).unwrap();
    let params = SegmentParams::for_diameter(diameter.px());
    let (w, h) = (p.width as f64, p.height as f64);
    let margin = p.diameter_px / 2.0;
    let inside = |x: f64, y: f64| x >= margin && y >= margin && x <= w - 1.0 - margin && y <= h - 1.0 - margin;
    let mut centroid = MatchCounts::default();
    let mut iou = MatchCounts::default();
    for t in 0..p.frames {
        let seg = segment_frame(&rec.read_frame(t).unwrap().to_image(), t, &params);
        let Pixels::U16(labels) = truth.read_frame(t).unwrap().pixels else {
            panic!("truth labels are 16-bit")
        };
        let reference: Vec<(f64, f64)> = truth_points_of(&labels, p.width, t)
            .iter()
            .map(|q| (q.x, q.y))
            .filter(|&(x, y)| inside(x, y))
            .collect();
        let found: Vec<(f64, f64)> = seg
            .detections
            .iter()
            .map(|d| (d.x, d.y))
            .filter(|&(x, y)| inside(x, y))
            .collect();
        centroid.add(match_points(&reference, &found, margin));
        let reference_labels: Vec<u32> = labels.iter().map(|&v| v as u32).collect();
        let IouScore { counts, .. } = iou_match(&reference_labels, &seg.labels);
        iou.add(counts);
    }
    eprintln!(
        "{:?}: centroid F1 {:.4} {:?}; IoU F1 {:.4} {:?}",
        p.scenario,
        centroid.f1(),
        centroid,
        iou.f1(),
        iou
    );
    Scores { centroid, iou }
}

#[test]
fn easy_dish_is_segmented_almost_perfectly() {
    let mut p = SynthParams::new(Scenario::Dish, 384, 384, 6);
    p.seed = 21;
    let s = score_scenario(&p);
    assert!(s.centroid.true_positives > 100, "enough nuclei to judge");
    assert!(s.centroid.f1() >= 0.97, "detection F1 {}", s.centroid.f1());
    assert!(s.iou.f1() >= 0.9, "IoU-matched F1 {}", s.iou.f1());
}

#[test]
fn crowded_touching_nuclei_are_split() {
    let mut p = SynthParams::new(Scenario::Crowded, 384, 384, 4);
    p.seed = 22;
    let s = score_scenario(&p);
    assert!(s.centroid.true_positives > 400, "enough nuclei to judge");
    assert!(s.centroid.f1() >= 0.93, "detection F1 {}", s.centroid.f1());
}

#[test]
fn migrating_stripe_with_entering_cells() {
    let mut p = SynthParams::new(Scenario::Stripe, 384, 256, 8);
    p.seed = 23;
    let s = score_scenario(&p);
    assert!(s.centroid.f1() >= 0.95, "detection F1 {}", s.centroid.f1());
}
