//! Linking detections across frames. This first piece is the frame-to-frame step of the LAP
//! framework: candidate links within a maximum step (k-d tree), the bipartite candidate graph
//! split into independent components, and each component solved optimally by Hungarian
//! assignment with birth and death alternatives, so that a detection may start a new track
//! rather than take a bad link. [`online::OnlineLinker`] turns it into tracks frame by frame.
//! No file I/O.

pub mod close;
pub mod divide;
pub mod estimate;
pub mod motion;
pub mod online;
pub mod params;
pub mod repair;

pub use params::{Divisions, LinkOptions, LinkParams, MaxStepSource, Prediction, ResolvedLinking};

use crate::tracks::TrackedDetection;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use pathfinding::prelude::{kuhn_munkres, Matrix};
use serde::Serialize;

/// The outcome of linking one frame to the next.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FrameLinks {
    /// `(source, target, squared distance)` for every link, sorted by source.
    pub links: Vec<(usize, usize, f64)>,
    /// Targets that start a new track, ascending.
    pub births: Vec<usize>,
    /// Sources whose track ends here, ascending.
    pub deaths: Vec<usize>,
    /// The birth/death alternative cost used (squared px).
    pub alternative_cost: f64,
    /// For each link (same order), the cheapest competing choice: another candidate of its
    /// source or of its target, or the alternative cost.
    pub second_best: Vec<f64>,
}

/// Links `sources` (frame t) to `targets` (frame t+1) by minimum total squared displacement,
/// with links longer than `max_step` forbidden and every object free to die or be born at the
/// alternative cost `1.05 x` the largest allowed link cost of the frame pair.
///
/// # Method
/// K. Jaqaman, D. Loerke, M. Mettlen, H. Kuwata, S. Grinstein, S. L. Schmid & G. Danuser
/// (2008), "Robust single-particle tracking in live-cell time-lapse sequences", Nat. Methods
/// 5(8):695–702, doi:10.1038/nmeth.1237: the (n+m)x(m+n) cost matrix with link, death, birth
/// and auxiliary (transposed link) blocks. Each connected component of the candidate graph is
/// an independent assignment problem, solved with the Hungarian algorithm (H. W. Kuhn (1955),
/// Naval Res. Logist. Q. 2:83–97; J. Munkres (1957), J. SIAM 5(1):32–38) on integer-scaled
/// costs. Candidates come from a k-d tree (J. L. Bentley (1975), Commun. ACM 18(9):509–517).
pub fn link_frames(sources: &[[f64; 2]], targets: &[[f64; 2]], max_step: f64) -> FrameLinks {
    link_frames_gated(sources, &vec![max_step; sources.len()], targets)
}

/// As [`link_frames`], with a search radius of its own for each source (a motion model's
/// gate); the alternative cost is still 1.05 x the largest allowed link cost.
pub fn link_frames_gated(sources: &[[f64; 2]], radii: &[f64], targets: &[[f64; 2]]) -> FrameLinks {
    let candidates = candidate_links(sources, radii, targets);
    let alternative_cost = 1.05 * candidates.iter().map(|c| c.2).fold(0.0, f64::max);
    assign_with_alternatives(sources.len(), targets.len(), &candidates, alternative_cost)
}

/// The LAP with birth and death alternatives over given candidate links
/// `(source, target, cost)` (sorted by source, then target): every source is linked to at most
/// one target and vice versa, and every object may instead end or start a track at
/// `alternative_cost`, so that no link is forced. Used for frame-to-frame linking and for gap
/// closing over track segments (Jaqaman et al. 2008, see [`link_frames`]).
pub fn assign_with_alternatives(
    n_sources: usize,
    n_targets: usize,
    candidates: &[(usize, usize, f64)],
    alternative_cost: f64,
) -> FrameLinks {
    let mut out = FrameLinks {
        alternative_cost,
        ..FrameLinks::default()
    };
    let mut linked_source = vec![false; n_sources];
    let mut linked_target = vec![false; n_targets];
    let mut link = |(s, t, c): (usize, usize, f64)| {
        linked_source[s] = true;
        linked_target[t] = true;
        out.links.push((s, t, c));
    };
    for component in components(n_sources, n_targets, candidates) {
        match lone_link(&component, candidates, alternative_cost) {
            Some(lone) => lone.into_iter().for_each(&mut link),
            None => solve_component(&component, candidates, alternative_cost)
                .into_iter()
                .for_each(&mut link),
        }
    }
    out.links.sort_by_key(|l| l.0);
    out.second_best = second_best_costs(&out.links, n_sources, n_targets, candidates, alternative_cost);
    out.deaths = (0..n_sources).filter(|&i| !linked_source[i]).collect();
    out.births = (0..n_targets).filter(|&j| !linked_target[j]).collect();
    out
}

