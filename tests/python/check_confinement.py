"""Independent check of the confinement outputs of `caravan analyze` and `caravan compare --by`
(run by tests/confinement.rs).

usage: check_confinement.py STREAM_CSV STREAM_DIR BOUNCE_CSV BOUNCE_DIR FACTOR_DIR

Recomputed here with numpy and scipy from the tracks: per frame the 5th-95th percentile span
across the axis and the 95th percentile along it (numpy.percentile), the front speed
(scipy.stats.theilslopes, Theil 1950 / Sen 1968); each approach to the half-plane x >= 200 and
its outcome; the lane profile's mean step speed per bin; each statistic's quadratic fit
against the factor (numpy.polyfit) and its vertex.
"""
import csv
import json
import sys
from collections import defaultdict

import numpy as np
from scipy.stats import theilslopes

stream_csv, stream_dir, bounce_csv, bounce_dir, factor_dir = sys.argv[1:6]


def tracks(path):
    t = defaultdict(list)
    with open(path, newline="") as f:
        for r in csv.DictReader(f):
            t[int(r["track_id"])].append((int(r["frame"]), float(r["x"]), float(r["y"])))
    return {k: sorted(v) for k, v in t.items()}


# Stream: axis along +x, so along = x and across = y.
T = tracks(stream_csv)
by_frame = defaultdict(list)
for pts in T.values():
    for f, x, y in pts:
        by_frame[f].append((x, y))
with open(f"{stream_dir}/stream.csv", newline="") as f:
    rows = {int(r["frame"]): r for r in csv.DictReader(f)}
fronts = []
for frame, pts in sorted(by_frame.items()):
    xs, ys = np.array([p[0] for p in pts]), np.array([p[1] for p in pts])
    width = np.percentile(ys, 95) - np.percentile(ys, 5)
    front = np.percentile(xs, 95)
    fronts.append((frame, front))
    r = rows[frame]
    assert abs(width - float(r["width_p5_p95_px"])) < 1e-5, (frame, width, r)
    assert abs(front - float(r["front_p95_px"])) < 1e-5
    assert int(r["cells"]) == len(pts)
slope = theilslopes([f[1] for f in fronts], [f[0] for f in fronts]).slope
summary = json.load(open(f"{stream_dir}/summary.json"))["confinement"]
assert abs(slope - summary["stream"]["front_speed_px_per_frame"]["value"]) < 1e-9, slope

# Lane profile across y in 100..140, 10 bins: mean speed of the steps starting in each bin.
with open(f"{stream_dir}/profiles.csv", newline="") as f:
    across = [r for r in csv.DictReader(f) if r["profile"] == "across"]
speeds = defaultdict(list)
for pts in T.values():
    for (f0, x0, y0), (f1, x1, y1) in zip(pts, pts[1:]):
        if f1 == f0 + 1:
            b = min(int((y0 - 100) // 4), 9)
            speeds[b].append(np.hypot(x1 - x0, y1 - y0))
for b, r in enumerate(across):
    if speeds[b]:
        assert abs(np.mean(speeds[b]) - float(r["mean_speed_px_per_frame"])) < 1e-6, (b, r)
    assert int(r["steps"]) == len(speeds[b])

# Border: the region x >= 200, zone 10: a run of points closer than 10 entered from farther;
# crossed if a point is inside, turned back if the track leaves the zone, else stopped.
B = tracks(bounce_csv)
expected = []
for tid, pts in sorted(B.items()):
    d = [200 - x for _, x, _ in pts]
    i = 1
    while i < len(pts):
        if d[i] < 10 <= d[i - 1]:
            j = i
            while j + 1 < len(pts) and d[j + 1] < 10:
                j += 1
            crossed = any(v < 0 for v in d[i:j + 1])
            outcome = "crossed" if crossed else ("turned_back" if j + 1 < len(pts) else "stopped")
            expected.append((tid, pts[i][0], pts[j][0], outcome))
            i = j
        i += 1
with open(f"{bounce_dir}/border.csv", newline="") as f:
    found = [(int(r["track_id"]), int(r["first_frame"]), int(r["last_frame"]), r["outcome"]) for r in csv.DictReader(f)]
assert found == expected, (found, expected)
with open(f"{bounce_dir}/border_distance.csv", newline="") as f:
    dist = {(int(r["track_id"]), int(r["frame"])): float(r["signed_distance_px"]) for r in csv.DictReader(f)}
assert len(dist) == sum(len(v) for v in B.values())
for tid, pts in B.items():
    for frame, x, _ in pts:
        assert abs(dist[(tid, frame)] - (200 - x)) < 1e-6, (tid, frame, x, dist[(tid, frame)])

# Factor: numpy's quadratic fit of each statistic's replicate means against the column.
fits = json.load(open(f"{factor_dir}/summary.json"))["factor"]
with open(f"{factor_dir}/factor.csv", newline="") as f:
    rows = list(csv.DictReader(f))
col = fits["column"]
for fit in fits["fits"]:
    pts = [(float(r[col]), float(r["mean"])) for r in rows if r["statistic"] == fit["statistic"]]
    if len({p[0] for p in pts}) < 3 or fit["quadratic"] is None:
        continue
    c2, c1, c0 = np.polyfit([p[0] for p in pts], [p[1] for p in pts], 2)
    a, b, c = fit["quadratic"]
    scale = max(1.0, abs(a))
    assert abs(c0 - a) < 1e-4 * scale and abs(c1 - b) < 1e-4 * scale and abs(c2 - c) < 1e-4 * scale, (fit["statistic"], (c0, c1, c2), fit["quadratic"])
    if fit["peak"] is not None:
        assert abs(-c1 / (2 * c2) - fit["peak"]) < 1e-3, (fit["statistic"], -c1 / (2 * c2), fit["peak"])
print(f"confinement checked: {len(by_frame)} frames, {len(found)} approaches, {len(fits['fits'])} factor fits")
