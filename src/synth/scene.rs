//! The simulated scene: nuclei as ellipses that move frame by frame, then rendered into
//! photon counts with optics, illumination, bleaching and camera noise.

use super::{truth_points_of, Scenario, SynthParams};
use crate::image2d;
use crate::numeric::Rng;
use crate::preprocess::gaussian_blur;
use crate::tracks::TrackPoint;

/// One nucleus at one time point.
#[derive(Debug, Clone, PartialEq)]
pub struct Nucleus {
    /// Track identifier (from 1; also its label in the truth label stack).
    pub id: u32,
    /// Centre column, px.
    pub x: f64,
    /// Centre row, px.
    pub y: f64,
    /// Semi-major axis, px.
    pub a: f64,
    /// Semi-minor axis, px.
    pub b: f64,
    /// Major-axis angle, radians.
    pub angle: f64,
    /// Peak brightness, photons at frame 0.
    pub brightness: f64,
    /// Missed in this frame (a one-frame dropout): not drawn, not in the truth.
    pub hidden: bool,
    vx: f64,
    vy: f64,
    /// Radius the nucleus grows back to after a division, px.
    adult_radius: f64,
    /// In mitosis: frames left before the division, and the axes to divide with.
    mitosis: Option<(usize, f64, f64)>,
    /// Drawn at this share of its brightness in this frame (1 = as usual).
    dimmed: f64,
}

impl Nucleus {
    fn radius(&self) -> f64 {
        0.5 * (self.a + self.b)
    }

    /// Chromatin-like texture at the point (u, v) of the nucleus's own rotated frame (see
    /// [`Pose::local`]), in [−1, 1]: value noise (random values on a lattice, smoothly
    /// interpolated; Perlin (1985), SIGGRAPH Comput. Graph. 19(3):287–296, in its simpler
    /// value form), so the pattern moves and turns with it. Two octaves: granules of about
    /// 2.5 px and patches of about 6 px.
    fn texture_at(&self, (u, v): (f64, f64)) -> f64 {
        0.6 * value_noise(self.id, 0, u / 2.5, v / 2.5) + 0.4 * value_noise(self.id, 1, u / 6.0, v / 6.0)
    }

    /// Its centre, axes and rotation, the rotation's cosine and sine worked out once for the
    /// many pixels drawn around it.
    fn pose(&self) -> Pose {
        Pose {
            x: self.x,
            y: self.y,
            a: self.a,
            b: self.b,
            cos: self.angle.cos(),
            sin: self.angle.sin(),
        }
    }
}

/// A nucleus's ellipse in the frame: centre, half-axes, and the cosine and sine of its angle.
#[derive(Debug, Clone, Copy)]
struct Pose {
    x: f64,
    y: f64,
    a: f64,
    b: f64,
    cos: f64,
    sin: f64,
}

impl Pose {
    /// Pixel (px, py) in the ellipse's own frame: along its major and minor axes.
    fn local(&self, px: f64, py: f64) -> (f64, f64) {
        let (dx, dy) = (px - self.x, py - self.y);
        (dx * self.cos + dy * self.sin, -dx * self.sin + dy * self.cos)
    }

    /// Normalised elliptical radius of pixel (px, py): 1 on the boundary.
    fn normalised_radius(&self, px: f64, py: f64) -> f64 {
        let (u, v) = self.local(px, py);
        ((u / self.a).powi(2) + (v / self.b).powi(2)).sqrt()
    }
}

/// Positions and shapes of every nucleus in every frame.
pub struct Scene {
    params: SynthParams,
    frames: Vec<Vec<Nucleus>>,
    /// Mother of each daughter nucleus (by id).
    parents: std::collections::BTreeMap<u32, u32>,
}

/// How a scenario moves and spaces its nuclei.
struct Motion {
    persistence: f64,
    kick: f64,
    drift_x: f64,
    separation: f64,
    band: Option<(f64, f64)>,
}

