//! The review page: `RUN/review/index.html`, a page that opens from the file system (no
//! server, no network) to scrub, play and step through every frame of a run, zoom, see each
//! nucleus's moment ellipse, id and tail, click a nucleus to see its track, and jump through
//! the moments worth a look.
//!
//! What is stored, and why: every frame downscaled to a display size (long side 512 px by
//! default) as a greyscale JPEG, loaded by the page only when shown; the recording's full
//! resolution only on the frames worth a look and every N-th frame, N chosen so that the full
//! frames together hold no more pixels than all display frames together; the overlays as
//! compact numbers (one script file per 100 frames, also loaded when needed), drawn by the
//! page. Scripts rather than JSON because a page opened from the file system may not fetch
//! files, but may load scripts and images beside it.
//!
//! The folder is written under a hidden name and renamed into place when complete.

mod page;

use crate::error::{Error, Result};
use crate::render::jpeg::MAX_SIDE;
use crate::render::{box_average, DisplayRange};
use rayon::prelude::*;
use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Frames per overlay script file.
const FRAMES_PER_CHUNK: usize = 100;
/// Frames decoded, stretched and encoded together (in parallel); bounds the memory held.
const ENCODE_BATCH: usize = 8;
/// JPEG quality of the stored frames (measured: a 512 px frame of a nucleus recording is
/// ~18 KB at 75).
const JPEG_QUALITY: u8 = 75;

/// One point of a track as the page shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewPoint {
    /// Frame number.
    pub frame: usize,
    /// Centroid, px.
    pub x: f64,
    /// Centroid, px.
    pub y: f64,
    /// Full major and minor axes of the moment ellipse, px.
    pub axes: (f64, f64),
    /// Major-axis angle from +x toward +y, degrees.
    pub angle_deg: f64,
    /// Confidence of the link into this point (`None` where the track starts or a gap was
    /// closed).
    pub link_confidence: Option<f64>,
}

/// A track as the page shows it: its points and the figures its panel lists.
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewTrack {
    /// Track id.
    pub id: u32,
    /// The mother's id.
    pub parent: Option<u32>,
    /// The daughters' ids.
    pub daughters: Vec<u32>,
    /// Mean speed over consecutive frames, px per frame.
    pub speed_px_per_frame: Option<f64>,
    /// Net displacement over path length.
    pub directionality: Option<f64>,
    /// Points in frame order.
    pub points: Vec<ReviewPoint>,
}

/// What makes a moment worth a look.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum MomentKind {
    /// The object count jumps (a frame the run's verdict flags).
    CountJump,
    /// A nucleus divides.
    Division,
    /// Two tracks share one object: a merge the segmentation did not split.
    TransientMerge,
    /// A track starts away from the border, not as a daughter, after the first frame.
    StartsInside,
    /// A track ends away from the border, not as a mother, before the last frame.
    EndsInside,
    /// Gap closing bridged missing frames.
    ClosedGap,
    /// A link had an alternative nearly as good.
    LowConfidenceLink,
}

impl MomentKind {
    /// Every kind, in the order of priority for full-resolution frames.
    pub const ALL: [MomentKind; 7] = [
        MomentKind::CountJump,
        MomentKind::Division,
        MomentKind::TransientMerge,
        MomentKind::StartsInside,
        MomentKind::EndsInside,
        MomentKind::ClosedGap,
        MomentKind::LowConfidenceLink,
    ];

    /// The label the page shows.
    pub fn label(self) -> &'static str {
        match self {
            MomentKind::CountJump => "object count jumps",
            MomentKind::Division => "division",
            MomentKind::TransientMerge => "two tracks share an object",
            MomentKind::StartsInside => "track starts inside the field",
            MomentKind::EndsInside => "track ends inside the field",
            MomentKind::ClosedGap => "gap closed",
            MomentKind::LowConfidenceLink => "uncertain link",
        }
    }
}

/// One moment worth a look: a frame, why, and the track it concerns.
#[derive(Debug, Clone, PartialEq)]
pub struct Moment {
    /// The frame to look at.
    pub frame: usize,
    /// Why.
    pub kind: MomentKind,
    /// The track concerned, if one.
    pub track: Option<u32>,
    /// A short explanation.
    pub note: String,
}

