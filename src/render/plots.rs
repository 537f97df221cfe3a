//! Charts for the HTML report, drawn as SVG with the `plotters` library: line charts (linear
//! or log-log), origin-centred trajectories, a rose diagram of directions, histograms, and
//! strip charts of values per condition with replicate means. Our own muted palette on white.

use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Report colours (our own choice: muted, distinguishable on white).
pub const REPORT_COLOURS: [RGBColor; 8] = [
    RGBColor(0, 110, 120),
    RGBColor(200, 90, 20),
    RGBColor(120, 60, 140),
    RGBColor(100, 120, 20),
    RGBColor(50, 80, 170),
    RGBColor(170, 50, 60),
    RGBColor(90, 90, 90),
    RGBColor(20, 140, 80),
];

/// Size of every chart, px.
const SIZE: (u32, u32) = (520, 360);
const FONT: (&str, u32) = ("sans-serif", 14);

/// A named series of `(x, y)` points.
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend text.
    pub label: String,
    /// Points.
    pub points: Vec<(f64, f64)>,
    /// Draw markers instead of a line.
    pub markers: bool,
    /// An interval band `(x, low, high)` drawn shaded under the series (empty: none).
    pub band: Vec<(f64, f64, f64)>,
}

impl Series {
    /// A series without a band.
    pub fn new(label: impl Into<String>, points: Vec<(f64, f64)>, markers: bool) -> Self {
        Series {
            label: label.into(),
            points,
            markers,
            band: Vec::new(),
        }
    }
}

fn colour(i: usize) -> RGBColor {
    REPORT_COLOURS[i % REPORT_COLOURS.len()]
}

/// A range that plotters can draw: widened when empty or degenerate.
fn span(values: impl Iterator<Item = f64>, pad: f64) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let width = (hi - lo).max(1e-9);
    (lo - pad * width, hi + pad * width)
}

type DrawResult = Result<(), Box<dyn std::error::Error>>;

/// Draws into an SVG string; a drawing error yields a chart that says so instead of failing
/// the report.
fn svg(draw: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> DrawResult) -> String {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, SIZE).into_drawing_area();
        let ok = root.fill(&WHITE).is_ok() && draw(&root).is_ok() && root.present().is_ok();
        if !ok {
            let _ = root.draw_text("chart could not be drawn", &FONT.into_text_style(&root), (20, 20));
        }
    }
    out
}

/// A chart with its caption and room for the axis labels.
fn framed<'a, 'b>(root: &'a DrawingArea<SVGBackend<'b>, Shift>, title: &str) -> ChartBuilder<'a, 'b, SVGBackend<'b>> {
    let mut b = ChartBuilder::on(root);
    b.caption(title, FONT)
        .margin(12)
        .x_label_area_size(36)
        .y_label_area_size(56);
    b
}

