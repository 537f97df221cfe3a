//! Automatic estimate of the typical nucleus diameter, made to survive noise, crowding and
//! uneven light: scale selection on the scale-normalised Laplacian of Gaussian, where only
//! blobs that stand out from the frame's own noise at their scale count; a cross-check (and
//! refinement) against the sizes of the objects that segmentation at that scale finds; and a
//! consensus over several frames, reported with a confidence. When no blob stands out from
//! the noise, there is no estimate: the caller asks for `--diameter` instead of guessing.

use crate::image2d::Image;
use crate::numeric::lower_median;
use crate::params::SegmentParams;
use crate::preprocess::{
    gaussian_derivative_kernel, gaussian_laplace, gaussian_radius, laplace_by_bands, robust_noise_sigma,
};
use serde::{Deserialize, Serialize};

/// The σ at which `−σ²·∇²G_σ * I` peaks at one pixel, over the given σ values.
///
/// # Method
/// T. Lindeberg (1998), "Feature detection with automatic scale selection", IJCV
/// 30(2):79–116, doi:10.1023/A:1008045108935 (γ = 1 normalisation for blobs). For a flat disc
/// of radius r the peak is at σ* = r/√2.
pub fn best_scale_at(image: &Image, row: usize, col: usize, sigmas: &[f64]) -> f64 {
    let mut best = (f64::NEG_INFINITY, sigmas[0]);
    for &s in sigmas {
        let r = -(s * s) * gaussian_laplace(image, s as f32)[[row, col]] as f64;
        if r > best.0 {
            best = (r, s);
        }
    }
    best.1
}

/// How far a blob must stand out: its scale-normalised response over the response that the
/// frame's white noise gives at the same scale. Over a 512² crop and ~40 scales there are a
/// few million nearly independent tests; a Gaussian exceeds 6 standard deviations with
/// probability 1e-9, so noise alone almost never makes a blob (our own choice, from that
/// count).
pub const MIN_BLOB_SIGNIFICANCE: f64 = 6.0;

/// Fewer significant blobs than this in a frame make no estimate for it.
pub const MIN_BLOBS: usize = 5;

/// Smallest and largest scale σ searched, px (nuclei of about 4 to 68 px across).
const SIGMA_RANGE: (f64, f64) = (1.5, 24.0);

/// A blob of the scale-space search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Blob {
    /// Row of the response maximum.
    pub y: usize,
    /// Column of the response maximum.
    pub x: usize,
    /// Selected scale σ*, px.
    pub sigma: f64,
    /// Normalised response `−σ²∇²G_σ * I` at σ*, grey levels.
    pub response: f64,
    /// Response over the noise's response at σ*.
    pub significance: f64,
}

/// The standard deviation of the normalised LoG response `−s²∇²G_s * n` for white noise `n` of
/// unit variance, for the discrete separable kernels used here: `s² · √ΣK²` with
/// `K(x, y) = g₂(x)g₀(y) + g₀(x)g₂(y)`, so `ΣK² = 2·Σg₂²·Σg₀² + 2·(Σg₂g₀)²`. (The continuous
/// value is `1 / (√(2π)·s)`, since `∫(∇²G_s)² = 1 / (2π s⁶)`.)
pub fn log_noise_gain(s: f64) -> f64 {
    let g0 = gaussian_derivative_kernel(s as f32, 0);
    let g2 = gaussian_derivative_kernel(s as f32, 2);
    let sum = |f: &dyn Fn(usize) -> f64| (0..g0.len()).map(f).sum::<f64>();
    let s00 = sum(&|i| (g0[i] as f64).powi(2));
    let s22 = sum(&|i| (g2[i] as f64).powi(2));
    let s02 = sum(&|i| g0[i] as f64 * g2[i] as f64);
    s * s * (2.0 * s22 * s00 + 2.0 * s02 * s02).sqrt()
}

/// Blobs of a frame that stand out from its noise: local maxima of the best normalised LoG
/// response over scales (scale selection per pixel, Lindeberg 1998, see [`best_scale_at`]),
/// kept where that response exceeds [`MIN_BLOB_SIGNIFICANCE`] times the noise's own response
/// at the selected scale (noise σ from [`robust_noise_sigma`], the response of white noise
/// from [`log_noise_gain`]). Comparing with the noise at each scale is what keeps a noisy
/// frame from selecting its smallest scale: white noise's normalised response falls as
/// `1/s`, so an unconstrained maximum over scales lands on the noise (fixtures/methods/check_values.md §13).
///
/// Work is bounded: scales from 1.5 to 24 px in steps of 8%, scales of 6 px and more computed
/// on images binned 2x, 4x, ... (so that the scale on the binned grid stays at 3 px or more;
/// binning by the mean divides white noise by the factor). The scales are searched in a few
/// runs of about equal work in parallel and their strongest responses merged in order, an
/// earlier run's kept on a tie: the same as one search in scale order.
pub fn significant_blobs(image: &Image, noise_sigma: f64) -> Vec<Blob> {
    let search = ScaleSearch::new(image.clone(), noise_sigma);
    search.blobs(search.all_runs())
}

/// Runs of scales a frame's search is cut into, of about equal work. More runs than cores,
/// so that the estimate's last frame does not leave a core idle while the other finishes a
/// long run (two runs per frame left one idle for about a run's length, ~30 ms at the end of
/// the estimate); each run keeps an array of its strongest responses the size of the image.
const SEARCH_RUNS: usize = 4;

/// The scale search of [`significant_blobs`] on one image, in pieces that can run on any
/// thread: each of its [`SEARCH_RUNS`] runs of scales ([`ScaleSearch::run`]), then the blobs
/// found from all of them ([`ScaleSearch::blobs`]).
struct ScaleSearch {
    /// The image (level 0) and its binnings by 2, 4, ... (level `l` by 2^l).
    levels: Vec<Image>,
    scales: Vec<SearchScale>,
    /// Where each run of scales starts, and the end of the last.
    cuts: [usize; SEARCH_RUNS + 1],
}

impl ScaleSearch {
    fn new(image: Image, noise_sigma: f64) -> ScaleSearch {
        let scales = search_scales(image.dim(), noise_sigma);
        let count = scales.iter().map(|s| s.level).max().map_or(1, |l| l as usize + 1);
        let binned: Vec<Image> = (1..count).map(|l| bin(&image, 1 << l)).collect();
        let levels: Vec<Image> = std::iter::once(image).chain(binned).collect();
        let cuts = cuts_by_work(&scales, &|level| &levels[level as usize]);
        ScaleSearch { levels, scales, cuts }
    }

    /// The strongest responses over run `run` of the scales (0 to [`SEARCH_RUNS`] − 1).
    fn run(&self, run: usize) -> Strongest {
        let (start, end) = (self.cuts[run], self.cuts[run + 1]);
        let at_level = |level: u32| &self.levels[level as usize];
        strongest_over(&self.scales[start..end], start, &at_level)
    }