/// Everything the page shows but the pixels.
#[derive(Debug, Clone)]
pub struct ReviewInput {
    /// The recording's name, for the title.
    pub title: String,
    /// Width and height of a frame, px.
    pub size: (usize, usize),
    /// Frames in the recording.
    pub frames: usize,
    /// Seconds between frames, when known.
    pub interval_s: Option<f64>,
    /// µm per pixel, when known.
    pub pixel_size_um: Option<f64>,
    /// The run's verdict and its findings, one line each.
    pub verdict: Vec<String>,
    /// Every track.
    pub tracks: Vec<ReviewTrack>,
    /// The moments worth a look, in order of priority within each kind.
    pub moments: Vec<Moment>,
}

pub use crate::params::ReviewOptions;

/// Which frames are stored at full resolution: up to half the budget for moments (in order
/// of priority), the rest as every N-th frame. The budget: full frames together hold no more
/// pixels than all display frames together (`frames / factor²` full frames).
#[derive(Debug, Clone, PartialEq)]
pub struct FullFramePlan {
    /// The frames stored at full resolution.
    pub frames: BTreeSet<usize>,
    /// Every this many frames is among them (0: none regularly).
    pub every: usize,
}

impl FullFramePlan {
    /// No frame at full resolution (nothing is downscaled, or the frame is wider than a JPEG
    /// can be).
    pub fn none() -> FullFramePlan {
        FullFramePlan {
            frames: BTreeSet::new(),
            every: 0,
        }
    }

    /// The plan for `frames` frames downscaled by `factor`, given the moments.
    pub fn choose(frames: usize, factor: usize, moments: &[Moment]) -> FullFramePlan {
        if factor <= 1 || frames == 0 {
            return FullFramePlan::none();
        }
        let budget = (frames / (factor * factor)).max(1);
        let mut chosen = BTreeSet::new();
        for kind in MomentKind::ALL {
            for m in moments.iter().filter(|m| m.kind == kind) {
                if chosen.len() >= budget / 2 {
                    break;
                }
                chosen.insert(m.frame);
            }
        }
        let left = budget.saturating_sub(chosen.len()).max(1);
        let every = frames.div_ceil(left).max(1);
        chosen.extend((0..frames).step_by(every));
        FullFramePlan { frames: chosen, every }
    }
}

/// A review frame compressed by [`ReviewEncoder::encode`], to be written by
/// [`ReviewWriter::accept`].
pub struct EncodedFrame {
    t: usize,
    display: Vec<u8>,
    full: Option<Vec<u8>>,
}

/// How a [`ReviewWriter`] maps and compresses frames ([`ReviewWriter::encoder`]), apart from
/// the writer, so that frames can be compressed on any thread.
#[derive(Debug, Clone)]
pub struct ReviewEncoder {
    size: (usize, usize),
    factor: usize,
    plan: FullFramePlan,
    stretch: Option<DisplayRange>,
}

impl ReviewEncoder {
    /// Frame `t` mapped to display grey levels and compressed, from its samples (`raw`) and
    /// its block average by some factor when the caller has it (the movie's downscale,
    /// [`crate::render::box_average`], used when it is the display's factor). `raw` may be
    /// left out where [`ReviewEncoder::needs_whole`] says so.
    ///
    /// # Panics
    /// If `raw` is left out where [`ReviewEncoder::needs_whole`] asks for it (a caller's
    /// mistake, not the data's).
    pub fn encode(&self, t: usize, raw: Option<&[f32]>, averaged: Option<(usize, &[f32])>) -> EncodedFrame {
        let stretch = self
            .stretch
            .unwrap_or_else(|| DisplayRange::from_values(raw.expect("the whole frame without a stretch")));
        let (display, full) = self.greys(stretch, t, raw, averaged);
        let (w, h) = self.size;
        let (dw, dh) = (w.div_ceil(self.factor), h.div_ceil(self.factor));
        EncodedFrame {
            t,
            display: jpeg(&display, dw, dh),
            full: full.map(|f| jpeg(&f, w, h)),
        }
    }

