//! The whole analysis of one set of tracks: per-track motility, population MSD and its fits,
//! autocorrelations, circular statistics of directions, and collective measures per frame.

use super::border::{border_response, BorderResponse};
use super::circular::{circular_summary, v_test, CircularSummary, VTest};
use super::collective::{neighbour_distance_and_density, order_parameter, scaled_fluctuations, PairCorrelation};
use super::geometry::{Axes, Border, Lane};
use super::models::{choose_model, ModelChoice, MotionKind};
use super::motility::{motility, steps, Motility, Step};
use super::msd::{
    anomalous_exponent, per_cell_mean_msd, pool_autocorrelation, pool_msd, track_autocorrelation, track_msd,
    AutocorrelationPoint, MsdPoint, TrackAutocorrelation, TrackMsd,
};
use super::profiles::{lane_profiles, ProfileBin};
use super::resample::{resample_tracks, TrackSums, Uncertainty, RESAMPLES};
use super::stream::{stream_geometry, StreamGeometry, STREAM_RESAMPLES};
use super::table::{Track, Units};
use crate::numeric::median;
use crate::numeric::significant;
use crate::tracks::PathPoint;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::BTreeMap;

/// Choices of the analysis.
#[derive(Debug, Clone, Serialize)]
pub struct AnalysisOptions {
    /// Direction of interest for the forward migration index and the V-test, degrees from +x
    /// toward +y.
    pub axis_deg: f64,
    /// Elapsed frames for the directionality ratio at a fixed time.
    pub fixed_elapsed_frames: usize,
    /// Lags (frames) of the motion-model fits and the anomalous exponent; `None`: 1 to a quarter of the
    /// median track span (common practice: fit lags ≤ N/4, fixtures/methods/check_values.md §9), at least 3.
    pub fit_lags: Option<(usize, usize)>,
    /// Neighbours for the local density estimate.
    pub density_neighbours: usize,
    /// Subtract the common drift (the mean displacement of all tracks per frame) before
    /// anything is computed (see [`remove_common_drift`]).
    pub remove_drift: bool,
    /// Resamples of tracks for the intervals (see [`super::resample`]).
    pub resamples: usize,
    /// Lane, border and stream measures asked for.
    pub confinement: Confinement,
}

/// The confinement measures asked for (all off by default).
#[derive(Debug, Clone, Serialize, Default)]
pub struct Confinement {
    /// A lane: profiles across it and along the axis (and the stream geometry).
    pub lane: Option<Lane>,
    /// The stream geometry per frame without a lane.
    pub stream: bool,
    /// A border cells should not enter.
    pub border: Option<Border>,
    /// The distance that counts as near the border (analysis units; by default one nucleus
    /// diameter, from the tracking run).
    pub border_zone: Option<f64>,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        AnalysisOptions {
            axis_deg: 0.0,
            fixed_elapsed_frames: 10,
            fit_lags: None,
            density_neighbours: 5,
            remove_drift: false,
            resamples: RESAMPLES,
            confinement: Confinement::default(),
        }
    }
}

/// Collective figures of one frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FrameOrder {
    /// Frame.
    pub frame: usize,
    /// Objects with a velocity (a point in the next frame).
    pub moving: usize,
    /// Order parameter of their velocities.
    pub order_parameter: Option<f64>,
    /// Mean nearest-neighbour distance of all objects present.
    pub mean_neighbour_distance: Option<f64>,
    /// Median local density (objects per unit area).
    pub median_density: Option<f64>,
}

/// One distance bin of the neighbour correlation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CorrelationBin {
    /// Lower edge of the distance bin.
    pub from: f64,
    /// Upper edge.
    pub to: f64,
    /// Cavagna's C(r): the mean product of neighbours' scaled velocity fluctuations.
    pub correlation: Option<f64>,
    /// Pairs.
    pub pairs: usize,
}

