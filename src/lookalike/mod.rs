//! Look-alikes: how accurate is tracking likely to be on *this* recording? After a run, the
//! statistics that make tracking hard are measured from it ([`mod@measure`]), a few short
//! recordings with those statistics and a known truth are synthesized by [`crate::synth`],
//! tracked with exactly the run's parameters (its diameter, segmentation and maximum step; the
//! motion model linking measures is measured from each look-alike) and scored against their
//! truth. The spread of those
//! scores is the expected accuracy.
//!
//! It can only tell what the statistics capture: debris, odd shapes, focus drift, texture,
//! cells that die or leave, and anything else the synthetic engine does not draw are not in a
//! look-alike, so its scores are an upper bound where those matter.

pub mod measure;

use crate::error::{Error, Result};
use crate::link::LinkOptions;
use crate::pipeline::{run_recording, RunOptions};
use crate::record::{DiameterSource, RunRecord};
use crate::score::files::score_files;
use crate::stack::{OpenOptions, Stack};
use crate::synth::illumination;
use crate::synth::{write_recording, Look, PersistentMotion, Scenario, SynthParams};
use measure::{measure, read_measured, Measured, RecordingStats};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// How many look-alikes, how long, from which seed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LookalikeOptions {
    /// Look-alike recordings synthesized and tracked.
    pub count: usize,
    /// Frames in each; `None`: as many as give the look-alikes together
    /// [`LookalikeOptions::NUCLEUS_FRAMES`] nucleus-frames, from
    /// [`LookalikeOptions::MIN_FRAMES`] to [`LookalikeOptions::MAX_FRAMES`].
    pub frames: Option<usize>,
    /// Seed of the first (the others follow).
    pub seed: u64,
}

impl Default for LookalikeOptions {
    fn default() -> Self {
        LookalikeOptions {
            count: 3,
            frames: None,
            seed: 1,
        }
    }
}

impl LookalikeOptions {
    /// Nucleus-frames the look-alikes hold together when their length is chosen: a detection
    /// F1 near 0.99 estimated from 2000 detections has a binomial standard error of about
    /// 0.002 (our own choice of precision).
    pub const NUCLEUS_FRAMES: f64 = 2000.0;
    /// The fewest frames: a nucleus missed for two frames (the default gap closing) is then
    /// seen before and after.
    pub const MIN_FRAMES: usize = 4;
    /// The most frames chosen: sparse recordings get long look-alikes, which are cheap there.
    pub const MAX_FRAMES: usize = 8;

    /// Frames in each look-alike of a recording with `nuclei_per_frame` nuclei: the given
    /// number, or enough for [`Self::NUCLEUS_FRAMES`] together. The cost of a look-alike
    /// grows with its pixels, so a large crowded recording gets the fewest frames.
    pub fn frames_for(&self, nuclei_per_frame: f64) -> usize {
        if let Some(frames) = self.frames {
            return frames.max(2);
        }
        let wanted = Self::NUCLEUS_FRAMES / (self.count.max(1) as f64 * nuclei_per_frame.max(1.0));
        (wanted.ceil() as usize).clamp(Self::MIN_FRAMES, Self::MAX_FRAMES)
    }
}

/// Mean, lowest and highest of a score over the look-alikes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// Mean.
    pub mean: f64,
    /// Lowest.
    pub min: f64,
    /// Highest.
    pub max: f64,
}

impl Spread {
    fn of(values: &[f64]) -> Option<Spread> {
        let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
        if finite.is_empty() {
            return None;
        }
        Some(Spread {
            mean: finite.iter().sum::<f64>() / finite.len() as f64,
            min: finite.iter().copied().fold(f64::INFINITY, f64::min),
            max: finite.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        })
    }
}

/// The accuracy expected on the recording: each measure's spread over the look-alikes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExpectedAccuracy {
    /// Detection F1.
    pub detection_f1: Option<Spread>,
    /// CLEAR-MOT accuracy.
    pub mota: Option<Spread>,
    /// Share of true links found.
    pub link_recall: Option<Spread>,
    /// Share of true tracks followed for 80% of their length by one track.
    pub mostly_tracked: Option<Spread>,
    /// Share of true divisions recovered (none when the look-alikes had none).
    pub divisions_recovered: Option<Spread>,
}

