//! Time repairs segmentation: an object that two tracks enter is two nuclei segmented as one,
//! and is split where the tracks say they are.

use crate::tracks::Detection;

/// The object's area over the two nuclei's summed areas must lie in this range for the
/// object to be taken as the two of them (our own bounds: two touching nuclei segmented as one
/// cover about their summed area; the margin leaves room for size noise and for the seam
/// pixels a merge adds).
pub const SHARED_AREA_RATIO: (f64, f64) = (0.7, 1.35);

/// A live track as the repair sees it: where it is predicted in the new frame and the area
/// of its last single nucleus.
#[derive(Debug, Clone, Copy)]
pub struct Expected {
    /// Predicted position in the new frame, px.
    pub predicted: [f64; 2],
    /// Area of the track's last single nucleus, px.
    pub area_px: f64,
}

/// Splits every detection that exactly two tracks enter: both predictions inside its
/// moment-equivalent ellipse, its area near the sum of theirs (within
/// [`SHARED_AREA_RATIO`]), neither track claimed by another object. Each such object is
/// replaced by two detections (see [`split_between`]) that keep its label, so both tracks go
/// on through the merge instead of one ending. Objects no track pair enters are left as
/// they are; in particular two objects are never joined because one track lies between them.
/// Returns the detections and how many objects were split.
pub fn split_shared_objects(detections: Vec<Detection>, tracks: &[Expected]) -> (Vec<Detection>, usize) {
    let mut claimed = vec![false; tracks.len()];
    let mut out = Vec::with_capacity(detections.len() + 4);
    let mut splits = 0;
    for d in detections {
        let inside: Vec<usize> = (0..tracks.len())
            .filter(|&k| !claimed[k] && inside_ellipse(&d, tracks[k].predicted))
            .collect();
        let pair = match inside[..] {
            [a, b] => Some([a, b]),
            _ => None,
        };
        let halves = pair.and_then(|[a, b]| {
            let total = tracks[a].area_px + tracks[b].area_px;
            let ratio = d.area_px / total;
            let fits = ratio >= SHARED_AREA_RATIO.0 && ratio <= SHARED_AREA_RATIO.1;
            fits.then(|| split_between(&d, [tracks[a], tracks[b]]))
                .flatten()
                .map(|h| (h, [a, b]))
        });
        match halves {
            Some((h, [a, b])) => {
                claimed[a] = true;
                claimed[b] = true;
                splits += 1;
                out.extend(h);
            }
            None => out.push(d),
        }
    }
    (out, splits)
}

/// Whether `p` lies inside the detection's moment-equivalent ellipse (axes as measured).
fn inside_ellipse(d: &Detection, p: [f64; 2]) -> bool {
    let (dx, dy) = (p[0] - d.x, p[1] - d.y);
    let (s, c) = d.orientation_deg.to_radians().sin_cos();
    let along = (dx * c + dy * s) / (d.major_axis_px / 2.0);
    let across = (-dx * s + dy * c) / (d.minor_axis_px / 2.0).max(1e-9);
    along * along + across * across <= 1.0
}