/// Everything computed for one set of tracks.
#[derive(Debug, Clone, Serialize)]
pub struct Analysis {
    /// Units of every length and time below.
    pub units: Units,
    /// The options used.
    pub options: AnalysisOptions,
    /// Per track.
    pub tracks: Vec<Motility>,
    /// Every step.
    pub steps: Vec<Step>,
    /// Population MSD.
    pub msd: Vec<MsdPoint>,
    /// The per-cell mean of time-averaged MSDs, `(lag_frames, mean, tracks)`.
    pub per_cell_msd: Vec<(usize, f64, usize)>,
    /// The motion models fitted to the MSD over `fit_lags`, and the one chosen.
    pub models: ModelChoice,
    /// Intervals from resampling tracks.
    pub uncertainty: Uncertainty,
    /// Anomalous exponent over `exponent_lags`.
    pub anomalous_exponent: Option<f64>,
    /// Lags (frames) of the fits.
    pub fit_lags: (usize, usize),
    /// Velocity and direction autocorrelation.
    pub autocorrelation: Vec<AutocorrelationPoint>,
    /// Directions of the tracks' net displacements.
    pub directions: Option<CircularSummary>,
    /// V-test toward the axis.
    pub v_test: Option<VTest>,
    /// Per frame.
    pub frames: Vec<FrameOrder>,
    /// Neighbour velocity-fluctuation correlation by distance.
    pub neighbour_correlation: Vec<CorrelationBin>,
    /// What the fitted motion model cannot be trusted for (see [`model_warnings`]).
    pub warnings: Vec<String>,
    /// The stream per frame, when asked for (a lane or `stream`).
    pub stream: Option<StreamGeometry>,
    /// The response to the border, when one was given.
    pub border: Option<BorderResponse>,
    /// Profiles across the lane and along the axis, when a lane was given.
    pub profiles: Vec<ProfileBin>,
}

/// Analyses `tracks` (already filtered) in `units`, with their own points as the neighbours of
/// each frame (see [`analyze_tracks_among`]).
pub fn analyze_tracks(tracks: &[Track], units: &Units, options: &AnalysisOptions) -> Analysis {
    analyze_tracks_among(tracks, tracks, units, options)
}

