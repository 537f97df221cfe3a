//! What makes tracking hard in a recording, measured from a finished run and its recording:
//! the same estimators on the real run and on each look-alike, so that the two can be shown
//! side by side. Every estimator is our own simple choice, named in its field's doc.

use crate::columns::read_named_columns;
use crate::error::{Error, Result};
use crate::numeric::{median, quantile};
use crate::stack::Stack;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::Path;

/// Frames sampled for the pixel statistics (background, noise, illumination).
const SAMPLED_FRAMES: usize = 5;
/// Side of the blocks of the noise estimate, px.
const NOISE_BLOCK: usize = 8;
/// Intensity bins of the noise estimate.
const NOISE_BINS: usize = 8;

/// The statistics that drive tracking accuracy, as measured.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RecordingStats {
    /// Median equivalent diameter of the tracked objects, px.
    pub diameter_px: f64,
    /// 10th and 90th percentiles of the equivalent diameter, px.
    pub diameter_p10_p90: (f64, f64),
    /// Median and 90th percentile of major / minor axis of the moment ellipses.
    pub axis_ratio_median_p90: (f64, f64),
    /// Background grey level: the median over sampled frames of each frame's 25th percentile
    /// (nuclei cover well under three quarters of a frame).
    pub background_grey: f64,
    /// Median over objects of mean intensity minus the background, grey levels.
    pub signal_grey: f64,
    /// Spread of brightness between nuclei: half the 16th-84th percentile range of the natural
    /// logarithm of each object's signal in the first frame (a standard deviation for a
    /// lognormal).
    pub brightness_spread: f64,
    /// Grey-level variance per grey level (the gain, for a Poisson camera): the photon-transfer
    /// line (Janesick 2007) fitted to half the variance of the difference of consecutive frames
    /// over 8 x 8 blocks against the blocks' mean, on the darker half of the blocks.
    pub gain: f64,
    /// The photon-transfer line's variance at zero grey level.
    pub variance_at_zero: f64,
    /// Noise standard deviation at the background level, from the photon-transfer line.
    pub background_noise_sd: f64,
    /// Median objects per frame.
    pub nuclei_per_frame: f64,
    /// Share of the frame's area inside objects (objects per frame times the disc of the
    /// median diameter over the frame's area).
    pub area_fraction: f64,
    /// Share of objects whose nearest neighbour's centre is closer than 1.05 times the mean of
    /// their equivalent diameters (touching or pressed).
    pub touching_share: f64,
    /// 5th percentile of the nearest-neighbour distance over the diameter (how closely nuclei
    /// pack).
    pub closest_packing: f64,
    /// Mean step length between consecutive frames of a track, px (drift removed).
    pub speed_px_per_frame: f64,
    /// Persistence of direction, frames: −1 / ln C, where C is the mean cosine-weighted
    /// correlation of consecutive velocities, Σ v_t·v_(t+1) / Σ |v_t|², after removing the
    /// common drift (a persistent random walk's velocities decorrelate as exp(−t/P)); 0 when
    /// C ≤ 0.
    pub persistence_frames: f64,
    /// The common drift: the mean velocity over all steps, px per frame (x, y).
    pub drift_px_per_frame: (f64, f64),
    /// Divisions per nucleus and frame (tracks with daughters over nucleus-frames).
    pub division_rate: f64,
    /// Tracks ending inside the field (not at the last frame, not as mothers, farther than a
    /// diameter from the edge) per nucleus and frame: nuclei lost or dying.
    pub ending_rate: f64,
    /// Signal lost per frame: 1 − exp(slope) of a least-squares line through the logarithm of
    /// the median object signal of each frame.
    pub bleach_per_frame: f64,
    /// Illumination unevenness: 1 − (lowest / highest) of the 25th percentiles of the first
    /// frame's 4 x 4 blocks.
    pub unevenness: f64,
}

/// One tracked object, the columns of `tracks.csv` the estimators use.
#[derive(Debug, Clone, PartialEq)]
pub struct Measured {
    /// Track id.
    pub track: u32,
    /// Mother track id.
    pub parent: Option<u32>,
    /// Frame.
    pub frame: usize,
    /// Centroid, px.
    pub x: f64,
    /// Centroid, px.
    pub y: f64,
    /// Equivalent diameter, px.
    pub diameter: f64,
    /// Major / minor axis.
    pub axis_ratio: f64,
    /// Mean raw intensity (`None` for a run without intensities).
    pub mean_intensity: Option<f64>,
}