fn motion(p: &SynthParams) -> Motion {
    let mut m = scenario_motion(p);
    // A drift given for any scenario moves its nuclei too (the stripe's is its default).
    m.drift_x = p.drift_px_per_frame;
    if let Some(sep) = p.separation {
        m.separation = sep;
    }
    if let Some(walk) = p.motion {
        let a = walk.memory();
        m.persistence = a;
        m.kick = walk.component_sd() * (1.0 - a * a).sqrt();
    }
    m
}

fn scenario_motion(p: &SynthParams) -> Motion {
    match p.scenario {
        Scenario::Dish => Motion {
            persistence: 0.85,
            kick: 0.5,
            drift_x: 0.0,
            separation: 1.2,
            band: None,
        },
        Scenario::Crowded => Motion {
            persistence: 0.8,
            kick: 0.3,
            drift_x: 0.0,
            separation: 0.85,
            band: None,
        },
        Scenario::Stripe => {
            let h = p.height as f64;
            Motion {
                persistence: 0.8,
                kick: 0.35,
                drift_x: p.drift_px_per_frame,
                separation: 1.0,
                band: Some((0.3 * h, 0.7 * h)),
            }
        }
    }
}

impl Scene {
    /// Runs the motion model for every frame.
    pub fn simulate(params: &SynthParams) -> Scene {
        let mut rng = Rng::new(params.seed);
        let m = motion(params);
        let mut next_id = 1;
        let mut cells: Vec<Nucleus> = Vec::new();
        for _ in 0..params.nuclei * 20 {
            if cells.len() >= params.nuclei {
                break;
            }
            let n = new_nucleus(&mut rng, params, &m, &mut next_id, None);
            if cells.iter().all(|c| far_enough(c, &n, m.separation)) {
                cells.push(n);
            } else {
                next_id -= 1;
            }
        }
        let mut frames = vec![cells.clone()];
        let mut parents = std::collections::BTreeMap::new();
        for _ in 1..params.frames {
            step(&mut cells, &mut rng, &m);
            cells.retain(|c| inside_margin(c, params));
            if params.division_rate > 0.0 {
                divide(&mut cells, &mut rng, params, &mut next_id, &mut parents);
            }
            replenish(&mut cells, &mut rng, params, &m, &mut next_id);
            separate(&mut cells, &m);
            if params.dropout_rate > 0.0 {
                drop_out(&mut cells, &mut rng, params.dropout_rate);
            }
            if params.dimming_rate > 0.0 {
                dim(&mut cells, &mut rng, params.dimming_rate);
            }
            frames.push(cells.clone());
        }
        Scene {
            params: params.clone(),
            frames,
            parents,
        }
    }

    /// Nuclei present at frame `t`.
    pub fn nuclei(&self, t: usize) -> &[Nucleus] {
        &self.frames[t]
    }

    /// The 16-bit frame `t` as a camera would record it.
    pub fn render(&self, t: usize) -> Vec<u16> {
        let p = &self.params;
        let (w, h) = (p.width, p.height);
        let signal = if p.look.seam_depth > 0.0 {
            self.pressed_signal(t)
        } else {
            self.overlaid_signal(t)
        };
        // Source of the PSF width: a diffraction-limited spot at 20-40x spans ~1-2 px
        // (common practice); sigma 1 px by default, wider in the tissue look.
        let blurred = gaussian_blur(&image2d::from_vec(w, h, signal), p.look.psf_sigma_px as f32);
        let bleach = (1.0 - p.bleach_per_frame).powi(t as i32);
        let mut rng = Rng::new(p.seed ^ (t as u64 + 1).wrapping_mul(0x9e37_79b9_7f4a_7c15));
        let blurred = blurred.as_slice().expect("standard layout");
        let mut frame = Vec::with_capacity(w * h);
        let columns: Vec<f64> = (0..w).map(|x| x as f64 / w as f64).collect();
        for (y, row) in blurred.chunks_exact(w).enumerate() {
            let v = y as f64 / h as f64;
            frame.extend(row.iter().zip(&columns).map(|(&signal, &u)| {
                let light = illumination(u, v, p.vignette);
                let photons = rng.poisson(light * (bleach * signal as f64 + p.background_photons));
                let grey = p.offset + p.gain * photons + p.read_noise * rng.ziggurat_normal();
                // Rounded half up and clamped to 16 bits by the saturating conversion.
                (grey + 0.5).max(0.0) as u16
            }));
        }
        frame
    }

