//! General statistics for comparing conditions: the normal tail, the Mann–Whitney U test, the
//! hierarchical bootstrap, and effect sizes.

use crate::numeric::Rng;
use serde::Serialize;

/// Upper tail of the standard normal, P(Z > z) = erfc(z/√2)/2.
pub fn normal_sf(z: f64) -> f64 {
    0.5 * erfc(z / std::f64::consts::SQRT_2)
}

/// Complementary error function, fractional error below 1.2e-7 everywhere.
///
/// # Method
/// W. H. Press, S. A. Teukolsky, W. T. Vetterling & B. P. Flannery (1992), *Numerical Recipes
/// in C*, 2nd ed., §6.2, `erfcc` (Chebyshev fit).
pub fn erfc(x: f64) -> f64 {
    let z = x.abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let poly = -z * z - 1.26551223
        + t * (1.00002368
            + t * (0.37409196
                + t * (0.09678418
                    + t * (-0.18628806
                        + t * (0.27886807
                            + t * (-1.13520398 + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277))))))));
    let r = t * poly.exp();
    if x >= 0.0 {
        r
    } else {
        2.0 - r
    }
}

/// Result of a two-sided Mann–Whitney U test.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MannWhitney {
    /// U of the first sample (pairs where it is larger, ties counted half).
    pub u1: f64,
    /// Two-sided p-value.
    pub p: f64,
    /// `exact` (no ties, a sample of 8 or fewer) or `asymptotic` (normal, tie and continuity
    /// corrected).
    pub method: &'static str,
    /// Rank-biserial correlation 2U₁/(n₁n₂) − 1, from −1 to 1 (the effect size of the test).
    pub rank_biserial: f64,
}

/// The Mann–Whitney U test, two-sided, choosing the method as scipy's `mannwhitneyu`
/// (method `auto`) does, so that results agree with it.
///
/// # Method
/// H. B. Mann & D. R. Whitney (1947), "On a test of whether one of two random variables is
/// stochastically larger than the other", Ann. Math. Stat. 18(1):50–60,
/// doi:10.1214/aoms/1177730491. The exact null distribution by counting; the normal
/// approximation with tie correction and a 0.5 continuity correction.
pub fn mann_whitney(x: &[f64], y: &[f64]) -> Option<MannWhitney> {
    let (n1, n2) = (x.len(), y.len());
    if n1 == 0 || n2 == 0 {
        return None;
    }
    let mut all: Vec<(f64, usize)> = x.iter().map(|&v| (v, 0)).chain(y.iter().map(|&v| (v, 1))).collect();
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (ranks, tie_term) = midranks(&all);
    let r1: f64 = ranks.iter().zip(&all).filter(|(_, a)| a.1 == 0).map(|(r, _)| r).sum();
    let u1 = r1 - (n1 * (n1 + 1)) as f64 / 2.0;
    let (nf1, nf2) = (n1 as f64, n2 as f64);
    let u_max = u1.max(nf1 * nf2 - u1);
    let ties = tie_term > 0.0;
    let (p, method) = if !ties && n1.min(n2) <= 8 {
        (exact_two_sided(n1, n2, u_max), "exact")
    } else {
        let n = nf1 + nf2;
        let sd = (nf1 * nf2 / 12.0 * ((n + 1.0) - tie_term / (n * (n - 1.0)))).sqrt();
        let z = (u_max - nf1 * nf2 / 2.0 - 0.5) / sd;
        ((2.0 * normal_sf(z)).min(1.0), "asymptotic")
    };
    Some(MannWhitney {
        u1,
        p,
        method,
        rank_biserial: 2.0 * u1 / (nf1 * nf2) - 1.0,
    })
}

/// Mid-ranks (1-based) of sorted values, and Σ(t³ − t) over tie groups.
fn midranks(sorted: &[(f64, usize)]) -> (Vec<f64>, f64) {
    let mut ranks = vec![0.0; sorted.len()];
    let mut tie_term = 0.0;
    let mut i = 0;
    while i < sorted.len() {
        let mut j = i;
        while j + 1 < sorted.len() && sorted[j + 1].0 == sorted[i].0 {
            j += 1;
        }
        let mid = (i + j) as f64 / 2.0 + 1.0;
        ranks[i..=j].iter_mut().for_each(|r| *r = mid);
        let t = (j - i + 1) as f64;
        tie_term += t * t * t - t;
        i = j + 1;
    }
    (ranks, tie_term)
}

