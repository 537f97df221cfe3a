//! Why reference tracks break: for every reference track that no single result track follows
//! for 80% of its points (not "mostly tracked"), the events along it that cost it coverage,
//! each given one cause, so that a change to segmentation or linking can be aimed at the
//! causes that dominate and checked against them.

use super::tracking::{FrameMatching, Vertex};
use crate::tracks::TrackPoint;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};

/// Counts per cause of a break.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct BreakCauses {
    /// A reference point with no result point near it.
    pub missed_detection: usize,
    /// A reference point with no result point of its own, but within the radius of a result
    /// point matched to a neighbour: two nuclei segmented as one.
    pub merged_with_neighbour: usize,
    /// Consecutive reference points followed by two different result tracks that are not
    /// mother and daughter: a wrong or missing link.
    pub wrong_link: usize,
    /// A reference daughter whose first point is followed by a result track that began before
    /// her: the result kept following the mother through the division.
    pub division_missed: usize,
    /// Consecutive reference points followed by a result mother and then her result daughter,
    /// where the reference has no division.
    pub division_spurious: usize,
}

impl BreakCauses {
    fn add(&mut self, cause: Cause) {
        *self.slot(cause) += 1;
    }

    fn slot(&mut self, cause: Cause) -> &mut usize {
        match cause {
            Cause::Missed => &mut self.missed_detection,
            Cause::Merged => &mut self.merged_with_neighbour,
            Cause::WrongLink => &mut self.wrong_link,
            Cause::DivisionMissed => &mut self.division_missed,
            Cause::DivisionSpurious => &mut self.division_spurious,
        }
    }
}

/// One cause of a break.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Cause {
    Missed,
    Merged,
    WrongLink,
    DivisionMissed,
    DivisionSpurious,
}

/// What broke the reference tracks that are not mostly tracked.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct TrackBreaks {
    /// Reference tracks not mostly tracked.
    pub tracks_not_mostly_tracked: usize,
    /// Those tracks by their main cause (the cause with the most events on the track; ties go
    /// to the earliest event).
    pub by_main_cause: BreakCauses,
    /// Every event on those tracks.
    pub events: BreakCauses,
}

/// Walks every reference track that is not mostly tracked and classifies the events along it
/// (see [`BreakCauses`]).
pub(crate) fn track_breaks(truth: &[TrackPoint], found: &[TrackPoint], matching: &FrameMatching) -> TrackBreaks {
    let found_of: HashMap<Vertex, u32> = matching.truth_of.iter().map(|(f, t)| (*t, f.1)).collect();
    let mut found_first: HashMap<u32, usize> = HashMap::new();
    let mut found_parent: HashMap<u32, u32> = HashMap::new();
    for p in found {
        let first = found_first.entry(p.track_id).or_insert(p.frame);
        *first = (*first).min(p.frame);
        if let Some(m) = p.parent_id {
            found_parent.insert(p.track_id, m);
        }
    }
    let mut tracks: BTreeMap<u32, Vec<&TrackPoint>> = BTreeMap::new();
    for p in truth {
        tracks.entry(p.track_id).or_default().push(p);
    }
    let mut out = TrackBreaks::default();
    for (&id, points) in tracks.iter_mut() {
        points.sort_by_key(|p| p.frame);
        if mostly_tracked(id, points, &found_of) {
            continue;
        }
        let events = events_along(id, points, matching, &found_of, &found_first, &found_parent);
        out.tracks_not_mostly_tracked += 1;
        for &c in &events {
            out.events.add(c);
        }
        if let Some(main) = main_cause(&events) {
            out.by_main_cause.add(main);
        }
    }
    out
}

/// Whether one result track follows at least 80% of the reference track's points (Li, Huang &
/// Nevatia 2009, as [`super::tracking::TrackCoverage`]).
fn mostly_tracked(id: u32, points: &[&TrackPoint], found_of: &HashMap<Vertex, u32>) -> bool {
    let mut per_result: HashMap<u32, usize> = HashMap::new();
    for p in points {
        if let Some(&f) = found_of.get(&(p.frame, id)) {
            *per_result.entry(f).or_default() += 1;
        }
    }
    let best = per_result.values().copied().max().unwrap_or(0);
    best as f64 >= 0.8 * points.len() as f64
}

/// The events along one reference track, in frame order.
fn events_along(
    id: u32,
    points: &[&TrackPoint],
    matching: &FrameMatching,
    found_of: &HashMap<Vertex, u32>,
    found_first: &HashMap<u32, usize>,
    found_parent: &HashMap<u32, u32>,
) -> Vec<Cause> {
    let mut events = Vec::new();
    let mut previous: Option<u32> = None;
    for (k, p) in points.iter().enumerate() {
        let v = (p.frame, id);
        let Some(&f) = found_of.get(&v) else {
            events.push(if matching.merged.contains(&v) {
                Cause::Merged
            } else {
                Cause::Missed
            });
            continue;
        };
        match previous {
            Some(g) if g != f => events.push(if found_parent.get(&f) == Some(&g) {
                Cause::DivisionSpurious
            } else {
                Cause::WrongLink
            }),
            None if k == 0 && p.parent_id.is_some() && found_first.get(&f).is_some_and(|&t| t < p.frame) => {
                events.push(Cause::DivisionMissed)
            }
            _ => {}
        }
        previous = Some(f);
    }
    events
}