/// One look-alike: its seed, its statistics as measured from its own run, its scores.
#[derive(Debug, Clone, Serialize)]
pub struct Lookalike {
    /// Seed it was synthesized with.
    pub seed: u64,
    /// Its statistics, measured as the recording's were.
    pub measured: RecordingStats,
    /// Detection F1, MOTA, link recall, mostly tracked, divisions recovered.
    pub scores: [f64; 5],
}

/// What `lookalike/summary.json` holds.
#[derive(Debug, Clone, Serialize)]
pub struct LookalikeSummary {
    /// Version of Caravan.
    pub caravan_version: String,
    /// The run imitated.
    pub run: PathBuf,
    /// The recording's statistics.
    pub measured: RecordingStats,
    /// The synthetic engine's parameters the look-alikes were made with (their seeds apart).
    pub synth_parameters: SynthParams,
    /// Options.
    pub options: LookalikeOptions,
    /// Each look-alike.
    pub lookalikes: Vec<Lookalike>,
    /// The expected accuracy.
    pub expected: ExpectedAccuracy,
    /// What a look-alike cannot tell.
    pub limits: String,
}

/// What a look-alike cannot tell, as the summary and the page say it.
pub const LIMITS: &str = "A look-alike reproduces the statistics measured here: nucleus size, elongation, brightness and its spread, camera noise, density and packing, speed, persistence, drift, divisions, bleaching and uneven light. Debris, odd shapes, chromatin texture, mitotic figures, focus drift, cells that die or leave the focal plane are not in it: where they matter, the expected accuracy is an upper bound.";

/// The run's record, its tracked objects and its recording, opened once; refuses a folder that
/// is not a tracked run with intensities.
fn open_run(run_dir: &Path) -> Result<(RunRecord, Vec<Measured>, Stack)> {
    let record = RunRecord::read(&run_dir.join("run.json"))?;
    let tracks = run_dir.join("tracks.csv");
    if record.parameters.link.is_none() || !tracks.exists() {
        return Err(Error::input(
            run_dir,
            "holds no tracks: a look-alike imitates a run of `caravan track`",
        ));
    }
    let objects = read_measured(&tracks)?;
    if record.input.masks.is_some() && objects.iter().all(|o| o.mean_intensity.is_none()) {
        return Err(Error::input(
            run_dir,
            "was tracked from masks without a recording: a look-alike needs the recording's intensities (track the masks with the recording)",
        ));
    }
    let stack = crate::review::open_recording(&record, None)?;
    Ok((record, objects, stack))
}

/// Measures the run, synthesizes and tracks its look-alikes (working files under `work`), and
/// returns the summary (written by the caller).
fn imitate(
    run_dir: &Path,
    (record, objects, stack): (&RunRecord, &[Measured], &mut Stack),
    work: &Path,
    options: &LookalikeOptions,
) -> Result<LookalikeSummary> {
    let measured = measure(stack, objects)?;
    let info = stack.info().clone();
    let frames = options.frames_for(measured.nuclei_per_frame);
    let synth = synth_parameters(&measured, (info.width, info.height), frames);
    // One after the other: tracking hands frames between its own threads and rayon's pool,
    // which look-alikes tracked from inside the pool could starve. (Synthesizing the next one
    // on a thread of its own while one is tracked was measured: no gain on 2 cores.)
    let lookalikes = (0..options.count)
        .map(|k| {
            let seed = options.seed + k as u64;
            track_lookalike(
                record,
                &SynthParams { seed, ..synth.clone() },
                &work.join(format!("{k}")),
            )
        })
        .collect::<Result<Vec<_>>>()?;
    let column = |i: usize| -> Vec<f64> { lookalikes.iter().map(|l| l.scores[i]).collect() };
    let expected = ExpectedAccuracy {
        detection_f1: Spread::of(&column(0)),
        mota: Spread::of(&column(1)),
        link_recall: Spread::of(&column(2)),
        mostly_tracked: Spread::of(&column(3)),
        divisions_recovered: Spread::of(&column(4)),
    };
    Ok(LookalikeSummary {
        caravan_version: crate::VERSION.to_string(),
        run: run_dir.to_path_buf(),
        measured,
        synth_parameters: synth,
        options: *options,
        lookalikes,
        expected,
        limits: LIMITS.to_string(),
    })
}