    /// Whether [`ReviewEncoder::encode`] needs frame `t`'s samples when it is given the frame's
    /// block average by `factor`: for a frame kept at full resolution, for another display
    /// factor, or without a stretch set.
    pub fn needs_whole(&self, t: usize, factor: usize) -> bool {
        self.stretch.is_none() || factor != self.factor || self.plan.frames.contains(&t)
    }

    /// The display frame's grey levels, and the full frame's where the plan keeps it.
    /// Averaged before stretching, so that only the display's pixels are mapped; the full
    /// frame is mapped only where it is kept.
    fn greys(
        &self,
        stretch: DisplayRange,
        t: usize,
        raw: Option<&[f32]>,
        averaged: Option<(usize, &[f32])>,
    ) -> (Vec<u8>, Option<Vec<u8>>) {
        let (w, h) = self.size;
        let to_grey = |values: &[f32]| -> Vec<u8> { stretch.levels(values, 255) };
        let whole = || raw.expect("the whole frame where the review needs it (see needs_whole)");
        let display = match averaged {
            Some((factor, averaged)) if factor == self.factor => to_grey(averaged),
            _ => to_grey(&box_average(whole(), w, h, self.factor)),
        };
        let full = self.plan.frames.contains(&t).then(|| to_grey(whole()));
        (display, full)
    }
}

/// Writes a review folder frame by frame: [`ReviewWriter::offer`] every frame in order, then
/// [`ReviewWriter::finish`].
pub struct ReviewWriter {
    input: std::sync::Arc<ReviewInput>,
    /// The page's data scripts, being made on a thread of their own (see [`DataScripts`]).
    scripts: Option<std::thread::JoinHandle<DataScripts>>,
    staging: PathBuf,
    target: PathBuf,
    /// How frames are mapped and compressed: the display factor, the full-frame plan and the
    /// contrast stretch.
    encoder: ReviewEncoder,
    /// Frames waiting to be encoded: display pixels, and full-resolution ones where kept.
    batch: Vec<(usize, Vec<u8>, Option<Vec<u8>>)>,
    offered: usize,
    bytes: u64,
}

/// Paths and sizes of a written review.
#[derive(Debug, Clone)]
pub struct ReviewOutputs {
    /// The page.
    pub page: PathBuf,
    /// Frames stored at full resolution.
    pub full_frames: usize,
    /// Bytes of the whole folder.
    pub bytes: u64,
}

