//! Collective measures per frame: the order parameter of velocities, nearest-neighbour
//! distance and local density, and the correlation of neighbours' velocity fluctuations
//! against their distance.

use crate::numeric::{squared_distance, PointGrid};
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use serde::Serialize;

/// Order parameter φ = |Σ v̂ᵢ| / N of unit velocity vectors (zero vectors left out); `None`
/// without any moving object.
///
/// # Method
/// T. Vicsek, A. Czirók, E. Ben-Jacob, I. Cohen & O. Shochet (1995), "Novel type of phase
/// transition in a system of self-driven particles", Phys. Rev. Lett. 75(6):1226–1229,
/// doi:10.1103/PhysRevLett.75.1226. 1 for perfect alignment, about 1/√N for random headings.
pub fn order_parameter(velocities: &[[f64; 2]]) -> Option<f64> {
    let units: Vec<[f64; 2]> = velocities.iter().filter_map(|&v| unit(v)).collect();
    if units.is_empty() {
        return None;
    }
    let (sx, sy) = units.iter().fold((0.0, 0.0), |(a, b), u| (a + u[0], b + u[1]));
    Some(sx.hypot(sy) / units.len() as f64)
}

fn unit(v: [f64; 2]) -> Option<[f64; 2]> {
    let n = v[0].hypot(v[1]);
    (n > 0.0).then(|| [v[0] / n, v[1] / n])
}

/// Accumulated dot products of pairs of vectors, binned by distance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairCorrelation {
    /// Upper edge of each distance bin (the first bin starts at 0).
    pub bin_edges: Vec<f64>,
    /// Sum of dot products per bin.
    pub product_sum: Vec<f64>,
    /// Pairs per bin.
    pub pairs: Vec<usize>,
}

impl PairCorrelation {
    /// Empty bins with the given upper edges (ascending).
    pub fn new(bin_edges: Vec<f64>) -> Self {
        let n = bin_edges.len();
        PairCorrelation {
            bin_edges,
            product_sum: vec![0.0; n],
            pairs: vec![0; n],
        }
    }

    /// Adds every pair of one frame within the last edge: the dot product of their vectors
    /// as given (unit vectors give cosines; [`scaled_fluctuations`] give Cavagna's C(r)).
    ///
    /// The candidates within reach come from a grid of cells a millionth wider than the reach
    /// (each point's own cell and the eight around it, `numeric::PointGrid::for_each_near`; a
    /// squared distance within that wider radius, so that rounding drops no pair the distance
    /// below keeps), so the work grows with the number of points times their neighbours
    /// within reach, not with the square of the points; each point's partners are then taken
    /// in index order, the order of the plain double loop, so the sums are the same to the
    /// last bit. (With a k-d tree's radius queries, as before, the pairs took about twice as
    /// long: ~2% of a default run's samples.) Frames with a point that is not
    /// finite, or a reach that is not a positive number, compare every pair.
    pub fn add_frame(&mut self, positions: &[[f64; 2]], vectors: &[[f64; 2]]) {
        let pairs = self.frame_pairs(positions, vectors);
        self.add_pairs(&pairs);
    }

    /// What [`PairCorrelation::add_frame`] adds for one frame, without adding it: each pair's
    /// bin and dot product, in the order they are added. Frames can then be worked out in
    /// parallel and added in frame order ([`PairCorrelation::add_pairs`]), the same sums to
    /// the last bit.
    pub fn frame_pairs(&self, positions: &[[f64; 2]], vectors: &[[f64; 2]]) -> Vec<(usize, f64)> {
        let mut out = Vec::new();
        let Some(&reach) = self.bin_edges.last() else {
            return out;
        };
        let finite = positions.iter().flatten().all(|v| v.is_finite());
        let cell = reach * (1.0 + 1e-6);
        let grid = (finite && cell.is_finite() && cell > 0.0).then(|| PointGrid::with_cell(positions, cell));
        let wider = cell * cell;
        let mut partners = Vec::new();
        for i in 0..positions.len() {
            let ui = vectors[i];
            partners.clear();
            match &grid {
                Some(grid) => grid.for_each_near(&positions[i], |j| {
                    if j > i && squared_distance(&positions[i], &positions[j]) <= wider {
                        partners.push(j);
                    }
                }),
                None => partners.extend(i + 1..positions.len()),
            }
            partners.sort_unstable();
            for &j in &partners {
                let uj = vectors[j];
                let offset = [positions[i][0] - positions[j][0], positions[i][1] - positions[j][1]];
                if let Some(bin) = self.bin_of(offset) {
                    out.push((bin, ui[0] * uj[0] + ui[1] * uj[1]));
                }
            }
        }
        out
    }

