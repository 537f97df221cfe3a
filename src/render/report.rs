//! The self-contained HTML report (inline SVG charts, no network, no external files) of an
//! analysis and of a comparison of conditions. Every piece of text that comes from a file or
//! a manifest is escaped.

use super::plots::{histogram, line_chart, rose, strip_chart, trajectories, Series, Strip};
use crate::record::RunRecord;
use std::fmt::Write;

/// Escapes text for HTML element content and attribute values.
pub fn escape_html(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

const STYLE: &str = "body{font-family:Georgia,'Times New Roman',serif;max-width:1120px;margin:2em auto;padding:0 1em;color:#1d2a2e;background:#fbfaf7}\
h1{font-weight:normal;border-bottom:3px double #00707a;padding-bottom:.2em}h2{font-weight:normal;color:#00707a;margin-top:1.6em}\
.note{background:#f1ede4;border-left:4px solid #c85a14;padding:.6em 1em}\
.grid{display:flex;flex-wrap:wrap;gap:14px}figure{margin:0;background:#fff;border:1px solid #ddd6c8;padding:6px}\
figcaption{font-size:.85em;color:#555;max-width:520px}table{border-collapse:collapse;font-size:.9em}\
td,th{border-bottom:1px solid #ddd6c8;padding:.25em .8em;text-align:left}.wide{overflow-x:auto;max-width:100%}\
tr.group th{color:#00707a;padding-top:.8em}.warnings li{color:#8a3b0a}.caption{font-size:.85em;color:#555}\
.strip{display:flex;flex-wrap:wrap;gap:10px}.flagged{background:#111;color:#eee;padding:4px;font-size:.8em}.flagged p{margin:.2em 0;max-width:260px}";

/// Opens a page with its title.
pub(crate) fn page_start(title: &str) -> String {
    format!(
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{}</title><style>{STYLE}</style></head><body><h1>{}</h1>\
<p class=\"note\">Caravan is research software. Statistics are only as good as the segmentation and tracking they rest on: look at the run's review page before trusting these numbers.</p>",
        escape_html(title),
        escape_html(title)
    )
}

/// Closes a page; the script records how many charts rendered and how many could not be drawn
/// (the placeholder of `plots`), read by the browser test.
pub(crate) fn page_end(html: &mut String) {
    html.push_str(concat!(
        "<script>const charts = [...document.querySelectorAll('figure svg')];",
        "const failed = charts.filter(s => s.textContent.includes('could not be drawn')).length;",
        "document.body.setAttribute('data-charts', String(charts.length - failed));",
        "document.body.setAttribute('data-charts-failed', String(failed));</script></body></html>",
    ));
}

fn figure(html: &mut String, id: &str, svg: &str, caption: &str) {
    let _ = write!(
        html,
        "<figure id=\"{id}\">{svg}<figcaption>{}</figcaption></figure>",
        escape_html(caption)
    );
}

/// A measured value as a reader wants it: four significant figures, whole numbers without
/// decimals, powers of ten only far from 1.
pub fn readable(x: f64) -> String {
    if x.is_finite() && x != x.round() && (x.abs() >= 1e5 || x.abs() < 1e-3) {
        return power_of_ten(x, 3);
    }
    crate::numeric::significant(x)
}

/// A p-value: three decimals, or `a × 10^b` below 0.001 (as journals print them).
pub fn p_value(p: f64) -> String {
    if !p.is_finite() {
        "–".into()
    } else if p < 1e-3 {
        power_of_ten(p, 2)
    } else {
        format!("{p:.3}")
    }
}

/// `1.23 × 10⁻⁴` with `digits` significant figures.
fn power_of_ten(x: f64, digits: usize) -> String {
    if x == 0.0 {
        return "0".into();
    }
    let exponent = x.abs().log10().floor() as i32;
    let mantissa = x / 10f64.powi(exponent);
    let superscript: String = exponent
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            d => ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'][d.to_digit(10).unwrap_or(0) as usize],
        })
        .collect();
    format!("{mantissa:.prec$} × 10{superscript}", prec = digits.saturating_sub(1))
}

