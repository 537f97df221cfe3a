//! Finding every nucleus in a frame: a global threshold on the prepared image, hole filling,
//! the exact Euclidean distance transform, h-maxima seeds, a seeded watershed restricted to
//! the mask (which splits touching nuclei), size filtering and per-object measurements.
//! Linking is not done here.

pub mod diameter;
pub mod distance_transform;
pub mod hmaxima;
pub mod label;
pub mod measure;
pub mod queue;
mod split;
pub mod threshold;
pub mod watershed;

pub use split::split_touching;

use crate::image2d::Image;
use crate::params::{SegmentParams, ThresholdMethod};
use crate::preprocess::prepare;
use crate::tracks::Detection;
use threshold::Histogram;

/// Bins of the float histogram that automatic thresholds see (scikit-image's default).
pub const THRESHOLD_BINS: usize = 256;

/// The result of segmenting one frame.
#[derive(Debug, Clone)]
pub struct FrameSegmentation {
    /// Frame number.
    pub frame: usize,
    /// The threshold applied to the prepared image.
    pub threshold: f64,
    /// One label per pixel (0 = background), objects numbered from 1 in raster order.
    pub labels: Vec<u32>,
    /// The measured objects, in label order.
    pub detections: Vec<Detection>,
    /// NaN or infinite pixels, replaced by the frame's lowest finite value.
    pub nonfinite_pixels: usize,
}

/// Segments one frame (`raw` in stored intensities) with the given parameters.
pub fn segment_frame(raw: &Image, frame: usize, params: &SegmentParams) -> FrameSegmentation {
    let (raw, nonfinite_pixels) = replace_nonfinite(raw);
    let raw = raw.as_ref();
    let (h, w) = raw.dim();
    let prepared = prepare(raw, params);
    let values = prepared.as_slice().expect("standard layout");
    let threshold = choose_threshold(values, params.threshold);
    let mut mask: Vec<bool> = values.iter().map(|&v| v as f64 > threshold).collect();
    label::fill_holes(&mut mask, w, h);
    let (mut labels, foreground) =
        split::split_touching_with_pixels(&mask, w, h, params.seed_h_px, params.distance_smoothing_px);
    let count = label::filter_and_relabel_pixels(&mut labels, &foreground, params.min_area_px, params.max_area_px);
    let intensity = raw.as_slice().expect("standard layout");
    let detections = measure::measure_objects(&labels, &foreground, count, intensity, w, h, frame);
    FrameSegmentation {
        frame,
        threshold,
        labels,
        detections,
        nonfinite_pixels,
    }
}

/// Float recordings may hold NaN or infinite pixels (a failed acquisition, a division by zero
/// in earlier processing). They carry no intensity, so they are replaced by the lowest finite
/// value of the frame (the background side), and counted so the run can warn; otherwise a
/// NaN would spread through smoothing and an infinity would become a nucleus of infinite
/// brightness in the tables.
fn replace_nonfinite(raw: &Image) -> (std::borrow::Cow<'_, Image>, usize) {
    let count = raw.iter().filter(|v| !v.is_finite()).count();
    if count == 0 {
        return (std::borrow::Cow::Borrowed(raw), 0);
    }
    let floor = raw
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f32::INFINITY, f32::min);
    let floor = if floor.is_finite() { floor } else { 0.0 };
    let cleaned = raw.mapv(|v| if v.is_finite() { v } else { floor });
    (std::borrow::Cow::Owned(cleaned), count)
}

/// The threshold for one prepared frame. A frame without contrast (all one value) gets an
/// infinite threshold: nothing is foreground.
pub fn choose_threshold(values: &[f32], method: ThresholdMethod) -> f64 {
    if let ThresholdMethod::Fixed(t) = method {
        return t;
    }
    let Some(hist) = Histogram::of_f32(values, THRESHOLD_BINS) else {
        return f64::INFINITY;
    };
    if hist.counts.iter().filter(|&&c| c > 0).count() < 2 {
        return f64::INFINITY;
    }
    match method {
        ThresholdMethod::Otsu => threshold::otsu_threshold(&hist),
        ThresholdMethod::Triangle => threshold::triangle_threshold(&hist),
        ThresholdMethod::Li => threshold::li_threshold(&hist),
        ThresholdMethod::Fixed(t) => t,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn two_discs() -> Vec<bool> {
        // Source: METHODS.md §5, discs r=12 at (20,20) and r=10 at (20,38) in 40x60.
        let (w, h) = (60, 40);
        (0..w * h)
            .map(|i| {
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                (y - 20.0).powi(2) + (x - 20.0).powi(2) <= 144.0 || (y - 20.0).powi(2) + (x - 38.0).powi(2) <= 100.0
            })
            .collect()
    }

    fn sizes(labels: &[u32]) -> Vec<usize> {
        let top = *labels.iter().max().unwrap() as usize;
        (1..=top)
            .map(|l| labels.iter().filter(|&&v| v as usize == l).count())
            .collect()
    }

    #[test]
    fn two_overlapping_discs_split_below_the_neck_dynamic() {
        // Source: METHODS.md §5 (skimage 0.26): area 725; h = 1, 2, 3 give two objects of
        // 431 and 294 px; h = 4 gives one of 725 px. Tie lines may go either way, so sizes
        // are checked within a few pixels.
        let mask = two_discs();
        assert_eq!(mask.iter().filter(|&&m| m).count(), 725);
        for h in [1.0, 2.0, 3.0] {
            let s = sizes(&split_touching(&mask, 60, 40, h, 0.0));
            assert_eq!(s.len(), 2, "h={h}");
            assert!(
                (s[0] as i64 - 431).abs() <= 4 && (s[1] as i64 - 294).abs() <= 4,
                "h={h}: {s:?}"
            );
        }
        assert_eq!(sizes(&split_touching(&mask, 60, 40, 4.0, 0.0)), vec![725]);
    }

    #[test]
    fn uniform_frame_has_no_objects() {
        let img = Image::from_elem((32, 32), 100.0);
        let s = segment_frame(&img, 0, &SegmentParams::for_diameter(8.0));
        assert!(s.detections.is_empty());
    }
}