/// Synthesizes one look-alike into `dir/syn`, tracks it in `dir/run` as the run was tracked,
/// scores it against its truth and measures it.
fn track_lookalike(record: &RunRecord, params: &SynthParams, dir: &Path) -> Result<Lookalike> {
    let syn = dir.join("syn");
    let out = write_recording(&syn, params)?;
    let mut stack = Stack::open(&out.recording, &OpenOptions::default())?;
    // Exactly the run's parameters: the diameter it used (the look-alike is drawn at the size
    // the run measured), its segmentation and its linking options; what linking measures from
    // motion is measured from the look-alike.
    let diameter = DiameterSource::Given {
        px: record.parameters.diameter.px(),
    };
    let link = record.parameters.link.as_ref().expect("checked by the caller");
    let linking = LinkOptions {
        max_step_px: Some(link.params.max_step_px),
        prediction: link.params.prediction,
        max_gap_frames: link.params.max_gap_frames,
        divisions: link.params.divisions,
    };
    let outputs = RunOptions {
        linking: Some(linking),
        ..RunOptions::default()
    };
    let run = dir.join("run");
    run_recording(
        &mut stack,
        diameter,
        &record.parameters.segment,
        &run,
        &outputs,
        "lookalike",
    )?;
    let (_, score) = score_files(&syn, &run, None, None)?;
    let measured = measure(&mut stack, &read_measured(&run.join("tracks.csv"))?)?;
    let divisions = if score.divisions.reference_events > 0 {
        score.divisions_recovered_fraction
    } else {
        f64::NAN
    };
    Ok(Lookalike {
        seed: params.seed,
        measured,
        scores: [
            score.detection_f1,
            score.clear_mot.mota,
            score.link_recall,
            score.tracks.mostly_tracked,
            divisions,
        ],
    })
}

/// The synthetic engine's parameters that reproduce the measured statistics.
///
/// The camera: the offset is not measurable without a dark frame, so 80% of the background's
/// variance is taken to be photon noise (our own assumption) and the rest read noise; the
/// nuclei's mean signal is taken as 80% of their peak (a disc blurred by a 1 px spread).
pub fn synth_parameters(m: &RecordingStats, (width, height): (usize, usize), frames: usize) -> SynthParams {
    let mut p = SynthParams::new(Scenario::Dish, width, height, frames);
    p.compression = crate::stack::write::TiffCompression::None;
    let gain = if m.gain > 1e-3 { m.gain } else { 1.0 };
    let background_variance = m.background_noise_sd.powi(2).max(1e-6);
    let offset = (m.background_grey - 0.8 * background_variance / gain).max(0.0);
    let light_share = if m.background_grey > offset {
        m.unevenness * m.background_grey / (m.background_grey - offset)
    } else {
        m.unevenness
    };
    p.vignette = vignette_for(light_share);
    // The background measured is the frame's 25th percentile, the signal a median over nuclei
    // spread over the field: both under the engine's uneven light at those quantiles.
    let (light_low, light_mid) = (light_quantile(p.vignette, 0.25), light_quantile(p.vignette, 0.5));
    p.gain = gain;
    p.offset = offset;
    p.background_photons = ((m.background_grey - offset) / (gain * light_low)).max(0.5);
    p.read_noise = (background_variance - gain * (m.background_grey - offset))
        .max(0.0)
        .sqrt();
    p.signal_photons = (m.signal_grey / (gain * 0.8 * light_mid)).max(1.0);
    p.diameter_px = m.diameter_px.clamp(4.0, width.min(height) as f64 / 3.0);
    p.nuclei = m.nuclei_per_frame.round().max(1.0) as usize;
    p.separation = Some(m.closest_packing.clamp(0.6, 1.3));
    p.look = Look {
        brightness_spread: m.brightness_spread.clamp(0.0, 1.0),
        max_axis_ratio: m.axis_ratio_median_p90.1.clamp(1.0, 3.0),
        ..Look::PLAIN
    };
    p.motion = Some(PersistentMotion {
        speed_px_per_frame: m.speed_px_per_frame.max(0.01),
        persistence_frames: m.persistence_frames.clamp(0.2, 100.0),
    });
    p.drift_px_per_frame = m.drift_px_per_frame.0.hypot(m.drift_px_per_frame.1);
    p.division_rate = m.division_rate.clamp(0.0, 0.5);
    p.bleach_per_frame = m.bleach_per_frame;
    p
}