/// How a statistic's numbers are printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumberKind {
    /// A measurement ([`readable`]).
    Measure,
    /// A p-value ([`p_value`]).
    PValue,
}

/// One row of the curated statistics table.
#[derive(Debug, Clone)]
pub struct StatisticRow {
    /// The question it answers ("How fast", ...), shown as a group heading.
    pub group: &'static str,
    /// What it is, in words.
    pub label: String,
    /// Its unit as printed (empty for a ratio).
    pub unit: String,
    /// The value, or the mean over tracks or frames.
    pub value: Option<f64>,
    /// Its 95% interval.
    pub interval: Option<(f64, f64)>,
    /// Median over tracks or frames.
    pub median: Option<f64>,
    /// Standard deviation over tracks or frames.
    pub spread: Option<f64>,
    /// What it rests on, in words ("104 tracks").
    pub n: String,
    /// How its numbers are printed.
    pub kind: NumberKind,
}

/// One parameter as shown: name, value with unit, where it came from.
#[derive(Debug, Clone)]
pub struct ParameterRow {
    /// Its name in words.
    pub name: String,
    /// Its value with unit.
    pub value: String,
    /// Where it came from (given, default, measured from the recording, ...).
    pub source: String,
}

/// A frame worth a look, with the run's objects drawn over it.
#[derive(Debug, Clone)]
pub struct FlaggedFrame {
    /// Frame number.
    pub frame: usize,
    /// Why it is worth a look.
    pub note: String,
    /// The frame as stored for the review page (JPEG).
    pub jpeg: Vec<u8>,
    /// The recording's width and height, px (the overlay's coordinates).
    pub size: (usize, usize),
    /// Objects as `track, x, y, major axis, minor axis, angle in degrees`.
    pub ellipses: Vec<[f64; 6]>,
}

fn statistics_table(html: &mut String, rows: &[StatisticRow]) {
    html.push_str("<div class=\"wide\"><table class=\"statistics\"><tr><th>statistic</th><th>value or mean</th><th>95% interval</th><th>median</th><th>standard deviation</th><th>unit</th><th>n</th></tr>");
    let mut group = "";
    for r in rows {
        if r.group != group {
            group = r.group;
            let _ = write!(
                html,
                "<tr class=\"group\"><th colspan=\"7\">{}</th></tr>",
                escape_html(group)
            );
        }
        let show = |v: Option<f64>| match (v, r.kind) {
            (None, _) => String::new(),
            (Some(v), NumberKind::Measure) => readable(v),
            (Some(v), NumberKind::PValue) => p_value(v),
        };
        let interval = r
            .interval
            .map(|(a, b)| format!("{} to {}", show(Some(a)), show(Some(b))))
            .unwrap_or_default();
        let cells = [
            show(r.value),
            interval,
            show(r.median),
            show(r.spread),
            r.unit.clone(),
            r.n.clone(),
        ];
        let _ = write!(html, "<tr><td>{}</td>", escape_html(&r.label));
        for c in cells {
            let _ = write!(html, "<td>{}</td>", escape_html(&c));
        }
        html.push_str("</tr>");
    }
    html.push_str("</table></div>");
}

fn parameters_table(html: &mut String, rows: &[ParameterRow]) {
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|r| vec![r.name.clone(), r.value.clone(), r.source.clone()])
        .collect();
    table(html, &["parameter", "value", "where it came from"], &cells);
}