    /// Noise-free signal of frame `t` with overlapping nuclei drawn over each other (the
    /// brighter wins).
    fn overlaid_signal(&self, t: usize) -> Vec<f32> {
        let (w, h) = (self.params.width, self.params.height);
        // Read before written below (see `filled`).
        let mut signal = crate::numeric::filled(w * h, 0f32);
        for n in self.frames[t].iter().filter(|n| !n.hidden) {
            let pose = n.pose();
            for_each_pixel_near(n, w, h, 2.5, |i, x, y| {
                signal[i] = signal[i].max(self.nucleus_value(n, &pose, x, y) as f32);
            });
        }
        signal
    }

    /// Noise-free signal of frame `t` with pressed nuclei: each pixel drawn by the nucleus
    /// whose boundary is farther away (the truth labels' rule), dimmed by `seam_depth` at the
    /// interface with the runner-up, falling off over about a pixel (a Gaussian of the
    /// distance to the interface, which is about (r₂ − r₁)·radius/2 for normalised radii r₁ ≤
    /// r₂).
    fn pressed_signal(&self, t: usize) -> Vec<f32> {
        let (w, h) = (self.params.width, self.params.height);
        let nuclei: Vec<(&Nucleus, Pose)> = self.frames[t]
            .iter()
            .filter(|n| !n.hidden)
            .map(|n| (n, n.pose()))
            .collect();
        // Per pixel: (r₁, owner), then r₂.
        let mut first = vec![(f64::INFINITY, usize::MAX); w * h];
        let mut second = vec![f64::INFINITY; w * h];
        for (k, (n, pose)) in nuclei.iter().enumerate() {
            for_each_pixel_near(n, w, h, 2.5, |i, x, y| {
                let r = pose.normalised_radius(x, y);
                if r < first[i].0 {
                    second[i] = first[i].0;
                    first[i] = (r, k);
                } else if r < second[i] {
                    second[i] = r;
                }
            });
        }
        let depth = self.params.look.seam_depth;
        (0..w * h)
            .map(|i| {
                let (r1, k) = first[i];
                if k == usize::MAX {
                    return 0.0;
                }
                let (n, pose) = &nuclei[k];
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                let to_interface = (second[i] - r1) * n.radius() / 2.0;
                let seam = 1.0 - depth * (-(to_interface / 0.75).powi(2)).exp();
                (self.nucleus_value(n, pose, x, y) * seam) as f32
            })
            .collect()
    }

    /// The brightness of nucleus `n` at pixel (x, y): a soft-edged ellipse, textured.
    fn nucleus_value(&self, n: &Nucleus, pose: &Pose, x: f64, y: f64) -> f64 {
        let r = pose.normalised_radius(x, y);
        let edge = 1.5 * n.radius();
        let mut profile = 1.0 / (1.0 + ((r - 1.0) * edge).exp());
        let texture = self.params.look.texture;
        if texture > 0.0 {
            profile *= (1.0 + texture * n.texture_at(pose.local(x, y))).max(0.0);
        }
        let mitotic = if n.mitosis.is_some() { MITOTIC_BRIGHTNESS } else { 1.0 };
        n.brightness * mitotic * n.dimmed * profile
    }

    /// The truth label image of frame `t`: each pixel inside a nucleus carries its track id;
    /// where ellipses overlap, the nucleus whose boundary is farther away wins.
    pub fn labels(&self, t: usize) -> Vec<u16> {
        let (w, h) = (self.params.width, self.params.height);
        let mut best = vec![f64::INFINITY; w * h];
        let mut labels = vec![0u16; w * h];
        for n in self.frames[t].iter().filter(|n| !n.hidden) {
            let pose = n.pose();
            for_each_pixel_near(n, w, h, 0.0, |i, x, y| {
                let r = pose.normalised_radius(x, y);
                if r <= 1.0 && r < best[i] {
                    best[i] = r;
                    labels[i] = n.id as u16;
                }
            });
        }
        labels
    }