/// For each link `(s, t)`, the cheapest other way for either end: a candidate from `s` to
/// another target or into `t` from another source, or the alternative cost if lower. The
/// candidates are looked up by source and by target, not scanned for every link; a minimum does
/// not depend on the order its values come in.
fn second_best_costs(
    links: &[(usize, usize, f64)],
    n_sources: usize,
    n_targets: usize,
    candidates: &[(usize, usize, f64)],
    alternative_cost: f64,
) -> Vec<f64> {
    // (the other end, cost) of every candidate, by source and by target: one list each, cut
    // at offsets counted first, rather than a list per object (hundreds of allocations a
    // frame).
    let from_source = crate::numeric::Grouped::of(n_sources, candidates.iter().map(|&(s, t, c)| (s, (t, c))));
    let into_target = crate::numeric::Grouped::of(n_targets, candidates.iter().map(|&(s, t, c)| (t, (s, c))));
    links
        .iter()
        .map(|&(s, t, _)| {
            let elsewhere = from_source.group(s).iter().filter(|&&(other, _)| other != t);
            let from_elsewhere = into_target.group(t).iter().filter(|&&(other, _)| other != s);
            elsewhere
                .chain(from_elsewhere)
                .map(|&(_, c)| c)
                .fold(alternative_cost, f64::min)
        })
        .collect()
}

/// What the global steps after frame-to-frame linking did.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct TrackResolution {
    /// Gaps bridged by gap closing.
    pub gaps_closed: usize,
    /// Objects split as two nuclei: during online linking because two tracks entered them
    /// ([`repair::split_shared_objects`], counted by the caller that ran the online linker),
    /// and afterwards because two nuclei came out of them ([`repair::split_back_in_time`]).
    pub shared_objects_split: usize,
    /// Division events, in frame order, with final track ids.
    pub divisions: Vec<divide::DivisionEvent>,
}

/// The global steps after online linking: gap closing, then objects that two nuclei came out
/// of split back in time, then division detection (as the parameters say), then track ids
/// renumbered from 1 in order of first appearance (first frame, then object label), so that
/// ids do not depend on how segments were joined.
pub fn resolve_tracks(points: &mut Vec<TrackedDetection>, params: &LinkParams) -> TrackResolution {
    let gaps_closed = close::close_gaps(points, params).len();
    let shared_objects_split = repair::split_back_in_time(
        points,
        params.daughter_reach_px(),
        repair::min_part_px(params.diameter_px),
    );
    let mut divisions = match params.divisions {
        Divisions::On => divide::detect_divisions(points, params, &params.division_rules),
        Divisions::Off => Vec::new(),
    };
    let new_id = renumber_tracks(points);
    for e in divisions.iter_mut() {
        e.mother = new_id[&e.mother];
        e.daughters = e.daughters.map(|d| new_id[&d]);
        e.daughters.sort_unstable();
    }
    TrackResolution {
        gaps_closed,
        divisions,
        shared_objects_split,
    }
}

/// Renumbers tracks 1, 2, ... by (first frame, first label) and returns the old-to-new map.
fn renumber_tracks(points: &mut [TrackedDetection]) -> std::collections::BTreeMap<u32, u32> {
    let mut first: std::collections::BTreeMap<u32, (usize, u32)> = Default::default();
    for p in points.iter() {
        let key = (p.detection.frame, p.detection.label);
        let e = first.entry(p.track_id).or_insert(key);
        *e = (*e).min(key);
    }
    let mut order: Vec<(usize, u32, u32)> = first.iter().map(|(&id, &(f, l))| (f, l, id)).collect();
    order.sort_unstable();
    let new_id: std::collections::BTreeMap<u32, u32> = order
        .iter()
        .enumerate()
        .map(|(k, &(_, _, id))| (id, k as u32 + 1))
        .collect();
    for p in points.iter_mut() {
        p.track_id = new_id[&p.track_id];
        p.parent_id = p.parent_id.map(|m| new_id[&m]);
    }
    new_id
}

