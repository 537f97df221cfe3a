//! The geometry a confined migration is measured against: a lane (the band between two lines
//! parallel to the axis of migration) and a border (a region cells should not enter, from a
//! mask image or a polygon), with coordinates along and across the axis and the signed
//! distance of any point to the border. Everything in analysis units.

use super::table::{polygon_contains, Region};
use crate::error::{Error, Result};
use crate::segment::distance_transform::squared_edt;
use crate::stack::{OpenOptions, Stack};
use serde::Serialize;
use std::path::Path;

/// Coordinates along the axis of migration and across it (rotated by the axis angle; across
/// is +90° from along, i.e. toward +y for an axis along +x).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Axes {
    /// The axis, degrees from +x toward +y.
    pub axis_deg: f64,
}

impl Axes {
    /// `(along, across)` of a point.
    pub fn project(&self, x: f64, y: f64) -> (f64, f64) {
        let (s, c) = self.axis_deg.to_radians().sin_cos();
        (x * c + y * s, -x * s + y * c)
    }
}

/// A lane: the band whose across-axis coordinate lies between `from` and `to`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Lane {
    /// Lower edge, across the axis (analysis units).
    pub from: f64,
    /// Upper edge.
    pub to: f64,
}

impl Lane {
    /// Parses `A,B` (across-axis positions of the two edges, multiplied by `scale` to reach
    /// analysis units); the edges may come in either order but must differ.
    pub fn parse(text: &str, scale: f64) -> std::result::Result<Lane, String> {
        let v: Vec<f64> = text
            .split(',')
            .map(|s| s.trim().parse::<f64>().ok().filter(|v| v.is_finite()))
            .collect::<Option<Vec<f64>>>()
            .ok_or_else(|| format!("{text:?}: expected two numbers A,B"))?;
        match v[..] {
            [a, b] if a != b => Ok(Lane {
                from: a.min(b) * scale,
                to: a.max(b) * scale,
            }),
            _ => Err(format!("{text:?}: expected two different numbers A,B")),
        }
    }

    /// Width of the lane.
    pub fn width(&self) -> f64 {
        self.to - self.from
    }
}

/// A region cells should not enter, as the signed distance to its edge: positive outside
/// (where cells are), negative inside.
#[derive(Debug, Clone, Serialize)]
pub struct Border {
    /// Where it came from: the mask's path or the polygon as given.
    pub source: String,
    #[serde(skip)]
    shape: BorderShape,
}

#[derive(Debug, Clone)]
enum BorderShape {
    /// A polygon's vertices in analysis units.
    Polygon(Vec<[f64; 2]>),
    /// Signed distances at pixel centres (analysis units), row-major, and the analysis units
    /// per pixel.
    Mask {
        width: usize,
        height: usize,
        signed: Vec<f64>,
        length_per_px: f64,
    },
}

impl Border {
    /// Reads `--border`: `poly:x,y;x,y;x,y` (coordinates times `scale` give analysis units)
    /// or the path of a mask TIFF whose non-zero pixels are the region (its first frame;
    /// pixel coordinates times `length_per_px` give analysis units).
    ///
    /// # Errors
    /// A polygon that does not parse, a mask that cannot be read or holds no region pixel.
    pub fn parse(text: &str, scale: f64, length_per_px: f64) -> Result<Border> {
        if text.starts_with("poly:") {
            return match Region::parse(text, scale) {
                Ok(Region::Polygon(v)) => Ok(Border {
                    source: text.to_string(),
                    shape: BorderShape::Polygon(v),
                }),
                Ok(_) => Err(Error::parameter("--border", text, "expected poly:x,y;x,y;x,y")),
                Err(e) => Err(Error::parameter("--border", text, e)),
            };
        }
        Border::from_mask(Path::new(text), length_per_px)
    }

    fn from_mask(path: &Path, length_per_px: f64) -> Result<Border> {
        let mut stack = Stack::open(path, &OpenOptions::default())?;
        let frame = stack.read_frame(0)?;
        let inside: Vec<bool> = frame.pixels.to_f32().iter().map(|&v| v != 0.0).collect();
        if !inside.iter().any(|&b| b) {
            return Err(Error::input(path, "the border mask has no non-zero pixel"));
        }
        let signed = signed_distance(&inside, frame.width, frame.height)
            .into_iter()
            .map(|d| d * length_per_px)
            .collect();
        Ok(Border {
            source: path.display().to_string(),
            shape: BorderShape::Mask {
                width: frame.width,
                height: frame.height,
                signed,
                length_per_px,
            },
        })
    }