/// Exact two-sided p = 2 P(U ≥ u_max) under the null (capped at 1), by counting the
/// arrangements with a given U (the recursion of Mann & Whitney 1947).
fn exact_two_sided(n1: usize, n2: usize, u_max: f64) -> f64 {
    let max_u = n1 * n2;
    // counts[m][u]: arrangements of the first-sample ranks giving U = u, built by adding one
    // element of either sample at a time.
    let mut table = vec![vec![vec![0f64; max_u + 1]; n2 + 1]; n1 + 1];
    for row in table[0].iter_mut() {
        row[0] = 1.0;
    }
    for a in 1..=n1 {
        table[a][0][0] = 1.0;
        for b in 1..=n2 {
            for u in 0..=a * b {
                let with_x_last = if u >= b { table[a - 1][b][u - b] } else { 0.0 };
                table[a][b][u] = with_x_last + table[a][b - 1][u];
            }
        }
    }
    let counts = &table[n1][n2];
    let total: f64 = counts.iter().sum();
    let from = u_max.ceil() as usize;
    let upper: f64 = counts[from.min(max_u + 1)..].iter().sum();
    (2.0 * upper / total).min(1.0)
}

/// The hierarchical bootstrap of the mean: resample replicates with replacement, then values
/// within each chosen replicate, and average the replicates' means; `resamples` times.
///
/// # Method
/// V. Saravanan, G. J. Berman & S. J. Sober (2020), "Application of the hierarchical bootstrap
/// to multi-level data in neuroscience", Neurons, Behavior, Data analysis, and Theory 3(5),
/// doi:10.1101/819334 (the statistic: the mean of the resampled replicates' means).
pub fn hierarchical_bootstrap(groups: &[Vec<f64>], resamples: usize, rng: &mut Rng) -> Vec<f64> {
    let groups: Vec<&Vec<f64>> = groups.iter().filter(|g| !g.is_empty()).collect();
    if groups.is_empty() {
        return Vec::new();
    }
    let pick = |rng: &mut Rng, n: usize| ((rng.uniform() * n as f64) as usize).min(n - 1);
    (0..resamples)
        .map(|_| {
            let mut sum = 0.0;
            for _ in 0..groups.len() {
                let g = groups[pick(rng, groups.len())];
                let m: f64 = (0..g.len()).map(|_| g[pick(rng, g.len())]).sum::<f64>() / g.len() as f64;
                sum += m;
            }
            sum / groups.len() as f64
        })
        .collect()
}

pub use crate::numeric::quantile;

/// Mean and sample standard deviation (n − 1); `None` for fewer than one value.
pub fn mean_sd(v: &[f64]) -> Option<(f64, Option<f64>)> {
    if v.is_empty() {
        return None;
    }
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let sd = (v.len() > 1).then(|| (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt());
    Some((m, sd))
}

/// Cohen's d with the pooled standard deviation; `None` without spread.
///
/// # Method
/// J. Cohen (1988), *Statistical Power Analysis for the Behavioral Sciences*, 2nd ed., eq. 2.5.
pub fn cohens_d(x: &[f64], y: &[f64]) -> Option<f64> {
    let (mx, sx) = mean_sd(x)?;
    let (my, sy) = mean_sd(y)?;
    let (nx, ny) = (x.len() as f64, y.len() as f64);
    let pooled = (((nx - 1.0) * sx?.powi(2) + (ny - 1.0) * sy?.powi(2)) / (nx + ny - 2.0)).sqrt();
    (pooled > 0.0).then(|| (mx - my) / pooled)
}

/// Hedges' g: Cohen's d times the small-sample correction J = 1 − 3 / (4(n₁ + n₂) − 9), which
/// removes most of d's upward bias when each side holds a few replicate means (at 3 vs 3, d
/// overstates the effect by a quarter). `None` as for [`cohens_d`] and below 2 + 2 values.
///
/// # Method
/// L. V. Hedges (1981), "Distribution theory for Glass's estimator of effect size and related
/// estimators", J. Educ. Stat. 6(2):107–128, doi:10.3102/10769986006002107 (the approximation
/// to the exact correction given there).
pub fn hedges_g(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = (x.len() + y.len()) as f64;
    (x.len() >= 2 && y.len() >= 2)
        .then(|| cohens_d(x, y))
        .flatten()
        .map(|d| d * (1.0 - 3.0 / (4.0 * n - 9.0)))
}

/// Largest number of group assignments enumerated by [`permutation_test`]; beyond it the test
/// samples [`PERMUTATION_SAMPLES`] of them.
pub const EXACT_PERMUTATIONS: u64 = 100_000;

/// Random assignments drawn by [`permutation_test`] when there are too many to enumerate.
pub const PERMUTATION_SAMPLES: usize = 20_000;

/// A permutation test's two-sided p and how it was computed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Permutation {
    /// Share of assignments whose |difference of means| is at least the observed one.
    pub p: f64,
    /// `exact` (every assignment) or `sampled` ((count + 1) / (samples + 1)).
    pub method: &'static str,
}