    /// The bin of a pair `offset` apart: the first whose upper edge its distance (`hypot`)
    /// does not exceed; `None` past the last. The distance is first taken as the square root
    /// of the sum of squares, within a few units in the last place of `hypot` (each of its
    /// four operations rounds once, to 2⁻⁵³ relative; `hypot` is within one unit), and
    /// `hypot` (several times slower, and the pairs of a frame run to tens of thousands) is
    /// asked only where that value lies within a billionth of an edge, is not finite, or may
    /// have lost precision to underflow: elsewhere both fall between the same edges, so the
    /// bin is `hypot`'s for every pair.
    fn bin_of(&self, [dx, dy]: [f64; 2]) -> Option<usize> {
        let bin_by = |d: f64| self.bin_edges.iter().position(|&e| d <= e);
        let squares = dx * dx + dy * dy;
        let quick = squares.sqrt();
        let precise = quick.is_finite() && (squares >= 1e-280 || (dx == 0.0 && dy == 0.0));
        let near_an_edge = self.bin_edges.iter().any(|&e| (quick - e).abs() <= 1e-9 * e.abs());
        if precise && !near_an_edge {
            bin_by(quick)
        } else {
            bin_by(dx.hypot(dy))
        }
    }

    /// Adds pairs listed by [`PairCorrelation::frame_pairs`], in their order.
    pub fn add_pairs(&mut self, pairs: &[(usize, f64)]) {
        for &(bin, product) in pairs {
            self.product_sum[bin] += product;
            self.pairs[bin] += 1;
        }
    }

    /// Mean product per bin (`None` for empty bins).
    pub fn means(&self) -> Vec<Option<f64>> {
        self.product_sum
            .iter()
            .zip(&self.pairs)
            .map(|(&s, &n)| (n > 0).then(|| s / n as f64))
            .collect()
    }
}

/// Velocity fluctuations δvᵢ = vᵢ − ⟨v⟩ of one frame, so that a common drift does not make
/// every pair look correlated.
///
/// # Method
/// A. Cavagna, A. Cimarelli, I. Giardina, G. Parisi, R. Santagati, F. Stefanini & M. Viale
/// (2010), "Scale-free correlations in starling flocks", PNAS 107(26):11865–11870,
/// doi:10.1073/pnas.1005766107.
pub fn fluctuations(velocities: &[[f64; 2]]) -> Vec<[f64; 2]> {
    let n = velocities.len().max(1) as f64;
    let (mx, my) = velocities.iter().fold((0.0, 0.0), |(a, b), v| (a + v[0], b + v[1]));
    velocities.iter().map(|v| [v[0] - mx / n, v[1] - my / n]).collect()
}

/// The velocity fluctuations of one frame scaled by their root mean square, uᵢ = δvᵢ /
/// √(⟨|δv|²⟩), so that ⟨|u|²⟩ = 1 and Σᵢ uᵢ = 0; `None` for fewer than two velocities or
/// when every velocity is the same. The mean of uᵢ·uⱼ over pairs at distance r is the
/// correlation function C(r) of Cavagna et al. (2010, their Eq. 1 and 2): 1 for identical
/// fluctuations, and summed over all pairs (i = j included) exactly 0.
///
/// # Method
/// A. Cavagna, A. Cimarelli, I. Giardina, G. Parisi, R. Santagati, F. Stefanini & M. Viale
/// (2010), "Scale-free correlations in starling flocks", PNAS 107(26):11865–11870,
/// doi:10.1073/pnas.1005766107.
pub fn scaled_fluctuations(velocities: &[[f64; 2]]) -> Option<Vec<[f64; 2]>> {
    if velocities.len() < 2 {
        return None;
    }
    let d = fluctuations(velocities);
    let rms = (d.iter().map(|v| v[0] * v[0] + v[1] * v[1]).sum::<f64>() / d.len() as f64).sqrt();
    (rms > 0.0).then(|| d.iter().map(|v| [v[0] / rms, v[1] / rms]).collect())
}

