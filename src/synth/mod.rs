//! Synthetic time-lapse recordings with ground truth, from scenarios of our own: nuclei that
//! wander on a dish, a crowded field of touching nuclei, and a micropatterned stripe along which
//! nuclei migrate with a drift. Appearance is meant to be realistic enough to test the
//! pipeline: blurred elliptical nuclei of varied size and brightness, touching neighbours,
//! uneven illumination, photobleaching, Poisson shot noise plus Gaussian read noise, and cells
//! entering and leaving the field. Everything is deterministic for a given seed.

mod scene;
pub use scene::illumination;
pub mod walks;

pub use crate::numeric::Rng;
pub use scene::{Nucleus, Scene};

use crate::error::{Error, Result};
use crate::output::{ensure_dir, write_atomic, AtomicFile};
use crate::stack::write::{write_stack, TiffCompression};
use crate::tracks::{write_track_points, TrackPoint};
use serde::Serialize;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The invented situations a recording can show.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Scenario {
    /// Sparse nuclei wandering on a dish (persistent random walk), rarely touching.
    Dish,
    /// A crowded field where many nuclei touch their neighbours.
    Crowded,
    /// Nuclei confined to a horizontal stripe, migrating along it with a drift; they leave on
    /// one side and new ones enter on the other.
    Stripe,
}

impl std::str::FromStr for Scenario {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "dish" => Ok(Scenario::Dish),
            "crowded" => Ok(Scenario::Crowded),
            "stripe" => Ok(Scenario::Stripe),
            _ => Err(format!("{s:?}: expected dish, crowded or stripe")),
        }
    }
}

/// Everything that defines a synthetic recording.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SynthParams {
    /// Which situation.
    pub scenario: Scenario,
    /// Columns.
    pub width: usize,
    /// Rows.
    pub height: usize,
    /// Time points.
    pub frames: usize,
    /// Nuclei present at the start.
    pub nuclei: usize,
    /// Mean nucleus diameter, px.
    pub diameter_px: f64,
    /// Peak signal of a nucleus at frame 0, photons.
    pub signal_photons: f64,
    /// Background level, photons.
    pub background_photons: f64,
    /// Fraction of signal lost per frame to photobleaching.
    pub bleach_per_frame: f64,
    /// Read-noise standard deviation, grey levels.
    pub read_noise: f64,
    /// Grey levels per photon (the camera's gain).
    pub gain: f64,
    /// Grey level of no light (the camera's offset).
    pub offset: f64,
    /// Depth of the illumination's fall-off from the centre to the corners (0.35: the corners
    /// get 65% of the centre's light; a 15% left-right tilt comes on top).
    pub vignette: f64,
    /// Pixel size written into the OME-XML, µm.
    pub pixel_size_um: f64,
    /// Frame interval written into the OME-XML, s.
    pub frame_interval_s: f64,
    /// Drift along +x, px per frame (the stripe's collective migration; 0 elsewhere).
    pub drift_px_per_frame: f64,
    /// Probability per nucleus and frame of dividing into two daughters.
    pub division_rate: f64,
    /// Probability per nucleus and frame of being missed for one frame (out of focus).
    pub dropout_rate: f64,
    /// Frames before a division during which the mother rounds up (axis ratio 1, 85% of her
    /// radius) and brightens (1.6x: condensed chromatin); 0 = she divides at once.
    pub mitosis_frames: usize,
    /// Probability per nucleus and frame of dimming to 35% of its brightness for one frame
    /// (drifting out of focus), still present in the truth.
    pub dimming_rate: f64,
    /// Seed of every random choice.
    pub seed: u64,
    /// Compression of the written recording.
    pub compression: TiffCompression,
    /// How real nuclei differ from smooth equal discs (the scenario's own defaults are the
    /// plain look: no texture, a 1 px point-spread function, brightness spread 0.25).
    pub look: Look,
    /// Motion as a persistent random walk of a given speed, instead of the scenario's own.
    pub motion: Option<PersistentMotion>,
    /// Closest approach of two nuclei's centres as a share of the sum of their radii, instead
    /// of the scenario's own (dish 1.2, crowded 0.85, stripe 1.0): below 1 nuclei press into
    /// each other, as in packed tissue.
    pub separation: Option<f64>,
}

