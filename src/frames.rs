//! Frame production: frames decoded one by one and segmented in parallel, a few ahead,
//! handed over in frame order, with progress on a terminal.

use crate::error::{Error, Result};
use crate::image2d::{box_average, box_average_of_samples};
use crate::params::SegmentParams;
use crate::render::movie::{outline_pairs, outline_pairs_of_objects};
use crate::segment::label::{give_back_label_image, give_back_label_image_of};
use crate::segment::{masks, segment_frame, segment_whole_number_frame, FrameSegmentation, MovieFrame};
use crate::stack::Stack;
use indicatif::{ProgressBar, ProgressStyle};
use std::collections::VecDeque;
use std::io::IsTerminal;
use std::sync::mpsc::Receiver;
use std::sync::Arc;

/// A progress bar on stderr when it is a terminal; hidden (silent) otherwise, e.g. in logs.
pub fn progress_bar(len: u64, what: &str) -> ProgressBar {
    if !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(len);
    let template = format!("{{elapsed_precise}} [{{bar:40}}] {{pos}}/{{len}} {what} {{per_sec}} ETA {{eta}}");
    bar.set_style(
        ProgressStyle::with_template(&template)
            .expect("valid template")
            .progress_chars("=> "),
    );
    bar
}

/// Segmented frames of a recording, in frame order. Each frame is decoded on the producing
/// thread and handed to the worker pool as a task of its own, a few frames ahead of the one
/// being delivered; results come back in frame order. A worker that finishes a frame takes
/// the next one at once (no batch to wait for, so no core idles while the slowest frame of a
/// batch finishes), and memory is bounded by the frames in flight, not by the recording's
/// length.
struct SegmentedFrames<'a> {
    stack: &'a mut Stack,
    /// The user's label masks, when they replace segmentation (see [`crate::segment::masks`]).
    masks: Option<&'a mut Stack>,
    /// Whether objects from masks are measured on the recording's intensities.
    intensities: bool,
    /// What is kept of each frame besides its segmentation.
    keep: Keep,
    params: Arc<SegmentParams>,
    /// Frames not decoded yet.
    range: std::ops::Range<usize>,
    /// Frames handed to the workers, oldest first: where each one's result will arrive.
    in_flight: VecDeque<Receiver<std::thread::Result<FrameSegmentation>>>,
    failed: Option<Error>,
    /// How many frames may be in flight: a few per worker, so that every worker finds the
    /// next frame waiting whichever frame finishes first.
    window: usize,
    progress: ProgressBar,
}

/// What frame production keeps of each frame besides its segmentation's measurements.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Keep {
    /// The label image ([`FrameSegmentation::labels`]; left empty otherwise, so that it is
    /// freed on the worker instead of queued).
    pub labels: bool,
    /// The movie's share ([`FrameSegmentation::movie`]): the outline pixels.
    pub outline: bool,
    /// With the outline, the frame downscaled by this factor for the movie.
    pub downscale: Option<usize>,
}

impl Default for Keep {
    /// The labels, nothing for the movie.
    fn default() -> Self {
        Keep {
            labels: true,
            outline: false,
            downscale: None,
        }
    }
}

/// A decoded frame and, with masks, its labels.
type Decoded = (crate::stack::Frame, Option<Vec<u32>>);

impl<'a> SegmentedFrames<'a> {
    /// Stops before frame `end` (a shard's range).
    fn until(mut self, end: usize) -> Self {
        self.range.end = self.range.end.min(end);
        self
    }

    /// Keeps `keep` of each frame.
    fn keeping(mut self, keep: Keep) -> Self {
        self.keep = keep;
        self
    }

    /// Iterates over the frames of `stack` from `first` on.
    fn starting_at(
        (stack, masks, intensities): (&'a mut Stack, Option<&'a mut Stack>, bool),
        params: &SegmentParams,
        progress: ProgressBar,
        first: usize,
    ) -> Self {
        let frames = stack.info().frames;
        SegmentedFrames {
            stack,
            masks,
            intensities,
            keep: Keep::default(),
            params: Arc::new(params.clone()),
            range: first.min(frames)..frames,
            in_flight: VecDeque::new(),
            failed: None,
            window: 3 * rayon::current_num_threads().max(1),
            progress,
        }
    }

    /// Frame `t` (and its mask's labels).
    fn decode(&mut self, t: usize) -> Result<Decoded> {
        let labels = match self.masks.as_deref_mut() {
            Some(m) => Some(masks::mask_labels(&m.read_frame(t)?, &m.info().path)?),
            None => None,
        };
        Ok((self.stack.read_frame(t)?, labels))
    }

    /// Decodes frames and hands them to the workers until the window is full, the range is
    /// done or a frame cannot be read.
    fn top_up(&mut self) {
        while self.failed.is_none() && self.in_flight.len() < self.window && !self.range.is_empty() {
            let t = self.range.start;
            self.range.start += 1;
            match self.decode(t) {
                Ok(decoded) => self.in_flight.push_back(self.spawn(decoded)),
                Err(e) => self.failed = Some(e),
            }
        }
    }

