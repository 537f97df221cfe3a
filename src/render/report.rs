//! The self-contained HTML report (inline SVG charts, no network, no external files) of an
//! analysis and of a comparison of conditions. Every piece of text that comes from a file or
//! a manifest is escaped.

use super::plots::{histogram, line_chart, rose, strip_chart, trajectories, Series, Strip};
use crate::record::RunRecord;
use serde_json::Value;
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
td,th{border-bottom:1px solid #ddd6c8;padding:.25em .8em;text-align:left}.wide{overflow-x:auto;max-width:100%}pre{background:#fff;border:1px solid #ddd6c8;padding:.6em;overflow:auto;font-size:.8em}";

/// Opens a page with its title.
fn page_start(title: &str) -> String {
    format!(
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{}</title><style>{STYLE}</style></head><body><h1>{}</h1>\
<p class=\"note\">Caravan is research software. Statistics are only as good as the segmentation and tracking they rest on: check the QC movie before trusting these numbers.</p>",
        escape_html(title),
        escape_html(title)
    )
}

/// Closes a page; the script records how many charts rendered and how many could not be drawn
/// (the placeholder of `plots`), read by the browser test.
fn page_end(html: &mut String) {
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

fn number(v: &Value) -> String {
    match v.as_f64() {
        Some(x) if x.abs() >= 1e4 || (x != 0.0 && x.abs() < 1e-3) => format!("{x:.3e}"),
        Some(x) => format!("{x:.4}"),
        None => "–".into(),
    }
}

/// The population summary as a table: statistics with a mean get one row (mean, median,
/// standard deviation, n and the interval of the mean), those with a value one row (value and
/// interval); other entries are flattened to one row each. The motion models have a table of
/// their own and are left out here.
fn summary_table(html: &mut String, summary: &Value) {
    html.push_str("<div class=\"wide\"><table><tr><th>statistic</th><th>value or mean</th><th>95% interval</th><th>median</th><th>standard deviation</th><th>n</th></tr>");
    fn row(html: &mut String, name: &str, cells: [String; 5]) {
        let _ = write!(html, "<tr><td>{}</td>", escape_html(name));
        for c in cells {
            let _ = write!(html, "<td>{}</td>", escape_html(&c));
        }
        html.push_str("</tr>");
    }
    fn interval(v: Option<&Value>) -> String {
        match v.and_then(Value::as_array) {
            Some(a) if a.len() == 2 => format!("{} – {}", number(&a[0]), number(&a[1])),
            _ => String::new(),
        }
    }
    fn cell(v: &Value) -> String {
        match v {
            Value::String(s) => s.clone(),
            Value::Array(a) => a.iter().map(cell).collect::<Vec<_>>().join(" – "),
            _ => number(v),
        }
    }
    fn walk(html: &mut String, prefix: &str, v: &Value) {
        let key = |k: &str| {
            if prefix.is_empty() {
                k.to_string()
            } else {
                format!("{prefix} · {k}")
            }
        };
        match v {
            Value::Object(m) if m.contains_key("mean") => {
                let n = m
                    .get("n")
                    .and_then(Value::as_u64)
                    .map(|n| n.to_string())
                    .unwrap_or_default();
                let cells = [
                    number(&m["mean"]),
                    interval(m.get("ci95_of_mean")),
                    number(&m["median"]),
                    number(&m["standard_deviation"]),
                    n,
                ];
                row(html, prefix, cells);
            }
            Value::Object(m) if m.contains_key("value") => {
                let blank = String::new;
                let cells = [cell(&m["value"]), interval(m.get("ci95")), blank(), blank(), blank()];
                row(html, prefix, cells);
                for (k, x) in m.iter().filter(|(k, _)| !["value", "ci95"].contains(&k.as_str())) {
                    walk(html, &key(k), x);
                }
            }
            Value::Object(m) => {
                for (k, x) in m {
                    if prefix.is_empty() && k == "motion_model" {
                        continue;
                    }
                    walk(html, &key(k), x);
                }
            }
            _ => row(
                html,
                prefix,
                [cell(v), String::new(), String::new(), String::new(), String::new()],
            ),
        }
    }
    walk(html, "", summary);
    html.push_str("</table></div>");
}

/// What the page of `caravan analyze` shows, prepared by the caller: the drawing code knows
/// no analysis types, only labels, numbers and series.
#[derive(Debug, Clone)]
pub struct AnalysisPage<'a> {
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
    /// `summary.json`'s population block, shown as a table.
    pub summary: &'a Value,
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
    /// The analysis options and units, shown as JSON.
    pub parameters: Value,
    /// Stream geometry, border response and lane profiles, when asked for.
    pub confinement: Vec<ChartSpec>,
}

/// The report of `caravan analyze`.
pub fn analysis_report(page: &AnalysisPage) -> String {
    let (l, t) = (page.length_unit, page.time_unit);
    let mut html = page_start("Caravan migration analysis");
    let _ = write!(
        html,
        "<p>Tracks from <code>{}</code>: {} read, {} analysed. Units: {} and {} ({}).</p>",
        escape_html(&page.source),
        page.tracks_read,
        page.tracks_analysed,
        l,
        t,
        escape_html(page.units_source)
    );
    if let Some(record) = page.run_record {
        verdict_section(&mut html, record);
    }
    html.push_str("<h2>Population statistics</h2>");
    summary_table(&mut html, page.summary);
    if !page.model_warnings.is_empty() {
        html.push_str("<ul class=\"model-warnings\">");
        for w in page.model_warnings {
            let _ = write!(html, "<li>warning: {}</li>", escape_html(w));
        }
        html.push_str("</ul>");
    }
    html.push_str("<h2 id=\"models\">Motion models</h2>");
    let _ = write!(html, "<p>{}</p>", escape_html(&page.model_criterion));
    table(
        &mut html,
        &["model", "parameters (95% interval)", "ΔAICc", ""],
        &page.models,
    );
    html.push_str("<h2>Charts</h2><div class=\"grid\">");
    figure(
        &mut html,
        "trajectories",
        &trajectories("Trajectories from a common origin", l, &page.paths, 300),
        "Each analysed track moved to start at the origin (at most 300 shown).",
    );
    figure(
        &mut html,
        "rose",
        &rose("Directions of net displacement", &page.directions_deg, 18),
        "Share of tracks per 20° sector; 0° is +x, 90° is +y (down in the image).",
    );
    figure(
        &mut html,
        "msd",
        &msd_chart(page),
        "Pooled MSD over overlapping windows (Qian et al. 1991), shaded: its 95% interval from resampling whole tracks; beside it the mean of each cell's own MSD, which weighs every cell alike; the line: the chosen model over the lags fitted.",
    );
    figure(
        &mut html,
        "speed",
        &histogram("Mean speed per track", &format!("{l}/{t}"), &page.speeds, 20),
        "Mean length of the steps between consecutive frames over the frame interval, per track (steps across missing frames left out).",
    );
    figure(
        &mut html,
        "directionality",
        &histogram(
            "Directionality ratio per track",
            "net displacement / path length",
            &page.directionality,
            20,
        ),
        "Longer tracks score lower (Gorelik & Gautreau 2014): between conditions, compare the ratio at a fixed time in the table.",
    );
    let series = |label: &str, points: &[(f64, f64)], markers: bool| [Series::new(label, points.to_vec(), markers)];
    figure(
        &mut html,
        "order",
        &line_chart(
            "Order parameter over time",
            &format!("time ({t})"),
            "order parameter",
            &series("φ", &page.order, false),
            false,
        ),
        "Alignment of velocities per frame: 1 all alike, about 1/√N for random headings.",
    );
    figure(
        &mut html,
        "autocorrelation",
        &line_chart(
            "Direction autocorrelation",
            &format!("lag ({t})"),
            "⟨û(t)·û(t+lag)⟩",
            &[Series {
                band: page.direction_autocorrelation_band.clone(),
                ..Series::new("direction", page.direction_autocorrelation.clone(), true)
            }],
            false,
        ),
        "Mean cosine between the directions of steps a lag apart, shaded: 95% interval from resampling tracks. Steps enter as unit vectors, so speed plays no part (Gorelik & Gautreau 2014).",
    );
    figure(
        &mut html,
        "neighbours",
        &line_chart(
            "Neighbour velocity-fluctuation correlation",
            &format!("distance ({l})"),
            "C(r)",
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
    if let Some(record) = page.run_record {
        qc_section(&mut html, record);
    }
    html.push_str("<h2>Analysis parameters</h2>");
    let _ = write!(
        html,
        "<pre>{}</pre>",
        escape_html(&serde_json::to_string_pretty(&page.parameters).unwrap_or_default())
    );
    page_end(&mut html);
    html
}

fn msd_chart(page: &AnalysisPage) -> String {
    let (l, t) = (page.length_unit, page.time_unit);
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

/// The tracking run's verdict and its findings, first on the page: statistics are only as
/// good as the segmentation and links they rest on.
fn verdict_section(html: &mut String, record: &RunRecord) {
    let Some(v) = &record.verdict else {
        return;
    };
    let _ = write!(
        html,
        "<h2 id=\"verdict\" class=\"verdict-{0}\">Tracking run verdict: {0}</h2>",
        v.verdict.word()
    );
    if v.findings.is_empty() {
        html.push_str("<p>No check of the run found a problem.</p>");
        return;
    }
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

/// Objects and threshold per frame, warnings and flags of the tracking run.
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
        "Sudden jumps mean segmentation trouble (flagged below).",
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
    html.push_str("</div><ul>");
    let _ = write!(
        html,
        "<li>gaps closed: {}; objects two tracks entered, split: {}; divisions: {}</li>",
        number(&serde_json::json!(record.gaps_closed)),
        number(&serde_json::json!(record.shared_objects_split)),
        record.divisions.as_ref().map_or(0, Vec::len)
    );
    for w in &record.warnings {
        let _ = write!(html, "<li>warning: {}</li>", escape_html(w));
    }
    html.push_str("</ul><h2>Tracking parameters</h2>");
    let _ = write!(
        html,
        "<pre>{}</pre>",
        escape_html(&serde_json::to_value(&record.parameters).map_or_else(|_| String::new(), |v| format!("{v:#}")))
    );
}

/// A table of text cells (escaped), scrolling sideways when wide.
fn table(html: &mut String, header: &[&str], rows: &[Vec<String>]) {
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

/// The report of `caravan compare`: the comparison table (already rendered rows), the
/// conditions' curves overlaid, one strip chart per statistic, and the warnings.
pub fn comparison_report(
    manifest: &str,
    entries: &[Vec<String>],
    table_rows: &[Vec<String>],
    header: &[&str],
    (stats, curves): (&[ComparedStatistic], &[ChartSpec]),
    warnings: &[String],
) -> String {
    let mut html = page_start("Caravan comparison of conditions");
    let _ = write!(html, "<p>Manifest <code>{}</code>.</p>", escape_html(manifest));
    html.push_str("<h2>Recordings</h2>");
    table(&mut html, &["path", "condition", "replicate", "labels"], entries);
    if !warnings.is_empty() {
        html.push_str("<div class=\"note\"><ul>");
        for w in warnings {
            let _ = write!(html, "<li>{}</li>", escape_html(w));
        }
        html.push_str("</ul></div>");
    }
    html.push_str("<h2>Differences between conditions</h2>");
    table(&mut html, header, table_rows);
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
    html.push_str("</div>");
    page_end(&mut html);
    html
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_in_names_is_escaped() {
        // HTML 5 specification, §13.1.2: text content must not contain "<" or "&" unescaped.
        assert_eq!(
            escape_html("<b>dish & \"1\"</b>"),
            "&lt;b&gt;dish &amp; &quot;1&quot;&lt;/b&gt;"
        );
    }
}