/// The appearance of nuclei: what tissue has and smooth synthetic discs lack.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Look {
    /// Chromatin-like texture: relative amplitude of the brightness variation inside a
    /// nucleus (0 = smooth; 0.3 = about ±30%).
    pub texture: f64,
    /// Standard deviation of the Gaussian point-spread function, px.
    pub psf_sigma_px: f64,
    /// Standard deviation of the natural logarithm of the peak brightness between nuclei
    /// (brightness is lognormal).
    pub brightness_spread: f64,
    /// Largest ratio of the long to the short axis of a nucleus (the ratio is 1 + 0.15·|N(0,1)|,
    /// capped here).
    pub max_axis_ratio: f64,
    /// Where two nuclei press into each other, each pixel belongs to the nucleus whose boundary
    /// is farther away (as in the truth labels), and the interface between them is dimmed by
    /// this share before blurring (the nuclear envelopes and the gap between them: a darker
    /// seam). 0: overlapping nuclei are drawn one over the other (the brighter wins), with no
    /// seam.
    pub seam_depth: f64,
}

impl Look {
    /// Smooth, moderately varied nuclei (the scenarios' long-standing look).
    pub const PLAIN: Look = Look {
        texture: 0.0,
        psf_sigma_px: 1.0,
        brightness_spread: 0.25,
        max_axis_ratio: 1.5,
        seam_depth: 0.0,
    };
    /// Closer to nuclei in tissue: textured chromatin, a wider point-spread function (σ 1.2 px),
    /// brightness varying by a factor of about 1.35 (lognormal σ 0.3), elongation up to 1.3,
    /// and pressed nuclei divided by a seam dimmed by half.
    pub const TISSUE: Look = Look {
        texture: 0.3,
        psf_sigma_px: 1.2,
        brightness_spread: 0.3,
        max_axis_ratio: 1.3,
        seam_depth: 0.5,
    };
}

impl std::str::FromStr for Look {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s {
            "plain" => Ok(Look::PLAIN),
            "tissue" => Ok(Look::TISSUE),
            _ => Err(format!("{s:?}: expected plain or tissue")),
        }
    }
}

/// A persistent random walk: each velocity component is an Ornstein-Uhlenbeck process
/// sampled once per frame, `v(t+1) = a·v(t) + σ_v·√(1 − a²)·N(0, 1)` with `a = exp(−1/P)`,
/// so the velocity autocorrelation decays as `exp(−lag/P)` and the stationary velocity
/// components have standard deviation `σ_v` (Uhlenbeck & Ornstein (1930), Phys. Rev.
/// 36:823–841). The mean speed of a 2D Gaussian velocity is `σ_v·√(π/2)` (the mean of a
/// Rayleigh distribution), which sets `σ_v` from the requested speed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PersistentMotion {
    /// Mean speed (of the random part), px per frame.
    pub speed_px_per_frame: f64,
    /// Persistence time P, frames.
    pub persistence_frames: f64,
}

impl PersistentMotion {
    /// Standard deviation of one velocity component, px per frame.
    pub fn component_sd(&self) -> f64 {
        self.speed_px_per_frame / (std::f64::consts::PI / 2.0).sqrt()
    }

    /// The per-frame velocity memory `a = exp(−1/P)`.
    pub fn memory(&self) -> f64 {
        (-1.0 / self.persistence_frames).exp()
    }
}

impl SynthParams {
    /// Defaults for a scenario at a given size.
    pub fn new(scenario: Scenario, width: usize, height: usize, frames: usize) -> Self {
        let area = (width * height) as f64;
        let nuclei = match scenario {
            Scenario::Dish => area / 5000.0,
            Scenario::Crowded => area / 650.0,
            Scenario::Stripe => area / 2200.0,
        };
        SynthParams {
            scenario,
            width,
            height,
            frames,
            nuclei: nuclei.round().max(1.0) as usize,
            diameter_px: 14.0,
            signal_photons: 600.0,
            background_photons: 60.0,
            bleach_per_frame: 0.002,
            read_noise: 3.0,
            gain: 1.0,
            offset: 100.0,
            vignette: 0.35,
            pixel_size_um: 0.65,
            frame_interval_s: 300.0,
            drift_px_per_frame: if scenario == Scenario::Stripe { 2.5 } else { 0.0 },
            division_rate: 0.0,
            dropout_rate: 0.0,
            mitosis_frames: 0,
            dimming_rate: 0.0,
            seed: 1,
            compression: TiffCompression::Deflate,
            look: Look::PLAIN,
            motion: None,
            separation: None,
        }
    }

    /// Standard deviation of the camera noise over the background at the field's centre,
    /// grey levels: Poisson noise of the background photons plus read noise.
    pub fn background_noise_sd(&self) -> f64 {
        (self.gain * self.gain * self.background_photons + self.read_noise * self.read_noise).sqrt()
    }

