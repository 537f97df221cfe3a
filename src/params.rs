//! Every tunable parameter: its default, unit, valid range and meaning. The command line builds
//! these structs; library users and tests build them directly. `validate()` refuses nonsense
//! before any work starts.

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::str::FromStr;

/// A length given either in pixels or in micrometres (`12px`, `8um`, `8µm`; a bare number is px).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "unit", content = "value")]
pub enum Length {
    /// Pixels.
    #[serde(rename = "px")]
    Pixels(f64),
    /// Micrometres; needs a pixel size to be used.
    #[serde(rename = "um")]
    Micrometres(f64),
}

impl Length {
    /// The length in pixels, given the pixel size when the length is physical.
    pub fn to_pixels(self, name: &str, pixel_size_um: Option<f64>) -> Result<f64> {
        match self {
            Length::Pixels(v) => Ok(v),
            Length::Micrometres(v) => match pixel_size_um {
                Some(s) => Ok(v / s),
                None => Err(Error::parameter(
                    name,
                    format!("{v}um"),
                    "a length in micrometres needs a pixel size: give --pixel-size or use px",
                )),
            },
        }
    }
}

impl FromStr for Length {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let t = s.trim();
        let (number, unit) = split_unit(t);
        let value: f64 = number
            .parse()
            .map_err(|_| format!("{s:?} is not a length such as 12px or 8um"))?;
        if !value.is_finite() || value <= 0.0 {
            return Err(format!("{s:?}: a length must be positive"));
        }
        match unit {
            "" | "px" => Ok(Length::Pixels(value)),
            "um" | "µm" | "μm" | "micron" => Ok(Length::Micrometres(value)),
            "nm" => Ok(Length::Micrometres(value * 1e-3)),
            "mm" => Ok(Length::Micrometres(value * 1e3)),
            other => Err(format!("{s:?}: unknown length unit {other:?} (use px or um)")),
        }
    }
}

/// A time interval in seconds, parsed from `300s`, `5min`, `0.5h`, `250ms` (a bare number is s).
pub fn parse_seconds(s: &str) -> std::result::Result<f64, String> {
    let (number, unit) = split_unit(s.trim());
    let value: f64 = number
        .parse()
        .map_err(|_| format!("{s:?} is not a time such as 300s or 5min"))?;
    if !value.is_finite() || value <= 0.0 {
        return Err(format!("{s:?}: a time interval must be positive"));
    }
    let factor =
        time_unit_seconds(unit).ok_or_else(|| format!("{s:?}: unknown time unit {unit:?} (use ms, s, min or h)"))?;
    Ok(value * factor)
}

/// A pixel size in micrometres from `0.65`, `0.65um`, `650nm`.
pub fn parse_pixel_size_um(s: &str) -> std::result::Result<f64, String> {
    match Length::from_str(s)? {
        Length::Micrometres(v) => Ok(v),
        Length::Pixels(v) if !s.trim().ends_with("px") => Ok(v),
        Length::Pixels(_) => Err(format!("{s:?}: a pixel size must be physical, e.g. 0.65um")),
    }
}

/// Seconds per unit for the time units we accept (OME-XML spellings included).
pub fn time_unit_seconds(unit: &str) -> Option<f64> {
    Some(match unit {
        "" | "s" | "sec" => 1.0,
        "ms" => 1e-3,
        "us" | "µs" | "μs" => 1e-6,
        "ns" => 1e-9,
        "min" => 60.0,
        "h" => 3600.0,
        _ => return None,
    })
}

/// Micrometres per unit for the length units we accept (OME-XML spellings included).
pub fn length_unit_um(unit: &str) -> Option<f64> {
    Some(match unit {
        "" | "um" | "µm" | "μm" | "micron" => 1.0,
        "nm" => 1e-3,
        "pm" => 1e-6,
        "Å" => 1e-4,
        "mm" => 1e3,
        "cm" => 1e4,
        "m" => 1e6,
        _ => return None,
    })
}

fn split_unit(t: &str) -> (&str, &str) {
    let cut = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.' || c == '-' || c == '+' || c == 'e' || c == 'E'))
        .unwrap_or(t.len());
    (t[..cut].trim(), t[cut..].trim())
}