impl ReviewWriter {
    /// Starts writing `target` (a folder, replaced when complete).
    ///
    /// # Errors
    /// The staging folder cannot be created.
    pub fn new(target: &Path, input: ReviewInput, options: &ReviewOptions) -> Result<ReviewWriter> {
        let (w, h) = input.size;
        let side = options.display_side_px.clamp(64, MAX_SIDE);
        let factor = w.max(h).div_ceil(side).max(1);
        let plan = if w.max(h) <= MAX_SIDE {
            FullFramePlan::choose(input.frames, factor, &input.moments)
        } else {
            FullFramePlan::none()
        };
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default();
        let staging = target.with_file_name(format!(".{name}.partial-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&staging);
        for sub in ["frames", "full", "data"] {
            let d = staging.join(sub);
            std::fs::create_dir_all(&d).map_err(|e| Error::output(&d, e))?;
        }
        let input = std::sync::Arc::new(input);
        let scripts = {
            let (input, plan) = (std::sync::Arc::clone(&input), plan.clone());
            std::thread::spawn(move || DataScripts::of(&input, factor, &plan))
        };
        Ok(ReviewWriter {
            input,
            scripts: Some(scripts),
            staging,
            target: target.to_path_buf(),
            encoder: ReviewEncoder {
                size: (w, h),
                factor,
                plan,
                stretch: None,
            },
            batch: Vec::new(),
            offered: 0,
            bytes: 0,
        })
    }

    /// The contrast stretch of the first frame, from a caller that has it already (the QC
    /// movie's, [`DisplayRange::from_values`] of the same frame), so it is not worked out twice.
    pub fn set_stretch(&mut self, stretch: DisplayRange) {
        self.encoder.stretch = Some(stretch);
    }

    /// Takes the next frame's samples (row-major, the recording's size). The contrast stretch
    /// comes from the first frame and is kept, so that bleaching shows as dimming.
    ///
    /// # Errors
    /// A frame out of order, or one that cannot be written.
    pub fn offer(&mut self, t: usize, raw: &[f32]) -> Result<()> {
        self.check_order(t)?;
        let stretch = *self
            .encoder
            .stretch
            .get_or_insert_with(|| DisplayRange::from_values(raw));
        // No block average at hand: the display frame is averaged from `raw`.
        let (display, full) = self.encoder.greys(stretch, t, Some(raw), None);
        self.batch.push((t, display, full));
        if self.batch.len() >= ENCODE_BATCH {
            self.encode_batch()?;
        }
        Ok(())
    }

    /// What frames are compressed with, for a caller that compresses them in parallel
    /// ([`ReviewEncoder::encode`]) and hands them to [`ReviewWriter::accept`] in order. The
    /// stretch must be set first ([`ReviewWriter::set_stretch`]); without it, each frame's own.
    pub fn encoder(&self) -> ReviewEncoder {
        self.encoder.clone()
    }

    /// Writes a frame from [`ReviewEncoder::encode`]; frames must come in order, after any
    /// offered ones.
    ///
    /// # Errors
    /// As [`ReviewWriter::offer`].
    pub fn accept(&mut self, frame: EncodedFrame) -> Result<()> {
        self.check_order(frame.t)?;
        self.encode_batch()?;
        self.write_encoded(frame.t, &frame.display, frame.full.as_deref())
    }

    fn check_order(&mut self, t: usize) -> Result<()> {
        if t != self.offered {
            return Err(Error::output(
                &self.target,
                std::io::Error::other(format!("frame {t} offered after {}", self.offered)),
            ));
        }
        self.offered += 1;
        Ok(())
    }

    /// Encodes the held frames in parallel and writes them in frame order.
    fn encode_batch(&mut self) -> Result<()> {
        let (w, h) = self.input.size;
        let factor = self.encoder.factor;
        let (dw, dh) = (w.div_ceil(factor), h.div_ceil(factor));
        let encoded: Vec<(usize, Vec<u8>, Option<Vec<u8>>)> = self
            .batch
            .par_iter()
            .map(|(t, display, full)| (*t, jpeg(display, dw, dh), full.as_ref().map(|f| jpeg(f, w, h))))
            .collect();
        self.batch.clear();
        for (t, small, full) in encoded {
            self.write_encoded(t, &small, full.as_deref())?;
        }
        Ok(())
    }

    fn write_encoded(&mut self, t: usize, display: &[u8], full: Option<&[u8]>) -> Result<()> {
        self.write(&format!("frames/{t:06}.jpg"), display)?;
        if let Some(full) = full {
            self.write(&format!("full/{t:06}.jpg"), full)?;
        }
        Ok(())
    }

    fn write(&mut self, name: &str, bytes: &[u8]) -> Result<()> {
        let path = self.staging.join(name);
        std::fs::write(&path, bytes).map_err(|e| Error::output(&path, e))?;
        self.bytes += bytes.len() as u64;
        Ok(())
    }

    /// Writes the data scripts and the page, and moves the folder into place (replacing an
    /// earlier one).
    ///
    /// # Errors
    /// Fewer frames offered than the recording holds, or a file that cannot be written.
    pub fn finish(mut self) -> Result<ReviewOutputs> {
        self.encode_batch()?;
        if self.offered != self.input.frames {
            return Err(Error::output(
                &self.target,
                std::io::Error::other(format!("{} of {} frames offered", self.offered, self.input.frames)),
            ));
        }
        let scripts = self.scripts.take().expect("the scripts are taken once, here");
        let DataScripts { run, tracks, shapes } =
            scripts.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic));
        self.write("data/run.js", run.as_bytes())?;
        self.write("data/tracks.js", tracks.as_bytes())?;
        for (k, script) in shapes.into_iter().enumerate() {
            self.write(&format!("data/shapes_{k:04}.js"), script.as_bytes())?;
        }
        let html = page::html(&self.input.title);
        self.write("index.html", html.as_bytes())?;
        if self.target.exists() {
            std::fs::remove_dir_all(&self.target).map_err(|e| Error::output(&self.target, e))?;
        }
        std::fs::rename(&self.staging, &self.target).map_err(|e| Error::output(&self.target, e))?;
        Ok(ReviewOutputs {
            page: self.target.join("index.html"),
            full_frames: self.encoder.plan.frames.len(),
            bytes: self.bytes,
        })
    }
}

