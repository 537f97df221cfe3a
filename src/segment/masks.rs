//! Segmentation the user brings: label masks (a stack, or a folder of label images, one per
//! frame, 8-, 16- or 32-bit, or float holding whole numbers) instead of thresholding. Every
//! non-zero label is one object, measured on the recording's intensities as segmentation's
//! own objects are; labels need not be consecutive.

use super::label::Foreground;
use super::measure::measure_objects;
use super::{FrameSegmentation, SizeFilterCounts};
use crate::error::{Error, Result};
use crate::image2d::Image;
use crate::stack::{Frame, OpenOptions, Pixels, Stack, StackInfo};
use std::collections::HashMap;
use std::path::Path;

/// Opens the masks at `path` for `recording`: refused (naming the file) unless they have the
/// recording's width, height and number of frames.
///
/// # Errors
/// Unreadable masks, or masks of another size or length.
pub fn open_masks(path: &Path, recording: &StackInfo) -> Result<Stack> {
    let masks = Stack::open(path, &OpenOptions::default())?;
    let m = masks.info();
    if (m.width, m.height) != (recording.width, recording.height) {
        return Err(Error::input(
            path,
            format!(
                "masks are {}x{} but the recording {} is {}x{}",
                m.width,
                m.height,
                recording.path.display(),
                recording.width,
                recording.height
            ),
        ));
    }
    if m.frames != recording.frames {
        return Err(Error::input(
            path,
            format!(
                "{} mask frames for the {} frames of {}",
                m.frames,
                recording.frames,
                recording.path.display()
            ),
        ));
    }
    Ok(masks)
}

/// The labels of one mask frame.
///
/// # Errors
/// A float mask holding a negative or non-whole value (naming the file and frame).
pub fn mask_labels(mask: &Frame, path: &Path) -> Result<Vec<u32>> {
    Ok(match &mask.pixels {
        Pixels::U8(v) => v.iter().map(|&p| u32::from(p)).collect(),
        Pixels::U16(v) => v.iter().map(|&p| u32::from(p)).collect(),
        Pixels::U32(v) => v.clone(),
        Pixels::F32(v) => v
            .iter()
            .map(|&p| (p >= 0.0 && p.fract() == 0.0 && p <= u32::MAX as f32).then_some(p as u32))
            .collect::<Option<Vec<u32>>>()
            .ok_or_else(|| Error::input_at(path, mask.index, "a float mask must hold whole, non-negative labels"))?,
    })
}

/// One frame segmented by its mask: the labels renumbered 1, 2, … in the raster order of
/// each object's first pixel (as segmentation numbers its own), each object measured on
/// `raw` (without `intensities`, its intensities are left undefined, NaN, and written as empty
/// cells). Nothing is dropped or cut: the masks are the user's.
pub fn segment_from_mask(mask: &[u32], raw: &Image, frame: usize, intensities: bool) -> FrameSegmentation {
    let (h, w) = raw.dim();
    let mut renumber: HashMap<u32, u32> = HashMap::new();
    let mut foreground = Foreground::default();
    for (i, &m) in mask.iter().enumerate().filter(|(_, &m)| m != 0) {
        let next = renumber.len() as u32 + 1;
        foreground.labels.push(*renumber.entry(m).or_insert(next));
        foreground.pixels.push(i as u32);
    }
    let labels = foreground.label_image(mask.len());
    let count = renumber.len() as u32;
    let intensity = raw.as_slice().expect("standard layout");
    let mut detections = measure_objects(&foreground, count, intensity, w, h, frame);
    if !intensities {
        for d in &mut detections {
            d.mean_intensity = f64::NAN;
            d.total_intensity = f64::NAN;
        }
    }
    FrameSegmentation {
        frame,
        threshold: f64::NAN,
        detections,
        labels,
        nonfinite_pixels: intensity.iter().filter(|v| !v.is_finite()).count(),
        size_filter: SizeFilterCounts::default(),
        content_crc32: None,
        movie: None,
        object_pixels: None,
    }
}

/// The equivalent diameter (of the disc of the same area) of every object of a label image.
pub fn equivalent_diameters(labels: &[u32]) -> Vec<f64> {
    let mut areas: HashMap<u32, usize> = HashMap::new();
    for &l in labels.iter().filter(|&&l| l != 0) {
        *areas.entry(l).or_default() += 1;
    }
    let mut sorted: Vec<(u32, usize)> = areas.into_iter().collect();
    sorted.sort_unstable();
    sorted
        .into_iter()
        .map(|(_, a)| 2.0 * (a as f64 / std::f64::consts::PI).sqrt())
        .collect()
}

/// The nucleus diameter of the masks: the median equivalent diameter of the objects of up to
/// ten frames spread over the recording, with the number of objects measured.
///
/// # Errors
/// Unreadable masks, or masks without any object in those frames.
pub fn diameter_from_masks(masks: &mut Stack) -> Result<(f64, usize)> {
    let info = masks.info().clone();
    let picks: Vec<usize> = (0..10.min(info.frames))
        .map(|k| k * info.frames / 10.min(info.frames))
        .collect();
    let mut diameters = Vec::new();
    for t in picks {
        let frame = masks.read_frame(t)?;
        diameters.extend(equivalent_diameters(&mask_labels(&frame, &info.path)?));
    }
    let n = diameters.len();
    crate::numeric::median(&mut diameters).map(|d| (d, n)).ok_or_else(|| {
        Error::input(
            &info.path,
            "the masks hold no object in the frames sampled for the diameter",
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_need_not_be_consecutive() {
        // Construction: a 6 x 4 mask with labels 900 (two pixels, top left) and 5 (three
        // pixels, bottom right): renumbered 1 and 2 in raster order of their first pixels,
        // measured as objects of 2 and 3 pixels, their centroids (0.5, 0) and (4, 3).
        let mut mask = vec![0u32; 24];
        mask[0] = 900;
        mask[1] = 900;
        for i in [21, 22, 23] {
            mask[i] = 5;
        }
        let raw = crate::image2d::from_vec(6, 4, vec![10.0; 24]);
        let seg = segment_from_mask(&mask, &raw, 3, true);
        assert_eq!(seg.labels[0], 1);
        assert_eq!(seg.labels[23], 2);
        let d = &seg.detections;
        assert_eq!((d.len(), d[0].area_px, d[1].area_px), (2, 2.0, 3.0));
        assert_eq!((d[0].x, d[0].y, d[1].x, d[1].y), (0.5, 0.0, 4.0, 3.0));
        assert_eq!((d[0].frame, d[0].total_intensity), (3, 20.0));
    }
}
