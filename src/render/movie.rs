//! The QC overlay movie: every frame, contrast-stretched to 8 bits and downscaled when large,
//! each nucleus outlined in the colour of its final track, a fading tail of recent positions,
//! and the frame number and time; plus a contact sheet of evenly spaced frames.
//!
//! It shows final track ids, so it is drawn after linking: outlines are spooled to a compact
//! file during segmentation ([`OutlineSpool`]), with each frame already downscaled for the
//! movie, and the frames are drawn and compressed a few at a time in parallel and written in
//! order, so memory stays bounded by a few frames and the movie is the same whatever the
//! thread count. A frame is decoded a second time only where its samples are needed (the
//! first frame's contrast, the review page's full-resolution frames) or were not spooled (the
//! frames before a resumed run's checkpoint).

use super::font::{draw_text, text_width};
use super::review::{ReviewOutputs, ReviewWriter};
use super::{box_average, is_edge, DisplayRange, PALETTE};
use crate::error::{Error, Result};
use crate::ordered::in_frame_order;
use crate::output::{AtomicFile, Commits};
use crate::stack::Stack;
use image::{Rgb, RgbImage};
use imageproc::drawing::draw_line_segment_mut;
use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

/// Entries of the palette kept for grey levels; then the overlay colours at `SHADES`
/// brightness levels (for fading tails), then white.
const GREYS: usize = 200;
const SHADES: [f32; 4] = [1.0, 0.75, 0.5, 0.3];
/// Palette index of the caption text (white) and its box (black).
const WHITE: u8 = 255;
const BLACK: u8 = 0;
/// Points in a tail, the current one included.
const TAIL: usize = 8;

pub use crate::params::MovieOptions;

/// Outline pixels of every frame, written during segmentation and read back in frame order;
/// and, when kept ([`OutlineSpool::keep_downscaled`]), the frames downscaled for the movie.
pub struct OutlineSpool {
    path: PathBuf,
    writer: Option<BufWriter<File>>,
    /// Removed when dropped (a temporary spool), or kept (a checkpoint's).
    temporary: bool,
    downscaled: Option<DownscaledSpool>,
}

/// Frames `first..first + held`, block-averaged for the movie, in a temporary file (removed
/// when dropped): the movie pass reads them instead of decoding the frames again.
struct DownscaledSpool {
    path: PathBuf,
    writer: BufWriter<File>,
    first: usize,
    held: usize,
    /// Values per frame.
    values: usize,
    /// Frames it may hold at most (its budget of bytes).
    most: usize,
}

/// Bytes of downscaled frames a spool keeps at most: 1 GiB, about 1000 frames of a 1024²
/// recording at the movie's default size (frames after that are decoded again by the movie
/// pass, so a very long recording does not fill the disk with a temporary file).
pub const DOWNSCALED_BUDGET_BYTES: usize = 1 << 30;

impl Drop for DownscaledSpool {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

impl OutlineSpool {
    /// A spool file next to the outputs (hidden name; removed when dropped).
    pub fn create(dir: &Path) -> Result<OutlineSpool> {
        let path = dir.join(format!(".outlines.partial-{}", std::process::id()));
        let file = File::create(&path).map_err(|e| Error::output(&path, e))?;
        Ok(OutlineSpool {
            path,
            writer: Some(BufWriter::new(file)),
            temporary: true,
            downscaled: None,
        })
    }

    /// A spool that survives a crash, for checkpoints: created empty, or with `append`
    /// continued after what it holds.
    pub fn durable(path: &Path, append: bool) -> Result<OutlineSpool> {
        let file = if append {
            std::fs::OpenOptions::new().append(true).open(path)
        } else {
            File::create(path)
        }
        .map_err(|e| Error::output(path, e))?;
        Ok(OutlineSpool {
            path: path.to_path_buf(),
            writer: Some(BufWriter::new(file)),
            temporary: false,
            downscaled: None,
        })
    }

    /// Also keeps the frames from `first` on, downscaled to `values` samples each
    /// ([`OutlineSpool::push_downscaled`]), in a temporary file in `dir` of at most
    /// `budget_bytes` ([`DOWNSCALED_BUDGET_BYTES`] in a run).
    pub fn keep_downscaled(&mut self, dir: &Path, first: usize, values: usize, budget_bytes: usize) -> Result<()> {
        let path = dir.join(format!(".downscaled.partial-{}", std::process::id()));
        let file = File::create(&path).map_err(|e| Error::output(&path, e))?;
        self.downscaled = Some(DownscaledSpool {
            path,
            writer: BufWriter::new(file),
            first,
            held: 0,
            values,
            most: budget_bytes / (4 * values).max(1),
        });
        Ok(())
    }