/// Distance from each point to its nearest other point (`None` for a lone point), via a k-d
/// tree; used for the linking ambiguity ratio.
pub fn nearest_neighbour_distances(points: &[[f64; 2]]) -> Vec<Option<f64>> {
    if points.len() < 2 {
        return vec![None; points.len()];
    }
    let tree: ImmutableKdTree<f64, 2> = ImmutableKdTree::new_from_slice(points).expect("finite points");
    let two = std::num::NonZero::new(2usize).expect("non-zero");
    points
        .iter()
        .map(|p| {
            tree.query(p)
                .nearest_n::<SquaredEuclidean<f64>>(two)
                .execute()
                .get(1)
                .map(|h| h.distance.sqrt())
        })
        .collect()
}

/// All `(source, target, squared distance)` pairs within each source's radius, found with a
/// k-d tree.
fn candidate_links(sources: &[[f64; 2]], radii: &[f64], targets: &[[f64; 2]]) -> Vec<(usize, usize, f64)> {
    if sources.is_empty() || targets.is_empty() {
        return Vec::new();
    }
    let tree: ImmutableKdTree<f64, 2> = ImmutableKdTree::new_from_slice(targets).expect("non-empty, finite points");
    let mut pairs = Vec::new();
    for (i, (s, r)) in sources.iter().zip(radii).enumerate() {
        // Unsorted: the pairs are put in (source, target) order below.
        for hit in tree
            .query(s)
            .within::<SquaredEuclidean<f64>>(r * r)
            .unsorted()
            .execute()
        {
            pairs.push((i, hit.item as usize, hit.distance));
        }
    }
    pairs.sort_by_key(|a| (a.0, a.1));
    pairs
}

/// A connected component of the candidate graph: its sources, targets and candidate indices.
struct Component {
    sources: Vec<usize>,
    targets: Vec<usize>,
    edges: Vec<usize>,
}

/// Splits the bipartite candidate graph into connected components (union-find); objects
/// without candidates form no component (they simply die or are born).
fn components(n_sources: usize, n_targets: usize, candidates: &[(usize, usize, f64)]) -> Vec<Component> {
    let mut sets = crate::numeric::DisjointSets::new(n_sources + n_targets);
    for &(s, t, _) in candidates {
        sets.union(s, n_sources + t);
    }
    // Components in order of their first candidate (their order does not matter: the links
    // are sorted by source afterwards); within one, sources, targets and edges in candidate
    // order, which sets the rows and columns of its assignment problem.
    let mut index_of_root = vec![usize::MAX; n_sources + n_targets];
    let mut found: Vec<Component> = Vec::new();
    for (k, &(s, t, _)) in candidates.iter().enumerate() {
        let root = sets.find(s);
        if index_of_root[root] == usize::MAX {
            index_of_root[root] = found.len();
            found.push(Component {
                sources: vec![],
                targets: vec![],
                edges: vec![],
            });
        }
        let c = &mut found[index_of_root[root]];
        c.edges.push(k);
        if !c.sources.contains(&s) {
            c.sources.push(s);
        }
        if !c.targets.contains(&t) {
            c.targets.push(t);
        }
    }
    found
}

/// The links of a component of one source and one target joined by one candidate, without
/// the assignment solver: its (2 x 2) problem takes the link (cost `2v`: the link and its
/// auxiliary entry) over death and birth (`2·alt`) exactly when `v < alt` in the solver's
/// integer costs. `None` for any other component, and for a tie (left to the solver, whose
/// tie-breaking this does not repeat).
fn lone_link(c: &Component, candidates: &[(usize, usize, f64)], alternative: f64) -> Option<Vec<(usize, usize, f64)>> {
    let [k] = c.edges[..] else {
        return None;
    };
    let (s, t, d2) = candidates[k];
    let (v, alt) = (scale_cost(d2), scale_cost(alternative));
    match v.cmp(&alt) {
        std::cmp::Ordering::Less => Some(vec![(s, t, d2)]),
        std::cmp::Ordering::Greater => Some(Vec::new()),
        std::cmp::Ordering::Equal => None,
    }
}

