"""Drives a run's review page in a real browser (Debian's Chromium through Selenium and
ChromeDriver) and checks what it shows against the run's own tables, read here with Python's
csv module: scrub to a frame with the keys, click a known nucleus, compare the shown track id
and first frame with tracks.csv, step along the track, jump to a moment, zoom into a frame
stored at full resolution. Fails on any console error and on any request that is not a local
file (the page must work with no server and no network).

Usage: check_review.py RUN_DIR
"""

import csv
import json
import math
import os
import sys
import time
from collections import defaultdict
from pathlib import Path

from selenium import webdriver
from selenium.webdriver.chrome.service import Service
from selenium.webdriver.common.action_chains import ActionChains
from selenium.webdriver.common.by import By
from selenium.webdriver.common.keys import Keys


def fail(message):
    print("check_review: " + message)
    sys.exit(1)


def browser():
    options = webdriver.ChromeOptions()
    options.binary_location = os.environ.get("CARAVAN_CHROMIUM", "/usr/bin/chromium")
    for flag in ["--headless=new", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 "--window-size=1400,1000"]:
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    service = Service(os.environ.get("CARAVAN_CHROMEDRIVER", "/usr/bin/chromedriver"))
    return webdriver.Chrome(options=options, service=service)


def wait_for(driver, condition, what, seconds=10.0):
    end = time.time() + seconds
    while time.time() < end:
        value = condition()
        if value:
            return value
        time.sleep(0.05)
    fail("timed out waiting for " + what + "; frame label: " + text(driver, "frame-label"))


def text(driver, element_id):
    return driver.find_element(By.ID, element_id).text


def read_run_script(run):
    body = (run / "review" / "data" / "run.js").read_text()
    return json.loads(body[body.index("(") + 1: body.rindex(")")])


def read_tracks(run):
    points = defaultdict(list)
    with open(run / "tracks.csv", newline="") as f:
        for row in csv.DictReader(f):
            points[int(row["track_id"])].append(
                (int(row["frame"]), float(row["x"]), float(row["y"]), float(row["major_axis_px"])))
    for pts in points.values():
        pts.sort()
    return points


def choose_nucleus(points, width, height, frames):
    """A point well inside the frame, far from every other nucleus of its frame, on a track of
    at least six points that starts after frame 0 when one does: the clearest click."""
    by_frame = defaultdict(list)
    for track, pts in points.items():
        for f, x, y, major in pts:
            by_frame[f].append((track, x, y))
    best = None
    for track, pts in points.items():
        if len(pts) < 6:
            continue
        f, x, y, major = pts[3]
        if f >= frames - 1:
            continue
        margin = min(x, y, width - x, height - y)
        nearest = min((math.hypot(x - ox, y - oy) for t, ox, oy in by_frame[f] if t != track), default=1e9)
        if margin < 20:
            continue
        key = (pts[0][0] > 0, nearest)
        if best is None or key > best[0]:
            best = (key, track, f, x, y)
    if best is None:
        fail("no track of six points inside the frame")
    return best[1:]


