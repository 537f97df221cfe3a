//! OME-XML in the first ImageDescription: dimensions, the plane-to-page mapping, and
//! calibration. Elements are matched by local name, so older schema namespaces work too.
//!
//! # Standard
//! OME-TIFF specification and OME-XML schema 2016-06 (Open Microscopy Environment): IFD order
//! follows `DimensionOrder`, the first letter after `XY` varying fastest; `TiffData` blocks map
//! runs of planes to runs of IFDs; unit defaults are µm and s.

use crate::params::{length_unit_um, time_unit_seconds};

/// A plane coordinate (Z, C, T), all 0-based.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PlaneIndex {
    /// Z plane.
    pub z: usize,
    /// Channel.
    pub c: usize,
    /// Time point.
    pub t: usize,
}

/// A `TiffData` element: `plane_count` planes starting at `first` live in consecutive IFDs
/// starting at `ifd`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct TiffData {
    ifd: usize,
    first: PlaneIndex,
    plane_count: Option<usize>,
}

/// What Caravan uses from the OME `Pixels` element.
#[derive(Debug, Clone, PartialEq)]
pub struct OmePixels {
    /// One of XYZCT, XYZTC, XYCTZ, XYCZT, XYTCZ, XYTZC.
    pub dimension_order: String,
    /// Columns.
    pub size_x: usize,
    /// Rows.
    pub size_y: usize,
    /// Z planes.
    pub size_z: usize,
    /// Channels.
    pub size_c: usize,
    /// Time points.
    pub size_t: usize,
    /// PhysicalSizeX in µm, when given.
    pub physical_size_x_um: Option<f64>,
    /// PhysicalSizeY in µm, when given.
    pub physical_size_y_um: Option<f64>,
    /// TimeIncrement in s, when given.
    pub time_increment_s: Option<f64>,
    /// Median difference of consecutive Plane DeltaT values (first Z, first C), in s.
    pub median_delta_t_s: Option<f64>,
    tiff_data: Vec<TiffData>,
}

impl OmePixels {
    /// Parses an ImageDescription; `Ok(None)` when it is not OME-XML.
    ///
    /// # Errors
    /// A message when the text is OME-XML but malformed or inconsistent.
    pub fn parse(description: &str) -> Result<Option<OmePixels>, String> {
        let text = description.trim_end_matches('\0').trim();
        if !text.starts_with('<') || !text.contains("OME") {
            return Ok(None);
        }
        let doc = roxmltree::Document::parse(text).map_err(|e| format!("OME-XML does not parse: {e}"))?;
        let Some(pixels) = doc.descendants().find(|n| n.tag_name().name() == "Pixels") else {
            return Ok(None);
        };
        let order = pixels.attribute("DimensionOrder").unwrap_or("XYZCT").to_string();
        if !is_dimension_order(&order) {
            return Err(format!(
                "OME-XML DimensionOrder {order:?} is not one of the six the standard allows"
            ));
        }
        let size = |name: &str| -> Result<usize, String> {
            match pixels.attribute(name) {
                None => Ok(1),
                Some(v) => v
                    .trim()
                    .parse::<usize>()
                    .ok()
                    .filter(|&n| n > 0)
                    .ok_or_else(|| format!("OME-XML {name}={v:?} is not a positive integer")),
            }
        };
        let physical_size_x_um = physical(
            pixels.attribute("PhysicalSizeX"),
            pixels.attribute("PhysicalSizeXUnit"),
            "PhysicalSizeX",
            length_unit_um,
        )?;
        let physical_size_y_um = physical(
            pixels.attribute("PhysicalSizeY"),
            pixels.attribute("PhysicalSizeYUnit"),
            "PhysicalSizeY",
            length_unit_um,
        )?;
        let time_increment_s = physical(
            pixels.attribute("TimeIncrement"),
            pixels.attribute("TimeIncrementUnit"),
            "TimeIncrement",
            time_unit_seconds,
        )?;
        let mut ome = OmePixels {
            dimension_order: order,
            size_x: size("SizeX")?,
            size_y: size("SizeY")?,
            size_z: size("SizeZ")?,
            size_c: size("SizeC")?,
            size_t: size("SizeT")?,
            physical_size_x_um,
            physical_size_y_um,
            time_increment_s,
            median_delta_t_s: None,
            tiff_data: Vec::new(),
        };
        ome.median_delta_t_s = median_delta_t(&pixels)?;
        for td in pixels.children().filter(|n| n.tag_name().name() == "TiffData") {
            let get = |name: &str| -> Result<Option<usize>, String> {
                td.attribute(name)
                    .map(|v| {
                        v.trim()
                            .parse::<usize>()
                            .map_err(|_| format!("OME-XML TiffData {name}={v:?} is not an integer"))
                    })
                    .transpose()
            };
            ome.tiff_data.push(TiffData {
                ifd: get("IFD")?.unwrap_or(0),
                first: PlaneIndex {
                    z: get("FirstZ")?.unwrap_or(0),
                    c: get("FirstC")?.unwrap_or(0),
                    t: get("FirstT")?.unwrap_or(0),
                },
                plane_count: match get("PlaneCount")? {
                    Some(n) => Some(n),
                    // Spec: PlaneCount defaults to 1 when IFD is given, else to all planes.
                    None if td.attribute("IFD").is_some() => Some(1),
                    None => None,
                },
            });
        }
        Ok(Some(ome))
    }