/// A tick label that fits its quantity: whole numbers without decimals (frames, counts), others
/// with the few digits that tell them apart.
fn tick(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return "0".into();
    }
    if (v - v.round()).abs() < 1e-9 * v.abs().max(1.0) && v.abs() < 1e6 {
        return format!("{}", v.round() as i64);
    }
    if v.abs() >= 1e5 || v.abs() < 1e-3 {
        return format!("{v:.1e}");
    }
    let decimals = (2 - v.abs().log10().floor() as i32).clamp(0, 6) as usize;
    let s = format!("{v:.decimals$}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// A line chart; with `log`, both axes are logarithmic (non-positive points are left out).
pub fn line_chart(title: &str, x_desc: &str, y_desc: &str, series: &[Series], log: bool) -> String {
    let keep = |p: &&(f64, f64)| !log || (p.0 > 0.0 && p.1 > 0.0);
    let bands: Vec<(f64, f64)> = series
        .iter()
        .flat_map(|s| s.band.iter().flat_map(|b| [(b.0, b.1), (b.0, b.2)]))
        .collect();
    let all = || series.iter().flat_map(|s| s.points.iter()).chain(&bands).filter(keep);
    let (x0, x1) = span(all().map(|p| p.0), if log { 0.0 } else { 0.02 });
    let (y0, y1) = span(all().map(|p| p.1), if log { 0.0 } else { 0.05 });
    svg(|root| {
        let mut b = framed(root, title);
        if log {
            let (x0, x1) = (x0.max(1e-12), x1.max(x0 * 10.0));
            let (y0, y1) = (y0.max(1e-12), y1.max(y0 * 10.0));
            let mut chart =
                b.build_cartesian_2d((x0 * 0.8..x1 * 1.25).log_scale(), (y0 * 0.8..y1 * 1.25).log_scale())?;
            fill_chart(&mut chart, series, x_desc, y_desc, keep)?;
        } else {
            let mut chart = b.build_cartesian_2d(x0..x1, y0..y1)?;
            fill_chart(&mut chart, series, x_desc, y_desc, keep)?;
        }
        Ok(())
    })
}

/// Axes, every series and the legend of a line chart (linear or logarithmic axes alike).
fn fill_chart<'a, DB: DrawingBackend + 'a, X, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    series: &[Series],
    x_desc: &str,
    y_desc: &str,
    keep: impl Fn(&&(f64, f64)) -> bool + Copy,
) -> DrawResult
where
    X: Ranged<ValueType = f64> + ValueFormatter<f64>,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
    DB::ErrorType: 'static,
{
    chart
        .configure_mesh()
        .x_desc(x_desc)
        .y_desc(y_desc)
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .draw()?;
    for (i, s) in series.iter().enumerate() {
        draw_series(chart, s, i, keep)?;
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()?;
    Ok(())
}

fn draw_series<'a, DB: DrawingBackend + 'a, X, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    s: &Series,
    i: usize,
    keep: impl Fn(&&(f64, f64)) -> bool,
) -> DrawResult
where
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
    DB::ErrorType: 'static,
{
    let c = colour(i);
    let band: Vec<(f64, f64, f64)> = s
        .band
        .iter()
        .copied()
        .filter(|b| keep(&&(b.0, b.1)) && keep(&&(b.0, b.2)))
        .collect();
    if band.len() > 1 {
        let outline: Vec<(f64, f64)> = band
            .iter()
            .map(|b| (b.0, b.2))
            .chain(band.iter().rev().map(|b| (b.0, b.1)))
            .collect();
        chart.draw_series(std::iter::once(Polygon::new(outline, c.mix(0.2).filled())))?;
    }
    let pts: Vec<(f64, f64)> = s.points.iter().filter(keep).copied().collect();
    let anno = if s.markers {
        chart.draw_series(pts.iter().map(|&p| Circle::new(p, 3, c.filled())))?
    } else {
        chart.draw_series(LineSeries::new(pts, c.stroke_width(2)))?
    };
    anno.label(s.label.clone())
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], c.stroke_width(2)));
    Ok(())
}

/// Tracks moved to start at the origin, each a thin line (at most `limit` tracks).
pub fn trajectories(title: &str, unit: &str, tracks: &[Vec<(f64, f64)>], limit: usize) -> String {
    let shown: Vec<Vec<(f64, f64)>> = tracks
        .iter()
        .take(limit)
        .map(|t| t.iter().map(|p| (p.0 - t[0].0, p.1 - t[0].1)).collect())
        .collect();
    let reach = shown
        .iter()
        .flatten()
        .map(|p| p.0.abs().max(p.1.abs()))
        .fold(1e-9, f64::max)
        * 1.05;
    svg(|root| {
        let mut chart = framed(root, title).build_cartesian_2d(-reach..reach, reach..-reach)?;
        chart
            .configure_mesh()
            .x_desc(format!("x ({unit})"))
            .y_desc(format!("y ({unit}), down as in the image"))
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
            .draw()?;
        for (i, t) in shown.iter().enumerate() {
            chart.draw_series(LineSeries::new(t.iter().copied(), colour(i).mix(0.7)))?;
        }
        Ok(())
    })
}

/// A rose diagram: the share of directions (degrees, +x toward +y) in each of `sectors`
/// equal sectors, as wedges whose radius is the share.
pub fn rose(title: &str, angles_deg: &[f64], sectors: usize) -> String {
    let mut counts = vec![0usize; sectors];
    for a in angles_deg {
        let k = ((a.rem_euclid(360.0) / 360.0 * sectors as f64) as usize).min(sectors - 1);
        counts[k] += 1;
    }
    let total = angles_deg.len().max(1) as f64;
    let max_share = counts.iter().map(|&c| c as f64 / total).fold(1e-9, f64::max) * 1.1;
    svg(|root| {
        let mut chart = ChartBuilder::on(root)
            .caption(format!("{title} (n = {})", angles_deg.len()), FONT)
            .margin(12)
            .build_cartesian_2d(-max_share * 1.45..max_share * 1.45, max_share..-max_share)?;
        for ring in 1..=4 {
            let r = max_share * ring as f64 / 4.0;
            let circle: Vec<(f64, f64)> = (0..=72)
                .map(|k| {
                    let a = k as f64 * 5f64.to_radians();
                    (r * a.cos(), r * a.sin())
                })
                .collect();
            chart.draw_series(LineSeries::new(circle, RGBColor(200, 200, 200)))?;
        }
        let width = 360.0 / sectors as f64;
        for (k, &c) in counts.iter().enumerate() {
            let r = c as f64 / total;
            let mut wedge = vec![(0.0, 0.0)];
            for s in 0..=8 {
                let a = (k as f64 * width + s as f64 * width / 8.0).to_radians();
                wedge.push((r * a.cos(), r * a.sin()));
            }
            chart.draw_series(std::iter::once(Polygon::new(wedge, colour(0).mix(0.75).filled())))?;
        }
        let label = FONT.into_text_style(root);
        for (deg, text) in [(0.0, "0°"), (90.0, "90°"), (180.0, "180°"), (270.0, "270°")] {
            let a: f64 = f64::to_radians(deg);
            chart.draw_series(std::iter::once(Text::new(
                text,
                (max_share * 1.12 * a.cos(), max_share * 1.12 * a.sin()),
                label.clone(),
            )))?;
        }
        Ok(())
    })
}