def scrub_to(driver, frame, frames):
    body = driver.find_element(By.TAG_NAME, "body")
    actions = ActionChains(driver)
    for _ in range(frame // 10):
        actions.key_down(Keys.SHIFT).send_keys(Keys.ARROW_RIGHT).key_up(Keys.SHIFT)
    for _ in range(frame % 10):
        actions.send_keys(Keys.ARROW_RIGHT)
    body.click()
    actions.perform()
    expected = "frame %d of %d" % (frame, frames - 1)
    wait_for(driver, lambda: text(driver, "frame-label").startswith(expected), expected)


def click_recording_point(driver, run_info, x, y):
    """Clicks the canvas where recording pixel (x, y) is drawn when the whole frame is shown:
    scaled to fit and centred, as the page promises."""
    canvas = driver.find_element(By.ID, "view")
    width, height = canvas.size["width"], canvas.size["height"]
    scale = min(width / run_info["width"], height / run_info["height"])
    ox = (width - run_info["width"] * scale) / 2
    oy = (height - run_info["height"] * scale) / 2
    # Selenium 4 offsets are from the element's centre; pixel centres are at +0.5.
    dx = ox + (x + 0.5) * scale - width / 2
    dy = oy + (y + 0.5) * scale - height / 2
    ActionChains(driver).move_to_element_with_offset(canvas, round(dx), round(dy)).click().perform()


def check(run):
    run_info = read_run_script(run)
    points = read_tracks(run)
    frames, width, height = run_info["frames"], run_info["width"], run_info["height"]
    track, frame, x, y = choose_nucleus(points, width, height, frames)
    driver = browser()
    try:
        driver.get((run / "review" / "index.html").resolve().as_uri())
        wait_for(driver, lambda: text(driver, "frame-label").startswith("frame 0 of"), "the page to start")

        # Scrub with the keys, then click the nucleus.
        scrub_to(driver, frame, frames)
        time.sleep(0.3)  # the frame's overlay script loads
        click_recording_point(driver, run_info, x, y)
        wait_for(driver, lambda: text(driver, "track-id"), "a track to be shown")
        shown_id, shown_first = int(text(driver, "track-id")), int(text(driver, "track-first"))
        first = points[track][0][0]
        if (shown_id, shown_first) != (track, first):
            fail("clicked track %d (first frame %d) at frame %d, (%.1f, %.1f); the page shows track %d, first frame %d"
                 % (track, first, frame, x, y, shown_id, shown_first))

        # Jump along it: to its first frame, then its next point.
        driver.find_element(By.ID, "track-first").click()
        expected = "frame %d of" % first
        wait_for(driver, lambda: text(driver, "frame-label").startswith(expected), expected)
        driver.find_element(By.ID, "track-next").click()
        second = points[track][1][0]
        expected = "frame %d of" % second
        wait_for(driver, lambda: text(driver, "frame-label").startswith(expected), expected)

        # The moments worth a look: listed as run.js has them; a click goes to the frame.
        items = driver.find_elements(By.CSS_SELECTOR, "#moments li")
        if len(items) != len(run_info["moments"]):
            fail("%d moments listed, %d in run.js" % (len(items), len(run_info["moments"])))
        if items:
            target = items[-1]
            want = int(target.get_attribute("data-frame"))
            driver.execute_script("arguments[0].scrollIntoView()", target)
            target.click()
            expected = "frame %d of" % want
            wait_for(driver, lambda: text(driver, "frame-label").startswith(expected), expected)

        # Zoom into a frame stored at full resolution: the page says so and loads it.
        if run_info["display"]["factor"] > 1:
            full = run_info["full"][len(run_info["full"]) // 2]
            driver.find_element(By.TAG_NAME, "body").send_keys(Keys.HOME)
            scrub_to(driver, full, frames)
            for _ in range(6):
                driver.find_element(By.TAG_NAME, "body").send_keys("+")
            wait_for(driver, lambda: text(driver, "resolution").startswith("Full resolution"), "full resolution")

        console = [e for e in driver.get_log("browser") if e["level"] in ("SEVERE", "WARNING")]
        if console:
            fail("console messages: %s" % console)
        requests = []
        for entry in driver.get_log("performance"):
            message = json.loads(entry["message"])["message"]
            if message["method"] == "Network.requestWillBeSent":
                requests.append(message["params"]["request"]["url"])
        remote = [u for u in requests if not u.startswith(("file://", "data:"))]
        if remote:
            fail("requests beyond the page's folder: %s" % remote[:5])
        if run_info["display"]["factor"] > 1 and not any("/full/" in u for u in requests):
            fail("no full-resolution frame was loaded when zoomed in")
        check_report(driver, run)
        print("check_review: ok (track %d clicked at frame %d; %d requests, all local)" % (track, frame, len(requests)))
    finally:
        driver.quit()


def summary_keys(value, keys):
    """Every key of summary.json, and every value that is a single word, that reads as a
    program's name (holds an underscore; paths left out)."""
    if isinstance(value, str) and "_" in value and not any(c in value for c in " /."):
        keys.add(value)
    if isinstance(value, dict):
        for k, v in value.items():
            if "_" in k:
                keys.add(k)
            summary_keys(v, keys)
    elif isinstance(value, list):
        for v in value:
            summary_keys(v, keys)
    return keys


def check_report(driver, run):
    """The analysis report, as a reader sees it: the verdict first, the curated labels, no
    key of summary.json in its text, every number without a run of trailing zeros, and a link
    that opens the review page."""
    driver.get((run / "analysis" / "report.html").resolve().as_uri())
    body = driver.find_element(By.TAG_NAME, "body").text
    for label in ["Tracking run verdict", "Population statistics", "Mean speed per track", "How fast",
                  "How straight", "Which way", "How together", "Frames worth a look", "Parameters",
                  "where it came from", "Nucleus diameter", "measured from the recording"]:
        if label not in body:
            fail("the report lacks %r" % label)
    if body.index("Tracking run verdict") > body.index("Population statistics"):
        fail("the verdict is not before the statistics")
    summary = json.loads((run / "analysis" / "summary.json").read_text())
    leaked = sorted(k for k in summary_keys(summary, set()) if k in body)
    if leaked:
        fail("raw key names in the report's text: %s" % leaked[:10])
    if " · " in body:
        fail("joined key paths in the report's text")
    import re
    padded = re.findall(r"\b\d+\.\d*000\b", body)
    if padded:
        fail("numbers printed with padding zeros: %s" % padded[:5])
    frames = driver.find_elements(By.CSS_SELECTOR, ".flagged svg image")
    if not frames:
        fail("no flagged frame shown")
    console = [e for e in driver.get_log("browser") if e["level"] in ("SEVERE", "WARNING")]
    if console:
        fail("report console messages: %s" % console)
    driver.find_element(By.LINK_TEXT, "review page").click()
    wait_for(driver, lambda: driver.title.startswith("Review"), "the review page from the report's link")


if __name__ == "__main__":
    check(Path(sys.argv[1]))