    /// Refuses sizes that cannot make a recording.
    pub fn validate(&self) -> Result<()> {
        if self.width < 16 || self.height < 16 || self.width > 16384 || self.height > 16384 {
            return Err(Error::parameter(
                "--size",
                format!("{}x{}", self.width, self.height),
                "each side must be 16 to 16384 px",
            ));
        }
        if !(self.gain > 0.0 && self.gain.is_finite() && (0.0..=0.9).contains(&self.vignette) && self.offset >= 0.0) {
            return Err(Error::parameter(
                "gain/offset/vignette",
                format!("{}/{}/{}", self.gain, self.offset, self.vignette),
                "gain must be positive, offset at least 0, vignette from 0 to 0.9",
            ));
        }
        if self.frames == 0 {
            return Err(Error::parameter("--frames", self.frames, "must be at least 1"));
        }
        if !(self.diameter_px >= 4.0 && self.diameter_px <= self.width.min(self.height) as f64 / 3.0) {
            return Err(Error::parameter(
                "--diameter",
                self.diameter_px,
                "must be at least 4 px and at most a third of the frame",
            ));
        }
        let rate_ok = |r: f64| (0.0..=0.5).contains(&r);
        if !rate_ok(self.dimming_rate) || self.mitosis_frames > 10 {
            return Err(Error::parameter(
                "--dimming/--mitosis-frames",
                format!("{}/{}", self.dimming_rate, self.mitosis_frames),
                "dimming from 0 to 0.5 per frame, mitosis at most 10 frames",
            ));
        }
        if !rate_ok(self.division_rate) || !rate_ok(self.dropout_rate) {
            return Err(Error::parameter(
                "--divisions/--dropouts",
                format!("{}/{}", self.division_rate, self.dropout_rate),
                "rates are probabilities per frame from 0 to 0.5",
            ));
        }
        if self.drift_px_per_frame.is_nan() || self.drift_px_per_frame.abs() > self.diameter_px {
            return Err(Error::parameter(
                "--drift",
                self.drift_px_per_frame,
                "must be at most one diameter per frame",
            ));
        }
        let look = &self.look;
        if !(0.0..=1.0).contains(&look.texture)
            || !(0.3..=5.0).contains(&look.psf_sigma_px)
            || !(0.0..=1.5).contains(&look.brightness_spread)
            || !(1.0..=3.0).contains(&look.max_axis_ratio)
            || !(0.0..=1.0).contains(&look.seam_depth)
        {
            return Err(Error::parameter(
                "--texture/--psf/--brightness-spread/--max-axis-ratio",
                format!("{look:?}"),
                "texture 0 to 1, PSF sigma 0.3 to 5 px, spread 0 to 1.5, axis ratio 1 to 3",
            ));
        }
        if let Some(sep) = self.separation {
            if !(0.5..=3.0).contains(&sep) {
                return Err(Error::parameter(
                    "--separation",
                    sep,
                    "must be from 0.5 to 3 (a share of the sum of two radii)",
                ));
            }
        }
        if let Some(m) = self.motion {
            let speed_ok = (0.0..=2.0 * self.diameter_px).contains(&m.speed_px_per_frame);
            let persistence_ok = m.persistence_frames > 0.0 && m.persistence_frames <= 1000.0;
            if !(speed_ok && persistence_ok) {
                return Err(Error::parameter(
                    "--speed/--persistence",
                    format!("{}/{}", m.speed_px_per_frame, m.persistence_frames),
                    "speed 0 to 2 diameters per frame, persistence above 0 and at most 1000 frames",
                ));
            }
        }
        if !(self.signal_photons > 0.0 && self.signal_photons <= 60000.0) {
            return Err(Error::parameter(
                "--signal",
                self.signal_photons,
                "must be 0 to 60000 photons",
            ));
        }
        Ok(())
    }
}

/// Paths written by [`write_recording`].
#[derive(Debug, Clone)]
pub struct SynthOutputs {
    /// The recording (multi-page 16-bit TIFF with OME-XML).
    pub recording: PathBuf,
    /// `track_id, parent_id, frame, x, y` of every visible nucleus.
    pub truth_csv: PathBuf,
    /// One 16-bit label image per frame; the label is the track id.
    pub truth_labels: PathBuf,
    /// The parameters, as JSON.
    pub scenario_json: PathBuf,
}