/// How the foreground threshold is chosen for each frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase", tag = "method", content = "value")]
pub enum ThresholdMethod {
    /// Otsu (1979), maximum between-class variance.
    Otsu,
    /// Zack, Rogers & Latt (1977), triangle; suits sparse bright nuclei.
    Triangle,
    /// Li & Lee (1993) minimum cross-entropy, iterative.
    Li,
    /// A fixed value on the background-subtracted, smoothed image.
    Fixed(f64),
}

impl FromStr for ThresholdMethod {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.trim() {
            "otsu" => Ok(ThresholdMethod::Otsu),
            "triangle" => Ok(ThresholdMethod::Triangle),
            "li" => Ok(ThresholdMethod::Li),
            other => other
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .map(ThresholdMethod::Fixed)
                .ok_or_else(|| format!("{s:?}: expected otsu, triangle, li or a number (a fixed threshold)")),
        }
    }
}

/// How uneven illumination is removed before thresholding.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum BackgroundMethod {
    /// White top-hat: subtract a smoothed grey opening larger than a nucleus.
    Tophat,
    /// Keep the image as it is.
    None,
}

impl FromStr for BackgroundMethod {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.trim() {
            "tophat" => Ok(BackgroundMethod::Tophat),
            "none" => Ok(BackgroundMethod::None),
            _ => Err(format!("{s:?}: expected tophat or none")),
        }
    }
}

/// Parameters of per-frame segmentation, all lengths in pixels once resolved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SegmentParams {
    /// Typical nucleus diameter in pixels; everything else scales with it.
    pub diameter_px: f64,
    /// Threshold rule.
    pub threshold: ThresholdMethod,
    /// Background removal.
    pub background: BackgroundMethod,
    /// Gaussian smoothing sigma in pixels (default: diameter / 10, at least 1).
    pub smoothing_sigma_px: f64,
    /// Smallest dynamic of a seed, in pixels of (intensity-weighted) distance (default: 0.01 x
    /// diameter, at least 0.1; the frame's noise raises it where nuclei are dim, see
    /// `segment::split`).
    pub seed_h_px: f64,
    /// Gaussian sigma applied to the distance map before seeding (default: diameter / 14).
    pub distance_smoothing_px: f64,
    /// Objects smaller than this many pixels are dropped (default: 20% of a disc of the diameter).
    pub min_area_px: f64,
    /// Objects larger than this many pixels are dropped (default: 5 discs of the diameter).
    pub max_area_px: f64,
}

impl SegmentParams {
    /// Defaults derived from the nucleus diameter (in pixels).
    pub fn for_diameter(diameter_px: f64) -> Self {
        let disc = std::f64::consts::PI * diameter_px * diameter_px / 4.0;
        SegmentParams {
            diameter_px,
            threshold: ThresholdMethod::Otsu,
            background: BackgroundMethod::Tophat,
            smoothing_sigma_px: (diameter_px / 10.0).max(1.0),
            seed_h_px: (0.01 * diameter_px).max(0.1),
            distance_smoothing_px: diameter_px / 14.0,
            min_area_px: (0.2 * disc).max(4.0),
            max_area_px: 5.0 * disc,
        }
    }

    /// Refuses values that cannot give a meaningful segmentation.
    pub fn validate(&self) -> Result<()> {
        positive("--diameter", self.diameter_px)?;
        if self.diameter_px < 3.0 {
            return Err(Error::parameter(
                "--diameter",
                self.diameter_px,
                "nuclei under 3 px across cannot be segmented; image at higher magnification",
            ));
        }
        positive("--smoothing", self.smoothing_sigma_px)?;
        positive("--seed-h", self.seed_h_px)?;
        if !(self.distance_smoothing_px >= 0.0 && self.distance_smoothing_px.is_finite()) {
            return Err(Error::parameter(
                "distance_smoothing_px",
                self.distance_smoothing_px,
                "must be 0 or positive",
            ));
        }
        positive("--min-area", self.min_area_px)?;
        if self.max_area_px <= self.min_area_px {
            return Err(Error::parameter(
                "--max-area",
                self.max_area_px,
                format!("must exceed --min-area ({})", self.min_area_px),
            ));
        }
        Ok(())
    }
}

fn positive(name: &str, v: f64) -> Result<()> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(Error::parameter(name, v, "must be a positive number"))
    }
}

