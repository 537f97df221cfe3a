"""Reads a run's look-alike outputs with Python's json and html.parser and Pillow: the expected
accuracy in summary.json is the mean, lowest and highest of the look-alikes' own scores; the
page shows those numbers; its two frames decode as images of one size.

Usage: check_lookalike.py RUN_DIR
"""

import base64
import io
import json
import sys
from html.parser import HTMLParser
from pathlib import Path

from PIL import Image


class Tables(HTMLParser):
    """Every table cell's text, and every image's source."""

    def __init__(self):
        super().__init__()
        self.cells, self.images, self._cell = [], [], None

    def handle_starttag(self, tag, attrs):
        if tag in ("td", "th"):
            self._cell = ""
        if tag == "img":
            self.images.append(dict(attrs)["src"])

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.cells.append(self._cell.strip())
            self._cell = None


def fail(message):
    print("check_lookalike: " + message)
    sys.exit(1)


def main(run):
    summary = json.loads((run / "lookalike" / "summary.json").read_text())
    names = ["detection_f1", "mota", "link_recall", "mostly_tracked", "divisions_recovered"]
    for k, name in enumerate(names):
        scores = [l["scores"][k] for l in summary["lookalikes"] if l["scores"][k] is not None]
        expected = summary["expected"][name]
        if not scores:
            if expected is not None:
                fail("%s expected without a score" % name)
            continue
        want = (sum(scores) / len(scores), min(scores), max(scores))
        got = (expected["mean"], expected["min"], expected["max"])
        if any(abs(a - b) > 1e-12 for a, b in zip(got, want)):
            fail("%s: summary %s, from the look-alikes' scores %s" % (name, got, want))
    page = Tables()
    page.feed((run / "lookalike" / "report.html").read_text())
    row = page.cells.index("MOTA (CLEAR-MOT accuracy)")
    shown = float(page.cells[row + 1])
    if abs(shown - summary["expected"]["mota"]["mean"]) > 5e-4:
        fail("the page shows MOTA %s, the summary %s" % (shown, summary["expected"]["mota"]["mean"]))
    frames = [Image.open(io.BytesIO(base64.b64decode(src.split(",", 1)[1]))) for src in page.images]
    if len(frames) != 2 or frames[0].size != frames[1].size:
        fail("two frames of one size expected, got %s" % [f.size for f in frames])
    if summary["measured"]["diameter_px"] <= 0:
        fail("no diameter measured")
    print("check_lookalike: ok (%d look-alikes)" % len(summary["lookalikes"]))


if __name__ == "__main__":
    main(Path(sys.argv[1]))