    /// Every run, in parallel, in order.
    fn all_runs(&self) -> Vec<Strongest> {
        use rayon::prelude::*;
        (0..SEARCH_RUNS).into_par_iter().map(|run| self.run(run)).collect()
    }

    /// The significant blobs, from the strongest responses of the runs, in order.
    fn blobs(&self, runs: Vec<Strongest>) -> Vec<Blob> {
        let scales = &self.scales;
        let w = self.levels[0].ncols();
        let mut runs = runs.into_iter();
        let mut strongest = runs.next().expect("at least one run");
        runs.for_each(|later| strongest.merge(&later));
        let Strongest { response: best, scale } = strongest;
        let chosen = |i: usize| (scale[i] as usize).checked_sub(1).map(|k| &scales[k]);
        local_maxima(&best, |i| chosen(i).map_or(0.0, |s| s.sigma))
            .into_iter()
            .filter_map(|(y, x)| {
                let scale = chosen(y * w + x)?;
                let (response, noise) = (best[[y, x]] as f64, scale.noise as f64);
                let significance = if noise > 0.0 {
                    response / noise
                } else if response > 0.0 {
                    f64::INFINITY
                } else {
                    0.0
                };
                (significance >= MIN_BLOB_SIGNIFICANCE).then_some(Blob {
                    y,
                    x,
                    sigma: scale.sigma as f64,
                    response,
                    significance,
                })
            })
            .collect()
    }
}

/// One scale of the search of [`significant_blobs`].
#[derive(Debug, Clone, Copy)]
struct SearchScale {
    /// σ on the frame's grid, px.
    sigma: f32,
    /// The image is binned by 2^level for it.
    level: u32,
    /// σ on the binned grid, px.
    binned_sigma: f32,
    /// The normalisation −s² (s on the binned grid).
    norm: f32,
    /// The normalised response of the frame's white noise at this scale.
    noise: f32,
}

/// The scales searched in a `h` x `w` frame with noise σ `noise_sigma`, smallest first.
fn search_scales((h, w): (usize, usize), noise_sigma: f64) -> Vec<SearchScale> {
    let mut scales = Vec::new();
    let mut sigma = SIGMA_RANGE.0;
    while sigma <= SIGMA_RANGE.1.min(w.min(h) as f64 / 4.0) {
        let level = ((sigma / 3.0).log2().floor().max(0.0)) as u32;
        let factor = 1usize << level;
        let s = sigma / factor as f64;
        scales.push(SearchScale {
            sigma: sigma as f32,
            level,
            binned_sigma: s as f32,
            norm: -(s * s) as f32,
            noise: (noise_sigma / factor as f64 * log_noise_gain(s)) as f32,
        });
        sigma *= 1.08;
    }
    scales
}

/// Where to cut `scales` into [`SEARCH_RUNS`] runs of about equal work (a scale's work: its
/// kernel's length times the pixels of its binned image): run `k` starts at the first scale
/// whose work before it is at least `k / SEARCH_RUNS` of the total.
fn cuts_by_work<'a>(scales: &[SearchScale], at_level: &dyn Fn(u32) -> &'a Image) -> [usize; SEARCH_RUNS + 1] {
    let work: Vec<usize> = scales
        .iter()
        .map(|s| (2 * gaussian_radius(s.binned_sigma) + 1) * at_level(s.level).len())
        .collect();
    let total: usize = work.iter().sum();
    let mut before = vec![0usize; work.len() + 1];
    for (k, w) in work.iter().enumerate() {
        before[k + 1] = before[k] + w;
    }
    std::array::from_fn(|run| {
        let share = total * run / SEARCH_RUNS;
        if run == SEARCH_RUNS {
            scales.len()
        } else {
            before
                .iter()
                .take(scales.len())
                .position(|&b| b >= share)
                .unwrap_or(scales.len())
        }
    })
}

/// Each pixel's strongest normalised response over some scales, and which scale gave it
/// (`scale[i]` = 1 + the scale's index in the search; 0 where none did, the response then
/// −∞).
struct Strongest {
    response: Image,
    scale: Vec<u8>,
}

impl Strongest {
    /// Nothing kept yet over an `h` x `w` grid: every response −∞, every scale 0.
    fn empty((h, w): (usize, usize)) -> Strongest {
        Strongest {
            response: Image::from_elem((h, w), f32::NEG_INFINITY),
            scale: vec![0; h * w],
        }
    }

    /// Takes `later`'s pixels where its response is strictly stronger: a search over scales
    /// that come after this one's, so that on a tie the earlier scale stays, as in one
    /// search in scale order.
    fn merge(&mut self, later: &Strongest) {
        let response = self.response.as_slice_mut().expect("standard layout");
        let later_response = later.response.as_slice().expect("standard layout");
        take_stronger_in_row(response, &mut self.scale, later_response, &later.scale);
    }

    /// [`Strongest::merge`] of this search over the scales of one binned level (its grid the
    /// frame's binned by 2^`level`) onto `frame`'s, kept over earlier scales on the frame's
    /// grid: each frame pixel `(y, x)` reads block `(y >> level, x >> level)`. A binned row is
    /// spread to full width once (blocks of 2^`level` pixels, the last one cut), then merged
    /// into each frame row it covers.
    fn spread_onto(&self, level: u32, frame: &mut Strongest) {
        let (h, w) = frame.response.dim();
        let bw = self.response.ncols();
        let (mut response, mut scale) = (vec![0f32; w], vec![0u8; w]);
        let binned = self.response.as_slice().expect("standard layout");
        let frame_response = frame.response.as_slice_mut().expect("standard layout");
        for (by, (line, scales)) in binned.chunks_exact(bw).zip(self.scale.chunks_exact(bw)).enumerate() {
            for ((r, s), (&v, &k)) in response
                .chunks_mut(1 << level)
                .zip(scale.chunks_mut(1 << level))
                .zip(line.iter().zip(scales))
            {
                r.fill(v);
                s.fill(k);
            }
            for y in (by << level)..((by + 1) << level).min(h) {
                let row = y * w..(y + 1) * w;
                take_stronger_in_row(
                    &mut frame_response[row.clone()],
                    &mut frame.scale[row],
                    &response,
                    &scale,
                );
            }
        }
    }
}

crate::multiversioned! {
    /// Where `later[x]` > `best[x]` (strictly; NaN never), takes it and `later_scale[x]` into
    /// `best` and `scale`: branch-free, vectorised.
    fn take_stronger_in_row / take_stronger_in_row_with(
        best: &mut [f32],
        scale: &mut [u8],
        later: &[f32],
        later_scale: &[u8]
    ) {
        for ((b, s), (&l, &ls)) in best.iter_mut().zip(scale.iter_mut()).zip(later.iter().zip(later_scale)) {
            let take = l > *b;
            *b = if take { l } else { *b };
            *s = if take { ls } else { *s };
        }
    }
}