/// Costs in squared px become integers in units of 1/1000 px² (the solver needs `Ord`
/// weights); the rounding moves a total by at most 0.0005 px² per assigned pair.
pub fn scale_cost(cost: f64) -> i64 {
    (cost * 1000.0).round() as i64
}

/// The row-to-column assignment of minimum total cost of a square integer matrix.
///
/// # Method
/// Hungarian algorithm (Kuhn 1955; Munkres 1957) via `pathfinding::kuhn_munkres`, which
/// maximises, on the negated costs.
pub fn hungarian_min_cost(cost: &Matrix<i64>) -> Vec<usize> {
    let weights =
        Matrix::from_vec(cost.rows, cost.columns, cost.as_ref().iter().map(|&v| -v).collect()).expect("same shape");
    kuhn_munkres(&weights).1
}

/// Solves one component's (n+m)x(m+n) LAP and returns its links.
fn solve_component(c: &Component, candidates: &[(usize, usize, f64)], alternative: f64) -> Vec<(usize, usize, f64)> {
    let (n, m) = (c.sources.len(), c.targets.len());
    let size = n + m;
    // Forbidden entries cost more than any complete assignment of allowed ones, and the
    // weights (negated costs) stay far from overflow.
    let alt = scale_cost(alternative);
    let forbidden = (alt + 1) * (size as i64 + 1);
    let mut cost = Matrix::new(size, size, forbidden);
    let row_of = |s: usize| c.sources.iter().position(|&x| x == s).expect("source in component");
    let col_of = |t: usize| c.targets.iter().position(|&x| x == t).expect("target in component");
    let mut min_link = i64::MAX;
    for &k in &c.edges {
        let (s, t, d2) = candidates[k];
        let v = scale_cost(d2);
        cost[(row_of(s), col_of(t))] = v;
        min_link = min_link.min(v);
    }
    for i in 0..n {
        cost[(i, m + i)] = alt; // death
    }
    for j in 0..m {
        cost[(n + j, j)] = alt; // birth
    }
    for &k in &c.edges {
        let (s, t, _) = candidates[k];
        cost[(n + col_of(t), m + row_of(s))] = min_link; // auxiliary block, Lᵀ pattern
    }
    let assignment = hungarian_min_cost(&cost);
    let mut links = Vec::new();
    for (i, &j) in assignment.iter().enumerate().take(n) {
        if j < m && cost[(i, j)] < forbidden {
            let (s, t) = (c.sources[i], c.targets[j]);
            let d2 = candidates[c
                .edges
                .iter()
                .copied()
                .find(|&k| candidates[k].0 == s && candidates[k].1 == t)
                .expect("an edge")]
            .2;
            links.push((s, t, d2));
        }
    }
    links
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn second_best_is_the_cheapest_competitor() {
        // Hand-derived: source 0 has candidates at squared distances 1 and 9; alternative is
        // 1.05 x 9 = 9.45, so the second best of link 0->0 is 9.
        let r = link_frames(&[[0.0, 0.0]], &[[1.0, 0.0], [0.0, 3.0]], 5.0);
        assert_eq!(r.links, vec![(0, 0, 1.0)]);
        assert_eq!(r.second_best, vec![9.0]);
    }

    #[test]
    fn second_best_by_lookup_is_the_scan_over_every_candidate() {
        // Source: the definition, the cheapest candidate sharing exactly one end with the link
        // (a scan over all candidates, the code before the lookup), on random dense frames.
        let mut rng = crate::numeric::Rng::new(3);
        let points = |rng: &mut crate::numeric::Rng, n: usize| -> Vec<[f64; 2]> {
            (0..n).map(|_| [rng.uniform() * 60.0, rng.uniform() * 60.0]).collect()
        };
        for round in 0..20 {
            let (sources, targets) = (points(&mut rng, 40 + round), points(&mut rng, 45));
            let candidates = candidate_links(&sources, &vec![8.0; sources.len()], &targets);
            let r = link_frames_gated(&sources, &vec![8.0; sources.len()], &targets);
            assert!(r.links.len() > 10);
            for (&(s, t, _), &got) in r.links.iter().zip(&r.second_best) {
                let want = (candidates.iter())
                    .filter(|c| (c.0 == s) != (c.1 == t))
                    .map(|c| c.2)
                    .fold(r.alternative_cost, f64::min);
                assert_eq!(got.to_bits(), want.to_bits(), "round {round} link {s}->{t}");
            }
        }
    }

    #[test]
    fn a_lone_link_is_decided_as_the_solver_decides_it() {
        // Source: the Hungarian solver (pathfinding's kuhn_munkres) on every component, the
        // path before the shortcut: random sparse frames where most components are one source
        // and one target, with alternative costs below, equal to and above the links' costs.
        let mut rng = crate::numeric::Rng::new(9);
        for round in 0..40 {
            let n = 30 + round;
            let sources: Vec<[f64; 2]> = (0..n).map(|_| [rng.uniform() * 400.0, rng.uniform() * 400.0]).collect();
            let targets: Vec<[f64; 2]> = sources
                .iter()
                .map(|p| [p[0] + 3.0 * rng.uniform(), p[1] + 3.0 * rng.uniform()])
                .collect();
            let candidates = candidate_links(&sources, &vec![6.0; n], &targets);
            let some_link = candidates[round % candidates.len()].2;
            for alternative in [some_link, 0.5 * some_link, 1.05 * some_link, 20.0] {
                let got = assign_with_alternatives(n, n, &candidates, alternative);
                let mut want: Vec<(usize, usize, f64)> = components(n, n, &candidates)
                    .iter()
                    .flat_map(|c| solve_component(c, &candidates, alternative))
                    .collect();
                want.sort_by_key(|l| l.0);
                assert_eq!(got.links, want, "round {round}, alternative {alternative}");
            }
        }
    }

    #[test]
    fn methods_lap_check_value() {
        // Source: fixtures/methods/check_values.md §7 (own construction checked with scipy linear_sum_assignment):
        // sources (0,0),(10,0); targets (1,0),(10,2),(30,0); max distance 5 -> alternative
        // 1.05 x 4 = 4.2, links 0->0 and 1->1, target 2 born, no deaths.
        let r = link_frames(&[[0.0, 0.0], [10.0, 0.0]], &[[1.0, 0.0], [10.0, 2.0], [30.0, 0.0]], 5.0);
        assert!((r.alternative_cost - 4.2).abs() < 1e-12);
        assert_eq!(r.links, vec![(0, 0, 1.0), (1, 1, 4.0)]);
        assert_eq!(r.births, vec![2]);
        assert!(r.deaths.is_empty());
    }

    #[test]
    fn optimal_not_greedy_and_births_for_the_rest() {
        // Hand-derived. (1) Sources at 0 and 5, targets at 1 and 4 on a line: the optimum is
        // 0->0 and 1->1 (1 + 1), not the crossing pair (16 + 9). (2) Isolated pairs link even
        // when far (16 < a death plus a birth, 2 x 16.8). (3) One source, targets at 0.5 and
        // 4.9: it takes the near one (0.25) and the far target is born (alternative 25.2).
        let r = link_frames(&[[0.0, 0.0], [5.0, 0.0]], &[[1.0, 0.0], [4.0, 0.0]], 5.0);
        assert_eq!(r.links, vec![(0, 0, 1.0), (1, 1, 1.0)]);
        let r = link_frames(&[[0.0, 0.0], [0.0, 5.0]], &[[0.5, 0.0], [0.0, 9.9]], 5.0);
        assert_eq!(r.links.len(), 2);
        let r = link_frames(&[[0.0, 0.0]], &[[0.5, 0.0], [4.9, 0.0]], 5.0);
        assert_eq!(r.links, vec![(0, 0, 0.25)]);
        assert_eq!(r.births, vec![1]);
        let r = link_frames(&[[0.0, 0.0], [20.0, 0.0]], &[[0.5, 0.0], [24.0, 0.0]], 5.0);
        assert_eq!(r.links, vec![(0, 0, 0.25), (1, 1, 16.0)]);
        assert!(r.births.is_empty() && r.deaths.is_empty());
    }
}