/// Reads the columns the estimators need from a run's `tracks.csv`.
///
/// # Errors
/// A missing column or a cell that is not a number, naming the file and line.
pub fn read_measured(path: &Path) -> Result<Vec<Measured>> {
    let names = [
        "track_id",
        "parent_id",
        "frame",
        "x",
        "y",
        "equivalent_diameter_px",
        "major_axis_px",
        "minor_axis_px",
        "mean_intensity",
    ];
    read_named_columns(path, &names, |row| {
        let minor = row.number(7)?;
        Ok(Measured {
            track: row.whole(0)?,
            parent: row.optional_whole(1)?,
            frame: row.whole(2)? as usize,
            x: row.number(3)?,
            y: row.number(4)?,
            diameter: row.number(5)?,
            axis_ratio: if minor > 0.0 { row.number(6)? / minor } else { 1.0 },
            mean_intensity: row.text(8).parse::<f64>().ok().filter(|v| v.is_finite()),
        })
    })
}

/// Measures a run: its tracked objects and the recording they came from.
///
/// # Errors
/// A frame that cannot be read, or a run without a tracked object.
pub fn measure(stack: &mut Stack, objects: &[Measured]) -> Result<RecordingStats> {
    let info = stack.info().clone();
    if objects.is_empty() {
        return Err(Error::input(
            &info.path,
            "the run tracked no nucleus: there is nothing to imitate",
        ));
    }
    let picks = sample_frames(info.frames);
    let mut backgrounds = BTreeMap::new();
    let mut pairs = Vec::new();
    let mut unevenness = 0.0;
    // A frame read as the successor of one pick is kept for the next pick.
    let mut held: Option<(usize, Vec<f32>)> = None;
    for &t in &picks {
        let frame = match held.take() {
            Some((k, frame)) if k == t => frame,
            _ => stack.read_frame(t)?.pixels.to_f32(),
        };
        backgrounds.insert(t, quantile_f32(&frame, 0.25));
        if t == picks[0] {
            unevenness = block_unevenness(&frame, info.width, info.height);
        }
        if t + 1 < info.frames {
            let next = stack.read_frame(t + 1)?.pixels.to_f32();
            pairs.extend(block_mean_variance(&frame, &next, info.width, info.height));
            held = Some((t + 1, next));
        }
    }
    let background = median(&mut backgrounds.values().copied().collect::<Vec<_>>()).unwrap_or(0.0);
    let (gain, at_zero) = photon_transfer(&mut pairs);
    let mut stats = shape_and_density(objects, info.width, info.height, info.frames);
    stats.background_grey = background;
    stats.gain = gain;
    stats.variance_at_zero = at_zero;
    stats.background_noise_sd = (gain * background + at_zero).max(0.0).sqrt();
    stats.unevenness = unevenness;
    brightness(objects, background, &mut stats);
    motion(objects, &mut stats);
    Ok(stats)
}

/// Up to [`SAMPLED_FRAMES`] frames spread over the recording (not the last, so that each has
/// a successor for the noise estimate when the recording has two frames or more).
fn sample_frames(frames: usize) -> Vec<usize> {
    let usable = frames.saturating_sub(1).max(1);
    let n = SAMPLED_FRAMES.min(usable);
    let mut picks: Vec<usize> = (0..n).map(|k| k * usable / n).collect();
    picks.dedup();
    picks
}

/// The `q`-quantile of the finite values, as [`quantile`] defines it (linear between the two
/// order statistics). Whole grey levels of up to 16 bits, what cameras record, are counted
/// rather than selected (the same value, a tenth of the time on a megapixel frame).
fn quantile_f32(values: &[f32], q: f64) -> f64 {
    if let Some(counts) = grey_level_counts(values) {
        return counted_quantile(&counts, q).unwrap_or(0.0);
    }
    let v: Vec<f64> = values.iter().filter(|v| v.is_finite()).map(|&v| v as f64).collect();
    quantile(&v, q).unwrap_or(0.0)
}

/// How many values fall on each whole grey level 0..=65535; none when a value is not one.
fn grey_level_counts(values: &[f32]) -> Option<Vec<u64>> {
    let mut counts = vec![0u64; 1 << 16];
    for &v in values {
        let level = v as u32;
        if level as f32 != v || level > 65535 {
            return None;
        }
        counts[level as usize] += 1;
    }
    Some(counts)
}

