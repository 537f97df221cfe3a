//! Per-object measurements from pixel moments.

use super::label::Foreground;
use crate::tracks::Detection;

/// Measures every labelled object: centroid (x = column, y = row), area, equivalent diameter,
/// mean and total intensity of `intensity`, major/minor axis and orientation from second
/// moments, and whether it touches the image border. Objects are returned in label order.
/// Only the foreground's pixels (in any order, with their labels) are read, so a frame is not
/// scanned; sums of integer intensities are exact in any order.
///
/// # Method
/// Image moments, M.-K. Hu (1962), "Visual pattern recognition by moment invariants", IRE
/// Trans. Inf. Theory 8(2):179–187, doi:10.1109/TIT.1962.1057692. Axis lengths are those of
/// the ellipse with the same second central moments, `4·√λ` for eigenvalues `λ` of the pixel
/// covariance (the convention of scikit-image `regionprops`). Orientation is the angle of the
/// major axis from +x toward +y (image rows grow downward), in degrees within (−90, 90].
pub fn measure_objects(
    foreground: &Foreground,
    count: u32,
    intensity: &[f32],
    width: usize,
    height: usize,
    frame: usize,
) -> Vec<Detection> {
    let grid = crate::numeric::Grid::new(width, height);
    let mut acc = vec![Moments::default(); count as usize + 1];
    // Gathered first, in a loop of loads that wait on nothing else, so that the misses to the
    // frame's rows (last read at its smoothing) overlap; in the sums' loop below each one
    // waited behind the object's sums (three fifths of this function's time).
    let pixels = &foreground.pixels;
    let gathered: Vec<f32> = pixels.iter().map(|&i| intensity[i as usize]).collect();
    // A run of pixels with one label (most objects are one run: a component's pixels come
    // together) is summed in local variables and stored once: the same additions in the same
    // order, without a store and a load of each sum per pixel for the next pixel to wait on.
    let mut start = 0;
    for run in foreground.labels.chunk_by(|a, b| a == b) {
        let (l, end) = (run[0] as usize, start + run.len());
        if l != 0 {
            let mut m = acc[l].clone();
            for (&i, &value) in pixels[start..end].iter().zip(&gathered[start..end]) {
                m.add(grid.column_row(i as usize), value, (width, height));
            }
            acc[l] = m;
        }
        start = end;
    }
    acc.iter()
        .enumerate()
        .skip(1)
        .filter(|(_, m)| m.n > 0.0)
        .map(|(l, m)| m.detection(frame, l as u32))
        .collect()
}

#[derive(Clone, Default)]
struct Moments {
    n: f64,
    sx: f64,
    sy: f64,
    sxx: f64,
    syy: f64,
    sxy: f64,
    si: f64,
    border: bool,
}

impl Moments {
    /// Adds the pixel at column `x`, row `y` of a `width` x `height` frame, of intensity `value`.
    #[inline(always)]
    fn add(&mut self, (x, y): (usize, usize), value: f32, (width, height): (usize, usize)) {
        let border = x == 0 || y == 0 || x + 1 == width || y + 1 == height;
        let (x, y) = (x as f64, y as f64);
        self.n += 1.0;
        self.sx += x;
        self.sy += y;
        self.sxx += x * x;
        self.syy += y * y;
        self.sxy += x * y;
        self.si += value as f64;
        self.border |= border;
    }