/// Distance to the nearest other point and the local density of each point, estimated as
/// `k / (π r_k²)` with `r_k` the distance to the k-th nearest neighbour; `None` where there
/// are too few points.
///
/// # Method
/// k-nearest-neighbour density: D. O. Loftsgaarden & C. P. Quesenberry (1965), "A
/// nonparametric estimate of a multivariate density function", Ann. Math. Stat.
/// 36(3):1049–1051, doi:10.1214/aoms/1177700079.
pub fn neighbour_distance_and_density(points: &[[f64; 2]], k: usize) -> Vec<(Option<f64>, Option<f64>)> {
    if points.len() < 2 {
        return vec![(None, None); points.len()];
    }
    let tree: ImmutableKdTree<f64, 2> = ImmutableKdTree::new_from_slice(points).expect("finite points");
    let want = std::num::NonZero::new(k + 1).expect("non-zero");
    points
        .iter()
        .map(|p| {
            let hits = tree.query(p).nearest_n::<SquaredEuclidean<f64>>(want).execute();
            let nearest = hits.get(1).map(|h| h.distance.sqrt());
            let density = hits
                .get(k)
                .map(|h| h.distance)
                .filter(|&r2| r2 > 0.0)
                .map(|r2| k as f64 / (std::f64::consts::PI * r2));
            (nearest, density)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pairs_from_the_grid_sum_as_the_plain_double_loop() {
        // Source: definition (C(r) sums over every pair within reach); the plain double loop
        // over all pairs, written out here, gives the same pair counts and the same sums to
        // the last bit, on a random field where most pairs are out of reach, and on a strip
        // 100,000 wide with a reach of 4 (more cells along it than the grid keeps, so its far
        // columns share one), its points in close pairs.
        let mut rng = crate::numeric::Rng::new(3);
        let field: Vec<[f64; 2]> = (0..400)
            .map(|_| [rng.uniform() * 900.0, rng.uniform() * 700.0])
            .collect();
        let mut strip: Vec<[f64; 2]> = Vec::new();
        for _ in 0..200 {
            let p = [rng.uniform() * 1e5, rng.uniform() * 3.0];
            strip.extend([p, [p[0] + rng.normal() * 2.0, p[1] + rng.normal()]]);
        }
        for (points, width) in [(field, 7.5), (strip, 0.5)] {
            let vectors: Vec<[f64; 2]> = (0..points.len()).map(|_| [rng.normal(), rng.normal()]).collect();
            let edges: Vec<f64> = (1..=8).map(|i| i as f64 * width).collect();
            let mut grid = PairCorrelation::new(edges.clone());
            grid.add_frame(&points, &vectors);
            let mut plain = PairCorrelation::new(edges.clone());
            for i in 0..points.len() {
                for j in i + 1..points.len() {
                    let d = (points[i][0] - points[j][0]).hypot(points[i][1] - points[j][1]);
                    if let Some(bin) = edges.iter().position(|&e| d <= e) {
                        plain.product_sum[bin] += vectors[i][0] * vectors[j][0] + vectors[i][1] * vectors[j][1];
                        plain.pairs[bin] += 1;
                    }
                }
            }
            assert_eq!(grid.pairs, plain.pairs);
            assert!(plain.pairs.iter().sum::<usize>() > 100);
            let bits = |c: &PairCorrelation| c.product_sum.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&grid), bits(&plain));
        }
    }

    #[test]
    fn pairs_at_a_bin_edge_fall_in_the_bin_hypot_gives() {
        // Source: definition (a pair's bin is the first edge its distance, f64::hypot, does not
        // exceed); the plain double loop with hypot is the reference. Pairs placed at each
        // edge in random directions, so that the square root of the sum of squares and hypot
        // disagree about the side of the edge for some of them (asserted, so the case is met).
        let mut rng = crate::numeric::Rng::new(8);
        let edges: Vec<f64> = (1..=8).map(|i| i as f64 * 7.3).collect();
        let mut points = Vec::new();
        for c in 0..40 {
            let centre = [200.0 * (c % 8) as f64 + 0.37, 200.0 * (c / 8) as f64 + 0.11];
            points.push(centre);
            for &e in &edges {
                for _ in 0..3 {
                    let angle = rng.uniform() * std::f64::consts::TAU;
                    points.push([centre[0] + e * angle.cos(), centre[1] + e * angle.sin()]);
                }
            }
        }
        let vectors: Vec<[f64; 2]> = points.iter().map(|_| [rng.normal(), rng.normal()]).collect();
        let mut tree = PairCorrelation::new(edges.clone());
        tree.add_frame(&points, &vectors);
        let mut plain = PairCorrelation::new(edges.clone());
        let mut sides_differ = 0;
        for i in 0..points.len() {
            for j in i + 1..points.len() {
                let (dx, dy) = (points[i][0] - points[j][0], points[i][1] - points[j][1]);
                let d = dx.hypot(dy);
                let quick = (dx * dx + dy * dy).sqrt();
                sides_differ += edges.iter().filter(|&&e| (d <= e) != (quick <= e)).count();
                if let Some(bin) = edges.iter().position(|&e| d <= e) {
                    plain.product_sum[bin] += vectors[i][0] * vectors[j][0] + vectors[i][1] * vectors[j][1];
                    plain.pairs[bin] += 1;
                }
            }
        }
        assert!(sides_differ > 0, "no pair where the two distances fall apart");
        assert_eq!(tree.pairs, plain.pairs);
        let bits = |c: &PairCorrelation| c.product_sum.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&tree), bits(&plain));
    }

    #[test]
    fn methods_order_parameter_and_neighbour_check() {
        // Source: fixtures/methods/check_values.md §9: velocities (1,0),(0.8,0.6),(0.6,−0.8),(−1,0): φ = 0.353553,
        // first three 0.802773; positions (0,0),(3,0),(0,4),(20,20): pairs within 5 have
        // cosines 0.8, 0.6, 0, mean 0.466667.
        let v = [[1.0, 0.0], [0.8, 0.6], [0.6, -0.8], [-1.0, 0.0]];
        assert!((order_parameter(&v).unwrap() - 0.353553).abs() < 1e-6);
        assert!((order_parameter(&v[..3]).unwrap() - 0.802773).abs() < 1e-6);
        let mut c = PairCorrelation::new(vec![5.0]);
        let units: Vec<[f64; 2]> = v.iter().filter_map(|&x| unit(x)).collect();
        c.add_frame(&[[0.0, 0.0], [3.0, 0.0], [0.0, 4.0], [20.0, 20.0]], &units);
        assert_eq!(c.pairs, vec![3]);
        assert!((c.means()[0].unwrap() - 0.466667).abs() < 1e-6);
    }

    #[test]
    fn scaled_fluctuations_follow_cavagna_s_normalisation() {
        // Source: Cavagna et al. (2010), Eq. 1–2: with uᵢ = δvᵢ/√(⟨|δv|²⟩), Σᵢⱼ uᵢ·uⱼ over all
        // pairs (i = j included) is |Σuᵢ|² = 0 and Σᵢ|uᵢ|² = N, so the mean over the N(N−1)
        // ordered pairs i ≠ j is −1/(N−1). Velocities (3,0), (1,0), (2,2), (2,−2): mean (2,0),
        // fluctuations (1,0), (−1,0), (0,2), (0,−2), mean square 2.5 (hand-derived).
        let v = [[3.0, 0.0], [1.0, 0.0], [2.0, 2.0], [2.0, -2.0]];
        let u = scaled_fluctuations(&v).unwrap();
        let s = 2.5f64.sqrt();
        assert!((u[0][0] - 1.0 / s).abs() < 1e-12 && (u[3][1] + 2.0 / s).abs() < 1e-12);
        let mut c = PairCorrelation::new(vec![100.0]);
        c.add_frame(&[[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [3.0, 0.0]], &u);
        assert!((c.means()[0].unwrap() + 1.0 / 3.0).abs() < 1e-12, "{:?}", c.means());
        // Pairs (1,0)·(−1,0) = −1 and (0,2)·(0,−2) = −4, over 2.5: −0.4 and −1.6.
        let mut near = PairCorrelation::new(vec![1.5]);
        near.add_frame(&[[0.0, 0.0], [1.0, 0.0], [10.0, 0.0], [11.0, 0.0]], &u);
        assert!((near.means()[0].unwrap() + 1.0).abs() < 1e-12, "{:?}", near.means());
        assert!(scaled_fluctuations(&[[1.0, 1.0], [1.0, 1.0]]).is_none());
    }

    #[test]
    fn fluctuations_remove_common_drift_and_density_of_a_grid() {
        // Hand-derived: two velocities (2,0) and (4,0) have mean (3,0), fluctuations (∓1,0).
        assert_eq!(fluctuations(&[[2.0, 0.0], [4.0, 0.0]]), vec![[-1.0, 0.0], [1.0, 0.0]]);
        // A unit square grid has density 1 per unit area (geometry): the 4th neighbour of an
        // interior point is at distance 1 → 4/π ≈ 1.27; its nearest at 1.
        let grid: Vec<[f64; 2]> = (0..7).flat_map(|i| (0..7).map(move |j| [i as f64, j as f64])).collect();
        let centre = neighbour_distance_and_density(&grid, 4)[3 * 7 + 3];
        assert_eq!(centre.0, Some(1.0));
        assert!((centre.1.unwrap() - 4.0 / std::f64::consts::PI).abs() < 1e-12);
    }
}