/// The strongest normalised response at each pixel of the frame (`at_level(0)`) over `scales`
/// (the first of them the `first`-th of the search), in order, a strictly stronger one
/// replacing the one kept: each scale's response is filtered a band of rows at a time
/// ([`laplace_by_bands`]) on the image binned for it (`at_level`) and folded in at once
/// ([`keep_scale`]). The scales of a binned level are kept on its own grid, a quarter of the
/// pixels or fewer, and spread onto the frame's once their level is done
/// ([`Strongest::spread_onto`]): the same responses and scales as folding each scale in on
/// the frame's grid (a run of scales keeps the first that is strictly the strongest, and the
/// run's best replaces an earlier best only when strictly stronger), for one pass over the
/// frame per level instead of one per scale (the keeping was about a sixth of the
/// estimate's time).
fn strongest_over<'a>(scales: &[SearchScale], first: usize, at_level: &dyn Fn(u32) -> &'a Image) -> Strongest {
    assert!(first + scales.len() < usize::from(u8::MAX), "a scale index fits a byte");
    let mut strongest = Strongest::empty(at_level(0).dim());
    // The scales of the binned level now searched, kept on its grid.
    let mut binned: Option<(u32, Strongest)> = None;
    for (k, scale) in scales.iter().enumerate() {
        let index = (first + k + 1) as u8;
        if let Some((level, kept)) = binned.take_if(|(level, _)| *level != scale.level) {
            kept.spread_onto(level, &mut strongest);
        }
        let image = at_level(scale.level);
        let kept = if scale.level == 0 {
            &mut strongest
        } else {
            &mut binned
                .get_or_insert_with(|| (scale.level, Strongest::empty(image.dim())))
                .1
        };
        keep_scale(image, scale, index, kept);
    }
    if let Some((level, kept)) = binned {
        kept.spread_onto(level, &mut strongest);
    }
    strongest
}

/// Folds `scale`'s normalised response on `image` (the frame binned for it) into `kept`
/// (on `image`'s grid), row by row as the bands come: where `norm · response` beats the
/// response kept, it replaces it with the scale's `index` ([`keep_strongest_in_row`]).
fn keep_scale(image: &Image, scale: &SearchScale, index: u8, kept: &mut Strongest) {
    let w = image.ncols();
    let response = kept.response.as_slice_mut().expect("standard layout");
    laplace_by_bands(image, scale.binned_sigma, |first_row, band| {
        for (y, line) in (first_row..).zip(band.chunks_exact(w)) {
            let row = y * w..(y + 1) * w;
            keep_strongest_in_row(
                line,
                scale.norm,
                index,
                &mut response[row.clone()],
                &mut kept.scale[row],
            );
        }
    });
}

crate::multiversioned! {
    /// One row of [`keep_scale`]: where `norm · line[x]` > `best[x]`, it replaces it and
    /// `index` is kept beside it in `scale[x]`.
    fn keep_strongest_in_row / keep_strongest_in_row_with(
        line: &[f32],
        norm: f32,
        index: u8,
        best: &mut [f32],
        scale: &mut [u8]
    ) {
        for ((b, s), &v) in best.iter_mut().zip(scale.iter_mut()).zip(line) {
            let r = norm * v;
            let take = r > *b;
            *b = if take { r } else { *b };
            *s = if take { index } else { *s };
        }
    }
}

/// The diameter of a disc whose LoG response peaks at scale σ (d = 2√2·σ, fixtures/methods/check_values.md §6).
pub fn disc_diameter(sigma: f64) -> f64 {
    2.0 * std::f64::consts::SQRT_2 * sigma
}

/// What one sampled frame says about the nucleus size.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FrameDiameter {
    /// Frame number.
    pub frame: usize,
    /// Pixel noise σ of the frame (robust Immerkær), grey levels.
    pub noise_sigma: f64,
    /// Blobs that stand out from the noise.
    pub blobs: usize,
    /// Median diameter of those blobs by scale selection, px (`None` below [`MIN_BLOBS`]).
    pub blob_diameter_px: Option<f64>,
    /// Median half-maximum diameter of the objects segmentation finds at the blob diameter and
    /// then again at that median (a fixed-point step), px; `None` with fewer than
    /// [`MIN_BLOBS`] objects.
    pub object_diameter_px: Option<f64>,
}

impl FrameDiameter {
    /// The frame's estimate: the object-based size when segmentation found enough objects,
    /// else the blob size.
    pub fn estimate(&self) -> Option<f64> {
        self.object_diameter_px.or(self.blob_diameter_px)
    }
}

/// How much an estimate can be trusted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Confidence {
    /// Frames disagree, blobs and objects disagree, or too few nuclei: give `--diameter`.
    Low,
    /// Consistent within 30% and with several nuclei.
    Medium,
    /// Consistent within 15%, with at least 20 nuclei.
    High,
}

/// The recording's diameter estimate with its evidence.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DiameterEstimate {
    /// The estimate, px: the median over frames of each frame's estimate.
    pub px: f64,
    /// How far it can be trusted.
    pub confidence: Confidence,
    /// Why the confidence is not high (empty when high).
    pub reasons: Vec<String>,
    /// The sampled frames.
    pub frames: Vec<FrameDiameter>,
}

/// Frames sampled for the estimate: up to five, evenly spread from the first to the last.
pub fn sample_frames(frames: usize) -> Vec<usize> {
    if frames == 0 {
        return Vec::new();
    }
    let mut picks: Vec<usize> = (0..5).map(|k| k * (frames - 1) / 4).collect();
    picks.dedup();
    picks
}

/// Examines one frame: noise, significant blobs in its central 512² crop, and the median size
/// of the objects that segmentation finds there at the blob size (`params_for(d)` builds the
/// segmentation parameters for a diameter, so the user's threshold and background choices are
/// kept), refined once at that object size.
pub fn examine_frame(image: &Image, frame: usize, params_for: &(dyn Fn(f64) -> SegmentParams + Sync)) -> FrameDiameter {
    let examination = Examination::start(std::borrow::Cow::Borrowed(image), frame);
    let runs = examination.search.all_runs();
    examination.finish(runs, params_for)
}