    /// Appends frame `t` downscaled for the movie, if it is the frame after the last one kept,
    /// of the size given to [`OutlineSpool::keep_downscaled`] and within the budget; the movie
    /// pass decodes the frames not kept.
    pub fn push_downscaled(&mut self, t: usize, values: &[f32]) -> Result<()> {
        let Some(d) = self.downscaled.as_mut() else {
            return Ok(());
        };
        if t != d.first + d.held || values.len() != d.values || d.held >= d.most {
            return Ok(());
        }
        let bytes: Vec<u8> = values.iter().flat_map(|v| v.to_le_bytes()).collect();
        d.writer.write_all(&bytes).map_err(|e| Error::output(&d.path, e))?;
        d.held += 1;
        Ok(())
    }

    /// Appends outline records written by another spool (a shard's), unchanged.
    pub fn append_raw(&mut self, bytes: &[u8]) -> Result<()> {
        let w = self.writer.as_mut().expect("still writing");
        w.write_all(bytes).map_err(|e| Error::output(&self.path, e))
    }

    /// Hands everything pushed so far to the file system and returns the spool's length in
    /// bytes with a handle on its file, to be made durable by whoever holds it
    /// ([`crate::checkpoint::Unsynced`]).
    pub fn flushed(&mut self) -> Result<(u64, crate::checkpoint::Unsynced)> {
        let w = self.writer.as_mut().expect("still writing");
        w.flush().map_err(|e| Error::output(&self.path, e))?;
        let file = w.get_ref().try_clone().map_err(|e| Error::output(&self.path, e))?;
        let len = file.metadata().map_err(|e| Error::output(&self.path, e))?.len();
        Ok((len, crate::checkpoint::Unsynced::new(&self.path, file)))
    }

    /// Makes everything pushed so far durable and returns the spool's length in bytes.
    pub fn flushed_len(&mut self) -> Result<u64> {
        let (len, file) = self.flushed()?;
        file.sync()?;
        Ok(len)
    }

    /// Appends one frame's outline pixels, given as [`outline_pairs`].
    pub fn push_outline(&mut self, pairs: &[u32]) -> Result<()> {
        let w = self.writer.as_mut().expect("still writing");
        let bytes: Vec<u8> = std::iter::once((pairs.len() / 2) as u32)
            .chain(pairs.iter().copied())
            .flat_map(u32::to_le_bytes)
            .collect();
        w.write_all(&bytes).map_err(|e| Error::output(&self.path, e))
    }

    fn reader(&mut self) -> Result<BufReader<File>> {
        if let Some(w) = self.writer.take() {
            w.into_inner().map_err(|e| Error::output(&self.path, e.into_error()))?;
        }
        Ok(BufReader::new(
            File::open(&self.path).map_err(|e| Error::output(&self.path, e))?,
        ))
    }

    /// The kept downscaled frames, read in frame order.
    fn downscaled_reader(&mut self) -> Result<Option<DownscaledReader<'_>>> {
        let Some(d) = self.downscaled.as_mut() else {
            return Ok(None);
        };
        d.writer.flush().map_err(|e| Error::output(&d.path, e))?;
        let file = File::open(&d.path).map_err(|e| Error::output(&d.path, e))?;
        Ok(Some(DownscaledReader {
            spool: d,
            reader: BufReader::with_capacity(1 << 16, file),
            bytes: Vec::new(),
        }))
    }
}

/// Reads a [`DownscaledSpool`] back, frame by frame in order.
struct DownscaledReader<'a> {
    spool: &'a DownscaledSpool,
    reader: BufReader<File>,
    bytes: Vec<u8>,
}

impl DownscaledReader<'_> {
    /// Frame `t` downscaled, when the spool holds it; frames must be asked for in order.
    fn frame(&mut self, t: usize) -> Result<Option<Vec<f32>>> {
        let d = self.spool;
        if !(d.first..d.first + d.held).contains(&t) {
            return Ok(None);
        }
        self.bytes.resize(4 * d.values, 0);
        self.reader
            .read_exact(&mut self.bytes)
            .map_err(|e| Error::output(&d.path, e))?;
        let mut values = vec![0f32; d.values];
        for (v, b) in values.iter_mut().zip(self.bytes.chunks_exact(4)) {
            *v = f32::from_le_bytes(b.try_into().expect("four bytes"));
        }
        Ok(Some(values))
    }
}