/// Options of the movie.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct MovieOptions {
    /// Longest side of the movie in pixels; larger recordings are downscaled by an integer factor.
    pub max_side_px: usize,
    /// Render every k-th frame.
    pub every: usize,
    /// Frames in the contact sheet.
    pub sheet_frames: usize,
    /// At most this many frames in the movie (0: no cap): longer recordings are sampled evenly,
    /// so that the movie stays a portable summary (the review page shows every frame).
    #[serde(default = "default_movie_frames")]
    pub max_frames: usize,
}

/// Frames a movie holds at most by default: at 512 px a side, ~12 MB of GIF.
pub const DEFAULT_MOVIE_FRAMES: usize = 120;

fn default_movie_frames() -> usize {
    DEFAULT_MOVIE_FRAMES
}

impl MovieOptions {
    /// The step between movie frames for a recording of `frames`: `every`, or more where the
    /// cap asks for it.
    pub fn step(&self, frames: usize) -> usize {
        let capped = if self.max_frames == 0 {
            1
        } else {
            frames.div_ceil(self.max_frames)
        };
        self.every.max(capped).max(1)
    }

    /// The integer factor a `width` x `height` recording is downscaled by for the movie (1:
    /// not downscaled): the least that brings the longest side to `max_side_px` or below.
    pub fn factor(&self, width: usize, height: usize) -> usize {
        width.max(height).div_ceil(self.max_side_px.max(16)).max(1)
    }
}

impl Default for MovieOptions {
    fn default() -> Self {
        MovieOptions {
            max_side_px: 512,
            every: 1,
            sheet_frames: 12,
            max_frames: DEFAULT_MOVIE_FRAMES,
        }
    }
}

/// Options of the review page (`review/`, see `render::review`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct ReviewOptions {
    /// Longest side of the display frames, px (larger recordings are downscaled by an integer
    /// factor; full resolution is kept for some frames).
    pub display_side_px: usize,
}

impl Default for ReviewOptions {
    fn default() -> Self {
        ReviewOptions { display_side_px: 512 }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_movie_is_capped_by_sampling_frames() {
        // 400 frames under the default cap of 120: every 4th frame, 100 in the movie.
        let movie = MovieOptions::default();
        assert_eq!(movie.step(400), 4);
        assert_eq!(400usize.div_ceil(movie.step(400)), 100);
        assert_eq!(movie.step(100), 1);
        let uncapped = MovieOptions {
            max_frames: 0,
            every: 3,
            ..movie
        };
        assert_eq!(uncapped.step(5000), 3);
    }

    #[test]
    fn lengths_and_times_parse_with_units() {
        assert_eq!("12px".parse::<Length>(), Ok(Length::Pixels(12.0)));
        assert_eq!("12".parse::<Length>(), Ok(Length::Pixels(12.0)));
        assert_eq!("8um".parse::<Length>(), Ok(Length::Micrometres(8.0)));
        assert_eq!("8 µm".parse::<Length>(), Ok(Length::Micrometres(8.0)));
        assert!("8 furlong".parse::<Length>().is_err());
        assert!("-3px".parse::<Length>().is_err());
        assert!("0".parse::<Length>().is_err());
        // Unit arithmetic, by definition of the units.
        assert_eq!(parse_seconds("5min"), Ok(300.0));
        assert_eq!(parse_seconds("0.5h"), Ok(1800.0));
        assert_eq!(parse_seconds("250ms"), Ok(0.25));
        assert!(parse_seconds("5 fortnights").is_err());
        assert_eq!(parse_pixel_size_um("650nm"), Ok(0.65));
        assert!(parse_pixel_size_um("3px").is_err());
    }

    #[test]
    fn micrometre_lengths_need_a_pixel_size() {
        let d = Length::Micrometres(10.0);
        assert_eq!(d.to_pixels("--diameter", Some(0.5)).unwrap(), 20.0);
        assert!(d.to_pixels("--diameter", None).is_err());
    }

    #[test]
    fn nonsense_segment_parameters_are_refused() {
        let mut p = SegmentParams::for_diameter(14.0);
        assert!(p.validate().is_ok());
        p.max_area_px = p.min_area_px;
        assert!(p.validate().is_err());
        assert!(SegmentParams::for_diameter(2.0).validate().is_err());
    }
}