    fn detection(&self, frame: usize, label: u32) -> Detection {
        let (cx, cy) = (self.sx / self.n, self.sy / self.n);
        let cxx = self.sxx / self.n - cx * cx;
        let cyy = self.syy / self.n - cy * cy;
        let cxy = self.sxy / self.n - cx * cy;
        let half_trace = 0.5 * (cxx + cyy);
        let root = (0.25 * (cxx - cyy).powi(2) + cxy * cxy).sqrt();
        let (l1, l2) = ((half_trace + root).max(0.0), (half_trace - root).max(0.0));
        let mut orientation = 0.5 * (2.0 * cxy).atan2(cxx - cyy).to_degrees();
        if orientation <= -90.0 {
            orientation += 180.0;
        }
        Detection {
            frame,
            label,
            x: cx,
            y: cy,
            area_px: self.n,
            equivalent_diameter_px: 2.0 * (self.n / std::f64::consts::PI).sqrt(),
            mean_intensity: self.si / self.n,
            total_intensity: self.si,
            major_axis_px: 4.0 * l1.sqrt(),
            minor_axis_px: 4.0 * l2.sqrt(),
            orientation_deg: orientation,
            touches_border: self.border,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rectangle_moments() {
        // Source: a uniform w-pixel segment has variance (w²−1)/12 (discrete uniform
        // distribution), so a 9x3 block has major 4·√(80/12), minor 4·√(8/12), orientation 0.
        let (w, h) = (12, 6);
        let mut labels = vec![0u32; w * h];
        for y in 1..4 {
            for x in 2..11 {
                labels[y * w + x] = 1;
            }
        }
        let foreground = Foreground {
            pixels: (0..(w * h) as u32).collect(),
            labels,
        };
        let d = &measure_objects(&foreground, 1, &vec![2.0; w * h], w, h, 0)[0];
        assert_eq!((d.x, d.y, d.area_px), (6.0, 2.0, 27.0));
        assert!((d.major_axis_px - 4.0 * (80.0f64 / 12.0).sqrt()).abs() < 1e-9);
        assert!((d.minor_axis_px - 4.0 * (8.0f64 / 12.0).sqrt()).abs() < 1e-9);
        assert_eq!(d.orientation_deg, 0.0);
        assert_eq!(d.total_intensity, 54.0);
        assert!(!d.touches_border);
    }

    #[test]
    fn sums_follow_the_pixels_order_whatever_the_runs_of_labels() {
        // Source: the definition, each object's sums taken pixel by pixel in the list's order
        // (so the same roundings): pixels in a shuffled order with labels in runs of every
        // length (one pixel to many, background among them), objects on the frame's border,
        // must give the same measures to the last bit.
        let (w, h) = (23, 17);
        let mut rng = crate::numeric::Rng::new(8);
        let mut pixels: Vec<u32> = (0..(w * h) as u32).collect();
        for k in (1..pixels.len()).rev() {
            pixels.swap(k, (rng.uniform() * (k + 1) as f64) as usize % (k + 1));
        }
        let mut labels = Vec::with_capacity(pixels.len());
        while labels.len() < pixels.len() {
            let run = 1 + (rng.uniform() * 9.0) as usize;
            let label = (rng.uniform() * 6.0) as u32;
            labels.extend(std::iter::repeat_n(label, run.min(pixels.len() - labels.len())));
        }
        let intensity: Vec<f32> = (0..w * h).map(|i| (i * 37 % 101) as f32 * 0.37 + 0.1).collect();
        let got = measure_objects(
            &Foreground {
                pixels: pixels.clone(),
                labels: labels.clone(),
            },
            5,
            &intensity,
            w,
            h,
            3,
        );
        let mut want = vec![Moments::default(); 6];
        for (&p, &l) in pixels.iter().zip(&labels).filter(|(_, &l)| l > 0) {
            let (x, y) = ((p as usize % w) as f64, (p as usize / w) as f64);
            let m = &mut want[l as usize];
            (m.n, m.sx, m.sy) = (m.n + 1.0, m.sx + x, m.sy + y);
            (m.sxx, m.syy, m.sxy) = (m.sxx + x * x, m.syy + y * y, m.sxy + x * y);
            m.si += intensity[p as usize] as f64;
            m.border |= x == 0.0 || y == 0.0 || x == (w - 1) as f64 || y == (h - 1) as f64;
        }
        let want: Vec<Detection> = (1..6)
            .filter(|&l| want[l].n > 0.0)
            .map(|l| want[l].detection(3, l as u32))
            .collect();
        assert_eq!(got.len(), 5);
        assert!(got.iter().any(|d| d.touches_border));
        assert_eq!(format!("{got:?}"), format!("{want:?}"));
    }
}