    /// Linear plane number of `p` in DimensionOrder (first letter after XY fastest).
    pub fn plane_number(&self, p: PlaneIndex) -> usize {
        let mut number = 0;
        let mut stride = 1;
        for axis in self.dimension_order[2..].chars() {
            let (value, size) = match axis {
                'Z' => (p.z, self.size_z),
                'C' => (p.c, self.size_c),
                _ => (p.t, self.size_t),
            };
            number += value * stride;
            stride *= size;
        }
        number
    }

    /// An error message when pixels are not square (X and Y sizes differ by more than 1%):
    /// every length Caravan reports assumes square pixels.
    pub fn non_square(&self) -> Option<String> {
        let (x, y) = (self.physical_size_x_um?, self.physical_size_y_um?);
        ((x - y).abs() > 0.01 * x.max(y)).then(|| {
            format!("has non-square pixels ({x} x {y} µm); Caravan assumes square pixels: resample, or give --pixel-size to accept one size for both axes")
        })
    }

    /// Total planes declared.
    pub fn plane_total(&self) -> usize {
        self.size_z * self.size_c * self.size_t
    }

    /// The IFD holding plane `p`, following TiffData blocks when present.
    pub fn ifd_of(&self, p: PlaneIndex) -> Option<usize> {
        let n = self.plane_number(p);
        if self.tiff_data.is_empty() {
            return Some(n);
        }
        self.tiff_data.iter().find_map(|td| {
            let first = self.plane_number(td.first);
            let count = td
                .plane_count
                .unwrap_or(self.plane_total() - first.min(self.plane_total()));
            (n >= first && n < first + count).then(|| td.ifd + (n - first))
        })
    }
}

fn is_dimension_order(s: &str) -> bool {
    matches!(s, "XYZCT" | "XYZTC" | "XYCTZ" | "XYCZT" | "XYTCZ" | "XYTZC")
}

fn physical(
    value: Option<&str>,
    unit: Option<&str>,
    name: &str,
    factor: fn(&str) -> Option<f64>,
) -> Result<Option<f64>, String> {
    let Some(v) = value else { return Ok(None) };
    let number: f64 = v
        .trim()
        .parse()
        .ok()
        .filter(|x: &f64| x.is_finite() && *x > 0.0)
        .ok_or_else(|| format!("OME-XML {name}={v:?} is not a positive number"))?;
    let unit = unit.unwrap_or("").trim();
    let f = factor(unit).ok_or_else(|| format!("OME-XML {name}Unit={unit:?} is not a unit Caravan knows"))?;
    Ok(Some(number * f))
}