/// Two detections for the two nuclei of one object, in the order of `parts`: area and total
/// intensity shared in proportion to the parts' areas `w1, w2`, centres whose weighted mean is
/// the object's centroid.
///
/// Where the object is elongated along the line between the two predictions (major axis
/// within 30° of it), the centres lie on the major axis `s` apart, with `s` from the object's
/// second moments taken as a mixture of two components of equal spread: the variance along the
/// major axis is `λ1 = σ² + w1·w2·s²` and across it `λ2 = σ²`, so `s² = (λ1 − λ2) / (w1·w2)`
/// (the law of total variance; exact for two discs of equal radius that do not overlap), and
/// which centre goes to which part follows the predictions; each part gets round axes of
/// `4·√λ2`. Otherwise the shape says nothing about where the two are, and each centre is its
/// prediction shifted by the same offset (so the weighted mean is the centroid); each part
/// then gets round axes of its own area's equivalent diameter. `None` when the two predictions
/// coincide (within 1 px).
pub fn split_between(d: &Detection, parts: [Expected; 2]) -> Option<[Detection; 2]> {
    let total = parts[0].area_px + parts[1].area_px;
    let apart = [
        parts[0].predicted[0] - parts[1].predicted[0],
        parts[0].predicted[1] - parts[1].predicted[1],
    ];
    if total.is_nan() || total <= 0.0 || apart[0].hypot(apart[1]) < 1.0 {
        return None;
    }
    let w = [parts[0].area_px / total, parts[1].area_px / total];
    let on_axis = moment_centres(d, w, apart);
    let along_axis = on_axis.is_some();
    let centres = on_axis.unwrap_or_else(|| {
        let mean = |i: usize| w[0] * parts[0].predicted[i] + w[1] * parts[1].predicted[i];
        let shift = [d.x - mean(0), d.y - mean(1)];
        parts.map(|p| [p.predicted[0] + shift[0], p.predicted[1] + shift[1]])
    });
    let spread = (d.minor_axis_px / 4.0).powi(2);
    let part = |k: usize| {
        let area = d.area_px * w[k];
        let equivalent = 2.0 * (area / std::f64::consts::PI).sqrt();
        let axis = if along_axis { 4.0 * spread.sqrt() } else { equivalent };
        Detection {
            x: centres[k][0],
            y: centres[k][1],
            area_px: area,
            equivalent_diameter_px: equivalent,
            total_intensity: d.total_intensity * w[k],
            major_axis_px: axis,
            minor_axis_px: axis,
            orientation_deg: 0.0,
            ..d.clone()
        }
    };
    Some([part(0), part(1)])
}