/// A histogram of `values` in `bins` equal bins.
pub fn histogram(title: &str, x_desc: &str, values: &[f64], bins: usize) -> String {
    let (lo, hi) = span(values.iter().copied(), 0.0);
    let width = (hi - lo) / bins as f64;
    let mut counts = vec![0usize; bins];
    for &v in values.iter().filter(|v| v.is_finite()) {
        counts[(((v - lo) / width) as usize).min(bins - 1)] += 1;
    }
    let top = counts.iter().copied().max().unwrap_or(0).max(1) as f64 * 1.1;
    svg(|root| {
        let mut chart =
            framed(root, &format!("{title} (n = {})", values.len())).build_cartesian_2d(lo..hi, 0.0..top)?;
        chart
            .configure_mesh()
            .x_desc(x_desc)
            .y_desc("tracks")
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
            .draw()?;
        chart.draw_series(counts.iter().enumerate().map(|(k, &c)| {
            let x = lo + k as f64 * width;
            Rectangle::new([(x, 0.0), (x + width * 0.92, c as f64)], colour(0).mix(0.8).filled())
        }))?;
        Ok(())
    })
}

/// One group of a strip chart: its name, every value (small grey points) and its replicate
/// means (large coloured points).
pub struct Strip {
    /// Condition name.
    pub name: String,
    /// All values (e.g. cells).
    pub values: Vec<f64>,
    /// Replicate means.
    pub replicate_means: Vec<f64>,
}

/// Values per condition, jittered deterministically, with replicate means on top, so that a
/// reader sees which points are the independent ones.
pub fn strip_chart(title: &str, y_desc: &str, groups: &[Strip]) -> String {
    let (y0, y1) = span(
        groups
            .iter()
            .flat_map(|g| g.values.iter().chain(&g.replicate_means).copied()),
        0.08,
    );
    svg(|root| {
        let mut chart = framed(root, title).build_cartesian_2d(-0.5..groups.len() as f64 - 0.5, y0..y1)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(groups.len().max(1))
            .x_label_formatter(&|x| {
                let k = x.round();
                if (x - k).abs() < 1e-6 && k >= 0.0 {
                    groups.get(k as usize).map(|g| g.name.clone()).unwrap_or_default()
                } else {
                    String::new()
                }
            })
            .y_desc(y_desc)
            .y_label_formatter(&|v| tick(*v))
            .draw()?;
        for (k, g) in groups.iter().enumerate() {
            // Golden-ratio jitter: deterministic and evenly spread.
            let jitter = |i: usize| ((i as f64 * 0.618_034).fract() - 0.5) * 0.5;
            chart.draw_series(
                g.values
                    .iter()
                    .enumerate()
                    .map(|(i, &v)| Circle::new((k as f64 + jitter(i), v), 2, RGBColor(150, 150, 150).filled())),
            )?;
            chart.draw_series(
                g.replicate_means
                    .iter()
                    .enumerate()
                    .map(|(i, &v)| Circle::new((k as f64 + jitter(i) * 0.4, v), 6, colour(k + 1).filled())),
            )?;
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_chart_that_fails_says_so_and_the_page_counts_it_apart() {
        // Construction: a drawing that errors gives the placeholder text the report's page
        // script separates from drawn charts (`data-charts-failed`); one that succeeds does not.
        let failed = svg(|_| Err("no data".into()));
        assert!(failed.contains("could not be drawn"), "{failed}");
        let drawn = svg(|_| Ok(()));
        assert!(drawn.starts_with("<svg") && !drawn.contains("could not be drawn"));
    }
}