fn median_delta_t(pixels: &roxmltree::Node) -> Result<Option<f64>, String> {
    let mut times: Vec<(usize, f64)> = Vec::new();
    for plane in pixels.children().filter(|n| n.tag_name().name() == "Plane") {
        let first = |a: &str| plane.attribute(a).map(|v| v.trim() == "0").unwrap_or(true);
        if !(first("TheZ") && first("TheC")) {
            continue;
        }
        let (Some(t), Some(dt)) = (plane.attribute("TheT"), plane.attribute("DeltaT")) else {
            continue;
        };
        let (Ok(t), Ok(dt)) = (t.trim().parse::<usize>(), dt.trim().parse::<f64>()) else {
            continue;
        };
        let unit = plane.attribute("DeltaTUnit").unwrap_or("s");
        let f = time_unit_seconds(unit)
            .ok_or_else(|| format!("OME-XML DeltaTUnit={unit:?} is not a unit Caravan knows"))?;
        times.push((t, dt * f));
    }
    times.sort_by_key(|a| a.0);
    let mut diffs: Vec<f64> = times
        .windows(2)
        .filter(|w| w[1].0 == w[0].0 + 1)
        .map(|w| w[1].1 - w[0].1)
        .filter(|d| d.is_finite() && *d > 0.0)
        .collect();
    if diffs.is_empty() {
        return Ok(None);
    }
    diffs.sort_by(f64::total_cmp);
    let m = diffs.len();
    Ok(Some(if m % 2 == 1 {
        diffs[m / 2]
    } else {
        0.5 * (diffs[m / 2 - 1] + diffs[m / 2])
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pixels(attrs: &str, inner: &str) -> OmePixels {
        let xml = format!(
            r#"<?xml version="1.0"?><OME xmlns="http://www.openmicroscopy.org/Schemas/OME/2016-06"><Image ID="Image:0"><Pixels ID="Pixels:0" Type="uint16" SizeX="4" SizeY="3" {attrs}>{inner}</Pixels></Image></OME>"#
        );
        OmePixels::parse(&xml).unwrap().unwrap()
    }

    #[test]
    fn ifd_order_follows_dimension_order() {
        // Source: fixtures/methods/check_values.md §10, checks from OME-TIFF spec fragments.
        let p = pixels(r#"DimensionOrder="XYZTC" SizeZ="3" SizeT="2" SizeC="2""#, "<TiffData/>");
        assert_eq!(p.ifd_of(PlaneIndex { z: 1, t: 1, c: 0 }), Some(4));
        assert_eq!(p.ifd_of(PlaneIndex { z: 0, t: 0, c: 1 }), Some(6));
        let p = pixels(
            r#"DimensionOrder="XYCTZ" SizeZ="4" SizeT="3" SizeC="2""#,
            r#"<TiffData PlaneCount="10"/>"#,
        );
        assert_eq!(p.ifd_of(PlaneIndex { z: 1, t: 1, c: 1 }), Some(9));
        let p = pixels(
            r#"DimensionOrder="XYZTC" SizeZ="4" SizeT="2" SizeC="1""#,
            r#"<TiffData IFD="3" PlaneCount="5"/>"#,
        );
        assert_eq!(p.ifd_of(PlaneIndex { z: 0, t: 1, c: 0 }), Some(7));
    }

    #[test]
    fn calibration_units_convert() {
        // Source: OME units (defaults µm and s); 1 min = 60 s, 1 nm = 1e-3 µm by definition.
        let p = pixels(
            r#"PhysicalSizeX="650" PhysicalSizeXUnit="nm" TimeIncrement="5" TimeIncrementUnit="min""#,
            "",
        );
        assert!((p.physical_size_x_um.unwrap() - 0.65).abs() < 1e-12);
        assert_eq!(p.time_increment_s, Some(300.0));
        let p = pixels(r#"PhysicalSizeX="0.5" PhysicalSizeXUnit="μm""#, "");
        assert_eq!(p.physical_size_x_um, Some(0.5));
    }

    #[test]
    fn non_square_pixels_are_noticed() {
        let p = pixels(r#"PhysicalSizeX="0.5" PhysicalSizeY="0.65""#, "");
        assert!(p.non_square().unwrap().contains("non-square"));
        assert_eq!(
            pixels(r#"PhysicalSizeX="0.5" PhysicalSizeY="0.502""#, "").non_square(),
            None
        );
        assert_eq!(pixels(r#"PhysicalSizeX="0.5""#, "").non_square(), None);
    }

    #[test]
    fn median_of_plane_delta_t() {
        let planes = r#"<Plane TheT="0" TheZ="0" TheC="0" DeltaT="0"/><Plane TheT="1" TheZ="0" TheC="0" DeltaT="120"/><Plane TheT="2" TheZ="0" TheC="0" DeltaT="250"/><Plane TheT="3" TheZ="0" TheC="0" DeltaT="360"/>"#;
        let p = pixels(r#"SizeT="4""#, planes);
        // Differences 120, 130, 110 -> median 120 s.
        assert_eq!(p.median_delta_t_s, Some(120.0));
        let planes_ms =
            r#"<Plane TheT="0" DeltaT="0" DeltaTUnit="ms"/><Plane TheT="1" DeltaT="1500" DeltaTUnit="ms"/>"#;
        assert_eq!(pixels(r#"SizeT="2""#, planes_ms).median_delta_t_s, Some(1.5));
    }

    #[test]
    fn bad_units_and_non_ome_text() {
        let xml =
            r#"<OME><Image><Pixels SizeX="2" SizeY="2" PhysicalSizeX="1" PhysicalSizeXUnit="furlong"/></Image></OME>"#;
        assert!(OmePixels::parse(xml).unwrap_err().contains("furlong"));
        assert_eq!(OmePixels::parse("written by a microscope").unwrap(), None);
        assert!(OmePixels::parse("<OME><broken").is_err());
    }
}