/// The outline pixels of a label image (object pixels on the image border or with a
/// 4-neighbour of another label, [`is_edge`]) as (pixel index, label) pairs in raster order.
pub fn outline_pairs(labels: &[u32], width: usize, height: usize) -> Vec<u32> {
    outline_pairs_by(labels, width, height, edges_in_run)
}

/// [`outline_pairs`] with the runs inside the image compared by `edges_in` ([`edges_in_run`]
/// on one instruction level or another).
fn outline_pairs_by(
    labels: &[u32],
    width: usize,
    height: usize,
    edges_in: impl Fn(&[u32], &[u32], &[u32], &[u32], &[u32]) -> u64 + Copy,
) -> Vec<u32> {
    let mut pairs = Vec::new();
    for y in 0..if width == 0 { 0 } else { height } {
        row_outline(labels, (width, height), y, edges_in, &mut pairs);
    }
    pairs
}

/// [`outline_pairs`] of a label image whose labelled pixels are all among `objects` (each
/// once, in any order; pixels of label 0 may be among them too): the same pairs in the same
/// order, found by looking at those pixels and their four neighbours only (a frame's nuclei
/// cover a few percent of it) instead of reading the whole image. The outline pixels are
/// marked in a bitmap of the frame, which is then read in raster order.
pub fn outline_pairs_of_objects(labels: &[u32], objects: &[u32], width: usize, height: usize) -> Vec<u32> {
    let words = labels.len().div_ceil(64);
    let mut marks = crate::numeric::spare::take_or_new(&SPARE_MARKS, words, 0);
    let grid = crate::numeric::Grid::new(width, height);
    for &p in objects {
        let p = p as usize;
        let (x, y) = grid.column_row(p);
        let edge = labels[p] != 0 && is_edge(labels, width, height, x, y);
        marks[p / 64] |= u64::from(edge) << (p % 64);
    }
    let mut pairs = Vec::new();
    for (k, word) in marks[..words].iter_mut().enumerate() {
        while *word != 0 {
            let p = k * 64 + word.trailing_zeros() as usize;
            pairs.extend([p as u32, labels[p]]);
            *word &= *word - 1;
        }
    }
    crate::numeric::spare::keep(&SPARE_MARKS, marks);
    pairs
}

