//! Pixel size and frame interval, each with the source it came from. Precedence: the command
//! line, then OME-XML, then baseline TIFF resolution tags (pixel size only); otherwise the run
//! is uncalibrated and works in pixels and frames.

use serde::{Deserialize, Serialize};

/// Where a calibration value came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CalibrationSource {
    /// Given on the command line (wins over metadata).
    CommandLine,
    /// OME-XML `Pixels` attributes (PhysicalSizeX/Y, TimeIncrement).
    OmeXml,
    /// Median difference of OME-XML `Plane` DeltaT values.
    OmePlaneDeltaT,
    /// Baseline TIFF XResolution/YResolution with ResolutionUnit.
    ResolutionTags,
    /// Not known: the value is absent.
    Unknown,
}

/// Physical calibration of a recording.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    /// Micrometres per pixel (square pixels assumed; X is used).
    pub pixel_size_um: Option<f64>,
    /// Where `pixel_size_um` came from.
    pub pixel_size_source: CalibrationSource,
    /// Seconds between frames.
    pub frame_interval_s: Option<f64>,
    /// Where `frame_interval_s` came from.
    pub frame_interval_source: CalibrationSource,
}

impl Calibration {
    /// No calibration at all.
    pub fn unknown() -> Self {
        Calibration {
            pixel_size_um: None,
            pixel_size_source: CalibrationSource::Unknown,
            frame_interval_s: None,
            frame_interval_source: CalibrationSource::Unknown,
        }
    }

    /// Applies command-line values, which win over whatever the metadata said.
    pub fn with_overrides(mut self, pixel_size_um: Option<f64>, frame_interval_s: Option<f64>) -> Self {
        if let Some(p) = pixel_size_um {
            self.pixel_size_um = Some(p);
            self.pixel_size_source = CalibrationSource::CommandLine;
        }
        if let Some(t) = frame_interval_s {
            self.frame_interval_s = Some(t);
            self.frame_interval_source = CalibrationSource::CommandLine;
        }
        self
    }
}

/// Micrometres per pixel from an X resolution (pixels per unit) and a TIFF ResolutionUnit
/// (2 inch, 3 centimetre). TIFF 6.0 §"Resolution"; fixtures/methods/check_values.md §10: 10⁴/XRes for cm, 25 400/XRes
/// for inch. Unit 1 (none) carries no physical meaning and yields `None`.
pub fn pixel_size_from_resolution(pixels_per_unit: f64, unit: u16) -> Option<f64> {
    if !(pixels_per_unit.is_finite() && pixels_per_unit > 0.0) {
        return None;
    }
    match unit {
        2 => Some(25_400.0 / pixels_per_unit),
        3 => Some(10_000.0 / pixels_per_unit),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn resolution_tags_convert_to_micrometres() {
        // Source: fixtures/methods/check_values.md §10 example, XResolution 20000/1 per cm -> 0.5 µm.
        assert_eq!(pixel_size_from_resolution(20_000.0, 3), Some(0.5));
        // Source: 1 inch = 25 400 µm (definition of the inch).
        assert_eq!(pixel_size_from_resolution(25_400.0, 2), Some(1.0));
        assert_eq!(pixel_size_from_resolution(72.0, 1), None);
    }

    #[test]
    fn command_line_wins() {
        let c = Calibration {
            pixel_size_um: Some(0.5),
            pixel_size_source: CalibrationSource::OmeXml,
            ..Calibration::unknown()
        }
        .with_overrides(Some(0.65), Some(300.0));
        assert_eq!(c.pixel_size_um, Some(0.65));
        assert_eq!(c.pixel_size_source, CalibrationSource::CommandLine);
        assert_eq!(c.frame_interval_source, CalibrationSource::CommandLine);
    }
}