/// Analyses `tracks` (already filtered) in `units`; the neighbour distance and density of each
/// frame come from all the points of `everyone` in it (every detection tracked, not only the
/// tracks kept for analysis: a nucleus tracked for 5 frames is a neighbour all the same, and
/// a length filter must not change how crowded a frame looks).
pub fn analyze_tracks_among(
    tracks: &[Track],
    everyone: &[Track],
    units: &Units,
    options: &AnalysisOptions,
) -> Analysis {
    let dt = units.time_per_frame;
    // Positions against a lane or border stay as recorded: the drift is removed from motion,
    // not from where the cells are.
    let recorded = tracks;
    let corrected;
    let tracks = if options.remove_drift {
        corrected = remove_common_drift(tracks);
        corrected.as_slice()
    } else {
        tracks
    };
    let spans: Vec<usize> = tracks
        .iter()
        .map(|t| t.path[t.path.len() - 1].frame - t.path[0].frame)
        .collect();
    let longest = spans.iter().copied().max().unwrap_or(0);
    let step_rows: Vec<Step> = tracks.iter().flat_map(|t| steps(t.id, &t.path, dt)).collect();
    let median_span = median(&mut spans.iter().map(|&s| s as f64).collect::<Vec<f64>>()).unwrap_or(0.0);
    let fit_lags = options.fit_lags.unwrap_or((1, ((median_span / 4.0) as usize).max(3)));
    let max_lag = (longest / 2).max(fit_lags.1).min(500);
    // The collective figures (per frame, over every tracked point) need nothing of the
    // per-track ones: the two are worked out at the same time.
    let ((frames, neighbour_correlation), (per_track_msd, motility_rows, per_track_acf)) = rayon::join(
        || collective(tracks, everyone, dt, options.density_neighbours),
        || per_track_figures(tracks, (max_lag, longest.clamp(1, 20)), dt, options),
    );
    let msd_points = pool_msd(&per_track_msd, None, dt);
    let acf_points = pool_autocorrelation(&per_track_acf, None);
    let fitted: Vec<MsdPoint> = msd_points
        .iter()
        .copied()
        .filter(|q| q.lag_frames >= fit_lags.0 && q.lag_frames <= fit_lags.1)
        .collect();
    let models = choose_model(&fitted);
    let exponent = anomalous_exponent(&fitted);
    let speeds: Vec<Option<f64>> = motility_rows.iter().map(|m| m.mean_speed).collect();
    let uncertainty = resample_tracks(
        &TrackSums {
            msd: &per_track_msd,
            autocorrelation: &per_track_acf,
            speed: &speeds,
        },
        &msd_points.iter().map(|q| q.lag_frames).collect::<Vec<_>>(),
        &acf_points.iter().map(|q| q.lag_frames).collect::<Vec<_>>(),
        (fit_lags, dt),
        &models.fitted,
        options.resamples,
        RESAMPLE_SEED,
    );
    let angles: Vec<f64> = motility_rows
        .iter()
        .filter_map(|m| m.mean_direction_deg)
        .map(f64::to_radians)
        .collect();
    let recording = longest as f64 * dt;
    let mut warnings = model_warnings(&models, exponent, fitted.len(), fit_lags, dt, recording);
    let c = &options.confinement;
    let axes = Axes {
        axis_deg: options.axis_deg,
    };
    let few = options.resamples.min(STREAM_RESAMPLES);
    let stream = (c.stream || c.lane.is_some()).then(|| stream_geometry(everyone, axes, dt, few, RESAMPLE_SEED));
    let border = c.border.as_ref().and_then(|b| match c.border_zone {
        Some(zone) => Some(border_response(recorded, b, zone, dt, (few, RESAMPLE_SEED))),
        None => {
            warnings.push(
                "no border response: the distance that counts as near the border is unknown (give --border-zone)"
                    .into(),
            );
            None
        }
    });
    Analysis {
        units: units.clone(),
        options: options.clone(),
        tracks: motility_rows,
        steps: step_rows,
        models,
        uncertainty,
        anomalous_exponent: exponent,
        fit_lags,
        per_cell_msd: per_cell_mean_msd(&per_track_msd),
        msd: msd_points,
        autocorrelation: acf_points,
        directions: circular_summary(&angles),
        v_test: v_test(&angles, options.axis_deg),
        frames,
        neighbour_correlation,
        warnings,
        stream,
        border,
        profiles: c.lane.map(|l| lane_profiles(recorded, l, axes, dt)).unwrap_or_default(),
    }
}

/// Each track's MSD sums (lags up to `max_lag`), motility row and direction autocorrelation
/// (up to `acf_lags`), in track order; tracks in parallel.
fn per_track_figures(
    tracks: &[Track],
    (max_lag, acf_lags): (usize, usize),
    dt: f64,
    options: &AnalysisOptions,
) -> (Vec<TrackMsd>, Vec<Motility>, Vec<TrackAutocorrelation>) {
    use rayon::prelude::*;
    let per_track_msd: Vec<TrackMsd> = tracks.par_iter().map(|t| track_msd(&t.path, max_lag)).collect();
    let motility_rows: Vec<Motility> = tracks
        .par_iter()
        .zip(&per_track_msd)
        .map(|(t, msd)| motility((t.id, &t.path, msd), dt, options.axis_deg, options.fixed_elapsed_frames))
        .collect();
    let per_track_acf: Vec<TrackAutocorrelation> = tracks
        .par_iter()
        .map(|t| track_autocorrelation(&t.path, acf_lags, dt))
        .collect();
    (per_track_msd, motility_rows, per_track_acf)
}

/// The seed of the resampling: fixed, so that the same tracks give the same intervals.
pub const RESAMPLE_SEED: u64 = 0x0c0a_7a7a;