/// The `q`-quantile of values given as counts per grey level (linear between the two order
/// statistics at ⌊h⌋ and ⌈h⌉, h = q·(n − 1), as [`quantile`]).
fn counted_quantile(counts: &[u64], q: f64) -> Option<f64> {
    let n: u64 = counts.iter().sum();
    if n == 0 {
        return None;
    }
    let h = q.clamp(0.0, 1.0) * (n - 1) as f64;
    let (lo, hi) = (h.floor() as u64, h.ceil() as u64);
    // The level holding the order statistic of rank `rank` (0-based).
    let level_of = |rank: u64| -> f64 {
        let mut seen = 0;
        for (level, &c) in counts.iter().enumerate() {
            seen += c;
            if seen > rank {
                return level as f64;
            }
        }
        (counts.len() - 1) as f64
    };
    let (at_lo, at_hi) = (level_of(lo), level_of(hi));
    Some(at_lo + (h - lo as f64) * (at_hi - at_lo))
}

/// 1 − lowest / highest 25th percentile of 4 x 4 blocks.
fn block_unevenness(frame: &[f32], w: usize, h: usize) -> f64 {
    let mut levels = Vec::new();
    for by in 0..4 {
        for bx in 0..4 {
            let (x0, x1, y0, y1) = (bx * w / 4, (bx + 1) * w / 4, by * h / 4, (by + 1) * h / 4);
            let block: Vec<f32> = (y0..y1)
                .flat_map(|y| frame[y * w + x0..y * w + x1].iter().copied())
                .collect();
            if !block.is_empty() {
                levels.push(quantile_f32(&block, 0.25));
            }
        }
    }
    let lo = levels.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = levels.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if hi > 0.0 && lo.is_finite() {
        (1.0 - lo / hi).clamp(0.0, 1.0)
    } else {
        0.0
    }
}

/// Per 8 x 8 block of two consecutive frames: the mean, and half the variance of their
/// difference (the noise variance of one frame when nothing moved).
fn block_mean_variance(a: &[f32], b: &[f32], w: usize, h: usize) -> Vec<(f64, f64)> {
    let n = (NOISE_BLOCK * NOISE_BLOCK) as f64;
    let mut out = Vec::new();
    for by in (0..h.saturating_sub(NOISE_BLOCK - 1)).step_by(NOISE_BLOCK) {
        for bx in (0..w.saturating_sub(NOISE_BLOCK - 1)).step_by(NOISE_BLOCK) {
            let (mut sum, mut d_sum, mut d_sq) = (0.0, 0.0, 0.0);
            for y in by..by + NOISE_BLOCK {
                for x in bx..bx + NOISE_BLOCK {
                    let (p, q) = (a[y * w + x] as f64, b[y * w + x] as f64);
                    sum += p + q;
                    d_sum += p - q;
                    d_sq += (p - q) * (p - q);
                }
            }
            let variance = (d_sq - d_sum * d_sum / n) / (n - 1.0);
            out.push((sum / (2.0 * n), variance / 2.0));
        }
    }
    out
}

