//! Seeded watershed on the distance map, restricted to the foreground mask, so that touching
//! nuclei come out as separate objects.

use super::hmaxima::neighbours4;
use super::queue::LevelQueue;

/// Floods the mask from labelled seeds, highest distance first, and returns one label per
/// pixel (0 = background). `levels` are integer flooding levels (here squared distances):
/// higher levels are flooded first; within a level, first come first served.
///
/// # Method
/// F. Meyer (1994), "Topographic distance and watershed lines", Signal Processing 38:113–125,
/// doi:10.1016/0165-1684(94)90060-4 (priority flooding from markers); L. Vincent & P. Soille
/// (1991), IEEE PAMI 13(6):583–598, doi:10.1109/34.87344. The priority queue is a
/// hierarchical queue over the integer levels ([`LevelQueue`]), O(n + levels). Departure: a
/// pixel reached from below (a maximum without its own seed) joins the current level instead
/// of jumping the queue.
pub fn seeded_watershed(levels: &[u32], mask: &[bool], seeds: &[u32], width: usize, height: usize) -> Vec<u32> {
    let n = levels.len();
    let mut labels = seeds.to_vec();
    let top = levels.iter().copied().max().unwrap_or(0) as usize;
    let mut queue = LevelQueue::new(top as u32);
    for i in 0..n {
        if labels[i] != 0 {
            queue.push(levels[i], i as u32);
        }
    }
    for level in (0..=top as u32).rev() {
        while let Some(p) = queue.pop(level) {
            let p = p as usize;
            for q in neighbours4(p, width, height) {
                if mask[q] && labels[q] == 0 {
                    labels[q] = labels[p];
                    queue.push(levels[q].min(level), q as u32);
                }
            }
        }
    }
    labels
}