/// The tracks with the common drift removed: the drift's displacement from frame f to f + 1
/// is the mean displacement of every track with points at both, accumulated from the first
/// frame and subtracted from every point (a frame pair without any such step adds none).
/// Common practice for stage drift and tissue flow; it also removes any motion all cells
/// share, which is what the other statistics then describe relative to.
pub fn remove_common_drift(tracks: &[Track]) -> Vec<Track> {
    let mut steps: BTreeMap<usize, (f64, f64, usize)> = BTreeMap::new();
    for t in tracks {
        for w in t.path.windows(2).filter(|w| w[1].frame == w[0].frame + 1) {
            let e = steps.entry(w[0].frame).or_default();
            e.0 += w[1].x - w[0].x;
            e.1 += w[1].y - w[0].y;
            e.2 += 1;
        }
    }
    let first = tracks.iter().map(|t| t.path[0].frame).min().unwrap_or(0);
    let last = tracks.iter().map(|t| t.path[t.path.len() - 1].frame).max().unwrap_or(0);
    let mut offset = vec![(0.0, 0.0); last - first + 1];
    for f in first + 1..=last {
        let (px, py) = offset[f - 1 - first];
        let (sx, sy, n) = steps.get(&(f - 1)).copied().unwrap_or((0.0, 0.0, 0));
        let n = n.max(1) as f64;
        offset[f - first] = (px + sx / n, py + sy / n);
    }
    tracks
        .iter()
        .map(|t| Track {
            path: t
                .path
                .iter()
                .map(|p| {
                    let (ox, oy) = offset[p.frame - first];
                    PathPoint::new(p.frame, p.x - ox, p.y - oy)
                })
                .collect(),
            ..t.clone()
        })
        .collect()
}

/// Where the fitted motion models say nothing trustworthy, in words: no model fitted (none is
/// dropped silently: each failure's reason is in the outputs, and a failed persistent walk
/// is warned about here because `compare` uses it), a persistence time below one frame
/// interval (the sampling cannot resolve it) or beyond the longest lag fitted or the longest
/// track (the fit cannot tell persistence from drift or ballistic motion there), a drift
/// that dominates the chosen model, and an anomalous exponent near 2 (directed motion). Our
/// own checks: P is seen in the data only as the bend of the MSD from slope 2 to slope 1 on
/// a log-log plot (Fürth 1920, see [`super::models`]), so a P outside the lags fitted is the
/// fit's extrapolation, not a measurement.
pub fn model_warnings(
    models: &ModelChoice,
    exponent: Option<f64>,
    fitted_points: usize,
    (first, last): (usize, usize),
    dt: f64,
    recording: f64,
) -> Vec<String> {
    let mut out = Vec::new();
    if models.fitted.is_empty() {
        out.push(format!(
            "no motion model could be fitted to the {fitted_points} MSD points on lags {first}-{last} frames: no diffusion coefficient or persistence time is reported"
        ));
    } else if models.persistent_walk().is_none() {
        out.push(format!(
            "the persistent random walk could not be fitted on lags {first}-{last} frames (reasons in summary.json): no persistence time is reported"
        ));
    }
    if let Some(p) = models.persistent_walk().and_then(|f| f.parameters.persistence) {
        if p < dt {
            out.push(format!(
                "persistence time {} is below one frame interval ({}): this sampling cannot resolve it; the persistence and the speed derived from it do not stand",
                significant(p),
                significant(dt)
            ));
        } else if p > (last as f64 * dt).min(recording) {
            out.push(format!(
                "persistence time {} is beyond the longest lag fitted ({}) or the longest track ({}): the fit cannot tell persistence from drift or directed motion; treat the persistence as undetermined",
                significant(p),
                significant(last as f64 * dt),
                significant(recording)
            ));
        }
    }
    if let Some(best) = models.best().filter(|b| b.model.kind == MotionKind::DiffusionWithDrift) {
        let t = last as f64 * dt;
        let (d, v) = (best.parameters.diffusion, best.parameters.drift_speed.unwrap_or(0.0));
        if v * v * t * t > 4.0 * d * t {
            out.push(format!(
                "a drift of {} per time unit dominates the MSD at the longest lag fitted (v²t² = {} against 4Dt = {}): the cells share a motion (stage drift, tissue flow or a common direction); --remove-drift analyses the motion relative to it",
                significant(v),
                significant(v * v * t * t),
                significant(4.0 * d * t)
            ));
        }
    }
    if let Some(a) = exponent.filter(|&a| a > 1.8) {
        out.push(format!(
            "anomalous exponent {a:.2} is near 2 (ballistic): directed motion or a common drift dominates, which a persistent random walk does not describe"
        ));
    }
    out
}