/// The two centres on the object's major axis (see [`split_between`]), part 0 on the side of
/// `apart` (part 0's prediction minus part 1's); `None` unless the major axis lies within 30°
/// of `apart` and the object is elongated.
fn moment_centres(d: &Detection, w: [f64; 2], apart: [f64; 2]) -> Option<[[f64; 2]; 2]> {
    let (l1, l2) = ((d.major_axis_px / 4.0).powi(2), (d.minor_axis_px / 4.0).powi(2));
    let (sin, cos) = d.orientation_deg.to_radians().sin_cos();
    let along = apart[0] * cos + apart[1] * sin;
    let cos_angle = along.abs() / apart[0].hypot(apart[1]);
    if l1 <= l2 || cos_angle < 30f64.to_radians().cos() {
        return None;
    }
    let s = ((l1 - l2) / (w[0] * w[1])).sqrt() * along.signum();
    Some([
        [d.x + w[1] * s * cos, d.y + w[1] * s * sin],
        [d.x - w[0] * s * cos, d.y - w[0] * s * sin],
    ])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::online::OnlineLinker;
    use crate::link::LinkParams;

    /// The one object made of discs `(x, y, r)` all labelled 1 in a 80 x 60 frame, measured
    /// as segmentation measures it.
    fn object_of_discs(discs: &[(f64, f64, f64)], frame: usize) -> Detection {
        let (w, h) = (80, 60);
        let labels: Vec<u32> = (0..w * h)
            .map(|i| {
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                discs
                    .iter()
                    .any(|&(cx, cy, r)| (x - cx).powi(2) + (y - cy).powi(2) <= r * r) as u32
            })
            .collect();
        let pixels: Vec<u32> = (0..(w * h) as u32).filter(|&i| labels[i as usize] == 1).collect();
        let intensity = vec![100.0f32; w * h];
        crate::segment::measure::measure_objects(&labels, &pixels, 1, &intensity, w, h, frame).remove(0)
    }

    fn expected(x: f64, y: f64, area_px: f64) -> Expected {
        Expected {
            predicted: [x, y],
            area_px,
        }
    }

    #[test]
    fn two_touching_discs_are_split_at_their_centres() {
        // Source: the law of total variance for a two-component mixture (the variance along
        // the axis is the spread within plus w1·w2·s²), exact for two discs that do not
        // overlap. Discs of radius 7 at (30, 30) and (44.5, 34) (a 0.3 px gap, tilted), each
        // 149 px at this radius on the grid: the halves land within 0.3 px of the centres,
        // each gets half the area, and predictions 2 px off still pick the right halves.
        let d = object_of_discs(&[(30.0, 30.0, 7.0), (44.5, 34.0, 7.0)], 3);
        let parts = [expected(46.0, 35.0, 149.0), expected(29.0, 28.5, 149.0)];
        let [a, b] = split_between(&d, parts).expect("elongated");
        assert!((a.x - 44.5).hypot(a.y - 34.0) < 0.3, "{a:?}");
        assert!((b.x - 30.0).hypot(b.y - 30.0) < 0.3, "{b:?}");
        assert_eq!(a.area_px, d.area_px / 2.0);
        assert_eq!(a.label, d.label);
        assert_eq!(a.frame, 3);
    }

    #[test]
    fn a_round_object_is_split_where_the_tracks_predict() {
        // Source: construction. A round object (one disc, r 9, at (40, 30)) that two tracks of
        // equal area are predicted inside, 8 px apart along y: its moments say nothing of
        // where the two are, so each half is its prediction shifted until their mean is the
        // centroid: (40, 26) and (40, 34) for predictions (41, 25) and (41, 33).
        let d = object_of_discs(&[(40.0, 30.0, 9.0)], 0);
        let [a, b] = split_between(&d, [expected(41.0, 25.0, 120.0), expected(41.0, 33.0, 120.0)]).unwrap();
        assert!((a.x - 40.0).abs() < 1e-9 && (a.y - 26.0).abs() < 1e-9, "{a:?}");
        assert!((b.x - 40.0).abs() < 1e-9 && (b.y - 34.0).abs() < 1e-9, "{b:?}");
    }

    #[test]
    fn an_object_two_tracks_enter_is_split_one_track_between_two_objects_is_not() {
        // Source: construction (the rule of issue 13, item 3).
        let merged = object_of_discs(&[(30.0, 30.0, 7.0), (44.0, 30.0, 7.0)], 0);
        let two = [expected(30.5, 30.0, 150.0), expected(43.5, 30.0, 150.0)];
        let (out, n) = split_shared_objects(vec![merged.clone()], &two);
        assert_eq!((out.len(), n), (2, 1));
        // Three times the tracks' summed area: not the two of them.
        let big = [expected(30.5, 30.0, 50.0), expected(43.5, 30.0, 50.0)];
        assert_eq!(split_shared_objects(vec![merged.clone()], &big).1, 0);
        // One track: nothing to split.
        assert_eq!(split_shared_objects(vec![merged], &two[..1]).0.len(), 1);
        // Two separate objects with one track predicted between them stay two.
        let left = object_of_discs(&[(20.0, 30.0, 7.0)], 0);
        let right = object_of_discs(&[(50.0, 30.0, 7.0)], 0);
        let between = [expected(35.0, 30.0, 150.0)];
        let (out, n) = split_shared_objects(vec![left, right], &between);
        assert_eq!((out.len(), n), (2, 0));
    }

    #[test]
    fn two_nuclei_merged_for_two_frames_keep_their_tracks() {
        // Source: construction. Two nuclei 1 px/frame apart along y, passing each other in x
        // 14 px apart: frames 3 and 4 they are one object (segmented as one); the online
        // linker splits it where the tracks are, so both tracks go on unbroken: two track ids
        // over all 8 frames, each with one point per frame.
        let mut linker = OnlineLinker::new(LinkParams::for_diameter(14.0));
        let mut points = Vec::new();
        for t in 0..8 {
            let y = 20.0 + t as f64;
            let frame = if t == 3 || t == 4 {
                vec![object_of_discs(&[(30.0, y, 7.0), (44.0, y, 7.0)], t)]
            } else {
                vec![
                    object_of_discs(&[(26.0, y, 7.0)], t),
                    object_of_discs(&[(48.0, y, 7.0)], t),
                ]
            };
            points.extend(linker.push(frame));
        }
        let ids: std::collections::BTreeSet<u32> = points.iter().map(|p| p.track_id).collect();
        assert_eq!(ids.len(), 2, "{ids:?}");
        assert_eq!(points.len(), 16);
        assert_eq!(linker.shared_objects_split(), 2);
    }
}
