//! The windowed split of touching nuclei (one component at a time, in a window of its box)
//! against the same method run once over the whole frame, on random masks of overlapping
//! discs: the claim in `segment/split.rs` is that, without distance smoothing, distances,
//! seeds and flooding are those of the whole frame, so the two must give the same objects.

use caravan::numeric::Rng;
use caravan::segment::distance_transform::squared_edt;
use caravan::segment::hmaxima::h_maxima_seeds;
use caravan::segment::split_touching;
use caravan::segment::watershed::seeded_watershed;
use std::collections::BTreeMap;

/// The split done once over the whole frame: exact squared EDT, seeds from the h-maxima of the
/// distance (one per regional maximum of the reconstruction), watershed over the squared
/// distances (the method of `split_touching`, without its windows).
fn whole_frame_split(mask: &[bool], w: usize, h: usize, seed_h: f64) -> Vec<u32> {
    let squared = squared_edt(mask, w, h, (1.0, 1.0));
    let distance: Vec<f32> = squared.iter().map(|&d| d.sqrt() as f32).collect();
    let levels: Vec<u32> = squared.iter().map(|&d| d as u32).collect();
    let (seeds, _) = h_maxima_seeds(&distance, mask, w, h, seed_h);
    seeded_watershed(&levels, mask, &seeds, w, h)
}

/// Random discs (radius 4 to 12 px, some overlapping, some cut by the border).
fn random_mask(rng: &mut Rng, w: usize, h: usize) -> Vec<bool> {
    let discs: Vec<(f64, f64, f64)> = (0..12)
        .map(|_| (rng.range(0.0, w as f64), rng.range(0.0, h as f64), rng.range(4.0, 12.0)))
        .collect();
    (0..w * h)
        .map(|i| {
            let (x, y) = ((i % w) as f64, (i / w) as f64);
            discs
                .iter()
                .any(|&(cx, cy, r)| (x - cx).powi(2) + (y - cy).powi(2) <= r * r)
        })
        .collect()
}

/// Whether two label images describe the same objects (the same pixels grouped together,
/// whatever the numbers).
fn same_partition(a: &[u32], b: &[u32]) -> bool {
    let (mut ab, mut ba) = (BTreeMap::new(), BTreeMap::new());
    a.len() == b.len()
        && a.iter()
            .zip(b)
            .all(|(&x, &y)| (x == 0) == (y == 0) && *ab.entry(x).or_insert(y) == y && *ba.entry(y).or_insert(x) == x)
}

#[test]
fn windowed_split_equals_the_whole_frame_split() {
    // Source: the whole-frame composition of the same public stages (reference above); 60
    // random masks of 96 x 80 px, seed heights 0.5 and 2 px.
    let mut rng = Rng::new(2024);
    let (w, h) = (96, 80);
    let mut objects = 0;
    for case in 0..60 {
        let mask = random_mask(&mut rng, w, h);
        let seed_h = if case % 2 == 0 { 0.5 } else { 2.0 };
        let windowed = split_touching(&mask, w, h, seed_h, 0.0);
        let whole = whole_frame_split(&mask, w, h, seed_h);
        assert!(same_partition(&windowed, &whole), "case {case}, h {seed_h}");
        objects += windowed.iter().copied().max().unwrap_or(0);
    }
    // The masks really hold touching discs to split (more objects than components would be
    // a weak check; this one guards against an all-empty generator).
    assert!(objects > 300, "{objects}");
}