/// Frames whose pairs [`collective`] lists at once before adding them up.
const PAIR_FRAMES_AT_ONCE: usize = 8;

/// Positions and velocities per frame, then the per-frame figures and the pooled neighbour
/// correlation (bins one median neighbour distance wide, eight of them).
fn collective(tracks: &[Track], everyone: &[Track], dt: f64, k: usize) -> (Vec<FrameOrder>, Vec<CorrelationBin>) {
    type FrameData = (Vec<[f64; 2]>, Vec<([f64; 2], [f64; 2])>);
    let mut by_frame: BTreeMap<usize, FrameData> = BTreeMap::new();
    for t in tracks {
        for (i, &PathPoint { frame: f, x, y }) in t.path.iter().enumerate() {
            let e = by_frame.entry(f).or_default();
            if let Some(&PathPoint { frame: g, x: x2, y: y2 }) = t.path.get(i + 1).filter(|n| n.frame == f + 1) {
                debug_assert_eq!(g, f + 1);
                e.1.push(([x, y], [(x2 - x) / dt, (y2 - y) / dt]));
            }
        }
    }
    for p in everyone.iter().flat_map(|t| &t.path) {
        if let Some(e) = by_frame.get_mut(&p.frame) {
            e.0.push([p.x, p.y]);
        }
    }
    // Each frame on its own (in parallel), then gathered in frame order: the same numbers as
    // one frame after the other.
    let by_frame: Vec<(usize, FrameData)> = by_frame.into_iter().collect();
    let per_frame: Vec<(FrameOrder, Vec<f64>)> = by_frame
        .par_iter()
        .map(|(f, (positions, moving))| {
            let nd = neighbour_distance_and_density(positions, k);
            let nn: Vec<f64> = nd.iter().filter_map(|p| p.0).collect();
            let mut dens: Vec<f64> = nd.iter().filter_map(|p| p.1).collect();
            let velocities: Vec<[f64; 2]> = moving.iter().map(|m| m.1).collect();
            let order = FrameOrder {
                frame: *f,
                moving: moving.len(),
                order_parameter: order_parameter(&velocities),
                mean_neighbour_distance: (!nn.is_empty()).then(|| nn.iter().sum::<f64>() / nn.len() as f64),
                median_density: median(&mut dens),
            };
            (order, nn)
        })
        .collect();
    let mut all_nn = Vec::new();
    let mut frames = Vec::with_capacity(per_frame.len());
    for (order, nn) in per_frame {
        all_nn.extend(nn);
        frames.push(order);
    }
    let width = median(&mut all_nn).unwrap_or(0.0);
    if width <= 0.0 {
        return (frames, Vec::new());
    }
    let mut corr = PairCorrelation::new((1..=8).map(|i| i as f64 * width).collect());
    // A few frames' pairs at a time (a frame of a few hundred cells lists tens of thousands).
    for group in by_frame.chunks(PAIR_FRAMES_AT_ONCE) {
        let pairs: Vec<Vec<(usize, f64)>> = group
            .par_iter()
            .map(|(_, (_, moving))| {
                let positions: Vec<[f64; 2]> = moving.iter().map(|m| m.0).collect();
                let velocities: Vec<[f64; 2]> = moving.iter().map(|m| m.1).collect();
                scaled_fluctuations(&velocities).map_or_else(Vec::new, |u| corr.frame_pairs(&positions, &u))
            })
            .collect();
        pairs.iter().for_each(|p| corr.add_pairs(p));
    }
    let bins = corr
        .means()
        .iter()
        .enumerate()
        .map(|(i, &c)| CorrelationBin {
            from: i as f64 * width,
            to: (i + 1) as f64 * width,
            correlation: c,
            pairs: corr.pairs[i],
        })
        .collect();
    (frames, bins)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn track(id: u32, frames: std::ops::Range<usize>, x0: f64) -> Track {
        Track {
            id,
            parent: None,
            path: frames.map(|f| PathPoint::new(f, x0 + f as f64, 0.0)).collect(),
        }
    }

    #[test]
    fn a_fit_the_data_cannot_support_is_said_so() {
        // Construction: straight tracks at 1 px/frame (MSD = t², exponent 2, no bend within
        // any lag) and a walk of alternating unit steps, x = 0, 1, 0, 1, ... (MSD flat at lags
        // above 1: a persistence below one frame or a failed fit); each must carry a warning,
        // where a persistent walk sampled within its bend carries none (below).
        let straight: Vec<Track> = (0..6).map(|k| track(k, 0..40, 50.0 * k as f64)).collect();
        let a = analyze_tracks(&straight, &Units::pixels(), &AnalysisOptions::default());
        assert!(
            a.warnings.iter().any(|w| w.contains("near 2 (ballistic)")),
            "{:?}",
            a.warnings
        );
        let jitter: Vec<Track> = (0..6)
            .map(|k| Track {
                id: k,
                parent: None,
                path: (0..40)
                    .map(|f| PathPoint::new(f, 50.0 * k as f64 + (f % 2) as f64, 0.0))
                    .collect(),
            })
            .collect();
        let a = analyze_tracks(&jitter, &Units::pixels(), &AnalysisOptions::default());
        assert!(
            a.warnings
                .iter()
                .any(|w| w.contains("below one frame interval") || w.contains("fit failed")),
            "{:?}",
            a.warnings
        );
        // Construction: exact persistent-walk MSD points with P = 5 frames, inside the lags
        // fitted (1-10 frames) and the recording (40), raise nothing; P = 12 beyond the lags
        // fitted raises the persistence warning.
        let walk =
            |p: f64| crate::analyze::msd::model_points(1..=10, 1.0, |t| crate::analyze::msd::furth_msd(t, 2.0, p));
        assert!(model_warnings(&choose_model(&walk(5.0)), Some(1.4), 10, (1, 10), 1.0, 40.0).is_empty());
        let far = model_warnings(&choose_model(&walk(12.0)), Some(1.4), 10, (1, 10), 1.0, 40.0);
        assert_eq!(far.len(), 1, "{far:?}");
        assert!(far[0].contains("beyond the longest lag"));
    }

    #[test]
    fn every_tracked_point_is_a_neighbour_whatever_the_filters_keep() {
        // Construction (hand-derived distances): tracks at x = 0 and x = 20 for frames 0-11
        // are analysed; one at x = 5 for frames 0-2 is too short to analyse but is their
        // neighbour. Frame 0: nearest neighbours 5, 5 and 15 px, mean 25/3; frame 5: 20.
        let (a, short, c) = (track(1, 0..12, 0.0), track(2, 0..3, 5.0), track(3, 0..12, 20.0));
        let kept = [a.clone(), c.clone()];
        let everyone = [a, short, c];
        let analysis = analyze_tracks_among(&kept, &everyone, &Units::pixels(), &AnalysisOptions::default());
        let at = |f: usize| analysis.frames.iter().find(|o| o.frame == f).unwrap();
        assert!((at(0).mean_neighbour_distance.unwrap() - 25.0 / 3.0).abs() < 1e-12);
        assert!((at(5).mean_neighbour_distance.unwrap() - 20.0).abs() < 1e-12);
        assert_eq!(at(0).moving, 2, "only the analysed tracks' velocities");
        let alone = analyze_tracks(&kept, &Units::pixels(), &AnalysisOptions::default());
        assert!((alone.frames[0].mean_neighbour_distance.unwrap() - 20.0).abs() < 1e-12);
    }
}