/// The page's three kinds of data script: the run's figures, the tracks, and the shapes by
/// chunks of frames. They need the tracks alone, not the frames, so [`ReviewWriter::new`] has
/// them made on a thread of their own while the frames are drawn and compressed: made after
/// the frames, they were ~25 ms at the end of a 100-frame run with one core idle.
///
/// That thread does all its work itself and never hands any to the worker pool: `finish`
/// waits for it, and may be called on a worker (the movie pass finishes the page beside the
/// contact sheet in `rayon::join`). A pool task waiting outside the pool's own waits for
/// work that is queued behind it on the pool is a deadlock (rayon's documentation on
/// blocking inside the pool, from memory): it hung a CI run, and one `caravan join` in 150
/// here.
struct DataScripts {
    run: String,
    tracks: String,
    shapes: Vec<String>,
}

impl DataScripts {
    /// The scripts of `input` shown `factor` times smaller with full frames by `plan`, made
    /// on the calling thread alone (see the type).
    fn of(input: &ReviewInput, factor: usize, plan: &FullFramePlan) -> DataScripts {
        DataScripts {
            run: page::run_script(input, factor, plan),
            tracks: page::tracks_script(&input.tracks),
            shapes: page::shape_scripts(input, FRAMES_PER_CHUNK),
        }
    }
}

impl Drop for ReviewWriter {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.staging);
    }
}

/// A greyscale baseline JPEG ([`crate::render::jpeg`]); [`ReviewWriter::new`] keeps both
/// the display and the full frames within the format's sides.
fn jpeg(grey: &[u8], w: usize, h: usize) -> Vec<u8> {
    crate::render::jpeg::grey_jpeg(grey, w, h, JPEG_QUALITY).expect("sides kept within JPEG's limit")
}

/// A number with at most `decimals` decimals, trailing zeros removed (compact data files).
/// Formatted by [`crate::columns::push_fixed`], equal to `format!("{v:.decimals$}")` and
/// several times faster (the page's data files hold every outline of every frame).
fn compact(v: f64, decimals: usize) -> String {
    let mut s = String::with_capacity(12);
    crate::columns::push_fixed(&mut s, v, decimals);
    if s.contains('.') {
        while s.ends_with('0') {
            s.pop();
        }
        if s.ends_with('.') {
            s.pop();
        }
    }
    if s == "-0" {
        s = "0".into();
    }
    s
}

/// Appends `values` as a JSON array of numbers.
fn push_numbers(out: &mut String, values: impl IntoIterator<Item = String>) {
    out.push('[');
    for (i, v) in values.into_iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        let _ = write!(out, "{v}");
    }
    out.push(']');
}

#[cfg(test)]
mod tests {
    use super::*;

    fn moment(frame: usize, kind: MomentKind) -> Moment {
        Moment {
            frame,
            kind,
            track: None,
            note: String::new(),
        }
    }

    #[test]
    fn full_frames_keep_to_the_pixel_budget() {
        // 400 frames at half size: 100 full frames at most (each holds four display frames'
        // pixels), half of them moments in order of priority, the rest every 8th frame.
        let moments: Vec<Moment> = (0..80)
            .map(|i| moment(i * 5 + 1, MomentKind::LowConfidenceLink))
            .chain([moment(7, MomentKind::CountJump)])
            .collect();
        let plan = FullFramePlan::choose(400, 2, &moments);
        assert!(plan.frames.contains(&7), "the highest priority first");
        assert_eq!(plan.every, 8);
        assert!(plan.frames.len() <= 100, "{}", plan.frames.len());
        assert_eq!(FullFramePlan::choose(400, 1, &moments).frames.len(), 0);
    }