/// Two-sided permutation test of the difference of the means of `x` and `y` (here replicate
/// means, the independent units): every assignment of the pooled values to groups of the same
/// sizes is equally likely under no difference, so the p is the share of assignments whose
/// |difference| reaches the observed one. Exact when C(n₁+n₂, n₁) is at most
/// [`EXACT_PERMUTATIONS`]; it cannot go below 1 / C(n₁+n₂, n₁) for each side, which is what
/// the design allows (0.1 at 3 vs 3). `None` when a group is empty.
///
/// # Method
/// R. A. Fisher (1935), *The Design of Experiments*, §21; E. J. G. Pitman (1937), "Significance
/// tests which may be applied to samples from any populations", Suppl. J. R. Stat. Soc.
/// 4(1):119–130, doi:10.2307/2984124; the sampled version's (count + 1) / (samples + 1) as in
/// M. D. Ernst (2004), "Permutation methods: a basis for exact inference", Stat. Sci.
/// 19(4):676–685, doi:10.1214/088342304000000396.
pub fn permutation_test(x: &[f64], y: &[f64], rng: &mut Rng) -> Option<Permutation> {
    let (n1, n2) = (x.len(), y.len());
    if n1 == 0 || n2 == 0 {
        return None;
    }
    let pooled: Vec<f64> = x.iter().chain(y).copied().collect();
    let total: f64 = pooled.iter().sum();
    let difference = |sum_first: f64| (sum_first / n1 as f64 - (total - sum_first) / n2 as f64).abs();
    let observed = difference(x.iter().sum());
    // Equal differences reached by another summation order count as reaching it.
    let reaches = |d: f64| d >= observed - 1e-9 * observed.abs().max(1e-12);
    if binomial(n1 + n2, n1) <= EXACT_PERMUTATIONS {
        let (mut hits, mut all) = (0u64, 0u64);
        for_each_subset(pooled.len(), n1, &mut |chosen| {
            all += 1;
            hits += u64::from(reaches(difference(chosen.iter().map(|&k| pooled[k]).sum())));
        });
        return Some(Permutation {
            p: hits as f64 / all as f64,
            method: "exact",
        });
    }
    let n = pooled.len();
    let mut order: Vec<usize> = (0..n).collect();
    let mut hits = 0usize;
    for _ in 0..PERMUTATION_SAMPLES {
        for i in 0..n1 {
            let j = i + (rng.uniform() * (n - i) as f64) as usize;
            order.swap(i, j.min(n - 1));
        }
        hits += usize::from(reaches(difference(order[..n1].iter().map(|&k| pooled[k]).sum())));
    }
    Some(Permutation {
        p: (hits + 1) as f64 / (PERMUTATION_SAMPLES + 1) as f64,
        method: "sampled",
    })
}

/// C(n, k), saturating.
fn binomial(n: usize, k: usize) -> u64 {
    let k = k.min(n - k);
    (0..k).fold(1u64, |c, i| c.saturating_mul((n - i) as u64) / (i as u64 + 1))
}

/// Calls `visit` with every k-subset of 0..n (ascending indices), in lexicographic order.
fn for_each_subset(n: usize, k: usize, visit: &mut dyn FnMut(&[usize])) {
    let mut chosen: Vec<usize> = (0..k).collect();
    loop {
        visit(&chosen);
        let Some(i) = (0..k).rev().find(|&i| chosen[i] < n - k + i) else {
            return;
        };
        chosen[i] += 1;
        for j in i + 1..k {
            chosen[j] = chosen[j - 1] + 1;
        }
    }
}