/// The cause with the most events; ties go to the one that happened first.
fn main_cause(events: &[Cause]) -> Option<Cause> {
    let mut count: BTreeMap<Cause, (usize, usize)> = BTreeMap::new();
    for (k, &c) in events.iter().enumerate() {
        let e = count.entry(c).or_insert((0, k));
        e.0 += 1;
    }
    count
        .into_iter()
        .max_by(|a, b| a.1 .0.cmp(&b.1 .0).then(b.1 .1.cmp(&a.1 .1)))
        .map(|(c, _)| c)
}

#[cfg(test)]
mod tests {
    use super::super::tracking::score_tracks;
    use super::super::tracking::tests::p;
    use super::*;

    /// A reference track of `n` frames at x = `x`, y = 0.
    fn still(id: u32, x: f64, n: usize) -> Vec<TrackPoint> {
        (0..n).map(|t| p(id, None, t, x, 0.0)).collect()
    }

    #[test]
    fn each_cause_is_named() {
        // Source: hand-built cases, one cause each, with the rules of BreakCauses.
        // Track 1 (10 frames): result switches ids at frame 5 (wrong link).
        // Track 2 (10 frames): result misses frames 2..5 (missed detections).
        // Track 3 and 4 at x = 100 and 103, 10 frames: the result has one point between them
        // in frames 0..5 (merged; radius 4).
        // Track 5 (10 frames): result splits it at frame 5 into a mother and her daughter.
        let mut truth = still(1, 0.0, 10);
        truth.extend(still(2, 50.0, 10));
        truth.extend(still(3, 100.0, 10));
        truth.extend(still(4, 103.0, 10));
        truth.extend(still(5, 200.0, 10));
        let mut found: Vec<TrackPoint> = (0..10)
            .map(|t| p(if t < 5 { 11 } else { 12 }, None, t, 0.0, 0.0))
            .collect();
        found.extend(
            (0..10)
                .filter(|t| !(2..6).contains(t))
                .map(|t| p(21, None, t, 50.0, 0.0)),
        );
        for t in 0..10 {
            if t < 5 {
                found.push(p(31, None, t, 101.0, 0.0));
            } else {
                found.push(p(31, None, t, 100.0, 0.0));
                found.push(p(41, None, t, 103.0, 0.0));
            }
        }
        found.extend((0..10).map(|t| {
            if t < 5 {
                p(51, None, t, 200.0, 0.0)
            } else {
                p(52, Some(51), t, 200.0, 0.0)
            }
        }));
        let b = score_tracks(&truth, &found, 4.0).breaks;
        // Track 3 keeps its result track throughout (matched to the merged point in frames
        // 0..4, then to its own): mostly tracked. Tracks 1, 2, 4 and 5 are not.
        assert_eq!(b.tracks_not_mostly_tracked, 4, "{b:?}");
        assert_eq!(b.events.wrong_link, 1);
        assert_eq!(b.events.missed_detection, 4);
        assert_eq!(b.events.division_spurious, 1);
        assert_eq!(b.events.merged_with_neighbour, 5);
        assert_eq!(b.events.division_missed, 0);
        let main = b.by_main_cause;
        assert_eq!(
            (
                main.wrong_link,
                main.missed_detection,
                main.merged_with_neighbour,
                main.division_spurious
            ),
            (1, 1, 1, 1)
        );
    }

    #[test]
    fn a_missed_division_is_named() {
        // Source: hand-built. Reference: mother 1 (frames 0..4) divides into daughters 2 and 3
        // (frames 5..9). Result: track 7 follows the mother and then daughter 2 for two frames,
        // track 9 takes daughter 2 from frame 7 on, track 8 follows daughter 3. Daughter 2's
        // first point is followed by a track that began before her (a missed division), then
        // her track changes (a wrong link): one event each, the earlier is the main cause.
        let mut truth: Vec<TrackPoint> = (0..5).map(|t| p(1, None, t, 0.0, 0.0)).collect();
        truth.extend((5..10).map(|t| p(2, Some(1), t, -5.0, 0.0)));
        truth.extend((5..10).map(|t| p(3, Some(1), t, 5.0, 0.0)));
        let mut found: Vec<TrackPoint> = (0..5).map(|t| p(7, None, t, 0.0, 0.0)).collect();
        found.extend((5..7).map(|t| p(7, None, t, -5.0, 0.0)));
        found.extend((7..10).map(|t| p(9, None, t, -5.0, 0.0)));
        found.extend((5..10).map(|t| p(8, None, t, 5.0, 0.0)));
        let b = score_tracks(&truth, &found, 2.0).breaks;
        assert_eq!(b.tracks_not_mostly_tracked, 1, "{b:?}");
        assert_eq!((b.events.division_missed, b.events.wrong_link), (1, 1));
        assert_eq!(b.by_main_cause.division_missed, 1);
    }
}
