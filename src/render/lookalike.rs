//! The look-alike page (`lookalike/report.html`): the expected accuracy with its spread, the
//! recording's statistics beside the look-alikes', and one real frame beside one look-alike
//! frame at the same contrast. Self-contained, like the other pages.

use super::report::{base64, escape_html, page_end, page_start, table};
use std::fmt::Write;

/// What the page shows, prepared by the caller.
#[derive(Debug, Clone)]
pub struct LookalikePage {
    /// The recording's name.
    pub title: String,
    /// How many look-alikes, of how many frames.
    pub made: String,
    /// Expected accuracy rows: measure, mean, lowest, highest.
    pub expected: Vec<Vec<String>>,
    /// Statistics rows: statistic, the recording's value, the look-alikes' mean.
    pub statistics: Vec<Vec<String>>,
    /// The recording's first frame and a look-alike's, PNG, at the same contrast.
    pub frames: (Vec<u8>, Vec<u8>),
    /// What a look-alike cannot tell.
    pub limits: String,
}

/// The page.
pub fn lookalike_report(page: &LookalikePage) -> String {
    let mut html = page_start(&format!("Expected accuracy: {}", page.title));
    let _ = write!(
        html,
        "<p>{}, made with this recording's statistics, tracked exactly as the run was and scored against their known truth.</p><h2 id=\"expected\">Expected accuracy</h2>",
        escape_html(&page.made)
    );
    table(&mut html, &["measure", "mean", "lowest", "highest"], &page.expected);
    let _ = write!(html, "<p class=\"note\">{}</p>", escape_html(&page.limits));
    html.push_str("<h2 id=\"statistics\">What makes tracking hard here</h2><p>Each statistic measured from the recording's run, and from the look-alikes' own runs in the same way: where the two differ, the look-alike is less like the recording in that respect.</p>");
    table(
        &mut html,
        &["statistic", "recording", "look-alikes (mean)"],
        &page.statistics,
    );
    let _ = write!(
        html,
        "<h2 id=\"frames\">The recording and a look-alike</h2><div class=\"grid\"><figure><img alt=\"the recording's first frame\" src=\"data:image/png;base64,{}\"><figcaption>The recording, first frame.</figcaption></figure><figure><img alt=\"a look-alike's first frame\" src=\"data:image/png;base64,{}\"><figcaption>A look-alike, first frame, at the same contrast.</figcaption></figure></div>",
        base64(&page.frames.0),
        base64(&page.frames.1)
    );
    page_end(&mut html);
    html
}