    /// Truth points of frame `t` from its label image.
    pub fn visible_points(&self, t: usize, labels: &[u16]) -> Vec<TrackPoint> {
        let mut points = truth_points_of(labels, self.params.width, t);
        for p in points.iter_mut() {
            p.parent_id = self.parents.get(&p.track_id).copied();
        }
        points
    }
}

/// Smoothly interpolated lattice noise in [−1, 1] for nucleus `id` and octave `octave`.
fn value_noise(id: u32, octave: u32, u: f64, v: f64) -> f64 {
    let (i, j) = (u.floor(), v.floor());
    let (fu, fv) = (u - i, v - j);
    let smooth = |f: f64| f * f * (3.0 - 2.0 * f);
    let (su, sv) = (smooth(fu), smooth(fv));
    let at = |di: i64, dj: i64| lattice_value(id, octave, i as i64 + di, j as i64 + dj);
    let top = at(0, 0) + su * (at(1, 0) - at(0, 0));
    let bottom = at(0, 1) + su * (at(1, 1) - at(0, 1));
    top + sv * (bottom - top)
}

/// A reproducible random value in [−1, 1] for one lattice point (SplitMix64 finaliser as the
/// hash, as in [`Rng::new`]).
fn lattice_value(id: u32, octave: u32, i: i64, j: i64) -> f64 {
    let mut x = (id as u64) << 40 ^ (octave as u64) << 36 ^ ((i as u64) << 18) ^ (j as u64 & 0x3_ffff);
    x = x.wrapping_add(0x9e37_79b9_7f4a_7c15);
    x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    x ^= x >> 31;
    (x >> 11) as f64 / (1u64 << 52) as f64 - 1.0
}

/// Uneven illumination: a vignette falling by `vignette` to the corners (0.35 by default: to
/// 65%) plus a 15% left-right tilt.
#[inline]
pub fn illumination(x: f64, y: f64, vignette: f64) -> f64 {
    let r2 = ((x - 0.5).powi(2) + (y - 0.5).powi(2)) / 0.5;
    (1.0 - vignette * r2) * (0.925 + 0.15 * x)
}

fn for_each_pixel_near(n: &Nucleus, w: usize, h: usize, pad: f64, mut f: impl FnMut(usize, f64, f64)) {
    let reach = n.a.max(n.b) + pad;
    let x0 = (n.x - reach).floor().max(0.0) as usize;
    let y0 = (n.y - reach).floor().max(0.0) as usize;
    let x1 = ((n.x + reach).ceil() as isize).min(w as isize - 1);
    let y1 = ((n.y + reach).ceil() as isize).min(h as isize - 1);
    if x1 < 0 || y1 < 0 {
        return;
    }
    for y in y0..=y1 as usize {
        for x in x0..=x1 as usize {
            f(y * w + x, x as f64, y as f64);
        }
    }
}

fn new_nucleus(rng: &mut Rng, p: &SynthParams, m: &Motion, next_id: &mut u32, at: Option<(f64, f64)>) -> Nucleus {
    let r = 0.5 * p.diameter_px * (1.0 + 0.08 * rng.normal()).clamp(0.75, 1.25);
    let aspect = (1.0 + 0.15 * rng.normal().abs()).min(p.look.max_axis_ratio);
    let (x, y) = at.unwrap_or_else(|| {
        let (ylo, yhi) = m.band.unwrap_or((0.0, p.height as f64));
        (rng.range(0.0, p.width as f64), rng.range(ylo + r, yhi - r))
    });
    let id = *next_id;
    *next_id += 1;
    let mut n = Nucleus {
        id,
        x,
        y,
        a: r * aspect.sqrt(),
        b: r / aspect.sqrt(),
        angle: rng.range(0.0, std::f64::consts::PI),
        brightness: p.signal_photons * (p.look.brightness_spread * rng.normal()).exp(),
        hidden: false,
        vx: m.drift_x,
        vy: 0.0,
        adult_radius: r,
        mitosis: None,
        dimmed: 1.0,
    };
    if let Some(walk) = p.motion {
        // Start from the walk's stationary velocity distribution.
        let sd = walk.component_sd();
        n.vx += sd * rng.normal();
        n.vy = sd * rng.normal();
    }
    n
}