    #[test]
    fn compact_numbers() {
        assert_eq!(compact(12.3456, 1), "12.3");
        assert_eq!(compact(12.0, 1), "12");
        assert_eq!(compact(-0.01, 1), "0");
        // Source: the standard library's formatter, `format!("{v:.d$}")`, trailing zeros and
        // a bare point removed and "-0" written "0": the same strings for random values of
        // every magnitude a page holds, for ties and their neighbours, and for values the
        // fast path leaves to the formatter (huge, non-finite).
        let by_definition = |v: f64, d: usize| {
            let mut s = format!("{v:.d$}");
            if s.contains('.') {
                s = s.trim_end_matches('0').trim_end_matches('.').to_string();
            }
            if s == "-0" {
                s = "0".into();
            }
            s
        };
        let mut rng = crate::numeric::Rng::new(21);
        let mut values = vec![0.0, -0.0, 0.05, 0.25, -0.35, 2.5, 1e15, -3e20, f64::NAN, f64::INFINITY];
        values.extend((0..20_000).map(|i| (rng.uniform() - 0.3) * 10f64.powi(i % 6 - 1)));
        values.extend((0..2_000).map(|i| i as f64 * 0.05 + [0.0, 1e-12, -1e-12][i % 3]));
        for v in values {
            for d in 0..=2 {
                assert_eq!(compact(v, d), by_definition(v, d), "{v:e} at {d}");
            }
        }
    }

    #[test]
    fn the_data_scripts_are_made_while_every_worker_is_busy() {
        // Source: rayon's documentation on blocking inside the pool (from memory): a pool
        // task that waits, outside the pool's own waits, for work queued behind it on the
        // pool never wakes. `finish` waits for the scripts' thread and may run on a worker, so
        // that thread must not hand work to the pool: here every worker of the global pool is
        // held until the scripts arrive. Handing their parts to the pool (`rayon::join`, a
        // `par_iter`) hangs this test until its minute is out, and it fails.
        let workers = rayon::current_num_threads();
        let (started, all_started) = std::sync::mpsc::channel();
        let releases: Vec<std::sync::mpsc::Sender<()>> = (0..workers)
            .map(|_| {
                let (release, held) = std::sync::mpsc::channel::<()>();
                let started = started.clone();
                rayon::spawn(move || {
                    let _ = started.send(());
                    let _ = held.recv();
                });
                release
            })
            .collect();
        for _ in 0..workers {
            all_started.recv().expect("every worker takes a holder");
        }
        let point = |frame: usize| ReviewPoint {
            frame,
            x: 10.0 + frame as f64,
            y: 20.0,
            axes: (8.0, 6.0),
            angle_deg: 30.0,
            link_confidence: Some(0.9),
        };
        let input = ReviewInput {
            title: "held".into(),
            size: (64, 64),
            frames: 250,
            interval_s: Some(60.0),
            pixel_size_um: None,
            verdict: vec!["ok".into()],
            tracks: vec![ReviewTrack {
                id: 1,
                parent: None,
                daughters: Vec::new(),
                speed_px_per_frame: Some(1.0),
                directionality: Some(1.0),
                points: (0..250).map(point).collect(),
            }],
            moments: vec![moment(3, MomentKind::CountJump)],
        };
        let (sent, arrived) = std::sync::mpsc::channel();
        std::thread::spawn(move || {
            let _ = sent.send(DataScripts::of(&input, 1, &FullFramePlan::none()));
        });
        let scripts = arrived.recv_timeout(std::time::Duration::from_secs(60));
        drop(releases);
        // One shapes script per FRAMES_PER_CHUNK frames (the page's layout): 250 frames, 3.
        assert_eq!(
            scripts.expect("the scripts, made with every worker held").shapes.len(),
            3
        );
    }
}