/// [`examine_frame`] of each of `crops` (frame number and image, read in order on the calling
/// thread), the results in the order read. Every frame's examination is cut into pieces that
/// wait for nothing: its set-up (crop, noise, binnings) is handed to the worker pool as soon
/// as the frame is read, each run of its scale search as soon as the set-up is done, and the
/// rest of it as soon as all runs are. (Run as one task per frame with the runs joined
/// inside, a worker waiting for its stolen run took up the next frame meanwhile, and the
/// frames' last steps then ran one after another on one worker at the end while the other
/// had nothing to do: about a third of the estimate's wall time with one core idle.) The
/// same results on any number of threads.
///
/// # Errors
/// The first error of reading (the frames read before it are examined and dropped).
pub fn examine_frames(
    crops: impl Iterator<Item = crate::error::Result<(usize, Image)>>,
    params_for: &(dyn Fn(f64) -> SegmentParams + Sync),
) -> crate::error::Result<Vec<FrameDiameter>> {
    use std::sync::{Arc, Mutex};
    let done: Mutex<Vec<(usize, FrameDiameter)>> = Mutex::new(Vec::new());
    rayon::in_place_scope(|scope| {
        for (k, crop) in crops.enumerate() {
            let (frame, crop) = crop?;
            let done = &done;
            scope.spawn(move |scope| {
                let examination = Arc::new(Examination::start(std::borrow::Cow::Owned(crop), frame));
                let found = Arc::new(RunsFound::new());
                for run in 0..SEARCH_RUNS {
                    let (examination, found) = (Arc::clone(&examination), Arc::clone(&found));
                    scope.spawn(move |scope| {
                        let Some(all) = found.record(run, examination.search.run(run)) else {
                            return;
                        };
                        scope.spawn(move |_| {
                            let frame = examination.finish(all, params_for);
                            done.lock().unwrap_or_else(|e| e.into_inner()).push((k, frame));
                        });
                    });
                }
            });
        }
        Ok(())
    })?;
    let mut done = done.into_inner().unwrap_or_else(|e| e.into_inner());
    done.sort_by_key(|(k, _)| *k);
    Ok(done.into_iter().map(|(_, frame)| frame).collect())
}

/// The runs of one frame's scale search as they finish, in any order: the run that completes
/// them takes them all, in run order, to finish the examination (a rayon join cannot say "the
/// last to finish goes on" without a worker waiting, which was the idle core
/// [`examine_frames`] avoids).
struct RunsFound(std::sync::Mutex<Vec<Option<Strongest>>>);

impl RunsFound {
    fn new() -> RunsFound {
        RunsFound(std::sync::Mutex::new((0..SEARCH_RUNS).map(|_| None).collect()))
    }

    /// Records what run `run` found; every run's, in order, if this was the last to finish.
    fn record(&self, run: usize, found: Strongest) -> Option<Vec<Strongest>> {
        let mut runs = self.0.lock().unwrap_or_else(|e| e.into_inner());
        runs[run] = Some(found);
        let complete = runs.iter().all(Option::is_some);
        complete.then(|| runs.iter_mut().filter_map(Option::take).collect())
    }
}

/// One frame's examination ([`examine_frame`]): its crop's noise and scale search, set up by
/// [`Examination::start`], searched in [`SEARCH_RUNS`] runs, and finished by [`Examination::finish`].
struct Examination {
    frame: usize,
    noise_sigma: f64,
    search: ScaleSearch,
}

impl Examination {
    /// For a frame (or its crop already cut, which is then kept as it is).
    fn start(image: std::borrow::Cow<'_, Image>, frame: usize) -> Examination {
        let crop = match central_crop(&image, ESTIMATE_CROP_PX) {
            std::borrow::Cow::Owned(crop) => crop,
            std::borrow::Cow::Borrowed(_) => image.into_owned(),
        };
        let noise_sigma = robust_noise_sigma(&crop);
        Examination {
            frame,
            noise_sigma,
            search: ScaleSearch::new(crop, noise_sigma),
        }
    }

    /// The frame's figures, from the strongest responses of the scale search's runs, in order.
    fn finish(&self, runs: Vec<Strongest>, params_for: &dyn Fn(f64) -> SegmentParams) -> FrameDiameter {
        let blobs = self.search.blobs(runs);
        let crop = &self.search.levels[0];
        let blob_diameter_px = (blobs.len() >= MIN_BLOBS).then(|| {
            let mut sigmas: Vec<f64> = blobs.iter().map(|b| b.sigma).collect();
            disc_diameter(lower_median(&mut sigmas).expect("at least MIN_BLOBS blobs"))
        });
        let object_diameter_px = blob_diameter_px
            .and_then(|d| object_diameter(crop, self.frame, &params_for(d)))
            .and_then(|d| object_diameter(crop, self.frame, &params_for(d)).or(Some(d)));
        FrameDiameter {
            frame: self.frame,
            noise_sigma: self.noise_sigma,
            blobs: blobs.len(),
            blob_diameter_px,
            object_diameter_px,
        }
    }
}

/// The median half-maximum diameter of the objects segmented with `params` that do not touch
/// the border; `None` with fewer than [`MIN_BLOBS`] such objects.
///
/// Each object's size is measured at half its own peak in the prepared (background-subtracted,
/// smoothed) image, not by its outline: the outline lies where a global threshold cuts the
/// blurred edge, so it grows with the point-spread function and with the nucleus's brightness
/// over the threshold, while the half-maximum contour of a blurred edge stays where the edge
/// is (a symmetric blur of a step crosses half its height at the step), whatever the blur and
/// brightness. The peak is the object's 90th percentile, so that a bright granule of texture
/// or a noisy pixel does not set it.
fn object_diameter(image: &Image, frame: usize, params: &SegmentParams) -> Option<f64> {
    if params.validate().is_err() {
        return None;
    }
    let (seg, prepared) = super::segment_frame_and_prepared(image, frame, params);
    let values = prepared.as_slice().expect("standard layout");
    let mut pixels: Vec<Vec<f32>> = vec![Vec::new(); seg.detections.len()];
    for (&label, &v) in seg.labels.iter().zip(values) {
        if label > 0 {
            pixels[label as usize - 1].push(v);
        }
    }
    let mut d: Vec<f64> = seg
        .detections
        .iter()
        .zip(pixels.iter_mut())
        .filter(|(det, px)| !det.touches_border && !px.is_empty())
        .map(|(_, px)| half_maximum_diameter(px))
        .collect();
    if d.len() < MIN_BLOBS {
        return None;
    }
    lower_median(&mut d)
}

/// The equivalent diameter of the pixels at or above half the 90th percentile of `values` (one
/// object's background-subtracted intensities): `√(4·count/π)`.
fn half_maximum_diameter(values: &mut [f32]) -> f64 {
    values.sort_by(f32::total_cmp);
    let half = 0.5 * values[(values.len() - 1) * 9 / 10];
    let count = values.len() - values.partition_point(|&v| v < half);
    (4.0 * count as f64 / std::f64::consts::PI).sqrt()
}