/// The `q`-quantile of the engine's light over the field for a vignette depth (a 64 x 64
/// grid).
fn light_quantile(vignette: f64, q: f64) -> f64 {
    let grid: Vec<f64> = (0..64 * 64)
        .map(|k| illumination((k % 64) as f64 / 64.0, (k / 64) as f64 / 64.0, vignette))
        .collect();
    crate::numeric::quantile(&grid, q).unwrap_or(1.0)
}

/// The vignette depth whose 4 x 4 blocks' 25th percentiles of light (the tilt included)
/// differ by `unevenness` between the darkest and the brightest, as
/// [`measure::RecordingStats::unevenness`] measures them: bisection on the engine's own light.
fn vignette_for(unevenness: f64) -> f64 {
    let spread = |v: f64| {
        let levels: Vec<f64> = (0..16)
            .map(|b| {
                let (bx, by) = ((b % 4) as f64 / 4.0, (b / 4) as f64 / 4.0);
                let block: Vec<f64> = (0..64)
                    .map(|k| illumination(bx + (k % 8) as f64 / 32.0, by + (k / 8) as f64 / 32.0, v))
                    .collect();
                crate::numeric::quantile(&block, 0.25).unwrap_or(1.0)
            })
            .collect();
        let lo = levels.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = levels.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        1.0 - lo / hi
    };
    let (mut lo, mut hi) = (0.0, 0.9);
    if unevenness <= spread(lo) {
        return 0.0;
    }
    for _ in 0..40 {
        let mid = (lo + hi) / 2.0;
        if spread(mid) < unevenness {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (lo + hi) / 2.0
}

/// Makes the look-alikes of the run in `run_dir` and writes `summary.json` and `report.html`
/// into `out` (each written whole, then renamed); the look-alikes' own files are removed.
///
/// # Errors
/// A folder without a tracked run, a recording that cannot be found, or an output that
/// cannot be written.
pub fn write_lookalike(run_dir: &Path, out: &Path, options: &LookalikeOptions) -> Result<LookalikeSummary> {
    let (record, objects, mut real) = open_run(run_dir)?;
    crate::output::ensure_dir(out)?;
    let work = WorkDir(out.join(format!(".work-{}", std::process::id())));
    let summary = imitate(run_dir, (&record, &objects, &mut real), &work.0, options)?;
    let mut imitation = Stack::open(&work.0.join("0/syn/recording.tif"), &OpenOptions::default())?;
    let frames = same_contrast_pngs(&mut real, &mut imitation)?;
    let json = serde_json::to_vec_pretty(&summary).expect("plain data");
    crate::output::write_atomic(&out.join("summary.json"), &json)?;
    let page = crate::render::lookalike::LookalikePage {
        title: crate::report_text::source_title(run_dir, Some(&record)),
        made: format!(
            "{} look-alike recordings of {} frames",
            summary.options.count, summary.synth_parameters.frames
        ),
        expected: expected_rows(&summary.expected),
        statistics: statistic_rows(&summary),
        frames,
        limits: LIMITS.to_string(),
    };
    let html = crate::render::lookalike::lookalike_report(&page);
    crate::output::write_atomic(&out.join("report.html"), html.as_bytes())?;
    Ok(summary)
}

/// A working folder removed however the work ends.
struct WorkDir(PathBuf);

impl Drop for WorkDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// The first frame of each recording as a PNG of at most 512 px a side, both stretched with
/// the real recording's display range.
fn same_contrast_pngs(real: &mut Stack, imitation: &mut Stack) -> Result<(Vec<u8>, Vec<u8>)> {
    let a = real.read_frame(0)?.pixels.to_f32();
    let b = imitation.read_frame(0)?.pixels.to_f32();
    let range = crate::render::DisplayRange::from_values(&a);
    let (w, h) = (real.info().width, real.info().height);
    let png = |values: &[f32]| -> Result<Vec<u8>> {
        let step = w.max(h).div_ceil(512).max(1);
        let (sw, sh) = (w.div_ceil(step), h.div_ceil(step));
        let pixels: Vec<u8> = (0..sh)
            .flat_map(|y| (0..sw).map(move |x| (x, y)))
            .map(|(x, y)| (range.unit(values[y * step * w + x * step]) * 255.0).round() as u8)
            .collect();
        let image = image::GrayImage::from_raw(sw as u32, sh as u32, pixels).expect("sized");
        let mut bytes = Vec::new();
        image
            .write_to(&mut std::io::Cursor::new(&mut bytes), image::ImageFormat::Png)
            .map_err(|e| Error::output(&real.info().path, std::io::Error::other(e)))?;
        Ok(bytes)
    };
    Ok((png(&a)?, png(&b)?))
}

fn expected_rows(e: &ExpectedAccuracy) -> Vec<Vec<String>> {
    let show = crate::render::report::readable;
    let rows = [
        ("Detection F1", e.detection_f1),
        ("MOTA (CLEAR-MOT accuracy)", e.mota),
        ("Links found (recall)", e.link_recall),
        ("True tracks mostly tracked", e.mostly_tracked),
        ("Divisions recovered", e.divisions_recovered),
    ];
    rows.iter()
        .filter_map(|(name, s)| s.map(|s| vec![name.to_string(), show(s.mean), show(s.min), show(s.max)]))
        .collect()
}

/// One row per measured statistic: its name and unit, the recording's value, the
/// look-alikes' mean.
fn statistic_rows(s: &LookalikeSummary) -> Vec<Vec<String>> {
    type Pick = fn(&RecordingStats) -> f64;
    let rows: [(&str, Pick); 18] = [
        ("Nucleus diameter, median (px)", |m| m.diameter_px),
        ("Elongation, median major / minor axis", |m| m.axis_ratio_median_p90.0),
        ("Elongation, 90th percentile", |m| m.axis_ratio_median_p90.1),
        ("Background (grey levels)", |m| m.background_grey),
        ("Nucleus signal over the background, median (grey levels)", |m| {
            m.signal_grey
        }),
        ("Brightness spread between nuclei (log s.d.)", |m| m.brightness_spread),
        ("Camera gain (grey-level variance per grey level)", |m| m.gain),
        ("Noise at the background (grey levels, s.d.)", |m| m.background_noise_sd),
        ("Nuclei per frame, median", |m| m.nuclei_per_frame),
        ("Share of the area inside nuclei", |m| m.area_fraction),
        ("Share of nuclei touching a neighbour", |m| m.touching_share),
        ("Closest packing (5th percentile neighbour distance / diameter)", |m| {
            m.closest_packing
        }),
        ("Speed (px per frame, drift removed)", |m| m.speed_px_per_frame),
        ("Persistence (frames)", |m| m.persistence_frames),
        ("Common drift (px per frame)", |m| {
            m.drift_px_per_frame.0.hypot(m.drift_px_per_frame.1)
        }),
        ("Divisions per nucleus and frame", |m| m.division_rate),
        ("Signal lost per frame (bleaching)", |m| m.bleach_per_frame),
        ("Uneven light (1 − darkest / brightest block)", |m| m.unevenness),
    ];
    let show = crate::render::report::readable;
    let n = s.lookalikes.len().max(1) as f64;
    rows.iter()
        .map(|(name, pick)| {
            let imitation = s.lookalikes.iter().map(|l| pick(&l.measured)).sum::<f64>() / n;
            vec![name.to_string(), show(pick(&s.measured)), show(imitation)]
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn look_alike_length_gives_the_nucleus_frames_asked_for() {
        // Worked by hand from the rule: 2000 nucleus-frames over 3 look-alikes is 667 per
        // look-alike; 300 nuclei need 2.2 frames (4 at the least), 100 nuclei 6.7 (7), 40
        // nuclei 16.7 (8 at the most); a given length is kept (2 at the least).
        let auto = LookalikeOptions::default();
        assert_eq!(auto.frames_for(300.0), 4);
        assert_eq!(auto.frames_for(100.0), 7);
        assert_eq!(auto.frames_for(40.0), 8);
        assert_eq!(auto.frames_for(0.0), 8);
        let given = |frames| LookalikeOptions {
            frames: Some(frames),
            ..auto
        };
        assert_eq!(given(5).frames_for(300.0), 5);
        assert_eq!(given(1).frames_for(300.0), 2);
    }
}
