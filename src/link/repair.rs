//! Time repairs segmentation: an object that two tracks enter is two nuclei segmented as one,
//! and is split where the tracks say they are.

use crate::tracks::{Detection, TrackedDetection};
use kiddo::{ImmutableKdTree, SquaredEuclidean};

/// The object's area over the two nuclei's summed areas must lie in this range for the
/// object to be taken as the two of them (our own bounds: two touching nuclei segmented as one
/// cover about their summed area; the margin leaves room for size noise and for the seam
/// pixels a merge adds).
pub const SHARED_AREA_RATIO: (f64, f64) = (0.7, 1.35);

/// Each of the two must be at least this fraction of a nucleus of the expected diameter: a
/// daughter is about half a nucleus; a fragment of an over-segmentation tracked beside a
/// nucleus is smaller, and would otherwise have that nucleus cut in two frame after frame.
/// Our own bound.
pub const MIN_PART_OF_NUCLEUS: f64 = 0.35;

/// Whether an object of `area` px can be two nuclei of `a` and `b` px segmented as one
/// ([`SHARED_AREA_RATIO`]), each at least `min_part` px ([`MIN_PART_OF_NUCLEUS`] of a nucleus).
pub fn area_fits_two(area: f64, a: f64, b: f64, min_part: f64) -> bool {
    let ratio = area / (a + b);
    ratio >= SHARED_AREA_RATIO.0 && ratio <= SHARED_AREA_RATIO.1 && a.min(b) >= min_part
}