/// Combines the sampled frames into one estimate with a confidence; `None` when no frame had
/// enough significant blobs.
pub fn combine(frames: Vec<FrameDiameter>) -> Option<DiameterEstimate> {
    let mut per_frame: Vec<f64> = frames.iter().filter_map(FrameDiameter::estimate).collect();
    let px = lower_median(&mut per_frame)?;
    let spread = per_frame.iter().map(|d| (d / px).max(px / d)).fold(1.0, f64::max);
    let blobs: usize = frames.iter().map(|f| f.blobs).sum();
    let ratios: Vec<f64> = frames
        .iter()
        .filter_map(|f| Some(f.object_diameter_px? / f.blob_diameter_px?))
        .map(|r| r.max(1.0 / r))
        .collect();
    let disagreement = ratios.iter().copied().fold(1.0, f64::max);
    let mut reasons = Vec::new();
    let mut confidence = Confidence::High;
    let mut lower = |to: Confidence, why: String| {
        confidence = confidence.min(to);
        reasons.push(why);
    };
    let missing = frames.len() - per_frame.len();
    if missing > 0 {
        lower(
            if 2 * missing >= frames.len() {
                Confidence::Low
            } else {
                Confidence::Medium
            },
            format!(
                "{missing} of {} sampled frames show no nuclei above the noise",
                frames.len()
            ),
        );
    }
    if spread > 1.15 {
        let level = if spread > 1.3 {
            Confidence::Low
        } else {
            Confidence::Medium
        };
        lower(
            level,
            format!("sampled frames differ by up to {:.0}%", 100.0 * (spread - 1.0)),
        );
    }
    if ratios.len() < per_frame.len() {
        lower(
            Confidence::Medium,
            "segmentation found too few objects to check the blob size".into(),
        );
    }
    if disagreement > 1.25 {
        let level = if disagreement > 1.5 {
            Confidence::Low
        } else {
            Confidence::Medium
        };
        lower(
            level,
            format!(
                "blob scale and object size differ by up to {:.0}%",
                100.0 * (disagreement - 1.0)
            ),
        );
    }
    if blobs < 20 {
        lower(
            if blobs < 2 * MIN_BLOBS {
                Confidence::Low
            } else {
                Confidence::Medium
            },
            format!("only {blobs} nuclei stand out from the noise in the sampled frames"),
        );
    }
    Some(DiameterEstimate {
        px,
        confidence,
        reasons,
        frames,
    })
}

/// Side of the central window of a frame that the estimate examines, px.
pub const ESTIMATE_CROP_PX: usize = 512;

/// The central `max_side` x `max_side` window of `image` (all of it when smaller).
pub fn central_crop(image: &Image, max_side: usize) -> std::borrow::Cow<'_, Image> {
    let (h, w) = image.dim();
    if h <= max_side && w <= max_side {
        return std::borrow::Cow::Borrowed(image);
    }
    let (y0, x0, ch, cw) = central_window((h, w), max_side);
    std::borrow::Cow::Owned(image.slice(ndarray::s![y0..y0 + ch, x0..x0 + cw]).to_owned())
}

/// Where [`central_crop`] cuts an `h` x `w` image: first row and column, rows and columns.
pub fn central_window((h, w): (usize, usize), max_side: usize) -> (usize, usize, usize, usize) {
    let (ch, cw) = (h.min(max_side), w.min(max_side));
    ((h - ch) / 2, (w - cw) / 2, ch, cw)
}

/// Mean over `factor` x `factor` blocks (edge blocks averaged over what exists):
/// [`crate::image2d::box_average`], as an image.
fn bin(image: &Image, factor: usize) -> Image {
    if factor == 1 {
        return image.clone();
    }
    let (h, w) = image.dim();
    let standard = image.as_standard_layout();
    let values = standard.as_slice().expect("standard layout");
    let means = crate::image2d::box_average(values, w, h, factor);
    Image::from_shape_vec((h.div_ceil(factor), w.div_ceil(factor)), means).expect("sized buffer")
}

/// Positive local maxima of the best response, each over a window of radius its own selected
/// scale σ* (`sigma_at(pixel index)`, at least 3 px), so that a weak large-scale response between nuclei is not a blob
/// of its own (ties: the first in raster order wins).
fn local_maxima(response: &Image, sigma_at: impl Fn(usize) -> f32) -> Vec<(usize, usize)> {
    let (h, w) = response.dim();
    let values = response.as_slice().expect("standard layout");
    let mut peaks = Vec::new();
    let mut inside = vec![false; w.saturating_sub(2)];
    for y in 0..h {
        let interior = y > 0 && y + 1 < h && w >= 3;
        if interior {
            let row = |yy: usize| &values[yy * w..(yy + 1) * w];
            above_their_neighbours(row(y - 1), row(y), row(y + 1), &mut inside);
        }
        for x in 0..w {
            if interior && x > 0 && x + 1 < w {
                // Positive and above its eight neighbours: worked out for the row at once.
                if !inside[x - 1] {
                    continue;
                }
            } else if values[y * w + x].is_nan() || values[y * w + x] <= 0.0 {
                // A pixel at the image's edge: its window (which holds its 3 x 3
                // neighbourhood) is searched directly.
                continue;
            }
            let r = (sigma_at(y * w + x).round() as usize).max(3);
            if beaten_within(response, (y, x), r) {
                continue;
            }
            peaks.push((y, x));
        }
    }
    peaks
}

crate::multiversioned! {
    /// For each pixel of `row` but the first and last (`out[x − 1]` for pixel `x`), whether it
    /// is positive and not beaten by any of its eight neighbours in `above`, `row` and `below`
    /// (as [`beaten_within`] at radius 1: a larger value, or an equal one earlier in raster order;
    /// NaN beats nothing and is not positive), a whole row at a time on the widest
    /// instruction level. Comparisons only, so the same on every level.
    fn above_their_neighbours / above_their_neighbours_with(above: &[f32], row: &[f32], below: &[f32], out: &mut [bool]) {
        let n = out.len();
        let (a, b) = (&above[..n + 2], &below[..n + 2]);
        let r = &row[..n + 2];
        for (i, o) in out.iter_mut().enumerate() {
            let v = r[i + 1];
            let earlier = (a[i] >= v) | (a[i + 1] >= v) | (a[i + 2] >= v) | (r[i] >= v);
            let later = (r[i + 2] > v) | (b[i] > v) | (b[i + 1] > v) | (b[i + 2] > v);
            *o = (v > 0.0) & !(earlier | later);
        }
    }
}