/// A strip of flagged frames, each with its objects outlined (SVG over the stored frame).
fn flagged_strip(html: &mut String, frames: &[FlaggedFrame], palette: &[[u8; 3]]) {
    html.push_str("<div class=\"strip\">");
    for f in frames {
        let (w, h) = f.size;
        let _ = write!(
            html,
            "<div class=\"flagged\"><svg viewBox=\"0 0 {w} {h}\" width=\"260\" role=\"img\" aria-label=\"frame {}\"><image href=\"data:image/jpeg;base64,{}\" width=\"{w}\" height=\"{h}\"/>",
            f.frame,
            base64(&f.jpeg)
        );
        for e in &f.ellipses {
            let c = palette[(e[0].max(1.0) as usize - 1) % palette.len()];
            let _ = write!(
                html,
                "<ellipse cx=\"{:.1}\" cy=\"{:.1}\" rx=\"{:.1}\" ry=\"{:.1}\" transform=\"rotate({:.0} {:.1} {:.1})\" fill=\"none\" stroke=\"rgb({},{},{})\" stroke-width=\"{:.1}\"/>",
                e[1], e[2], e[3] / 2.0, e[4] / 2.0, e[5], e[1], e[2], c[0], c[1], c[2], (w.max(h) as f64 / 260.0).max(1.0)
            );
        }
        let _ = write!(html, "</svg><p>frame {}: {}</p></div>", f.frame, escape_html(&f.note));
    }
    html.push_str("</div>");
}