/// Holm's step-down adjustment of `p` values tested together: sorted ascending, the i-th
/// (from 1) is multiplied by m − i + 1, each at least the one before, at most 1; returned in
/// the input order. Controls the family-wise error rate without assuming independence.
///
/// # Method
/// S. Holm (1979), "A simple sequentially rejective multiple test procedure", Scand. J. Stat.
/// 6(2):65–70.
pub fn holm(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]).then(a.cmp(&b)));
    let mut adjusted = vec![0.0; m];
    let mut running = 0.0f64;
    for (i, &k) in order.iter().enumerate() {
        running = running.max(((m - i) as f64 * p[k]).min(1.0));
        adjusted[k] = running;
    }
    adjusted
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_tail_matches_known_values() {
        // Standard normal table values (e.g. Abramowitz & Stegun 1964, table 26.1):
        // P(Z > 1.959964) = 0.025, P(Z > 0) = 0.5, P(Z > 3) = 0.0013499.
        assert!((normal_sf(1.959964) - 0.025).abs() < 1e-7);
        assert!((normal_sf(0.0) - 0.5).abs() < 1e-7);
        assert!((normal_sf(3.0) - 0.0013499).abs() < 1e-7);
        assert!((normal_sf(-1.0) - 0.8413447).abs() < 1e-7);
    }

    #[test]
    fn methods_mann_whitney_checks() {
        // Source: fixtures/methods/check_values.md §9 (scipy 1.17.1 mannwhitneyu): x vs y U₁ = 4, exact p = 0.051948;
        // with ties U₁ = 6, p = 0.113903 (asymptotic, tie-corrected).
        let m = mann_whitney(&[1.1, 2.3, 3.0, 4.2, 5.5], &[2.0, 6.1, 7.3, 8.4, 9.0, 10.2]).unwrap();
        assert_eq!((m.u1, m.method), (4.0, "exact"));
        assert!((m.p - 0.051948).abs() < 1e-6, "{}", m.p);
        let m = mann_whitney(&[1., 2., 2., 3., 4.], &[2., 3., 3., 5., 6., 7.]).unwrap();
        assert_eq!((m.u1, m.method), (6.0, "asymptotic"));
        assert!((m.p - 0.113903).abs() < 1e-6, "{}", m.p);
        // The smallest two-sided p of 3 vs 3 is 0.1 (fixtures/methods/check_values.md §9).
        assert!((mann_whitney(&[1., 2., 3.], &[4., 5., 6.]).unwrap().p - 0.1).abs() < 1e-12);
    }

    #[test]
    fn methods_pseudo_replication_check() {
        // Source: fixtures/methods/check_values.md §9: pooled cells p = 0.037258 (18 vs 13); embryo means p = 0.7;
        // hierarchical bootstrap of ctrl ≈ mean of embryo means 0.614857 (assert ±0.005).
        let ctrl = vec![
            vec![0.60, 0.62, 0.61, 0.63, 0.64, 0.62],
            vec![0.50, 0.52, 0.51, 0.53, 0.52],
            vec![0.70, 0.71, 0.69, 0.72, 0.70, 0.71, 0.73],
        ];
        let kd = vec![
            vec![0.55, 0.57, 0.56, 0.58],
            vec![0.48, 0.47, 0.49, 0.50, 0.49],
            vec![0.66, 0.65, 0.67, 0.68],
        ];
        let flat = |g: &[Vec<f64>]| g.concat();
        let pooled = mann_whitney(&flat(&ctrl), &flat(&kd)).unwrap();
        assert!((pooled.p - 0.037258).abs() < 1e-6, "{}", pooled.p);
        let means = |g: &[Vec<f64>]| {
            g.iter()
                .map(|v| v.iter().sum::<f64>() / v.len() as f64)
                .collect::<Vec<_>>()
        };
        assert!((mann_whitney(&means(&ctrl), &means(&kd)).unwrap().p - 0.7).abs() < 1e-12);
        let boot = hierarchical_bootstrap(&ctrl, 20000, &mut Rng::new(1));
        let m = boot.iter().sum::<f64>() / boot.len() as f64;
        assert!((m - 0.614857).abs() < 0.005, "{m}");
        // Source: the law of total variance. Each resampled replicate mean M picks a group G
        // at random, then averages n_G values drawn from it with replacement: Var(M) =
        // Var_G(μ_G) + E_G[σ²_G / n_G] (σ² the group's population variance); the statistic
        // averages k = 3 such draws, so its variance is Var(M) / 3. A function that does not
        // resample would give 0. Within 5% (sampling error of a variance over 20 000 draws ~1%).
        let k = ctrl.len() as f64;
        let mu: Vec<f64> = means(&ctrl);
        let grand = mu.iter().sum::<f64>() / k;
        let between = mu.iter().map(|u| (u - grand).powi(2)).sum::<f64>() / k;
        let within = ctrl
            .iter()
            .zip(&mu)
            .map(|(g, u)| g.iter().map(|x| (x - u).powi(2)).sum::<f64>() / g.len() as f64 / g.len() as f64)
            .sum::<f64>()
            / k;
        let expected = (between + within) / k;
        let var = boot.iter().map(|b| (b - m).powi(2)).sum::<f64>() / (boot.len() - 1) as f64;
        assert!((var / expected - 1.0).abs() < 0.05, "{var} vs {expected}");
    }

    #[test]
    fn permutation_p_is_exact_and_bounded_by_the_design() {
        // Source: enumeration by hand. 3 vs 3 completely separated: of the C(6,3) = 20
        // assignments, 2 (the observed one and its mirror) reach |difference| = 3, p = 0.1,
        // the smallest the design allows. [1, 2] vs [3, 4, 5]: |difference| 2.5 is reached by
        // {1,2} and {4,5} (2.5 both) of the C(5,2) = 10 choices of the first group: p = 0.2.
        let mut rng = Rng::new(1);
        let p = permutation_test(&[4., 5., 6.], &[1., 2., 3.], &mut rng).unwrap();
        assert_eq!(p.method, "exact");
        assert!((p.p - 0.1).abs() < 1e-12, "{p:?}");
        let p = permutation_test(&[1., 2.], &[3., 4., 5.], &mut rng).unwrap();
        assert!((p.p - 0.2).abs() < 1e-12, "{p:?}");
        assert!(permutation_test(&[], &[1.], &mut rng).is_none());
        assert_eq!(binomial(20, 10), 184_756);
    }

    #[test]
    fn permutation_tests_keep_their_level_under_no_difference() {
        // Source: a permutation test is exact under exchangeability (Ernst 2004), so with no
        // difference p < 0.05 happens in at most 5% of comparisons (at 6 vs 6, 46 of the 924
        // assignments: 4.98%); simulated null comparisons must stay within the nominal 5% plus
        // two binomial standard deviations of their count (the issue asks ≤ 6%): none at 3 vs
        // 3 (p ≥ 0.1), ≤ 5.97% of 2000 at 6 vs 6 (exact), ≤ 6.38% of 1000 at 12 vs 12
        // (sampled).
        let mut rng = Rng::new(2026);
        for (n, runs) in [(3, 500), (6, 2000), (12, 1000)] {
            let mut positives = 0;
            for _ in 0..runs {
                let x: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
                let y: Vec<f64> = (0..n).map(|_| rng.normal()).collect();
                positives += usize::from(permutation_test(&x, &y, &mut rng).unwrap().p < 0.05);
            }
            let rate = positives as f64 / runs as f64;
            let limit = if n == 3 {
                0.0
            } else {
                0.05 + 2.0 * (0.05 * 0.95 / runs as f64).sqrt()
            };
            assert!(rate <= limit, "{n} vs {n}: {positives} of {runs}");
        }
    }

    #[test]
    fn holm_adjusts_step_down() {
        // Source: Holm (1979) by hand: p = (0.01, 0.04, 0.03, 0.005) → sorted 0.005, 0.01,
        // 0.03, 0.04 times 4, 3, 2, 1 = 0.02, 0.03, 0.06, 0.04 → running maximum 0.02, 0.03,
        // 0.06, 0.06; in input order (0.03, 0.06, 0.06, 0.02).
        let a = holm(&[0.01, 0.04, 0.03, 0.005]);
        let want = [0.03, 0.06, 0.06, 0.02];
        assert!(a.iter().zip(want).all(|(x, y)| (x - y).abs() < 1e-12), "{a:?}");
        assert_eq!(holm(&[0.6, 0.7]), vec![1.0, 1.0]);
    }

    #[test]
    fn quantiles_and_cohens_d() {
        // numpy.quantile([1, 2, 3, 4], 0.25) = 1.75 (linear rule); Cohen's d of [1,2,3] vs
        // [2,3,4]: means differ by 1, pooled sd 1 → −1 (hand-derived).
        assert_eq!(quantile(&[4.0, 1.0, 3.0, 2.0], 0.25), Some(1.75));
        assert!((cohens_d(&[1., 2., 3.], &[2., 3., 4.]).unwrap() + 1.0).abs() < 1e-12);
        // Hedges (1981): J = 1 − 3/(4·6 − 9) = 0.8 at 3 vs 3 (the exact correction,
        // Γ(2)/(√2·Γ(3/2)) = 0.7979, from memory, lies within 0.3% of it).
        assert!((hedges_g(&[1., 2., 3.], &[2., 3., 4.]).unwrap() + 0.8).abs() < 1e-12);
        assert_eq!(hedges_g(&[1.], &[2., 3., 4.]), None);
    }
}