    /// Signed distance of `(x, y)` (analysis units) to the border: positive outside the
    /// region, negative inside. A mask gives the value at the nearest pixel centre (points
    /// beyond the image take the nearest edge pixel's).
    pub fn signed_distance(&self, x: f64, y: f64) -> f64 {
        match &self.shape {
            BorderShape::Polygon(v) => polygon_signed_distance(v, x, y),
            BorderShape::Mask {
                width,
                height,
                signed,
                length_per_px,
            } => {
                let col = (x / length_per_px).round().clamp(0.0, (*width - 1) as f64) as usize;
                let row = (y / length_per_px).round().clamp(0.0, (*height - 1) as f64) as usize;
                signed[row * width + col]
            }
        }
    }
}

/// Distance to the nearest polygon edge (point-to-segment distances), negative inside (the
/// crossing test of [`polygon_contains`]).
fn polygon_signed_distance(v: &[[f64; 2]], x: f64, y: f64) -> f64 {
    let edges = v.iter().zip(v.iter().cycle().skip(1));
    let nearest = edges
        .map(|(a, b)| {
            let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
            let t = (((x - a[0]) * dx + (y - a[1]) * dy) / (dx * dx + dy * dy).max(1e-300)).clamp(0.0, 1.0);
            (x - a[0] - t * dx).hypot(y - a[1] - t * dy)
        })
        .fold(f64::INFINITY, f64::min);
    if polygon_contains(v, x, y) {
        -nearest
    } else {
        nearest
    }
}

/// Signed distance of every pixel centre to the region's edge, in pixels: outside, the
/// distance to the nearest region pixel minus ½; inside, minus (the distance to the nearest
/// pixel outside minus ½), so the edge between two pixels lies at 0. Both distances by the
/// exact transform of [`crate::segment::distance_transform::squared_edt`] (Felzenszwalb &
/// Huttenlocher 2012).
pub fn signed_distance(inside: &[bool], width: usize, height: usize) -> Vec<f64> {
    let outside: Vec<bool> = inside.iter().map(|&b| !b).collect();
    let to_region = squared_edt(&outside, width, height, (1.0, 1.0));
    let to_outside = squared_edt(inside, width, height, (1.0, 1.0));
    (0..inside.len())
        .map(|i| {
            if inside[i] {
                -(to_outside[i].sqrt() - 0.5)
            } else {
                to_region[i].sqrt() - 0.5
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn signed_distances_match_brute_force() {
        // Source: the definition (minimum Euclidean distance between pixel centres, less ½),
        // by brute force over a 13 x 9 grid whose region is three pixels.
        let (w, h) = (13, 9);
        let region = [(2usize, 3usize), (10, 1), (7, 8)];
        let mut inside = vec![false; w * h];
        for &(x, y) in &region {
            inside[y * w + x] = true;
        }
        let s = signed_distance(&inside, w, h);
        for y in 0..h {
            for x in 0..w {
                let want = if inside[y * w + x] {
                    -0.5
                } else {
                    region
                        .iter()
                        .map(|&(rx, ry)| (x as f64 - rx as f64).hypot(y as f64 - ry as f64))
                        .fold(f64::INFINITY, f64::min)
                        - 0.5
                };
                assert!(
                    (s[y * w + x] - want).abs() < 1e-12,
                    "({x},{y}) {} vs {want}",
                    s[y * w + x]
                );
            }
        }
    }

    #[test]
    fn signed_distance_of_a_half_plane_and_a_square() {
        // Construction: the right half (x >= 10) of a 20-wide mask: the edge lies at x = 9.5,
        // so pixel x = 4 is 5.5 outside and x = 12 is 2.5 inside. A unit square polygon: the
        // point (0.5, 0.25) is 0.25 inside, (3, 0.5) is 2 outside (geometry).
        let (w, h) = (20, 5);
        let inside: Vec<bool> = (0..w * h).map(|i| i % w >= 10).collect();
        let s = signed_distance(&inside, w, h);
        assert!((s[2 * w + 4] - 5.5).abs() < 1e-12 && (s[2 * w + 12] + 2.5).abs() < 1e-12);
        let square = Border::parse("poly:0,0;1,0;1,1;0,1", 1.0, 1.0).unwrap();
        assert!((square.signed_distance(0.5, 0.25) + 0.25).abs() < 1e-12);
        assert!((square.signed_distance(3.0, 0.5) - 2.0).abs() < 1e-12);
    }

    #[test]
    fn along_and_across_an_axis() {
        // Trigonometry: along an axis at 90° (+y), the point (3, 4) is 4 along and −3 across.
        let (along, across) = Axes { axis_deg: 90.0 }.project(3.0, 4.0);
        assert!((along - 4.0).abs() < 1e-12 && (across + 3.0).abs() < 1e-12);
        let lane = Lane::parse("30, 10", 0.5).unwrap();
        assert_eq!((lane.from, lane.to, lane.width()), (5.0, 15.0, 10.0));
        assert!(Lane::parse("3,3", 1.0).is_err() && Lane::parse("3", 1.0).is_err());
    }
}