/// The photon-transfer line `variance = gain · mean + at_zero` (see
/// [`RecordingStats::gain`]), over the darker half of the blocks (background, spread in level
/// by uneven light), where nothing moves: in 8 bins by mean, the median variance of each (the
/// median of a variance over 63 degrees of freedom is within 1% of its mean), least squares.
/// A slope that is not positive (a flat field) leaves the gain at 1, the variance all at the
/// background level.
fn photon_transfer(pairs: &mut [(f64, f64)]) -> (f64, f64) {
    if pairs.len() < NOISE_BINS * 8 {
        return (1.0, 0.0);
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let darker = &pairs[..pairs.len() / 2];
    let per = darker.len() / NOISE_BINS;
    let points: Vec<(f64, f64)> = darker
        .chunks(per)
        .filter(|c| c.len() >= 8)
        .map(|c| {
            let mut means: Vec<f64> = c.iter().map(|p| p.0).collect();
            let mut variances: Vec<f64> = c.iter().map(|p| p.1).collect();
            (median(&mut means).unwrap_or(0.0), median(&mut variances).unwrap_or(0.0))
        })
        .collect();
    let (gain, intercept) = line_fit(&points).unwrap_or((0.0, 0.0));
    if gain > 0.0 && gain.is_finite() {
        (gain, intercept)
    } else {
        let n = points.len().max(1) as f64;
        let (mx, my) = (
            points.iter().map(|p| p.0).sum::<f64>() / n,
            points.iter().map(|p| p.1).sum::<f64>() / n,
        );
        (1.0, my - mx)
    }
}

/// The least-squares line through `points` as (slope, intercept); `None` for fewer than two
/// distinct abscissae.
fn line_fit(points: &[(f64, f64)]) -> Option<(f64, f64)> {
    let n = points.len() as f64;
    let (mx, my) = (
        points.iter().map(|p| p.0).sum::<f64>() / n,
        points.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    (points.len() >= 2 && sxx > 0.0).then(|| (sxy / sxx, my - sxy / sxx * mx))
}

/// Diameter, axis ratio, density, touching and packing.
fn shape_and_density(objects: &[Measured], w: usize, h: usize, frames: usize) -> RecordingStats {
    let diameters: Vec<f64> = objects.iter().map(|o| o.diameter).collect();
    let ratios: Vec<f64> = objects.iter().map(|o| o.axis_ratio).collect();
    let diameter = quantile(&diameters, 0.5).unwrap_or(0.0);
    let mut per_frame: BTreeMap<usize, Vec<&Measured>> = BTreeMap::new();
    for o in objects {
        per_frame.entry(o.frame).or_default().push(o);
    }
    let mut counts: Vec<f64> = (0..frames)
        .map(|t| per_frame.get(&t).map_or(0, Vec::len) as f64)
        .collect();
    let nuclei = median(&mut counts).unwrap_or(0.0);
    let (mut touching, mut total, mut packing) = (0usize, 0usize, Vec::new());
    for list in per_frame.values() {
        for (a, (d, other)) in list.iter().zip(nearest_neighbours(list)) {
            total += 1;
            touching += usize::from(d < 1.05 * (a.diameter + other.diameter) / 2.0);
            packing.push(d / diameter.max(1.0));
        }
    }
    let area = std::f64::consts::PI * diameter * diameter / 4.0;
    RecordingStats {
        diameter_px: diameter,
        diameter_p10_p90: (
            quantile(&diameters, 0.1).unwrap_or(0.0),
            quantile(&diameters, 0.9).unwrap_or(0.0),
        ),
        axis_ratio_median_p90: (
            quantile(&ratios, 0.5).unwrap_or(1.0),
            quantile(&ratios, 0.9).unwrap_or(1.0),
        ),
        background_grey: 0.0,
        signal_grey: 0.0,
        brightness_spread: 0.0,
        gain: 0.0,
        variance_at_zero: 0.0,
        background_noise_sd: 0.0,
        nuclei_per_frame: nuclei,
        area_fraction: nuclei * area / (w * h) as f64,
        touching_share: if total > 0 { touching as f64 / total as f64 } else { 0.0 },
        closest_packing: quantile(&packing, 0.05).unwrap_or(0.0),
        speed_px_per_frame: 0.0,
        persistence_frames: 0.0,
        drift_px_per_frame: (0.0, 0.0),
        division_rate: 0.0,
        ending_rate: 0.0,
        bleach_per_frame: 0.0,
        unevenness: 0.0,
    }
}

/// Each object's distance to its nearest neighbour in the same frame, and that neighbour (a
/// k-d tree: a frame of a few thousand nuclei is not compared pair by pair); none for a lone
/// object.
fn nearest_neighbours<'a>(list: &[&'a Measured]) -> Vec<(f64, &'a Measured)> {
    if list.len() < 2 {
        return Vec::new();
    }
    let points: Vec<[f64; 2]> = list.iter().map(|o| [o.x, o.y]).collect();
    let tree: ImmutableKdTree<f64, 2> = ImmutableKdTree::new_from_slice(&points).expect("finite centroids");
    let two = std::num::NonZero::new(2usize).expect("non-zero");
    points
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let hits = tree.query(p).nearest_n::<SquaredEuclidean<f64>>(two).execute();
            // The object itself is one of the two (at distance 0), unless another sits at the
            // very same place.
            let other = hits.iter().find(|hit| hit.item as usize != i).unwrap_or(&hits[1]);
            (other.distance.sqrt(), list[other.item as usize])
        })
        .collect()
}