thread_local! {
    /// The bitmap of [`outline_pairs_of_objects`], kept zeroed between frames (each word is
    /// cleared as it is read).
    static SPARE_MARKS: std::cell::RefCell<Vec<u64>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// Appends row `y`'s outline pixels to `pairs` (see [`outline_pairs`]), the runs inside the
/// image compared by `edges_in`.
fn row_outline(
    labels: &[u32],
    (width, height): (usize, usize),
    y: usize,
    edges_in: impl Fn(&[u32], &[u32], &[u32], &[u32], &[u32]) -> u64,
    pairs: &mut Vec<u32>,
) {
    // Most pixels are background, so runs of RUN pixels are first tested as a whole (one
    // vectorised OR) and only those with an object looked into, all RUN at once
    // ([`edges_in_run`]) away from the image's border.
    let row = &labels[y * width..(y + 1) * width];
    let inner = y > 0 && y + 1 < height;
    for (k, run) in row.chunks(RUN).enumerate() {
        if run.iter().fold(0, |any, &l| any | l) == 0 {
            continue;
        }
        let x0 = k * RUN;
        let mut edges = if inner && x0 > 0 && x0 + RUN < width {
            let at = |dy: isize, dx: isize| {
                let start = (y as isize + dy) as usize * width + (x0 as isize + dx) as usize;
                &labels[start..start + RUN]
            };
            edges_in(run, at(0, -1), at(0, 1), at(-1, 0), at(1, 0))
        } else {
            let edge = |i: usize| run[i] != 0 && is_edge(labels, width, height, x0 + i, y);
            (0..run.len()).fold(0u64, |m, i| m | (u64::from(edge(i)) << i))
        };
        while edges != 0 {
            let i = edges.trailing_zeros() as usize;
            pairs.extend([(y * width + x0 + i) as u32, run[i]]);
            edges &= edges - 1;
        }
    }
}

/// Pixels per run of [`outline_pairs`]: a bit each in a `u64`.
const RUN: usize = 64;

crate::multiversioned! {
    /// Bit `i` set where `run[i]` is an object pixel whose `left`, `right`, `up` or `down`
    /// neighbour (the runs one pixel to each side, all of [`RUN`] pixels) has another label:
    /// [`is_edge`] for a run inside the image, compared lane by lane.
    fn edges_in_run / edges_in_run_with(run: &[u32], left: &[u32], right: &[u32], up: &[u32], down: &[u32]) -> u64 {
        let (run, left, right, up, down) = (&run[..RUN], &left[..RUN], &right[..RUN], &up[..RUN], &down[..RUN]);
        let mut edges = 0u64;
        for i in 0..RUN {
            let l = run[i];
            let differs = (left[i] != l) | (right[i] != l) | (up[i] != l) | (down[i] != l);
            edges |= u64::from((l != 0) & differs) << i;
        }
        edges
    }
}

impl Drop for OutlineSpool {
    fn drop(&mut self) {
        if self.temporary {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

fn read_outline(r: &mut impl Read, path: &Path) -> Result<Vec<(u32, u32)>> {
    let mut word = [0u8; 4];
    let mut next = |r: &mut dyn Read| -> Result<u32> {
        r.read_exact(&mut word).map_err(|e| Error::output(path, e))?;
        Ok(u32::from_le_bytes(word))
    };
    let n = next(r)?;
    (0..n).map(|_| Ok((next(r)?, next(r)?))).collect()
}

/// What the movie needs to know of the tracks, per frame.
pub struct TrackOverlay {
    /// For each frame, the final track id of each label (index = label − 1).
    pub track_of_label: Vec<Vec<u32>>,
    /// For each frame, `(track id, x, y)` of the points present, in ascending track id.
    pub points: Vec<Vec<(u32, f64, f64)>>,
    /// Divisions as `(mother's last frame, x, y)`: marked for a few frames from the next one.
    pub divisions: Vec<(usize, f64, f64)>,
}

/// Frames during which a division stays marked.
const DIVISION_MARK_FRAMES: usize = 4;

/// Paths written by [`render_movie`].
#[derive(Debug, Clone)]
pub struct MovieOutputs {
    /// The animated GIF.
    pub movie: PathBuf,
    /// The contact-sheet PNG.
    pub sheet: PathBuf,
    /// Frames in the movie.
    pub frames: usize,
    /// Movie width and height.
    pub size: (usize, usize),
}

/// Renders `qc_movie.gif` and `qc_sheet.png` into `dir` (a second pass over the frames), and
/// hands every frame to the review page's writer when one is given, so that each frame is
/// read once for both: from the spool's downscaled frames where it kept them
/// ([`OutlineSpool::keep_downscaled`]), decoding again only the frames whose samples are
/// needed (the first, for the contrast; the review's full-resolution ones). The review page
/// is finished ([`ReviewWriter::finish`]) while the contact sheet is compressed, and its
/// outputs returned with the movie's.
///
/// Colours: 240 grey levels plus our overlay palette, fixed for the whole movie so that a
/// track keeps its colour; the contrast stretch is taken from the first frame and kept, so
/// that bleaching shows as dimming rather than being hidden. The movie holds every
/// [`MovieOptions::step`]-th frame: capped by default, a portable summary.
pub fn render_movie(
    stack: &mut Stack,
    spool: &mut OutlineSpool,
    overlay: &TrackOverlay,
    options: &MovieOptions,
    dir: &Path,
    mut review: Option<ReviewWriter>,
) -> Result<(MovieOutputs, Option<ReviewOutputs>)> {
    let info = stack.info().clone();
    let (w, h) = (info.width, info.height);
    let factor = options.factor(w, h);
    let (mw, mh) = (w.div_ceil(factor), h.div_ceil(factor));
    let step = options.step(info.frames);
    let out = MovieOutputs {
        movie: dir.join("qc_movie.gif"),
        sheet: dir.join("qc_sheet.png"),
        frames: info.frames.div_ceil(step),
        size: (mw, mh),
    };
    let mut file = AtomicFile::create(&out.movie)?;
    let gif_error = |e: gif::EncodingError| Error::output(&out.movie, std::io::Error::other(e.to_string()));
    let mut sheet = ContactSheet::new(options.sheet_frames.min(out.frames).max(1), out.frames, mw, mh);
    {
        let mut encoder = gif::Encoder::new(&mut file, mw as u16, mh as u16, &palette()).map_err(gif_error)?;
        encoder.set_repeat(gif::Repeat::Infinite).map_err(gif_error)?;
        let spool_path = spool.path.clone();
        let mut reader = spool.reader()?;
        let mut downscaled = spool.downscaled_reader()?;
        // Frame `t`: its outline, its spooled downscale, and its samples where `whole` asks
        // for them or nothing was spooled.
        let mut read = |t: usize, whole: &dyn Fn(usize) -> bool| -> Result<FrameToDraw> {
            let outline = read_outline(&mut reader, &spool_path)?;
            let averaged = match downscaled.as_mut() {
                Some(d) => d.frame(t)?,
                None => None,
            };
            let raw = if averaged.is_none() || whole(t) {
                Some(stack.read_frame(t)?.pixels.to_f32())
            } else {
                None
            };
            Ok(FrameToDraw {
                t,
                raw,
                averaged,
                outline,
            })
        };
        let first = if info.frames > 0 {
            Some(read(0, &|_| true)?)
        } else {
            None
        };
        // The contrast of the first frame, for the movie and the review page alike.
        let stretch = DisplayRange::from_values(first.as_ref().and_then(|f| f.raw.as_deref()).unwrap_or(&[]));
        if let Some(r) = review.as_mut() {
            r.set_stretch(stretch);
        }
        let look = MovieLook {
            overlay,
            stretch,
            size: (w, h),
            factor,
            interval_s: info.calibration.frame_interval_s,
        };
        let reviewer = review.as_ref().map(ReviewWriter::encoder);
        let whole = |t: usize| reviewer.as_ref().is_some_and(|r| r.needs_whole(t, factor));
        let mut write = |done: FinishedFrame| -> Result<()> {
            if let (Some(r), Some(encoded)) = (review.as_mut(), done.review) {
                r.accept(encoded)?;
            }
            if let Some(d) = done.drawn {
                sheet.offer(done.t / step, &d.canvas);
                encoder.write_lzw_pre_encoded_frame(&d.gif).map_err(gif_error)?;
            }
            Ok(())
        };
        let finish = |frame: FrameToDraw| -> FinishedFrame {
            let t = frame.t;
            let in_movie = t.is_multiple_of(step);
            let averaged = match (frame.averaged, frame.raw.as_deref()) {
                (Some(averaged), _) => Some(averaged),
                (None, Some(raw)) if in_movie => Some(box_average(raw, w, h, factor)),
                (None, _) => None,
            };
            let drawn = match (in_movie, averaged.as_deref()) {
                (true, Some(averaged)) => Some(look.draw(t, averaged, &frame.outline)),
                _ => None,
            };
            let review = reviewer
                .as_ref()
                .map(|r| r.encode(t, frame.raw.as_deref(), averaged.as_deref().map(|a| (factor, a))));
            FinishedFrame { t, drawn, review }
        };
        in_frame_order(first, (1..info.frames).map(|t| read(t, &whole)), &finish, &mut write)?;
    }
    // The movie's commit waits on the disk on a thread of its own while the contact sheet
    // and the review page are finished.
    let mut commits = Commits::default();
    commits.start(file);
    let (sheet, review) = rayon::join(
        || sheet.write(&out.sheet),
        || review.map(ReviewWriter::finish).transpose(),
    );
    commits.wait()?;
    sheet?;
    Ok((out, review?))
}

/// A frame to draw: its index, its samples (where decoded), its block average for the movie
/// (where spooled) and its outline pixels (index, label).
struct FrameToDraw {
    t: usize,
    raw: Option<Vec<f32>>,
    averaged: Option<Vec<f32>>,
    outline: Vec<(u32, u32)>,
}

/// One frame of the movie pass once drawn and compressed: its movie frame (every `step`-th
/// frame) and its review frame (when the page is written).
struct FinishedFrame {
    t: usize,
    drawn: Option<DrawnFrame>,
    review: Option<crate::render::review::EncodedFrame>,
}

/// What every movie frame is drawn with.
struct MovieLook<'a> {
    overlay: &'a TrackOverlay,
    stretch: DisplayRange,
    size: (usize, usize),
    factor: usize,
    interval_s: Option<f64>,
}

/// One movie frame: the drawn canvas and its GIF frame, already compressed.
struct DrawnFrame {
    canvas: image::GrayImage,
    gif: gif::Frame<'static>,
}

impl MovieLook<'_> {
    /// Frame `t` (`averaged`: its block average by the movie's factor) stretched, with tails,
    /// division marks, outlines in track colours and the caption; compressed for the GIF (the
    /// same bytes as the encoder would write).
    fn draw(&self, t: usize, averaged: &[f32], outline: &[(u32, u32)]) -> DrawnFrame {
        let ((w, h), factor) = (self.size, self.factor);
        let (mw, mh) = (w.div_ceil(factor), h.div_ceil(factor));
        let mut canvas = indexed_grey(averaged, (mw, mh), &self.stretch);
        draw_tails(&mut canvas, self.overlay, t, factor);
        draw_division_marks(&mut canvas, self.overlay, t, factor);
        for &(i, l) in outline {
            let track = self.overlay.track_of_label[t].get(l as usize - 1).copied().unwrap_or(0);
            let (x, y) = (i as usize % w / factor, i as usize / w / factor);
            canvas.put_pixel(x as u32, y as u32, image::Luma([track_colour(track)]));
        }
        let time = self.interval_s.map(|s| format_time(t as f64 * s)).unwrap_or_default();
        caption_indexed(&mut canvas, &format!("t={t} {time}"));
        let gif = gif::Frame {
            width: mw as u16,
            height: mh as u16,
            delay: 10,
            buffer: std::borrow::Cow::Owned(super::lzw::gif_lzw(canvas.as_raw())),
            ..gif::Frame::default()
        };
        DrawnFrame { canvas, gif }
    }
}

/// The fixed palette: 240 greys, then our overlay colours; entry 255 is white.
fn palette() -> Vec<u8> {
    let mut p = Vec::with_capacity(768);
    for i in 0..GREYS {
        let g = (i * 255 / (GREYS - 1)) as u8;
        p.extend([g, g, g]);
    }
    for shade in SHADES {
        for c in PALETTE {
            p.extend(c.map(|v| (v as f32 * shade).round() as u8));
        }
    }
    p.resize(255 * 3, 0);
    p.extend([255, 255, 255]);
    p
}

/// Palette index of a track's colour (track 0 = unknown gets white).
fn track_colour(track: u32) -> u8 {
    faded_colour(track, 0)
}

/// A track's colour at shade `level` (0 = full brightness, higher = dimmer).
fn faded_colour(track: u32, level: usize) -> u8 {
    if track == 0 {
        return WHITE;
    }
    (GREYS + level.min(SHADES.len() - 1) * PALETTE.len() + (track as usize - 1) % PALETTE.len()) as u8
}

/// A block-averaged frame ([`super::box_average`]) as palette grey indices.
fn indexed_grey(averaged: &[f32], (mw, mh): (usize, usize), stretch: &DisplayRange) -> image::GrayImage {
    let data = stretch.levels(averaged, (GREYS - 1) as u8);
    image::GrayImage::from_raw(mw as u32, mh as u32, data).expect("sized buffer")
}

/// Lines through each present track's last `TAIL` positions, in its colour, older segments
/// dimmer.
fn draw_tails(canvas: &mut image::GrayImage, overlay: &TrackOverlay, t: usize, factor: usize) {
    let first = t.saturating_sub(TAIL - 1);
    for &(track, _, _) in &overlay.points[t] {
        let path: Vec<(f32, f32)> = (first..=t)
            // Points of a frame are in ascending track id (tracks are sorted before the overlay
            // is built), so each lookup is a binary search, not a scan.
            .filter_map(|f| {
                overlay.points[f]
                    .binary_search_by_key(&track, |p| p.0)
                    .ok()
                    .map(|i| &overlay.points[f][i])
            })
            .map(|p| (p.1 as f32 / factor as f32, p.2 as f32 / factor as f32))
            .collect();
        let n = path.len();
        for (k, seg) in path.windows(2).enumerate() {
            let age = n - 2 - k;
            let level = age * SHADES.len() / TAIL;
            draw_line_segment_mut(canvas, seg[0], seg[1], image::Luma([faded_colour(track, level)]));
        }
    }
}

/// A white four-pointed star (a plus with a hollow centre, our own mark) where a nucleus
/// divided, from the daughters' first frame for [`DIVISION_MARK_FRAMES`] frames.
fn draw_division_marks(canvas: &mut image::GrayImage, overlay: &TrackOverlay, t: usize, factor: usize) {
    for &(frame, x, y) in &overlay.divisions {
        if t <= frame || t > frame + DIVISION_MARK_FRAMES {
            continue;
        }
        let (cx, cy) = (x as f32 / factor as f32, y as f32 / factor as f32);
        for (dx, dy) in [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)] {
            let from = (cx + 3.0 * dx, cy + 3.0 * dy);
            let to = (cx + 8.0 * dx, cy + 8.0 * dy);
            draw_line_segment_mut(canvas, from, to, image::Luma([WHITE]));
        }
    }
}

fn caption_indexed(canvas: &mut image::GrayImage, text: &str) {
    let scale = if canvas.width() >= 400 { 2 } else { 1 };
    let (bw, bh) = (text_width(text, scale) + 2 * scale, 7 * scale);
    if bw > canvas.width() || bh > canvas.height() {
        return;
    }
    for y in 0..bh {
        for x in 0..bw {
            canvas.put_pixel(x, y, image::Luma([BLACK]));
        }
    }
    let (cw, ch) = (canvas.width(), canvas.height());
    draw_text(text, scale, scale, scale, |x, y| {
        if x < cw && y < ch {
            canvas.put_pixel(x, y, image::Luma([WHITE]));
        }
    });
}

/// `12m`, `1h05m` or `30s`: a short caption in the letters our bitmap font has.
fn format_time(seconds: f64) -> String {
    let s = seconds.round() as u64;
    match s {
        0..=119 => format!("{s}s"),
        120..=3599 => format!("{}m", s / 60),
        _ => format!("{}h{:02}m", s / 3600, (s % 3600) / 60),
    }
}

/// A grid of evenly spaced movie frames, kept as they are rendered (bounded memory).
struct ContactSheet {
    picks: Vec<usize>,
    tiles: Vec<image::GrayImage>,
    size: (usize, usize),
}

impl ContactSheet {
    fn new(count: usize, frames: usize, w: usize, h: usize) -> Self {
        let picks = (0..count)
            .map(|i| if count == 1 { 0 } else { i * (frames - 1) / (count - 1) })
            .collect();
        ContactSheet {
            picks,
            tiles: Vec::new(),
            size: (w, h),
        }
    }

    fn offer(&mut self, index: usize, canvas: &image::GrayImage) {
        if self.picks.contains(&index) && self.tiles.len() < self.picks.len() {
            self.tiles.push(canvas.clone());
        }
    }

    fn write(&self, path: &Path) -> Result<()> {
        let columns = (self.tiles.len() as f64).sqrt().ceil().max(1.0) as usize;
        let rows = self.tiles.len().div_ceil(columns).max(1);
        // Thumbnails of at most 256 px a side, by keeping every k-th pixel.
        let step = self.size.0.max(self.size.1).div_ceil(256).max(1);
        let (w, h) = (self.size.0.div_ceil(step), self.size.1.div_ceil(step));
        let gap = 4;
        let pal = palette();
        let mut sheet = RgbImage::from_pixel(
            (columns * (w + gap) + gap) as u32,
            (rows * (h + gap) + gap) as u32,
            Rgb([32, 32, 32]),
        );
        for (k, tile) in self.tiles.iter().enumerate() {
            let (ox, oy) = (gap + (k % columns) * (w + gap), gap + (k / columns) * (h + gap));
            let sheet_width = sheet.width() as usize;
            let rows = tile.as_raw().chunks_exact(self.size.0.max(1)).step_by(step);
            for (ty, row) in rows.enumerate() {
                let start = 3 * ((oy + ty) * sheet_width + ox);
                let out = &mut sheet.as_mut()[start..start + 3 * w];
                for (rgb, &index) in out.chunks_exact_mut(3).zip(row.iter().step_by(step)) {
                    let i = index as usize * 3;
                    rgb.copy_from_slice(&pal[i..i + 3]);
                }
            }
        }
        let mut bytes = Vec::new();
        sheet
            .write_to(&mut std::io::Cursor::new(&mut bytes), image::ImageFormat::Png)
            .map_err(|e| Error::output(path, std::io::Error::other(e)))?;
        crate::output::write_atomic(path, &bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_downscaled_spool_keeps_frames_in_order_within_its_budget() {
        // Construction: a budget of two and a half frames of 6 values, frames from 3 on. The
        // first two are read back as written (the same bits, NaN and −0 included); the third
        // is over the budget, a frame out of order or of another size is not kept, and frames
        // before the first were never kept: the movie pass decodes those.
        let dir = tempfile::tempdir().unwrap();
        let mut spool = OutlineSpool::create(dir.path()).unwrap();
        spool.keep_downscaled(dir.path(), 3, 6, 4 * 6 * 5 / 2).unwrap();
        let frame = |t: usize| -> Vec<f32> { (0..6).map(|i| (t * 10 + i) as f32 * 0.37).collect() };
        let mut odd = frame(3);
        odd[1] = f32::NAN;
        odd[2] = -0.0;
        spool.push_downscaled(3, &odd).unwrap();
        spool.push_downscaled(5, &frame(5)).unwrap(); // out of order: not kept
        spool.push_downscaled(4, &frame(4)[..5]).unwrap(); // another size: not kept
        spool.push_downscaled(4, &frame(4)).unwrap();
        spool.push_downscaled(5, &frame(5)).unwrap(); // over the budget
        let mut reader = spool.downscaled_reader().unwrap().unwrap();
        let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(reader.frame(2).unwrap(), None);
        assert_eq!(bits(&reader.frame(3).unwrap().unwrap()), bits(&odd));
        assert_eq!(reader.frame(4).unwrap(), Some(frame(4)));
        assert_eq!(reader.frame(5).unwrap(), None);
    }

    #[test]
    fn outline_pairs_are_the_edge_pixels_in_raster_order() {
        // Source: definition (an object pixel on the image border or with a 4-neighbour of
        // another label), pixel by pixel, on label images of blobs with widths that do and do
        // not fill the 64-pixel runs the search skips by (runs inside the image are compared
        // lane by lane, the others pixel by pixel), on every instruction level, and on empty
        // and one-pixel images; also from the objects' pixels alone, giving the image back with
        // no label left behind.
        let mut rng = crate::numeric::Rng::new(4);
        let sizes = [
            (1usize, 1usize),
            (0, 0),
            (31, 5),
            (64, 7),
            (70, 40),
            (200, 12),
            (300, 7),
            (193, 3),
        ];
        for ((w, h), level) in sizes
            .into_iter()
            .flat_map(|s| crate::simd::levels().into_iter().map(move |l| (s, l)))
        {
            let labels: Vec<u32> = (0..w * h)
                .map(|i| {
                    let (x, y) = ((i % w) as f64, (i / w) as f64);
                    let blob = ((x / 6.0).sin() * (y / 4.0).cos() > 0.3) as u32;
                    blob * (1 + (rng.uniform() * 3.0) as u32)
                })
                .collect();
            let at = |x: i64, y: i64| {
                let inside = (0..w as i64).contains(&x) && (0..h as i64).contains(&y);
                inside.then(|| labels[y as usize * w + x as usize])
            };
            let mut want = Vec::new();
            for (i, &l) in labels.iter().enumerate() {
                let (x, y) = ((i % w) as i64, (i / w) as i64);
                let neighbours = [at(x - 1, y), at(x + 1, y), at(x, y - 1), at(x, y + 1)];
                if l != 0 && neighbours.iter().any(|n| *n != Some(l)) {
                    want.extend([i as u32, l]);
                }
            }
            assert!(w * h < 100 || !want.is_empty());
            let edges_in =
                |a: &[u32], b: &[u32], c: &[u32], d: &[u32], e: &[u32]| edges_in_run_with(level, a, b, c, d, e);
            let found = outline_pairs_by(&labels, w, h, edges_in);
            assert_eq!(found, want, "{w}x{h} on {level:?}");
            // Found from the objects' pixels (shuffled, with some background among them): the
            // same pairs; the image given back by clearing them holds no label for the next
            // frame's.
            let mut objects: Vec<u32> = (0..w * h)
                .filter(|&i| labels[i] != 0 || i % 7 == 0)
                .map(|i| i as u32)
                .collect();
            for k in (1..objects.len()).rev() {
                objects.swap(k, (rng.uniform() * (k + 1) as f64) as usize % (k + 1));
            }
            assert_eq!(
                outline_pairs_of_objects(&labels, &objects, w, h),
                want,
                "{w}x{h}, objects"
            );
            crate::segment::label::give_back_label_image_of(labels.clone(), &objects);
            let next = crate::segment::label::Foreground {
                pixels: Vec::new(),
                labels: Vec::new(),
            };
            assert!(next.label_image(w * h).iter().all(|&l| l == 0), "{w}x{h} given back");
        }
    }

    #[test]
    fn time_captions_and_palette() {
        assert_eq!(format_time(30.0), "30s");
        assert_eq!(format_time(600.0), "10m");
        assert_eq!(format_time(3900.0), "1h05m");
        // GIF global colour tables hold 256 RGB entries (GIF89a specification, §19).
        assert_eq!(palette().len(), 768);
        assert_eq!(track_colour(1), GREYS as u8);
        assert_eq!(track_colour(13), GREYS as u8);
        assert_eq!(faded_colour(1, 3), (GREYS + 3 * PALETTE.len()) as u8);
        assert!(GREYS + SHADES.len() * PALETTE.len() < 255, "white stays the last entry");
    }
}
