//! Crowded tissue, tracked with defaults only and scored against the known truth: nuclei
//! pressed into each other, dim ones among bright ones, and dividing mothers that round up
//! before they split. Targets from the issue on crowded tissue (crowded field: detection F1 ≥
//! 0.95, MOTA ≥ 0.90, mostly tracked ≥ 0.75; divisions: ≥ 85% recovered with the right mother,
//! ≥ 90% of those reported true).
//!
//! Scoring as `caravan score` does it (points within half the synthetic diameter, border
//! margin of half a diameter; common practice for centroid matching).

mod common;

use caravan::link::LinkOptions;
use caravan::score::files::score_files;
use caravan::synth::{Look, Scenario, Scene, SynthParams};
use common::track_synthetic;

/// The crowded field of benches/accuracy.sh: 287 nuclei of 14 px in 384² (30% of the area),
/// pressed to 0.7 of the sum of their radii, tissue look with a brightness spread of 0.25.
fn crowded_field(seed: u64) -> SynthParams {
    let mut p = SynthParams::new(Scenario::Crowded, 384, 384, 30);
    p.nuclei = 287;
    p.look = Look {
        brightness_spread: 0.25,
        ..Look::TISSUE
    };
    p.separation = Some(0.7);
    p.seed = seed;
    p
}

/// Share of the frame inside nuclei and share of nuclei touching another, from the truth
/// label image of frame `t` (8-connected contact between different labels).
fn coverage_and_touching(p: &SynthParams, t: usize) -> (f64, f64) {
    let scene = Scene::simulate(p);
    let labels = scene.labels(t);
    let (w, h) = (p.width, p.height);
    let mut touching = std::collections::BTreeSet::new();
    let mut present = std::collections::BTreeSet::new();
    for y in 0..h {
        for x in 0..w {
            let a = labels[y * w + x];
            if a == 0 {
                continue;
            }
            present.insert(a);
            for (dx, dy) in [(1i64, 0i64), (0, 1), (1, 1), (-1, 1)] {
                let (nx, ny) = (x as i64 + dx, y as i64 + dy);
                if nx < 0 || ny < 0 || nx >= w as i64 || ny >= h as i64 {
                    continue;
                }
                let b = labels[ny as usize * w + nx as usize];
                if b != 0 && b != a {
                    touching.insert(a);
                    touching.insert(b);
                }
            }
        }
    }
    let inside = labels.iter().filter(|&&l| l != 0).count() as f64 / (w * h) as f64;
    (inside, touching.len() as f64 / present.len() as f64)
}

#[test]
fn a_crowded_field_of_pressed_nuclei_meets_its_targets() {
    let p = crowded_field(7);
    // The scene is what the issue describes: about 30% of the area inside nuclei and most
    // nuclei touching a neighbour.
    let (inside, touching) = coverage_and_touching(&p, 10);
    eprintln!(
        "crowded field: {:.0}% of the area, {:.0}% touching",
        100.0 * inside,
        100.0 * touching
    );
    assert!((0.25..0.35).contains(&inside) && touching > 0.6);
    let scene = track_synthetic(&p, LinkOptions::default());
    let s = score_files(&scene.syn, &scene.run, None, None).unwrap().1;
    eprintln!(
        "crowded field: F1 {:.4} MOTA {:.4} MT {:.3} breaks {:?}",
        s.detection_f1, s.clear_mot.mota, s.tracks.mostly_tracked, s.breaks
    );
    assert!(s.detection_f1 >= 0.95, "F1 {}", s.detection_f1);
    assert!(s.clear_mot.mota >= 0.90, "MOTA {}", s.clear_mot.mota);
    assert!(s.tracks.mostly_tracked >= 0.75, "MT {}", s.tracks.mostly_tracked);
}

#[test]
fn mothers_that_round_up_before_dividing_are_found() {
    // Mothers round up and brighten for 2 frames, then split into two touching daughters;
    // 0.8% of nuclei per frame, two seeded dishes of 100 nuclei, pooled.
    let [truth, recovered, found, spurious] = pooled_divisions(|seed| {
        let mut p = SynthParams::new(Scenario::Dish, 384, 384, 40);
        p.nuclei = 100;
        p.division_rate = 0.008;
        p.mitosis_frames = 2;
        p.seed = seed;
        p
    });
    eprintln!("mitotic divisions: {recovered} of {truth} recovered, {spurious} of {found} spurious");
    assert!(truth >= 40, "enough events to judge: {truth}");
    assert!(recovered as f64 >= 0.85 * truth as f64);
    assert!(spurious as f64 <= 0.10 * found as f64);
}

#[test]
fn divisions_in_crowded_tissue_are_found() {
    // The frequent-division scene of benches/accuracy.sh on two other seeds: crowded tissue
    // look, 0.8% of nuclei dividing per frame, mothers rounding up and brightening for 2
    // frames, daughters touching at birth. Pooled on these seeds this version recovers 128 of
    // 142 divisions (90.1%) with 5 of 133 reported spurious, and the issue's target of 85% is
    // asserted. The measure is in the README ("Accuracy"): 750 of 865 (86.7%) on the twelve
    // seeds the blob split was developed on, 708 of 807 (87.7%) on twelve seeds run once
    // after it was settled; this pair of seeds is a guard.
    let [truth, recovered, found, spurious] = pooled_divisions(|seed| {
        let mut p = SynthParams::new(Scenario::Crowded, 384, 384, 40);
        p.look = Look::TISSUE;
        p.division_rate = 0.008;
        p.mitosis_frames = 2;
        p.seed = seed;
        p
    });
    eprintln!("crowded divisions: {recovered} of {truth} recovered, {spurious} of {found} spurious");
    assert!(truth >= 100, "enough events to judge: {truth}");
    assert!(recovered as f64 >= 0.85 * truth as f64, "{recovered} of {truth}");
    assert!(spurious as f64 <= 0.10 * found as f64, "{spurious} of {found}");
}

/// Division scores of the scenes `scene(22)` and `scene(23)`, tracked with defaults, pooled:
/// `[reference events, recovered, found, spurious]`.
fn pooled_divisions(scene: impl Fn(u64) -> SynthParams) -> [usize; 4] {
    let mut pooled = [0; 4];
    for seed in [22, 23] {
        let tracked = track_synthetic(&scene(seed), LinkOptions::default());
        let d = score_files(&tracked.syn, &tracked.run, None, None).unwrap().1.divisions;
        for (sum, v) in pooled
            .iter_mut()
            .zip([d.reference_events, d.recovered, d.found_events, d.spurious])
        {
            *sum += v;
        }
    }
    pooled
}