/// Signal over the background, its spread between nuclei and its loss over time.
fn brightness(objects: &[Measured], background: f64, stats: &mut RecordingStats) {
    let signal = |o: &Measured| o.mean_intensity.map(|m| m - background).filter(|s| *s > 0.0);
    let all: Vec<f64> = objects.iter().filter_map(signal).collect();
    stats.signal_grey = quantile(&all, 0.5).unwrap_or(0.0);
    let first = objects.iter().map(|o| o.frame).min().unwrap_or(0);
    let logs: Vec<f64> = objects
        .iter()
        .filter(|o| o.frame == first)
        .filter_map(signal)
        .map(f64::ln)
        .collect();
    stats.brightness_spread = match (quantile(&logs, 0.16), quantile(&logs, 0.84)) {
        (Some(lo), Some(hi)) => (hi - lo) / 2.0,
        _ => 0.0,
    };
    let mut per_frame: BTreeMap<usize, Vec<f64>> = BTreeMap::new();
    for o in objects {
        if let Some(s) = signal(o) {
            per_frame.entry(o.frame).or_default().push(s);
        }
    }
    let points: Vec<(f64, f64)> = per_frame
        .into_iter()
        .filter_map(|(t, mut v)| Some((t as f64, median(&mut v)?.ln())))
        .collect();
    if let Some((slope, _)) = line_fit(&points) {
        stats.bleach_per_frame = (1.0 - slope.exp()).clamp(0.0, 0.5);
    }
}

/// A displacement between consecutive frames, px (x, y).
type Velocity = (f64, f64);