/// Simulates and writes a recording with its ground truth into `dir`.
pub fn write_recording(dir: &Path, params: &SynthParams) -> Result<SynthOutputs> {
    params.validate()?;
    ensure_dir(dir)?;
    let scene = Scene::simulate(params);
    let out = SynthOutputs {
        recording: dir.join("recording.tif"),
        truth_csv: dir.join("truth.csv"),
        truth_labels: dir.join("truth_labels.tif"),
        scenario_json: dir.join("scenario.json"),
    };
    let description = ome_description(params);
    let (w, h) = (params.width, params.height);
    let mut frames = AheadInParallel::new(params.frames, |t| scene.render(t));
    write_stack::<u16, _>(
        &out.recording,
        w,
        h,
        params.frames,
        params.compression,
        Some(&description),
        |t| Ok(frames.take(t)),
    )?;
    let mut points = Vec::new();
    let mut labels = AheadInParallel::new(params.frames, |t| scene.labels(t));
    write_stack::<u16, _>(
        &out.truth_labels,
        w,
        h,
        params.frames,
        TiffCompression::Deflate,
        None,
        |t| {
            let labels = labels.take(t);
            points.extend(scene.visible_points(t, &labels));
            Ok(labels)
        },
    )?;
    let mut csv = AtomicFile::create(&out.truth_csv)?;
    write_track_points(&mut csv, &points).map_err(|e| csv.error(e))?;
    csv.commit()?;
    let json = serde_json::to_vec_pretty(&serde_json::json!({ "caravan_version": crate::VERSION, "synth": params }))
        .expect("serialisable");
    write_atomic(&out.scenario_json, &json)?;
    Ok(out)
}

/// Frames made a few at a time in parallel and handed out in order: each frame's randomness is
/// seeded by its index, so the result is the same whatever the thread count.
struct AheadInParallel<F: Fn(usize) -> Vec<u16> + Sync> {
    make: F,
    ready: std::collections::VecDeque<Vec<u16>>,
    frames: usize,
}

impl<F: Fn(usize) -> Vec<u16> + Sync> AheadInParallel<F> {
    /// Frames made together (bounds the memory held).
    const BATCH: usize = 4;

    fn new(frames: usize, make: F) -> Self {
        AheadInParallel {
            make,
            ready: std::collections::VecDeque::new(),
            frames,
        }
    }

    /// Frame `t`; frames are asked for in order from 0.
    fn take(&mut self, t: usize) -> Vec<u16> {
        use rayon::prelude::*;
        if self.ready.is_empty() {
            let end = (t + Self::BATCH).min(self.frames).max(t + 1);
            let batch: Vec<Vec<u16>> = (t..end).into_par_iter().map(&self.make).collect();
            self.ready.extend(batch);
        }
        self.ready.pop_front().expect("a batch was made")
    }
}

/// Truth points of one frame: every nucleus with visible pixels, at the centroid of its
/// visible label pixels.
pub fn truth_points_of(labels: &[u16], width: usize, frame: usize) -> Vec<TrackPoint> {
    // Indexed by label (a 16-bit label has 65 536 possible values): sums in pixel order.
    let mut sums = vec![(0f64, 0f64, 0f64); 1 << 16];
    for (y, row) in labels.chunks_exact(width.max(1)).enumerate() {
        for (x, &l) in row.iter().enumerate().filter(|(_, &l)| l != 0) {
            let e = &mut sums[l as usize];
            e.0 += x as f64;
            e.1 += y as f64;
            e.2 += 1.0;
        }
    }
    sums.into_iter()
        .enumerate()
        .filter(|(_, (_, _, n))| *n > 0.0)
        .map(|(id, (sx, sy, n))| TrackPoint {
            track_id: id as u32,
            parent_id: None,
            frame,
            x: sx / n,
            y: sy / n,
        })
        .collect()
}

fn ome_description(p: &SynthParams) -> String {
    let mut s = Vec::new();
    write!(
        s,
        r#"<?xml version="1.0" encoding="UTF-8"?><OME xmlns="http://www.openmicroscopy.org/Schemas/OME/2016-06" Creator="caravan {} synth"><Image ID="Image:0" Name="synthetic {:?} scenario"><Pixels ID="Pixels:0" DimensionOrder="XYZCT" Type="uint16" SizeX="{}" SizeY="{}" SizeZ="1" SizeC="1" SizeT="{}" PhysicalSizeX="{}" PhysicalSizeY="{}" TimeIncrement="{}" TimeIncrementUnit="s"><Channel ID="Channel:0:0" SamplesPerPixel="1"/><TiffData/></Pixels></Image></OME>"#,
        crate::VERSION, p.scenario, p.width, p.height, p.frames, p.pixel_size_um, p.pixel_size_um, p.frame_interval_s
    )
    .expect("writing to a Vec");
    String::from_utf8(s).expect("ascii")
}
