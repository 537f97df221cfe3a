//! Frame production: frames decoded and segmented in parallel batches, handed over in frame
//! order while the next batch is being segmented, with progress on a terminal.

use crate::error::{Error, Result};
use crate::params::SegmentParams;
use crate::segment::{masks, segment_frame, FrameSegmentation};
use crate::stack::Stack;
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::collections::VecDeque;
use std::io::IsTerminal;

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

/// Segmented frames of a recording, in frame order. Frames are decoded in batches of a few per
/// worker thread; while one batch is segmented in parallel the next is decoded, so reading
/// overlaps computing, and memory is bounded by two batches, not by the recording's length.
struct SegmentedFrames<'a> {
    stack: &'a mut Stack,
    /// The user's label masks, when they replace segmentation (see [`crate::segment::masks`]).
    masks: Option<&'a mut Stack>,
    /// Whether objects from masks are measured on the recording's intensities.
    intensities: bool,
    params: &'a SegmentParams,
    /// Frames not decoded yet.
    range: std::ops::Range<usize>,
    /// Decoded (with their masks' labels), waiting to be segmented.
    decoded: Vec<Decoded>,
    ready: VecDeque<FrameSegmentation>,
    failed: Option<Error>,
    batch: usize,
    progress: ProgressBar,
}

/// A decoded frame and, with masks, its labels.
type Decoded = (crate::stack::Frame, Option<Vec<u32>>);

impl<'a> SegmentedFrames<'a> {
    /// Stops before frame `end` (a shard's range).
    fn until(mut self, end: usize) -> Self {
        self.range.end = self.range.end.min(end);
        self
    }

    /// Iterates over the frames of `stack` from `first` on.
    fn starting_at(
        (stack, masks, intensities): (&'a mut Stack, Option<&'a mut Stack>, bool),
        params: &'a SegmentParams,
        progress: ProgressBar,
        first: usize,
    ) -> Self {
        let frames = stack.info().frames;
        let batch = 2 * rayon::current_num_threads().max(1);
        SegmentedFrames {
            stack,
            masks,
            intensities,
            params,
            range: first.min(frames)..frames,
            decoded: Vec::new(),
            ready: VecDeque::new(),
            failed: None,
            batch,
            progress,
        }
    }

    fn decode_batch(
        stack: &mut Stack,
        mut masks: Option<&mut Stack>,
        range: &mut std::ops::Range<usize>,
        batch: usize,
    ) -> Result<Vec<Decoded>> {
        let end = (range.start + batch).min(range.end);
        let frames = (range.start..end)
            .map(|t| {
                let labels = match masks.as_deref_mut() {
                    Some(m) => Some(masks::mask_labels(&m.read_frame(t)?, &m.info().path)?),
                    None => None,
                };
                Ok((stack.read_frame(t)?, labels))
            })
            .collect::<Result<Vec<_>>>();
        range.start = end;
        frames
    }

    fn fill(&mut self) {
        if self.decoded.is_empty() {
            match Self::decode_batch(self.stack, self.masks.as_deref_mut(), &mut self.range, self.batch) {
                Ok(frames) => self.decoded = frames,
                Err(e) => {
                    self.failed = Some(e);
                    return;
                }
            }
        }
        let current = std::mem::take(&mut self.decoded);
        let (params, intensities) = (self.params, self.intensities);
        let (stack, masks, range, batch) = (&mut *self.stack, self.masks.as_deref_mut(), &mut self.range, self.batch);
        let (next, done) = rayon::join(
            || Self::decode_batch(stack, masks, range, batch),
            || {
                current
                    .par_iter()
                    .map(|(f, labels)| {
                        let segmented = match labels {
                            Some(l) => masks::segment_from_mask(l, &f.to_image(), f.index, intensities),
                            None => segment_frame(&f.to_image(), f.index, params),
                        };
                        FrameSegmentation {
                            content_crc32: Some(f.content_crc32()),
                            ..segmented
                        }
                    })
                    .collect::<Vec<_>>()
            },
        );
        self.progress.inc(done.len() as u64);
        self.ready.extend(done);
        match next {
            Ok(frames) => self.decoded = frames,
            Err(e) => self.failed = Some(e),
        }
    }
}

impl Iterator for SegmentedFrames<'_> {
    type Item = Result<FrameSegmentation>;
    fn next(&mut self) -> Option<Self::Item> {
        if self.ready.is_empty() && self.failed.is_none() && !(self.decoded.is_empty() && self.range.is_empty()) {
            self.fill();
        }
        if let Some(seg) = self.ready.pop_front() {
            return Some(Ok(seg));
        }
        if let Some(e) = self.failed.take() {
            self.range.start = self.range.end;
            self.decoded.clear();
            return Some(Err(e));
        }
        self.progress.finish_and_clear();
        None
    }
}

/// Runs `consume` on the segmented frames `range` of `stack` (segmented by `masks` when given,
/// measured on the recording's intensities when `intensities`), in frame order, while the next
/// frames are being segmented: a producer thread decodes and segments batches (on the worker
/// pool) and hands results over a short queue, so writing tables, logging and
/// linking on the calling thread no longer leave the workers idle between batches.
/// Returns what `consume` returns; if it stops early, the producer stops at its next frame.
pub fn with_segmented_frames<T>(
    (stack, masks, intensities): (&mut Stack, Option<&mut Stack>, bool),
    params: &SegmentParams,
    progress: ProgressBar,
    range: std::ops::Range<usize>,
    consume: impl FnOnce(&mut dyn Iterator<Item = Result<FrameSegmentation>>) -> T,
) -> T {
    let queue = 2 * rayon::current_num_threads().max(1);
    std::thread::scope(|scope| {
        let (sender, receiver) = std::sync::mpsc::sync_channel(queue);
        let producer = scope.spawn(move || {
            let frames = SegmentedFrames::starting_at((stack, masks, intensities), params, progress, range.start)
                .until(range.end);
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