    /// Segments a decoded frame on the worker pool; a panic is caught there and handed back
    /// with the result, to be raised on the thread that reads it.
    fn spawn(&self, (frame, labels): Decoded) -> Receiver<std::thread::Result<FrameSegmentation>> {
        let (sender, receiver) = std::sync::mpsc::sync_channel(1);
        let (params, intensities, keep) = (Arc::clone(&self.params), self.intensities, self.keep);
        rayon::spawn(move || {
            // One frame per worker: its filters stay on this thread (see the function).
            let segmented = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                crate::preprocess::filters_on_this_thread(|| produce(frame, labels, &params, intensities, keep))
            }));
            // The reader may have stopped early; then nobody wants this frame.
            let _ = sender.send(segmented);
        });
        receiver
    }
}

/// One decoded frame segmented (from its mask's `labels` when given, measured on the
/// recording's intensities when `intensities`), with its content checksum and what `keep`
/// asks for of it.
fn produce(
    frame: crate::stack::Frame,
    labels: Option<Vec<u32>>,
    params: &SegmentParams,
    intensities: bool,
    keep: Keep,
) -> FrameSegmentation {
    let (image, content_crc32) = frame.image_and_content_crc32();
    let segmented = match labels {
        Some(l) => masks::segment_from_mask(&l, &image, frame.index, intensities),
        None if frame.pixels.are_whole_numbers() => segment_whole_number_frame(&image, frame.index, params),
        None => segment_frame(&image, frame.index, params),
    };
    let mut segmented = FrameSegmentation {
        content_crc32: Some(content_crc32),
        ..segmented
    };
    // The movie's outline is found from the objects' pixels where segmentation gives them, and
    // a label image that is not kept is given back for the next frame's, zeroed there alone.
    let (w, h) = (frame.width, frame.height);
    let objects = segmented.object_pixels.take();
    let outline = keep.outline.then(|| match objects.as_deref() {
        Some(objects) => outline_pairs_of_objects(&segmented.labels, objects, w, h),
        None => outline_pairs(&segmented.labels, w, h),
    });
    if !keep.labels {
        let labels = std::mem::take(&mut segmented.labels);
        match objects.as_deref() {
            Some(objects) => give_back_label_image_of(labels, objects),
            None => give_back_label_image(labels),
        }
    }
    if let Some(outline) = outline {
        let values = image.as_slice().expect("standard layout");
        segmented.movie = Some(MovieFrame {
            outline,
            downscaled: keep.downscale.map(|f| downscale(&frame.pixels, values, (w, h), f)),
        });
    }
    segmented
}

/// The frame's block average by `factor` for the movie: from its 16-bit samples as decoded
/// where that gives the same values ([`box_average_of_samples`]), otherwise from its image.
fn downscale(pixels: &crate::stack::Pixels, image: &[f32], (w, h): (usize, usize), factor: usize) -> Vec<f32> {
    let of_samples = match pixels {
        crate::stack::Pixels::U16(samples) => box_average_of_samples(samples, w, h, factor),
        _ => None,
    };
    of_samples.unwrap_or_else(|| box_average(image, w, h, factor))
}

impl Iterator for SegmentedFrames<'_> {
    type Item = Result<FrameSegmentation>;
    fn next(&mut self) -> Option<Self::Item> {
        self.top_up();
        if let Some(arriving) = self.in_flight.pop_front() {
            let segmented = arriving.recv().expect("a spawned frame always sends its result");
            let segmented = segmented.unwrap_or_else(|panic| std::panic::resume_unwind(panic));
            self.progress.inc(1);
            self.top_up();
            return Some(Ok(segmented));
        }
        if let Some(e) = self.failed.take() {
            self.range.start = self.range.end;
            self.progress.finish_and_clear();
            return Some(Err(e));
        }
        self.progress.finish_and_clear();
        None
    }
}

/// Runs `consume` on the segmented frames `range` of `stack` (segmented by `masks` when given,
/// measured on the recording's intensities when `intensities`, keeping of each frame what
/// `keep` asks for), in frame order, while the next
/// frames are being segmented: a producer thread decodes frames and has them segmented (on the
/// worker pool), and hands results over a short queue, so writing tables, logging and linking
/// on the calling thread do not leave the workers idle.
/// Returns what `consume` returns; if it stops early, the producer stops at its next frame.
pub fn with_segmented_frames<T>(
    (stack, masks, intensities): (&mut Stack, Option<&mut Stack>, bool),
    params: &SegmentParams,
    progress: ProgressBar,
    (range, keep): (std::ops::Range<usize>, Keep),
    consume: impl FnOnce(&mut dyn Iterator<Item = Result<FrameSegmentation>>) -> T,
) -> T {
    let queue = 2 * rayon::current_num_threads().max(1);
    std::thread::scope(|scope| {
        let (sender, receiver) = std::sync::mpsc::sync_channel(queue);
        let producer = scope.spawn(move || {
            let frames = SegmentedFrames::starting_at((stack, masks, intensities), params, progress, range.start)
                .until(range.end)
                .keeping(keep);
            for seg in frames {
                if sender.send(seg).is_err() {
                    break;
                }
            }
        });
        let result = consume(&mut receiver.iter());
        drop(receiver);
        if let Err(panic) = producer.join() {
            std::panic::resume_unwind(panic);
        }
        result
    })
}