/// Standard base64 (RFC 4648, §4) with padding, for images inside the page.
pub(crate) fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [chunk[0], *chunk.get(1).unwrap_or(&0), *chunk.get(2).unwrap_or(&0)];
        let n = (b[0] as u32) << 16 | (b[1] as u32) << 8 | b[2] as u32;
        for k in 0..4 {
            if k <= chunk.len() {
                out.push(ALPHABET[(n >> (18 - 6 * k) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// What the page of `caravan analyze` shows, prepared by the caller: the drawing code knows
/// no analysis types, only labels, numbers and series.
#[derive(Debug, Clone)]
pub struct AnalysisPage<'a> {
    /// What was analysed, for the title (the recording's or the table's name).
    pub title: String,
    /// Where the tracks came from, as shown.
    pub source: String,
    /// Tracks read, and tracks analysed after filtering.
    pub tracks_read: usize,
    /// Tracks analysed after filtering.
    pub tracks_analysed: usize,
    /// Length unit label (`um` or `px`).
    pub length_unit: &'a str,
    /// Time unit label (`min` or `frame`).
    pub time_unit: &'a str,
    /// Where the calibration came from.
    pub units_source: &'a str,
    /// The tracking run's record, when the tracks came from a run folder.
    pub run_record: Option<&'a RunRecord>,
    /// The curated population statistics (all of them are in `summary.json`).
    pub statistics: Vec<StatisticRow>,
    /// Each analysed track's path, `(x, y)` in length units.
    pub paths: Vec<Vec<(f64, f64)>>,
    /// Direction of each track's net displacement, degrees.
    pub directions_deg: Vec<f64>,
    /// MSD points `(lag, msd)` in time and squared length units.
    pub msd: Vec<(f64, f64)>,
    /// The MSD's 95% interval `(lag, low, high)`.
    pub msd_band: Vec<(f64, f64, f64)>,
    /// The mean of cells' own MSDs `(lag, msd)`.
    pub per_cell_msd: Vec<(f64, f64)>,
    /// The chosen model's MSD curve: its legend and points.
    pub msd_fit: Option<(String, Vec<(f64, f64)>)>,
    /// How the model was chosen, in words.
    pub model_criterion: String,
    /// One row per candidate model: name, parameters with intervals, ΔAICc, verdict.
    pub models: Vec<Vec<String>>,
    /// What the fitted motion model cannot be trusted for, in words.
    pub model_warnings: &'a [String],
    /// Mean speed per track.
    pub speeds: Vec<f64>,
    /// Directionality ratio per track.
    pub directionality: Vec<f64>,
    /// Order parameter over time `(time, φ)`.
    pub order: Vec<(f64, f64)>,
    /// Direction autocorrelation `(lag, value)`.
    pub direction_autocorrelation: Vec<(f64, f64)>,
    /// Its 95% interval `(lag, low, high)`.
    pub direction_autocorrelation_band: Vec<(f64, f64, f64)>,
    /// Neighbour velocity-fluctuation correlation `(distance, value)`.
    pub neighbour_correlation: Vec<(f64, f64)>,
    /// The analysis's options, units and filters.
    pub parameters: Vec<ParameterRow>,
    /// The tracking run's parameters, when the tracks came from a run folder.
    pub tracking_parameters: Vec<ParameterRow>,
    /// Frames of the tracking run worth a look, with their objects.
    pub flagged: Vec<FlaggedFrame>,
    /// The run's review page, relative to the report, when it has one.
    pub review_page: Option<String>,
    /// The accuracy expected on the recording from its look-alikes (`track --lookalike`):
    /// measure, mean, lowest to highest; empty without look-alikes.
    pub expected_accuracy: Vec<Vec<String>>,
    /// Stream geometry, border response and lane profiles, when asked for.
    pub confinement: Vec<ChartSpec>,
}

/// The report of `caravan analyze`, for the scientist who reads it: the verdict and warnings
/// first, then the curated statistics, the charts grouped by the question each answers, the
/// frames worth a look, the tracking run's quality control and the parameters with their
/// sources.
pub fn analysis_report(page: &AnalysisPage) -> String {
    let (l, t) = (page.length_unit, page.time_unit);
    let mut html = page_start(&format!("Migration analysis: {}", page.title));
    verdict_and_warnings(&mut html, page.run_record, page.model_warnings);
    let _ = write!(
        html,
        "<p>Tracks from <code>{}</code>: {} read, {} analysed (the filters are under Parameters). Lengths in {}, times in {} ({}).</p>",
        escape_html(&page.source),
        page.tracks_read,
        page.tracks_analysed,
        unit_name(l),
        unit_name(t),
        escape_html(page.units_source)
    );
    if !page.expected_accuracy.is_empty() {
        html.push_str("<h2 id=\"expected-accuracy\">Expected tracking accuracy on this recording</h2><p>Scored on look-alike recordings made with this recording's statistics and tracked as it was (<code>lookalike/report.html</code> in the run folder). The statistics below rest on tracks of about this quality; a look-alike lacks debris, odd shapes and focus drift, so where those occur this is an upper bound.</p>");
        table(
            &mut html,
            &["measure", "mean", "lowest to highest"],
            &page.expected_accuracy,
        );
    }
    html.push_str("<h2>Population statistics</h2>");
    statistics_table(&mut html, &page.statistics);
    html.push_str("<h2 id=\"how-fast\">How fast</h2><div class=\"grid\">");
    figure(
        &mut html,
        "speed",
        &histogram("Mean speed per track", &format!("speed ({})", unit_name(&format!("{l}/{t}"))), &page.speeds, 20),
        "Each track's mean step length between consecutive frames over the frame interval (steps across missing frames left out).",
    );
    figure(
        &mut html,
        "msd",
        &msd_chart(page),
        "How far cells get in a given time. Pooled over overlapping windows (Qian et al. 1991); shaded: its 95% interval from resampling whole tracks. Beside it the mean of each cell's own curve, which weighs every cell alike; the line: the chosen model over the lags fitted.",
    );
    html.push_str("</div><h3 id=\"models\">Motion models fitted to the MSD</h3>");
    let _ = write!(html, "<p>{}</p>", escape_html(&page.model_criterion));
    table(
        &mut html,
        &["model", "parameters (95% interval)", "ΔAICc", ""],
        &page.models,
    );
    html.push_str("<h2 id=\"how-straight\">How straight</h2><div class=\"grid\">");
    figure(
        &mut html,
        "directionality",
        &histogram(
            "Directionality per track",
            "net displacement / path length",
            &page.directionality,
            20,
        ),
        "1 for a straight path. Longer tracks score lower (Gorelik & Gautreau 2014): between conditions, compare the value over a fixed time, in the table.",
    );
    figure(
        &mut html,
        "autocorrelation",
        &line_chart(
            "How long a direction is kept",
            &format!("time apart ({})", unit_name(t)),
            "mean cosine between step directions",
            &[Series {
                band: page.direction_autocorrelation_band.clone(),
                ..Series::new("direction", page.direction_autocorrelation.clone(), true)
            }],
            false,
        ),
        "Direction autocorrelation: the mean cosine between the directions of steps a given time apart; speed plays no part (Gorelik & Gautreau 2014). Shaded: 95% interval from resampling tracks.",
    );
    html.push_str("</div><h2 id=\"which-way\">Which way</h2><div class=\"grid\">");
    figure(
        &mut html,
        "trajectories",
        &trajectories("Trajectories from a common origin", &unit_name(l), &page.paths, 300),
        "Each analysed track moved to start at the origin (at most 300 shown).",
    );
    figure(
        &mut html,
        "rose",
        &rose("Directions of net displacement", &page.directions_deg, 18),
        "Share of tracks per 20° sector; 0° is +x, 90° is +y (down in the image).",
    );
    html.push_str("</div><h2 id=\"how-together\">How together</h2><div class=\"grid\">");
    let series = |label: &str, points: &[(f64, f64)], markers: bool| [Series::new(label, points.to_vec(), markers)];
    figure(
        &mut html,
        "order",
        &line_chart(
            "Alignment of the whole population over time",
            &format!("time ({})", unit_name(t)),
            "order parameter φ",
            &series("φ", &page.order, false),
            false,
        ),
        "Order parameter per frame: the length of the mean of the cells' unit velocities; 1 when all move alike, about 1/√N for random headings (Vicsek et al. 1995).",
    );
    figure(
        &mut html,
        "neighbours",
        &line_chart(
            "Alignment of neighbours by distance",
            &format!("distance ({})", unit_name(l)),
            "correlation C(r)",
            &series("C(r)", &page.neighbour_correlation, true),
            false,
        ),
        "How alike the velocity fluctuations of two cells are, by their distance: each frame's fluctuations about its mean velocity, scaled by their root mean square, multiplied in pairs and averaged (Cavagna et al. 2010).",
    );
    html.push_str("</div>");
    if !page.confinement.is_empty() {
        html.push_str("<h2 id=\"confinement\">Stream, border and lane</h2><div class=\"grid\">");
        chart_specs(&mut html, "confinement", &page.confinement);
        html.push_str("</div>");
    }
    if !page.flagged.is_empty() {
        html.push_str("<h2 id=\"flagged\">Frames worth a look</h2><p>The tracking run's objects over the frames where its checks found something to look at");
        if let Some(link) = &page.review_page {
            let _ = write!(
                html,
                "; open the <a href=\"{}\">review page</a> to scrub through every frame and click the tracks",
                escape_html(link)
            );
        }
        html.push_str(".</p>");
        flagged_strip(&mut html, &page.flagged, &crate::render::PALETTE);
    }
    if let Some(record) = page.run_record {
        qc_section(&mut html, record);
    }
    html.push_str("<h2 id=\"parameters\">Parameters</h2><h3>Analysis</h3>");
    parameters_table(&mut html, &page.parameters);
    if !page.tracking_parameters.is_empty() {
        html.push_str("<h3>Tracking run</h3>");
        parameters_table(&mut html, &page.tracking_parameters);
    }
    page_end(&mut html);
    html
}

/// `µm` for `um`, `µm/min` for `um/min`, `µm²` for `um2`; frames and pixels spelt out.
pub fn unit_name(unit: &str) -> String {
    match unit {
        "frame" => "frames".into(),
        _ => unit.replace("um", "µm"),
    }
}

fn msd_chart(page: &AnalysisPage) -> String {
    let (l, t) = (unit_name(page.length_unit), unit_name(page.time_unit));
    let mut series = vec![Series {
        band: page.msd_band.clone(),
        ..Series::new("MSD (pooled)", page.msd.clone(), true)
    }];
    if !page.per_cell_msd.is_empty() {
        series.push(Series::new("MSD (mean of cells)", page.per_cell_msd.clone(), true));
    }
    if let Some((label, fit)) = &page.msd_fit {
        series.push(Series::new(label.clone(), fit.clone(), false));
    }
    line_chart(
        "Mean squared displacement",
        &format!("lag ({t})"),
        &format!("MSD ({l}²)"),
        &series,
        true,
    )
}

/// The tracking run's verdict with its findings, and every warning, first on the page:
/// statistics are only as good as the segmentation and links they rest on.
fn verdict_and_warnings(html: &mut String, record: Option<&RunRecord>, model_warnings: &[String]) {
    if let Some(v) = record.and_then(|r| r.verdict.as_ref()) {
        let _ = write!(
            html,
            "<h2 id=\"verdict\" class=\"verdict-{0}\">Tracking run verdict: {0}</h2>",
            v.verdict.word()
        );
        if v.findings.is_empty() {
            html.push_str("<p>No check of the run found a problem.</p>");
        } else {
            html.push_str("<ul>");
            for f in &v.findings {
                let _ = write!(
                    html,
                    "<li><b>{}</b>: {} <i>Fix: {}.</i></li>",
                    f.level.word(),
                    escape_html(&f.reason),
                    escape_html(&f.fix)
                );
            }
            html.push_str("</ul>");
        }
    }
    let run_warnings = record.map(|r| r.warnings.as_slice()).unwrap_or_default();
    if run_warnings.is_empty() && model_warnings.is_empty() {
        return;
    }
    html.push_str("<h2 id=\"warnings\">Warnings</h2><ul class=\"warnings\">");
    for w in run_warnings {
        let _ = write!(html, "<li>Tracking: {}</li>", escape_html(w));
    }
    for w in model_warnings {
        let _ = write!(html, "<li>Motion model: {}</li>", escape_html(w));
    }
    html.push_str("</ul>");
}

/// Objects and threshold per frame, and what linking repaired, of the tracking run.
fn qc_section(html: &mut String, record: &RunRecord) {
    html.push_str("<h2>Tracking run: quality control</h2><div class=\"grid\">");
    let pick = |value: fn(&crate::record::FrameSummary) -> Option<f64>| -> Vec<(f64, f64)> {
        record
            .per_frame
            .iter()
            .filter_map(|f| Some((f.frame as f64, value(f)?)))
            .collect()
    };
    figure(
        html,
        "objects",
        &line_chart(
            "Objects per frame",
            "frame",
            "objects",
            &[Series::new("objects", pick(|f| Some(f.objects as f64)), false)],
            false,
        ),
        "Sudden jumps mean segmentation trouble (the verdict flags them).",
    );
    figure(
        html,
        "threshold",
        &line_chart(
            "Threshold per frame",
            "frame",
            "grey level",
            &[Series::new("threshold", pick(|f| f.threshold), false)],
            false,
        ),
        "A drifting threshold follows bleaching; jumps deserve a look.",
    );
    html.push_str("</div>");
    let _ = write!(
        html,
        "<p>Gaps closed: {}. Objects two tracks entered, split: {}. Divisions: {}.</p>",
        record.gaps_closed.map_or("–".into(), |n| n.to_string()),
        record.shared_objects_split.map_or("–".into(), |n| n.to_string()),
        record.divisions.as_ref().map_or(0, Vec::len)
    );
}

/// A table of text cells (escaped), scrolling sideways when wide.
pub(crate) fn table(html: &mut String, header: &[&str], rows: &[Vec<String>]) {
    html.push_str("<div class=\"wide\"><table><tr>");
    for h in header {
        let _ = write!(html, "<th>{}</th>", escape_html(h));
    }
    html.push_str("</tr>");
    for row in rows {
        html.push_str("<tr>");
        for c in row {
            let _ = write!(html, "<td>{}</td>", escape_html(c));
        }
        html.push_str("</tr>");
    }
    html.push_str("</table></div>");
}

/// One compared statistic for the comparison report.
pub struct ComparedStatistic {
    /// Name with unit.
    pub name: String,
    /// Per condition: cells and replicate means.
    pub strips: Vec<Strip>,
}

/// Figures `{prefix}-0`, `{prefix}-1`, ... of prepared line charts.
fn chart_specs(html: &mut String, prefix: &str, charts: &[ChartSpec]) {
    for (k, c) in charts.iter().enumerate() {
        figure(
            html,
            &format!("{prefix}-{k}"),
            &line_chart(&c.title, &c.axes.0, &c.axes.1, &c.series, c.log),
            &c.caption,
        );
    }
}

/// A line chart the caller prepared: curves of every condition, or a confinement profile.
#[derive(Debug, Clone)]
pub struct ChartSpec {
    /// Chart title.
    pub title: String,
    /// Axis descriptions.
    pub axes: (String, String),
    /// Logarithmic axes.
    pub log: bool,
    /// The series (with their bands).
    pub series: Vec<Series>,
    /// Caption.
    pub caption: String,
}

/// The report of `caravan compare`, laid out as the analysis page: warnings first, then the
/// differences between conditions (rows already in words), the conditions' curves overlaid
/// and one strip chart per statistic, then the recordings compared.
pub fn comparison_report(
    manifest: &str,
    entries: &[Vec<String>],
    table_rows: &[Vec<String>],
    header: &[&str],
    (stats, curves): (&[ComparedStatistic], &[ChartSpec]),
    warnings: &[String],
) -> String {
    let mut html = page_start("Comparison of conditions");
    let _ = write!(html, "<p>Conditions and replicates from <code>{}</code>; the replicate, not the cell, is the unit of every test.</p>", escape_html(manifest));
    if !warnings.is_empty() {
        html.push_str("<h2 id=\"warnings\">Warnings</h2><ul class=\"warnings\">");
        for w in warnings {
            let _ = write!(html, "<li>{}</li>", escape_html(w));
        }
        html.push_str("</ul>");
    }
    html.push_str("<h2>Differences between conditions</h2>");
    table(&mut html, header, table_rows);
    html.push_str("<p class=\"caption\">Difference: the condition's mean of replicate means minus the reference's, with its 95% interval from resampling replicates. p: permutation test over replicates (Holm-adjusted over the statistics, Holm 1979) and the Mann-Whitney test on replicate means; effect size: Hedges' g on replicate means.</p>");
    html.push_str("<h2>Per condition</h2><div class=\"grid\">");
    chart_specs(&mut html, "curves", curves);
    for (k, s) in stats.iter().enumerate() {
        figure(
            &mut html,
            &format!("statistic-{k}"),
            &strip_chart(&s.name, &s.name, &s.strips),
            "Grey: one point per track; large: one per replicate, the values the test compares (a layout after Lord et al. 2020).",
        );
    }
    html.push_str("</div><h2>Recordings</h2>");
    table(&mut html, &["file", "condition", "replicate", "labels"], entries);
    page_end(&mut html);
    html
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_as_a_reader_expects() {
        // Common practice in journals' figures and tables: four significant figures, counts
        // without decimals, p-values to three decimals and below 0.001 as a power of ten
        // (values chosen by hand; 0.3308... and 25.93... are the demo run's mean speed and D).
        assert_eq!(readable(100.0), "100");
        assert_eq!(readable(0.33082630733923973), "0.3308");
        assert_eq!(readable(25.931788), "25.93");
        assert_eq!(readable(2.5e-5), "2.50 × 10⁻⁵");
        assert_eq!(p_value(0.0432), "0.043");
        assert_eq!(p_value(8.89e-78), "8.9 × 10⁻⁷⁸");
    }

    #[test]
    fn base64_matches_the_rfc_test_vectors() {
        // RFC 4648, §10: BASE64("f") = "Zg==", ("fo") = "Zm8=", ("foobar") = "Zm9vYmFy".
        assert_eq!(base64(b"f"), "Zg==");
        assert_eq!(base64(b"fo"), "Zm8=");
        assert_eq!(base64(b"foo"), "Zm9v");
        assert_eq!(base64(b"foobar"), "Zm9vYmFy");
    }

    #[test]
    fn markup_in_names_is_escaped() {
        // HTML 5 specification, §13.1.2: text content must not contain "<" or "&" unescaped.
        assert_eq!(
            escape_html("<b>dish & \"1\"</b>"),
            "&lt;b&gt;dish &amp; &quot;1&quot;&lt;/b&gt;"
        );
    }
}