/// Speed, persistence, drift, divisions and endings from the tracks.
fn motion(objects: &[Measured], stats: &mut RecordingStats) {
    let mut tracks: BTreeMap<u32, Vec<&Measured>> = BTreeMap::new();
    for o in objects {
        tracks.entry(o.track).or_default().push(o);
    }
    for t in tracks.values_mut() {
        t.sort_by_key(|o| o.frame);
    }
    // Velocities between consecutive frames, each with the track's next one when consecutive.
    let mut velocities: Vec<(Velocity, Option<Velocity>)> = Vec::new();
    for t in tracks.values() {
        let steps: Vec<(usize, Velocity)> = t
            .windows(2)
            .filter(|w| w[1].frame == w[0].frame + 1)
            .map(|w| (w[0].frame, (w[1].x - w[0].x, w[1].y - w[0].y)))
            .collect();
        for (k, &(f, v)) in steps.iter().enumerate() {
            let next = steps.get(k + 1).filter(|s| s.0 == f + 1).map(|s| s.1);
            velocities.push((v, next));
        }
    }
    if !velocities.is_empty() {
        let n = velocities.len() as f64;
        let drift = (
            velocities.iter().map(|v| v.0 .0).sum::<f64>() / n,
            velocities.iter().map(|v| v.0 .1).sum::<f64>() / n,
        );
        let rel = |v: (f64, f64)| (v.0 - drift.0, v.1 - drift.1);
        stats.drift_px_per_frame = drift;
        stats.speed_px_per_frame = velocities.iter().map(|v| rel(v.0).0.hypot(rel(v.0).1)).sum::<f64>() / n;
        let (mut dot, mut sq) = (0.0, 0.0);
        for (v, next) in &velocities {
            if let Some(w) = next {
                let (a, b) = (rel(*v), rel(*w));
                dot += a.0 * b.0 + a.1 * b.1;
                sq += a.0 * a.0 + a.1 * a.1;
            }
        }
        let c = if sq > 0.0 { dot / sq } else { 0.0 };
        stats.persistence_frames = if c > 0.0 && c < 1.0 {
            -1.0 / c.ln()
        } else if c >= 1.0 {
            100.0
        } else {
            0.0
        };
    }
    let nucleus_frames = objects.len() as f64;
    let mothers: std::collections::BTreeSet<u32> = objects.iter().filter_map(|o| o.parent).collect();
    stats.division_rate = mothers.len() as f64 / nucleus_frames;
    let last = objects.iter().map(|o| o.frame).max().unwrap_or(0);
    let (w, h) = (
        objects.iter().map(|o| o.x).fold(0.0, f64::max),
        objects.iter().map(|o| o.y).fold(0.0, f64::max),
    );
    let margin = stats.diameter_px;
    let endings = tracks
        .iter()
        .filter(|(id, t)| {
            let end = t[t.len() - 1];
            end.frame < last
                && !mothers.contains(id)
                && end.x.min(end.y) > margin
                && end.x < w - margin
                && end.y < h - margin
        })
        .count();
    stats.ending_rate = endings as f64 / nucleus_frames;
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counted_grey_levels_give_the_linear_quantile() {
        // Source: Hyndman & Fan (1996), Am. Stat. 50(4):361–365, definition 7 (numpy's and R's
        // default): h = q·(n − 1), linear between order statistics ⌊h⌋ and ⌈h⌉. Worked by hand:
        // [1, 2, 3, 4, 10] at 0.3 → h = 1.2 → 2 + 0.2·(3 − 2) = 2.2; [5, 5, 5, 7] at 0.9 →
        // h = 2.7 → 5 + 0.7·(7 − 5) = 6.4; at 0.25 → 5.
        for (values, q, want) in [
            (vec![10.0, 3.0, 1.0, 4.0, 2.0], 0.3, 2.2),
            (vec![5.0, 7.0, 5.0, 5.0], 0.9, 6.4),
            (vec![5.0, 7.0, 5.0, 5.0], 0.25, 5.0),
        ] {
            assert!(grey_level_counts(&values).is_some(), "whole grey levels are counted");
            assert!((quantile_f32(&values, q) - want).abs() < 1e-9);
            // The same values shifted by a half are not grey levels: selected instead.
            let shifted: Vec<f32> = values.iter().map(|v| v + 0.5).collect();
            assert!(grey_level_counts(&shifted).is_none());
            assert!((quantile_f32(&shifted, q) - (want + 0.5)).abs() < 1e-6);
        }
    }

    #[test]
    fn the_photon_transfer_line_of_a_poisson_camera() {
        // Construction: blocks whose difference variance is gain · mean + read² exactly
        // (gain 2, read noise 3), as a camera with 2 grey levels per photon gives (Janesick,
        // "Photon transfer", 2007, the variance-mean relation).
        let mut pairs: Vec<(f64, f64)> = (0..800)
            .map(|i| (100.0 + i as f64, 2.0 * (100.0 + i as f64) + 9.0))
            .collect();
        let (gain, at_zero) = photon_transfer(&mut pairs);
        assert!(
            (gain - 2.0).abs() < 1e-9 && (at_zero - 9.0).abs() < 1e-6,
            "{gain} {at_zero}"
        );
    }

    #[test]
    fn nearest_neighbours_by_hand() {
        // Worked by hand: (0, 0), (3, 4) and (10, 4): the first two are 5 apart, the third is
        // 7 from the second; two objects on the very same spot are each other's nearest, at 0.
        let at = |x: f64, y: f64, diameter: f64| Measured {
            track: 0,
            parent: None,
            frame: 0,
            x,
            y,
            diameter,
            axis_ratio: 1.0,
            mean_intensity: None,
        };
        let objects = [at(0.0, 0.0, 1.0), at(3.0, 4.0, 2.0), at(10.0, 4.0, 3.0)];
        let list: Vec<&Measured> = objects.iter().collect();
        let found: Vec<(f64, f64)> = nearest_neighbours(&list)
            .iter()
            .map(|(d, o)| (*d, o.diameter))
            .collect();
        assert_eq!(found, vec![(5.0, 2.0), (5.0, 1.0), (7.0, 2.0)]);
        let twins = [at(2.0, 2.0, 1.0), at(2.0, 2.0, 2.0)];
        let list: Vec<&Measured> = twins.iter().collect();
        let found: Vec<(f64, f64)> = nearest_neighbours(&list)
            .iter()
            .map(|(d, o)| (*d, o.diameter))
            .collect();
        assert_eq!(found, vec![(0.0, 2.0), (0.0, 1.0)]);
        assert!(nearest_neighbours(&list[..1]).is_empty());
    }

    #[test]
    fn persistence_of_a_walk_whose_velocities_keep_half_their_direction() {
        // Construction: velocities alternate between (1, 0) and (0.5, ±0.866...) so that
        // consecutive ones correlate with C = 0.5 about a zero drift; P = −1/ln 0.5 = 1.4427.
        let mut objects = Vec::new();
        let (mut x, mut y) = (50.0, 50.0);
        let angles = [0.0f64, 60.0, 120.0, 180.0, 240.0, 300.0];
        for (f, a) in angles.iter().cycle().take(61).enumerate() {
            objects.push(Measured {
                track: 1,
                parent: None,
                frame: f,
                x,
                y,
                diameter: 10.0,
                axis_ratio: 1.0,
                mean_intensity: None,
            });
            x += a.to_radians().cos();
            y += a.to_radians().sin();
        }
        let mut stats = shape_and_density(&objects, 200, 200, 61);
        motion(&objects, &mut stats);
        assert!(
            (stats.persistence_frames - 1.0 / 2f64.ln()).abs() < 0.05,
            "{}",
            stats.persistence_frames
        );
        assert!((stats.speed_px_per_frame - 1.0).abs() < 0.05);
    }
}