/// [`MIN_PART_OF_NUCLEUS`] of the area of a disc of `diameter_px`.
pub fn min_part_px(diameter_px: f64) -> f64 {
    MIN_PART_OF_NUCLEUS * std::f64::consts::PI * diameter_px * diameter_px / 4.0
}

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
/// moment-equivalent ellipse, its area near the sum of theirs and larger than either
/// ([`area_fits_two`]), neither track claimed by another object. Each such object is
/// replaced by two detections (see [`split_between`]) that keep its label, so both tracks go
/// on through the merge instead of one ending. Objects no track pair enters are left as
/// they are; in particular two objects are never joined because one track lies between them.
/// Returns the detections and how many objects were split.
pub fn split_shared_objects(detections: Vec<Detection>, tracks: &[Expected], min_part: f64) -> (Vec<Detection>, usize) {
    let mut claimed = vec![false; tracks.len()];
    let mut out = Vec::with_capacity(detections.len() + 4);
    let mut splits = 0;
    let nearby = NearbyTracks::of(tracks);
    for d in detections {
        let inside: Vec<usize> = nearby
            .near(&d)
            .into_iter()
            .filter(|&k| !claimed[k] && inside_ellipse(&d, tracks[k].predicted))
            .collect();
        let pair = match inside[..] {
            [a, b] => Some([a, b]),
            _ => None,
        };
        let halves = pair.and_then(|[a, b]| {
            let fits = area_fits_two(d.area_px, tracks[a].area_px, tracks[b].area_px, min_part);
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

/// The tracks' finite predictions in a k-d tree, so that the tracks that can enter an object
/// are found by one radius query instead of testing every track against every object of the
/// frame (a track with a non-finite prediction is never inside an ellipse).
struct NearbyTracks {
    tree: Option<ImmutableKdTree<f64, 2>>,
    /// The track of each point of the tree.
    track_of: Vec<usize>,
}

impl NearbyTracks {
    fn of(tracks: &[Expected]) -> NearbyTracks {
        let (points, track_of): (Vec<[f64; 2]>, Vec<usize>) = (tracks.iter().enumerate())
            .filter(|(_, t)| t.predicted.iter().all(|v| v.is_finite()))
            .map(|(k, t)| (t.predicted, k))
            .unzip();
        let tree = (!points.is_empty())
            .then(|| ImmutableKdTree::new_from_slice(&points).ok())
            .flatten();
        NearbyTracks { tree, track_of }
    }

    /// The tracks whose prediction lies within a tenth of a percent more than the detection's
    /// reach ([`ellipse_reach`]), ascending: every track [`inside_ellipse`] accepts is among
    /// them (its squared distance is within the squared reach, up to a relative 10⁻⁶).
    fn near(&self, d: &Detection) -> Vec<usize> {
        let Some(tree) = &self.tree else { return Vec::new() };
        let radius = ellipse_reach(d) * 1.001;
        let mut near: Vec<usize> = (tree.query(&[d.x, d.y]))
            .within::<SquaredEuclidean<f64>>(radius * radius)
            .unsorted()
            .execute()
            .iter()
            .map(|hit| self.track_of[hit.item as usize])
            .collect();
        near.sort_unstable();
        near
    }
}

/// The detection's longer half-axis: no point farther from its centre is inside its ellipse.
fn ellipse_reach(d: &Detection) -> f64 {
    (d.major_axis_px / 2.0).max((d.minor_axis_px / 2.0).max(1e-9))
}

/// Whether `p` lies inside the detection's moment-equivalent ellipse (axes as measured).
fn inside_ellipse(d: &Detection, p: [f64; 2]) -> bool {
    let (dx, dy) = (p[0] - d.x, p[1] - d.y);
    // Inside the ellipse is within its longer half-axis of the centre: most of a frame's
    // tracks are ruled out before the rotation (a margin keeps the boundary's rounding out of
    // it: this never rules out a point the exact test keeps).
    let reach = ellipse_reach(d);
    if dx * dx + dy * dy > reach * reach * (1.0 + 1e-6) {
        return false;
    }
    let (s, c) = d.orientation_deg.to_radians().sin_cos();
    let along = (dx * c + dy * s) / (d.major_axis_px / 2.0);
    let across = (-dx * s + dy * c) / (d.minor_axis_px / 2.0).max(1e-9);
    along * along + across * across <= 1.0
}

/// Two detections for the two nuclei of one object, in the order of `parts`: area and total
/// intensity shared in proportion to the parts' areas (`w1, w2`; areas rounded to whole
/// pixels), centres whose weighted mean is the object's centroid.
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
    split(d, parts, true)
}

/// [`split_between`] where the object's shape says where the two are, `None` elsewhere.
pub fn split_along_axis(d: &Detection, parts: [Expected; 2]) -> Option<[Detection; 2]> {
    split(d, parts, false)
}

fn split(d: &Detection, parts: [Expected; 2], or_at_predictions: bool) -> Option<[Detection; 2]> {
    let total = parts[0].area_px + parts[1].area_px;
    let apart = [
        parts[0].predicted[0] - parts[1].predicted[0],
        parts[0].predicted[1] - parts[1].predicted[1],
    ];
    if total.is_nan() || total <= 0.0 || d.area_px < 2.0 || apart[0].hypot(apart[1]) < 1.0 {
        return None;
    }
    // Areas stay whole pixel counts: the first share rounded, the second the rest; the
    // weights follow the rounded areas so that centroid, area and brightness agree.
    let first = (d.area_px * parts[0].area_px / total)
        .round()
        .clamp(1.0, d.area_px - 1.0);
    let areas = [first, d.area_px - first];
    let w = [areas[0] / d.area_px, areas[1] / d.area_px];
    let on_axis = moment_centres(d, w, apart);
    let along_axis = on_axis.is_some();
    if !along_axis && !or_at_predictions {
        return None;
    }
    let centres = on_axis.unwrap_or_else(|| {
        let mean = |i: usize| w[0] * parts[0].predicted[i] + w[1] * parts[1].predicted[i];
        let shift = [d.x - mean(0), d.y - mean(1)];
        parts.map(|p| [p.predicted[0] + shift[0], p.predicted[1] + shift[1]])
    });
    let spread = (d.minor_axis_px / 4.0).powi(2);
    let part = |k: usize| {
        let area = areas[k];
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

/// A merged object split back in time must be at least this elongated (major over minor
/// axis). Two touching discs segmented as one measure about 1.9 (moments of two discs); a
/// round nucleus, such as a mother rounded up for mitosis, measures close to 1, but single
/// nuclei up to about 1.5 are common (the 95th percentile of detections is 1.3 to 1.6 in our
/// scenes): at 1.3 a chain of splits ran on back through an elongated mother, cutting her in
/// two before she divided. Our own bound; it gives up pairs that overlap by more than about
/// a third of their radius.
pub const MIN_MERGED_ELONGATION: f64 = 1.5;

/// Splits back in time the objects that two nuclei shared before they parted: where a track
/// starts (frame `g`) next to a point of another track (within `reach` px), and that other
/// track's point one frame earlier is an object elongated along the line between the two
/// (at least [`MIN_MERGED_ELONGATION`], its major axis within 30° of the line) with about
/// their summed area ([`area_fits_two`]), the object is split as
/// [`split_along_axis`] does and the starting track begins one frame earlier with its half;
/// and so on back while the test holds. Daughters still touching after a division are found
/// this way (the mother's track took them as one object), and so is a neighbour hidden in a
/// nucleus's object before it came apart. Returns the number of objects split.
pub fn split_back_in_time(points: &mut Vec<TrackedDetection>, reach: f64, min_part: f64) -> usize {
    let mut index = PointIndex::of(points);
    let mut splits = 0;
    for start in track_starts(points) {
        let Some((mut older, mut sister)) = index.parted_from(points, start, reach, min_part) else {
            continue;
        };
        let mut newer = start;
        loop {
            let parts = [&points[newer], &points[sister]].map(|p| Expected {
                predicted: [p.detection.x, p.detection.y],
                area_px: p.detection.area_px,
            });
            let Some([mine, theirs]) = split_along_axis(&points[older].detection, parts) else {
                break;
            };
            if points[older].track_id != points[sister].track_id {
                // The merged object's track ended there and the sister starts after it: the
                // sister goes on that track.
                let step = (theirs.x - points[sister].detection.x).hypot(theirs.y - points[sister].detection.y);
                points[sister].distance_from_prediction_px = Some(step);
                let (from, to) = (points[sister].track_id, points[older].track_id);
                index.relabel(points, from, to);
            }
            let track_id = points[newer].track_id;
            let step = (mine.x - points[newer].detection.x).hypot(mine.y - points[newer].detection.y);
            points[newer].distance_from_prediction_px = Some(step);
            points[older].detection = theirs;
            points.push(TrackedDetection {
                track_id,
                parent_id: None,
                detection: mine,
                distance_from_prediction_px: None,
                link_confidence: None,
            });
            newer = points.len() - 1;
            index.add(points, newer);
            splits += 1;
            // Go on back along the same pair: the half just made and its sister half.
            sister = older;
            let Some(next) = index.merged_before(points, newer, sister, min_part) else {
                break;
            };
            older = next;
        }
    }
    splits
}

/// The first point of every track that starts after frame 0, in track id order.
fn track_starts(points: &[TrackedDetection]) -> Vec<usize> {
    let mut first: std::collections::BTreeMap<u32, usize> = Default::default();
    for (k, p) in points.iter().enumerate() {
        let e = first.entry(p.track_id).or_insert(k);
        if p.detection.frame < points[*e].detection.frame {
            *e = k;
        }
    }
    first.into_values().filter(|&k| points[k].detection.frame > 0).collect()
}

/// Points by frame and by (track, frame).
struct PointIndex {
    by_frame: Vec<Vec<usize>>,
    by_track_frame: std::collections::HashMap<(u32, usize), usize>,
}

impl PointIndex {
    fn of(points: &[TrackedDetection]) -> Self {
        let mut index = PointIndex {
            by_frame: Vec::new(),
            by_track_frame: Default::default(),
        };
        for k in 0..points.len() {
            index.add(points, k);
        }
        index
    }

    fn add(&mut self, points: &[TrackedDetection], k: usize) {
        let frame = points[k].detection.frame;
        if self.by_frame.len() <= frame {
            self.by_frame.resize(frame + 1, Vec::new());
        }
        self.by_frame[frame].push(k);
        self.by_track_frame.insert((points[k].track_id, frame), k);
    }

    /// For the first point `start` of a track (frame `g`): a point of another track at `g`, a
    /// separate object within `reach` px (the sister), and a point one frame earlier that
    /// holds the two merged: the sister's own, or, where the sister starts a track too, the
    /// last point of a track that ends there, within `reach` of both. Returns `(that earlier
    /// point, the sister)`; among several, the sister nearest `start` (then the first
    /// indexed).
    fn parted_from(
        &self,
        points: &[TrackedDetection],
        start: usize,
        reach: f64,
        min_part: f64,
    ) -> Option<(usize, usize)> {
        let p = &points[start];
        let g = p.detection.frame;
        let mut best: Option<(f64, usize, usize)> = None;
        for &sister in &self.by_frame[g] {
            let q = &points[sister];
            let apart = distance(p, q);
            let separate = q.track_id != p.track_id && q.detection.label != p.detection.label;
            if !separate || apart > reach || best.is_some_and(|b| b.0 <= apart) {
                continue;
            }
            let older = self.merged_before(points, start, sister, min_part).or_else(|| {
                let starts_too = !self.by_track_frame.contains_key(&(q.track_id, g - 1));
                starts_too
                    .then(|| self.ended_holding(points, start, sister, reach, min_part))
                    .flatten()
            });
            if let Some(older) = older {
                best = Some((apart, older, sister));
            }
        }
        best.map(|(_, older, sister)| (older, sister))
    }

    /// The first point (in index order) one frame before `a` and `b` that is the last of its
    /// track, within `reach` of both, and holds the two merged.
    fn ended_holding(
        &self,
        points: &[TrackedDetection],
        a: usize,
        b: usize,
        reach: f64,
        min_part: f64,
    ) -> Option<usize> {
        let g = points[a].detection.frame;
        self.by_frame[g - 1].iter().copied().find(|&o| {
            let m = &points[o];
            !self.by_track_frame.contains_key(&(m.track_id, g))
                && distance(m, &points[a]) <= reach
                && distance(m, &points[b]) <= reach
                && holds_both(&m.detection, &points[a].detection, &points[b].detection, min_part)
        })
    }

    /// Moves every point of track `from` to track `to` (which has no point in the same frames).
    fn relabel(&mut self, points: &mut [TrackedDetection], from: u32, to: u32) {
        for (k, p) in points.iter_mut().enumerate() {
            if p.track_id == from {
                self.by_track_frame.remove(&(from, p.detection.frame));
                p.track_id = to;
                self.by_track_frame.insert((to, p.detection.frame), k);
            }
        }
    }

    /// The point one frame before `a` on the track of `b` (both at one frame), if it holds the
    /// two merged ([`holds_both`]).
    fn merged_before(&self, points: &[TrackedDetection], a: usize, b: usize, min_part: f64) -> Option<usize> {
        let earlier = points[a].detection.frame.checked_sub(1)?;
        let older = *self.by_track_frame.get(&(points[b].track_id, earlier))?;
        holds_both(
            &points[older].detection,
            &points[a].detection,
            &points[b].detection,
            min_part,
        )
        .then_some(older)
    }
}

fn distance(p: &TrackedDetection, q: &TrackedDetection) -> f64 {
    (p.detection.x - q.detection.x).hypot(p.detection.y - q.detection.y)
}

/// Whether object `m` looks like `a` and `b` segmented as one: elongated enough, with about
/// their summed area.
fn holds_both(m: &Detection, a: &Detection, b: &Detection, min_part: f64) -> bool {
    m.major_axis_px >= MIN_MERGED_ELONGATION * m.minor_axis_px
        && area_fits_two(m.area_px, a.area_px, b.area_px, min_part)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::online::OnlineLinker;
    use crate::link::LinkParams;

    #[test]
    fn the_radius_query_finds_every_track_inside_an_object() {
        // Source: the definition, every track tested against every object (the code before the
        // query), on random ellipses and predictions, some on the boundary and some not finite.
        let mut rng = crate::numeric::Rng::new(7);
        let tracks: Vec<Expected> = (0..400)
            .map(|k| Expected {
                predicted: match k % 97 {
                    0 => [f64::NAN, 10.0],
                    1 => [f64::INFINITY, 5.0],
                    _ => [rng.uniform() * 200.0, rng.uniform() * 200.0],
                },
                area_px: 100.0,
            })
            .collect();
        let template = object_of_discs(&[(20.0, 20.0, 5.0)], 0);
        let mut found = 0;
        for i in 0..300 {
            let minor = 4.0 + 16.0 * rng.uniform();
            let d = Detection {
                x: rng.uniform() * 200.0,
                y: rng.uniform() * 200.0,
                minor_axis_px: minor,
                major_axis_px: minor * (1.0 + rng.uniform()),
                orientation_deg: 180.0 * rng.uniform() - 90.0,
                ..template.clone()
            };
            // Every tenth object has a track exactly on its ellipse's end.
            let mut moved = tracks.clone();
            if i % 10 == 0 {
                let (s, c) = d.orientation_deg.to_radians().sin_cos();
                moved[i % tracks.len()].predicted = [d.x + c * d.major_axis_px / 2.0, d.y + s * d.major_axis_px / 2.0];
            }
            let inside = |k: &usize| inside_ellipse(&d, moved[*k].predicted);
            let every: Vec<usize> = (0..moved.len()).filter(inside).collect();
            let near: Vec<usize> = NearbyTracks::of(&moved).near(&d).into_iter().filter(inside).collect();
            found += every.len();
            assert_eq!(near, every, "object {i}");
        }
        assert!(found > 50, "{found}");
    }

    #[test]
    fn the_smallest_part_is_a_share_of_a_disc_of_the_diameter() {
        // Source: the disc area π d² / 4 (geometry) times MIN_PART_OF_NUCLEUS (0.35): 14 px
        // nuclei give 0.35 · π · 49 = 53.878 px, 10 px nuclei 27.489 px.
        assert!((min_part_px(14.0) - 0.35 * std::f64::consts::PI * 49.0).abs() < 1e-12);
        assert!((min_part_px(10.0) - 27.488936).abs() < 1e-6);
    }

    #[test]
    fn a_track_starts_at_its_earliest_point_whatever_the_order_of_points() {
        // Construction: track 2's points listed frame 5, 3, 4 start at frame 3 (index 2);
        // track 1 starts at frame 0 and is not a start after frame 0.
        let point = |track_id, frame| TrackedDetection {
            track_id,
            parent_id: None,
            detection: Detection {
                frame,
                ..object_of_discs(&[(20.0, 20.0, 5.0)], frame)
            },
            distance_from_prediction_px: None,
            link_confidence: None,
        };
        let points = vec![point(2, 5), point(1, 0), point(2, 3), point(2, 4), point(1, 1)];
        assert_eq!(track_starts(&points), vec![2]);
    }

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
        let foreground = crate::segment::label::Foreground {
            labels: vec![1; pixels.len()],
            pixels,
        };
        let intensity = vec![100.0f32; w * h];
        crate::segment::measure::measure_objects(&foreground, 1, &intensity, w, h, frame).remove(0)
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
        assert_eq!(a.area_px + b.area_px, d.area_px);
        assert!((a.area_px - b.area_px).abs() <= 1.0, "whole pixels, shared equally");
        assert_eq!(a.label, d.label);
        assert_eq!(a.frame, 3);
    }

    #[test]
    fn a_round_object_is_split_where_the_tracks_predict() {
        // Source: construction. A round object (one disc, r 9, at (40, 30)) that two tracks of
        // equal area are predicted inside, 8 px apart along y: its moments say nothing of
        // where the two are, so each half is its prediction shifted until their mean is the
        // centroid: (40, 26) and (40, 34) for predictions (41, 25) and (41, 33), within 0.05 px
        // (the odd pixel of an odd area goes to one half, moving the weights off one half).
        let d = object_of_discs(&[(40.0, 30.0, 9.0)], 0);
        let [a, b] = split_between(&d, [expected(41.0, 25.0, 120.0), expected(41.0, 33.0, 120.0)]).unwrap();
        assert!((a.x - 40.0).abs() < 1e-9 && (a.y - 26.0).abs() < 0.05, "{a:?}");
        assert!((b.x - 40.0).abs() < 1e-9 && (b.y - 34.0).abs() < 0.05, "{b:?}");
    }

    #[test]
    fn an_object_two_tracks_enter_is_split_one_track_between_two_objects_is_not() {
        // Source: construction (the rule of issue 13, item 3).
        let merged = object_of_discs(&[(30.0, 30.0, 7.0), (44.0, 30.0, 7.0)], 0);
        let two = [expected(30.5, 30.0, 150.0), expected(43.5, 30.0, 150.0)];
        let (out, n) = split_shared_objects(vec![merged.clone()], &two, 50.0);
        assert_eq!((out.len(), n), (2, 1));
        // Three times the tracks' summed area: not the two of them.
        let big = [expected(30.5, 30.0, 50.0), expected(43.5, 30.0, 50.0)];
        assert_eq!(split_shared_objects(vec![merged.clone()], &big, 10.0).1, 0);
        // One track: nothing to split.
        assert_eq!(split_shared_objects(vec![merged], &two[..1], 50.0).0.len(), 1);
        // Two separate objects with one track predicted between them stay two.
        let left = object_of_discs(&[(20.0, 30.0, 7.0)], 0);
        let right = object_of_discs(&[(50.0, 30.0, 7.0)], 0);
        let between = [expected(35.0, 30.0, 150.0)];
        let (out, n) = split_shared_objects(vec![left, right], &between, 50.0);
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
                    Detection {
                        label: 2,
                        ..object_of_discs(&[(48.0, y, 7.0)], t)
                    },
                ]
            };
            points.extend(linker.push(frame));
        }
        let ids: std::collections::BTreeSet<u32> = points.iter().map(|p| p.track_id).collect();
        assert_eq!(ids.len(), 2, "{ids:?}");
        assert_eq!(points.len(), 16);
        assert_eq!(linker.shared_objects_split(), 2);
    }

    /// A mother (one disc of radius 7 at (30, 30)) for frames 0-4, then two daughter discs of
    /// radius 5.25 moving apart along x, `8 + 2k` px apart at frame `5 + k`, segmented as one
    /// object while `merged(t)` says so.
    fn dividing(merged: impl Fn(usize) -> bool, round_when_merged: bool) -> Vec<Vec<Detection>> {
        (0..10)
            .map(|t| {
                if t < 5 {
                    return vec![object_of_discs(&[(30.0, 30.0, 7.0)], t)];
                }
                let half = 4.0 + (t - 5) as f64;
                let discs = [(30.0 - half, 30.0, 5.25), (30.0 + half, 30.0, 5.25)];
                match (merged(t), round_when_merged) {
                    (true, false) => vec![object_of_discs(&discs, t)],
                    (true, true) => vec![object_of_discs(&[(30.0, 30.0, 7.5)], t)],
                    (false, _) => discs
                        .iter()
                        .enumerate()
                        .map(|(k, &d)| Detection {
                            label: k as u32 + 1,
                            ..object_of_discs(&[d], t)
                        })
                        .collect(),
                }
            })
            .collect()
    }

    fn resolved(frames: Vec<Vec<Detection>>) -> (Vec<TrackedDetection>, crate::link::TrackResolution) {
        let params = LinkParams::for_diameter(14.0);
        let mut linker = OnlineLinker::new(params);
        let mut points: Vec<TrackedDetection> = frames.into_iter().flat_map(|f| linker.push(f)).collect();
        let resolution = crate::link::resolve_tracks(&mut points, &params);
        (points, resolution)
    }

    #[test]
    fn daughters_that_still_touch_are_split_back_to_the_division() {
        // Source: construction (issue 13, item 4). The daughters are one elongated object in
        // frames 5 and 6 (two discs 8 and 10 px apart: major over minor axis about 1.8 and
        // 2.1) and apart from frame 7. Split back in time, the division is found where it
        // happened: the mother's last frame is 4, both daughters are tracked from frame 5.
        let (points, resolution) = resolved(dividing(|t| t <= 6, false));
        assert_eq!(resolution.shared_objects_split, 2);
        assert_eq!(resolution.divisions.len(), 1, "{:?}", resolution.divisions);
        let event = &resolution.divisions[0];
        assert_eq!(event.frame, 4);
        for d in event.daughters {
            let frames: Vec<usize> = points
                .iter()
                .filter(|p| p.track_id == d)
                .map(|p| p.detection.frame)
                .collect();
            assert_eq!(frames.len(), 5, "{frames:?}");
            assert_eq!(*frames.iter().min().unwrap(), 5);
        }
    }

    #[test]
    fn a_round_object_is_not_split_back() {
        // Source: construction. The same movie with a round object (one disc of radius 7.5) in
        // frames 5 and 6: nothing says it held two, so it stays one point; no object is split
        // and no track gains points before frame 7 that it did not have.
        let (points, resolution) = resolved(dividing(|t| t <= 6, true));
        assert_eq!(resolution.shared_objects_split, 0);
        assert_eq!(points.len(), 5 + 2 + 3 * 2);
    }
}