/// Daughters are 0.75 of the mother's radius (about 0.56 of her area, our own choice within
/// the range seen for nuclei just after mitosis) and grow back by 1% a frame.
const DAUGHTER_RADIUS: f64 = 0.75;

/// Each nucleus divides with probability `rate` per frame: it is replaced by two daughters
/// with new ids, placed on either side of it along a random axis, touching each other.
fn divide(
    cells: &mut Vec<Nucleus>,
    rng: &mut Rng,
    p: &SynthParams,
    next_id: &mut u32,
    parents: &mut std::collections::BTreeMap<u32, u32>,
) {
    let mut out = Vec::with_capacity(cells.len() + 4);
    for mut c in cells.drain(..) {
        match c.mitosis {
            Some((left, a, b)) if left > 1 => {
                c.mitosis = Some((left - 1, a, b));
                out.push(c);
                continue;
            }
            Some((_, a, b)) => {
                // Divide now, with the axes she had before rounding up.
                (c.a, c.b) = (a, b);
            }
            None => {
                if c.hidden || rng.uniform() >= p.division_rate {
                    grow(&mut out, c);
                    continue;
                }
                if p.mitosis_frames > 0 {
                    let round = MITOTIC_RADIUS * c.radius();
                    c.mitosis = Some((p.mitosis_frames, c.a, c.b));
                    (c.a, c.b) = (round, round);
                    out.push(c);
                    continue;
                }
            }
        }
        c.mitosis = None;
        let axis = rng.range(0.0, std::f64::consts::PI);
        let offset = 0.8 * DAUGHTER_RADIUS * c.radius();
        for side in [-1.0, 1.0] {
            let mut d = c.clone();
            d.id = *next_id;
            *next_id += 1;
            parents.insert(d.id, c.id);
            d.a *= DAUGHTER_RADIUS;
            d.b *= DAUGHTER_RADIUS;
            d.x += side * offset * axis.cos();
            d.y += side * offset * axis.sin();
            d.vx = c.vx + side * 0.5 * axis.cos();
            d.vy = c.vy + side * 0.5 * axis.sin();
            out.push(d);
        }
    }
    *cells = out;
}

/// A mother in mitosis is round with 85% of her radius and 1.6x as bright (our own choices
/// within what condensed chromatin looks like in a nuclear marker).
const MITOTIC_RADIUS: f64 = 0.85;
const MITOTIC_BRIGHTNESS: f64 = 1.6;

/// One-frame dimming: each nucleus is drawn at 35% of its brightness with probability `rate`,
/// never twice in a row.
fn dim(cells: &mut [Nucleus], rng: &mut Rng, rate: f64) {
    for c in cells.iter_mut() {
        c.dimmed = if c.dimmed == 1.0 && rng.uniform() < rate {
            0.35
        } else {
            1.0
        };
    }
}

fn grow(out: &mut Vec<Nucleus>, mut c: Nucleus) {
    if c.radius() < c.adult_radius {
        c.a *= 1.01;
        c.b *= 1.01;
    }
    out.push(c);
}

/// One-frame dropouts: each nucleus is missed with probability `rate`, never twice in a row.
fn drop_out(cells: &mut [Nucleus], rng: &mut Rng, rate: f64) {
    for c in cells.iter_mut() {
        c.hidden = !c.hidden && rng.uniform() < rate;
    }
}