/// Whether a pixel within `r` (a square window, clipped at the borders) of `(y, x)` beats it:
/// has a larger response, or an equal one earlier in raster order.
fn beaten_within(response: &Image, (y, x): (usize, usize), r: usize) -> bool {
    let (h, w) = response.dim();
    let v = response[[y, x]];
    let (y0, y1, x0, x1) = (
        y.saturating_sub(r),
        (y + r).min(h - 1),
        x.saturating_sub(r),
        (x + r).min(w - 1),
    );
    (y0..=y1).any(|yy| {
        (x0..=x1).any(|xx| {
            let u = response[[yy, xx]];
            u > v || (u == v && (yy, xx) < (y, x))
        })
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Values with many ties, some NaN and some not positive, for the local maxima's tests.
    fn tied_values(n: usize, seed: u64) -> Vec<f32> {
        let mut rng = crate::numeric::Rng::new(seed);
        (0..n)
            .map(|_| match (rng.uniform() * 20.0) as u32 {
                0 => f32::NAN,
                k => (k % 6) as f32 - 1.0,
            })
            .collect()
    }

    #[test]
    fn pixels_above_their_neighbours_are_found_alike_on_every_level() {
        // Source: definition (positive, and no neighbour larger or equal and earlier in raster
        // order; NaN beats nothing), pixel by pixel through the window check at radius one, on
        // rows that do and do not fill whole vectors, on every instruction level.
        for w in [3usize, 4, 17, 64, 131] {
            let values = tied_values(3 * w, w as u64);
            let image = Image::from_shape_vec((3, w), values.clone()).expect("sized");
            let want: Vec<bool> = (1..w - 1)
                .map(|x| values[w + x] > 0.0 && !beaten_within(&image, (1, x), 1))
                .collect();
            if w >= 17 {
                assert!(want.iter().any(|&p| p) && want.iter().any(|&p| !p), "both kinds at {w}");
            }
            for level in crate::simd::levels() {
                let mut got = vec![false; w - 2];
                above_their_neighbours_with(level, &values[..w], &values[w..2 * w], &values[2 * w..], &mut got);
                assert_eq!(got, want, "width {w}, {level:?}");
            }
        }
    }

    #[test]
    fn local_maxima_are_the_pixels_no_pixel_of_their_window_beats() {
        // Source: definition (positive, and no pixel within the window of radius max(3, σ*)
        // larger, or equal and earlier in raster order), by direct search over every pixel's
        // window, on images with ties, NaN and peaks at the edges and corners.
        for (h, w) in [(1usize, 1usize), (2, 9), (9, 2), (12, 15), (40, 33)] {
            let values = tied_values(h * w, (h * 100 + w) as u64);
            let image = Image::from_shape_vec((h, w), values.clone()).expect("sized");
            let radius = |i: usize| if i.is_multiple_of(3) { 1.0f32 } else { 4.4 };
            let want: Vec<(usize, usize)> = (0..h)
                .flat_map(|y| (0..w).map(move |x| (y, x)))
                .filter(|&(y, x)| {
                    let v = values[y * w + x];
                    let r = (radius(y * w + x).round() as usize).max(3) as isize;
                    v > 0.0
                        && !(-r..=r).any(|dy| {
                            (-r..=r).any(|dx| {
                                let (yy, xx) = (y as isize + dy, x as isize + dx);
                                let inside = (0..h as isize).contains(&yy) && (0..w as isize).contains(&xx);
                                inside && {
                                    let u = values[yy as usize * w + xx as usize];
                                    u > v || (u == v && (yy, xx) < (y as isize, x as isize))
                                }
                            })
                        })
                })
                .collect();
            assert_eq!(local_maxima(&image, radius), want, "{h} x {w}");
        }
    }

    #[test]
    fn the_strongest_scale_is_kept_alike_on_every_instruction_level() {
        // Source: definition (a response replaces the best only when strictly larger, NaN
        // never does); the vector copies must match the portable build bit for bit
        // (crate::simd), ties and NaN included.
        let line: Vec<f32> = (0..67)
            .map(|i| {
                if i % 11 == 0 {
                    f32::NAN
                } else {
                    ((i * 37) % 19) as f32 - 9.0
                }
            })
            .collect();
        let start: Vec<f32> = (0..67).map(|i| ((i * 13) % 7) as f32 - 3.0).collect();
        let run = |level| {
            let (mut b, mut s) = (start.clone(), vec![0u8; 67]);
            keep_strongest_in_row_with(level, &line, -1.0, 7, &mut b, &mut s);
            (b.iter().map(|v| v.to_bits()).collect::<Vec<_>>(), s)
        };
        let portable = run(crate::simd::Level::Portable);
        let taken = portable.1.iter().filter(|&&s| s == 7).count();
        let by_hand = line.iter().zip(&start).filter(|(&v, &b)| -v > b).count();
        assert_eq!(taken, by_hand);
        for level in crate::simd::levels() {
            assert_eq!(run(level), portable, "{level:?}");
        }
        // The merge of a later search: the same test, branch-free, on every level.
        let later_scale: Vec<u8> = (0..67).map(|i| (i % 9) as u8).collect();
        let merged = |level| {
            let (mut b, mut s) = (start.clone(), vec![0u8; 67]);
            take_stronger_in_row_with(level, &mut b, &mut s, &line, &later_scale);
            (b.iter().map(|v| v.to_bits()).collect::<Vec<_>>(), s)
        };
        let portable = merged(crate::simd::Level::Portable);
        let by_hand: Vec<u8> = line
            .iter()
            .zip(&start)
            .zip(&later_scale)
            .map(|((&v, &b), &k)| if v > b { k } else { 0 })
            .collect();
        assert_eq!(portable.1, by_hand);
        for level in crate::simd::levels() {
            assert_eq!(merged(level), portable, "{level:?}");
        }
    }

    #[test]
    fn a_binned_level_is_spread_block_by_block() {
        // Source: definition (pixel (x, y) of the frame reads block (x >> level, y >> level)
        // of a search kept on the grid binned by 2^level; it replaces the best only when
        // strictly larger, NaN never): levels 0-3 on full sizes that do and do not divide
        // into blocks, over a best already half filled.
        for (level, (h, w), (rh, rw)) in [
            (0u32, (5, 7), (5, 7)),
            (1, (9, 7), (5, 4)),
            (2, (13, 10), (4, 3)),
            (3, (17, 9), (3, 2)),
        ] {
            let binned = Strongest {
                // Ties with both values the best starts from, NaN, and values on either side.
                response: Image::from_shape_fn((rh, rw), |(y, x)| match (y * 7 + x * 3) % 7 {
                    6 => f32::NAN,
                    5 => 0.5,
                    4 => f32::NEG_INFINITY,
                    k => k as f32 - 2.0,
                }),
                scale: (0..rh * rw).map(|i| (i % 5) as u8 + 1).collect(),
            };
            let start = |y: usize, x: usize| {
                if (x + y).is_multiple_of(2) {
                    0.5
                } else {
                    f32::NEG_INFINITY
                }
            };
            let mut frame = Strongest {
                response: Image::from_shape_fn((h, w), |(y, x)| start(y, x)),
                scale: vec![0; h * w],
            };
            binned.spread_onto(level, &mut frame);
            for y in 0..h {
                for x in 0..w {
                    let (by, bx) = (y >> level, x >> level);
                    let r = binned.response[[by, bx]];
                    let taken = r > start(y, x);
                    let context = format!("level {level}, pixel ({x}, {y})");
                    let want = if taken { r } else { start(y, x) };
                    assert_eq!(frame.response[[y, x]].to_bits(), want.to_bits(), "{context}");
                    let want_scale = if taken { binned.scale[by * rw + bx] } else { 0 };
                    assert_eq!(frame.scale[y * w + x], want_scale, "{context}");
                }
            }
        }
    }

    #[test]
    fn the_search_in_runs_keeps_what_one_search_in_scale_order_keeps() {
        // Source: definition (each pixel keeps the first scale whose normalised response is
        // strictly the strongest, scales in order, each response from gaussian_laplace on the
        // image binned for it and read block by block), on a frame of discs of three sizes in
        // noise, with the scales cut in two at every point and into the search's own runs:
        // the runs merged in order must keep the same responses and scales bit for bit.
        let mut rng = Rng::new(12);
        let (h, w) = (90, 70);
        let image = Image::from_shape_fn((h, w), |(y, x)| {
            let disc = |cy: f64, cx: f64, r: f64| f64::from((y as f64 - cy).hypot(x as f64 - cx) < r);
            (40.0 * (disc(20.0, 20.0, 3.0) + disc(60.0, 30.0, 8.0) + disc(45.0, 55.0, 14.0)) + rng.normal()) as f32
        });
        let scales = search_scales((h, w), 1.0);
        assert!(scales.iter().any(|s| s.level == 2), "binned levels searched");
        let binned: Vec<Image> = (0..3).map(|l| bin(&image, 1 << l)).collect();
        let at_level = |l: u32| &binned[l as usize];
        let mut want_response = vec![f32::NEG_INFINITY; h * w];
        let mut want_scale = vec![0u8; h * w];
        for (k, scale) in scales.iter().enumerate() {
            let response = gaussian_laplace(at_level(scale.level), scale.binned_sigma);
            for (i, (r, s)) in want_response.iter_mut().zip(want_scale.iter_mut()).enumerate() {
                let (y, x) = ((i / w) >> scale.level, (i % w) >> scale.level);
                let v = scale.norm * response[[y, x]];
                if v > *r {
                    (*r, *s) = (v, k as u8 + 1);
                }
            }
        }
        for cut in 0..=scales.len() {
            let (first, second) = scales.split_at(cut);
            let mut got = strongest_over(first, 0, &at_level);
            got.merge(&strongest_over(second, cut, &at_level));
            let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(
                bits(got.response.as_slice().unwrap()),
                bits(&want_response),
                "cut at {cut}"
            );
            assert_eq!(got.scale, want_scale, "cut at {cut}");
        }
        // The search's own runs, cut by work, merged in order.
        let cuts = cuts_by_work(&scales, &at_level);
        assert_eq!((cuts[0], cuts[SEARCH_RUNS]), (0, scales.len()));
        assert!(cuts.windows(2).all(|c| c[0] < c[1]), "{cuts:?} of {}", scales.len());
        let mut got = strongest_over(&scales[..cuts[1]], 0, &at_level);
        for run in cuts.windows(2).skip(1) {
            got.merge(&strongest_over(&scales[run[0]..run[1]], run[0], &at_level));
        }
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(got.response.as_slice().unwrap()), bits(&want_response), "{cuts:?}");
        assert_eq!(got.scale, want_scale, "{cuts:?}");
    }

    use crate::numeric::Rng;

    #[test]
    fn binning_is_the_block_mean_in_raster_order() {
        // Source: the definition of a block mean, edge blocks averaged over the pixels they
        // hold (not padded with zeros), the sum taken pixel by pixel in raster order so that
        // the f32 result is exactly defined.
        for (h, w, factor) in [(8, 8, 2), (7, 13, 2), (9, 10, 4), (5, 3, 8), (1, 1, 2), (12, 17, 1)] {
            let image = Image::from_shape_fn((h, w), |(y, x)| ((y * 97 + x * 31) % 53) as f32 * 1.37 + 0.11);
            let (bh, bw) = (h.div_ceil(factor), w.div_ceil(factor));
            let mut sum = vec![0f32; bh * bw];
            let mut count = vec![0f32; bh * bw];
            for y in 0..h {
                for x in 0..w {
                    sum[(y / factor) * bw + x / factor] += image[[y, x]];
                    count[(y / factor) * bw + x / factor] += 1.0;
                }
            }
            let got = bin(&image, factor);
            assert_eq!(got.dim(), (bh, bw));
            for (g, (s, c)) in got.iter().zip(sum.iter().zip(&count)) {
                assert_eq!(g.to_bits(), (s / c).to_bits(), "{h} x {w} by {factor}");
            }
        }
    }

    #[test]
    fn the_row_check_is_the_window_check_at_radius_one() {
        // Source: the rule of `beaten_within` (a larger value, or an equal one earlier in
        // raster order, within the 3 x 3 window), on images full of ties and NaN, where the
        // row-at-once check and the general one must agree on every pixel they both see (the
        // row check's: not on the image's edge).
        // The random images (few levels) have equal values one row down and one column left,
        // among others: such a tie is later in raster order and must not beat the pixel.
        let patterned = [(1, 1), (1, 5), (6, 1), (9, 11)].map(|(h, w)| {
            Image::from_shape_fn((h, w), |(y, x)| match (y * 7 + x * 3) % 5 {
                0 => f32::NAN,
                k => (k % 3) as f32,
            })
        });
        let random = [(9usize, 11usize), (20, 20)]
            .map(|(h, w)| Image::from_shape_vec((h, w), tied_values(h * w, (h * w) as u64)).expect("sized"));
        for image in patterned.iter().chain(&random) {
            let (h, w) = image.dim();
            let values = image.as_slice().unwrap();
            let row = |y: usize| &values[y * w..(y + 1) * w];
            for y in (1..h.saturating_sub(1)).filter(|_| w >= 3) {
                let mut fast = vec![false; w - 2];
                above_their_neighbours(row(y - 1), row(y), row(y + 1), &mut fast);
                for x in 1..w - 1 {
                    let want = values[y * w + x] > 0.0 && !beaten_within(image, (y, x), 1);
                    assert_eq!(fast[x - 1], want, "{h} x {w} at {y}, {x}");
                }
            }
        }
    }

    #[test]
    fn the_crop_is_the_central_window() {
        // Source: definition (the doc above): rows (h − side)/2 .. +side and columns
        // (w − side)/2 .. +side; each pixel holds its own coordinates, so the crop names where
        // it came from.
        let image = Image::from_shape_fn((700, 600), |(y, x)| (1000 * y + x) as f32);
        let crop = central_crop(&image, 512);
        assert_eq!(crop.dim(), (512, 512));
        assert_eq!(crop[[0, 0]], (1000 * 94 + 44) as f32);
        assert_eq!(crop[[511, 511]], (1000 * 605 + 555) as f32);
        let small = Image::zeros((100, 80));
        assert!(matches!(central_crop(&small, 512), std::borrow::Cow::Borrowed(_)));
    }

    fn disk(size: usize, r: f64) -> Image {
        let c = (size / 2) as f64;
        Image::from_shape_fn((size, size), |(y, x)| {
            if (y as f64 - c).powi(2) + (x as f64 - c).powi(2) <= r * r {
                1.0
            } else {
                0.0
            }
        })
    }

    #[test]
    fn scale_selection_matches_scipy_check_values() {
        // Source: fixtures/methods/check_values.md §6 (scipy 1.17.1 ndi.gaussian_laplace, centre pixel of an 81x81
        // image, σ grid 2.00–10.00 step 0.05): disk r=6 -> 4.25, r=8 -> 5.60, r=10 -> 7.10.
        let sigmas: Vec<f64> = (0..=160).map(|i| 2.0 + 0.05 * i as f64).collect();
        for (r, want) in [(6.0, 4.25), (8.0, 5.60), (10.0, 7.10)] {
            let got = best_scale_at(&disk(81, r), 40, 40, &sigmas);
            assert!((got - want).abs() < 0.051, "r={r}: σ*={got}, scipy {want}");
        }
    }

    #[test]
    fn noise_gain_matches_the_continuous_value_and_white_noise() {
        // Source: ∫(∇²G_s)² dA = 1/(2π s⁶) (integral of the squared Laplacian of a 2D Gaussian,
        // derived in the doc comment), so the normalised response of unit white noise has
        // s.d. 1/(√(2π) s); sampling departs from it by a few percent at small s. And the
        // empirical s.d. of the filtered noise (our generator, 256², interior) within 5%.
        for s in [2.0, 4.0, 8.0] {
            let continuous = 1.0 / ((2.0 * std::f64::consts::PI).sqrt() * s);
            assert!((log_noise_gain(s) / continuous - 1.0).abs() < 0.05, "s={s}");
        }
        let mut rng = Rng::new(9);
        let noise = Image::from_shape_fn((256, 256), |_| rng.normal() as f32);
        for s in [1.5f64, 3.0] {
            let r = gaussian_laplace(&noise, s as f32);
            let inner: Vec<f64> = r
                .slice(ndarray::s![40..216, 40..216])
                .iter()
                .map(|&v| (s * s) * v as f64)
                .collect();
            let sd = (inner.iter().map(|v| v * v).sum::<f64>() / inner.len() as f64).sqrt();
            assert!((sd / log_noise_gain(s) - 1.0).abs() < 0.05, "s={s}: {sd}");
        }
    }

    #[test]
    fn pure_noise_has_no_significant_blob() {
        // Source: the significance rule (6 noise s.d.); Gaussian noise only, 512².
        let mut rng = Rng::new(11);
        let noise = Image::from_shape_fn((512, 512), |_| 100.0 + 8.0 * rng.normal() as f32);
        let sigma = robust_noise_sigma(&noise);
        assert!(significant_blobs(&noise, sigma).is_empty());
    }

    #[test]
    fn dim_discs_are_sized_in_noise() {
        // Source: construction. Discs of radius 7 (d = 14) with contrast 3x the noise s.d.,
        // on a grid of 40 px; scale selection of a disc gives d = 2√2·σ* (fixtures/methods/check_values.md §6),
        // so the blob diameter is within 10% of 14 and every disc is found, nothing else.
        let mut rng = Rng::new(12);
        let img = Image::from_shape_fn((320, 320), |(y, x)| {
            let (cy, cx) = ((y / 40) * 40 + 20, (x / 40) * 40 + 20);
            let r2 = (y as f64 - cy as f64).powi(2) + (x as f64 - cx as f64).powi(2);
            100.0 + if r2 <= 49.0 { 24.0 } else { 0.0 } + 8.0 * rng.normal() as f32
        });
        let blobs = significant_blobs(&img, robust_noise_sigma(&img));
        assert_eq!(blobs.len(), 64, "{}", blobs.len());
        let mut s: Vec<f64> = blobs.iter().map(|b| b.sigma).collect();
        let d = disc_diameter(lower_median(&mut s).unwrap());
        assert!((d / 14.0 - 1.0).abs() < 0.1, "{d}");
    }

    #[test]
    fn frames_examined_in_pieces_give_what_each_frame_examined_alone_gives() {
        // Source: examine_frame (the estimate of one frame, its scale selection checked
        // against scipy above), frame by frame: examine_frames hands the same frames' pieces
        // to the worker pool and must give the same figures, in the order read, on one
        // thread and on two; an error reading the third frame is returned.
        let mut rng = Rng::new(3);
        let frames: Vec<(usize, Image)> = (0..4)
            .map(|t| {
                let img = Image::from_shape_fn((200, 240), |(y, x)| {
                    let (cy, cx) = ((y / 40) * 40 + 20, (x / 40) * 40 + 20);
                    let r2 = (y as f64 - cy as f64).powi(2) + (x as f64 - cx as f64).powi(2);
                    100.0 + if r2 <= (36 + 4 * t) as f64 { 30.0 } else { 0.0 } + 6.0 * rng.normal() as f32
                });
                (10 * t, img)
            })
            .collect();
        let params_for: &(dyn Fn(f64) -> SegmentParams + Sync) = &SegmentParams::for_diameter;
        let alone: Vec<FrameDiameter> = frames
            .iter()
            .map(|(t, img)| examine_frame(img, *t, params_for))
            .collect();
        assert!(alone.iter().all(|f| f.blob_diameter_px.is_some()), "{alone:?}");
        for threads in [1, 2] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("pool");
            let got = pool
                .install(|| examine_frames(frames.iter().cloned().map(Ok), params_for))
                .expect("no error");
            assert_eq!(got, alone, "{threads} threads");
            let failing = frames.iter().cloned().enumerate().map(|(k, f)| match k {
                2 => Err(crate::error::Error::input(
                    std::path::Path::new("rec.tif"),
                    "unreadable frame",
                )),
                _ => Ok(f),
            });
            let err = pool
                .install(|| examine_frames(failing, params_for))
                .expect_err("the third frame fails");
            assert!(err.to_string().contains("unreadable frame"), "{err}");
        }
    }
}