fn step(cells: &mut [Nucleus], rng: &mut Rng, m: &Motion) {
    for c in cells.iter_mut() {
        c.vx = m.drift_x + m.persistence * (c.vx - m.drift_x) + m.kick * rng.normal();
        c.vy = m.persistence * c.vy + m.kick * rng.normal();
        c.x += c.vx;
        c.y += c.vy;
        c.angle += 0.05 * rng.normal();
        if let Some((lo, hi)) = m.band {
            let r = c.radius();
            if c.y < lo + r {
                c.y = 2.0 * (lo + r) - c.y;
                c.vy = c.vy.abs();
            }
            if c.y > hi - r {
                c.y = 2.0 * (hi - r) - c.y;
                c.vy = -c.vy.abs();
            }
        }
    }
}

fn inside_margin(c: &Nucleus, p: &SynthParams) -> bool {
    let r = c.radius();
    c.x > -r && c.y > -r && c.x < p.width as f64 + r && c.y < p.height as f64 + r
}

/// New nuclei enter across the border to keep the population near its starting size.
fn replenish(cells: &mut Vec<Nucleus>, rng: &mut Rng, p: &SynthParams, m: &Motion, next_id: &mut u32) {
    let (w, h) = (p.width as f64, p.height as f64);
    let mut attempts = 0;
    while cells.len() < p.nuclei && attempts < 4 {
        attempts += 1;
        let r = 0.5 * p.diameter_px;
        let at = match m.band {
            Some((lo, hi)) => (-0.5 * r, rng.range(lo + r, hi - r)),
            None => match (rng.uniform() * 4.0) as u32 {
                0 => (-0.5 * r, rng.range(0.0, h)),
                1 => (w + 0.5 * r, rng.range(0.0, h)),
                2 => (rng.range(0.0, w), -0.5 * r),
                _ => (rng.range(0.0, w), h + 0.5 * r),
            },
        };
        let mut n = new_nucleus(rng, p, m, next_id, Some(at));
        if p.motion.is_some() {
            // Keep the drawn speed, pointed inward across the border it enters by.
            n.vx = enter_inward(n.vx - m.drift_x, at.0, w) + m.drift_x;
            n.vy = enter_inward(n.vy, at.1, h);
            if cells.iter().all(|c| far_enough(c, &n, m.separation)) {
                cells.push(n);
            } else {
                *next_id -= 1;
            }
            continue;
        }
        // Enter moving inward.
        n.vx = m.drift_x
            + if at.0 < 0.0 {
                1.0
            } else if at.0 > w {
                -1.0
            } else {
                0.0
            };
        n.vy = if at.1 < 0.0 {
            1.0
        } else if at.1 > h {
            -1.0
        } else {
            0.0
        };
        if cells.iter().all(|c| far_enough(c, &n, m.separation)) {
            cells.push(n);
        } else {
            *next_id -= 1;
        }
    }
}

/// A velocity component of a nucleus entering at coordinate `at` of a side `0..extent`:
/// pointed inward when it enters across that side's border, unchanged otherwise.
fn enter_inward(v: f64, at: f64, extent: f64) -> f64 {
    if at < 0.0 {
        v.abs()
    } else if at > extent {
        -v.abs()
    } else {
        v
    }
}

fn far_enough(a: &Nucleus, b: &Nucleus, separation: f64) -> bool {
    let d2 = (a.x - b.x).powi(2) + (a.y - b.y).powi(2);
    d2 >= (separation * (a.radius() + b.radius())).powi(2)
}

/// Pushes apart pairs closer than the scenario's separation (a soft contact repulsion).
fn separate(cells: &mut [Nucleus], m: &Motion) {
    for _ in 0..3 {
        for i in 0..cells.len() {
            for j in i + 1..cells.len() {
                let (dx, dy) = (cells[j].x - cells[i].x, cells[j].y - cells[i].y);
                let d = (dx * dx + dy * dy).sqrt().max(1e-6);
                let want = m.separation * (cells[i].radius() + cells[j].radius());
                if d < want {
                    let push = 0.5 * (want - d) / d;
                    cells[i].x -= dx * push;
                    cells[i].y -= dy * push;
                    cells[j].x += dx * push;
                    cells[j].y += dy * push;
                }
            }
        }
    }
}
