"""Independent check of `caravan analyze` and `caravan compare` outputs (run by tests/cli.rs).

usage: check_analysis.py RUN_DIR ANALYSIS_DIR COMPARISON_DIR

Recomputed here with numpy/scipy from tracks.csv and run.json (tracks of >= 10 points, as the
default filter): per-track path length, net displacement, mean speed and directionality;
the pooled MSD with overlapping windows; the Rayleigh statistic of net-displacement
directions (Zar 2010); the order parameter per frame (Vicsek 1995). For the comparison:
scipy.stats.mannwhitneyu on the replicate means written in replicates.csv.
"""
import csv
import json
import math
import sys
from collections import defaultdict

import numpy as np
from scipy.stats import mannwhitneyu

run, ana, cmp_dir = sys.argv[1:4]
record = json.load(open(f"{run}/run.json"))
cal = record["input"]["stack"]["calibration"]
px, dt = cal["pixel_size_um"], cal["frame_interval_s"] / 60.0

tracks = defaultdict(list)
with open(f"{run}/tracks.csv", newline="") as f:
    for r in csv.DictReader(f):
        tracks[int(r["track_id"])].append((int(r["frame"]), float(r["x"]) * px, float(r["y"]) * px))
tracks = {k: sorted(v) for k, v in tracks.items() if len(v) >= 10}

with open(f"{ana}/track_stats.csv", newline="") as f:
    stats = {int(r["track_id"]): r for r in csv.DictReader(f)}
assert set(stats) == set(tracks), (len(stats), len(tracks))
for k, pts in tracks.items():
    a = np.array([(x, y) for _, x, y in pts])
    path = np.hypot(*np.diff(a, axis=0).T).sum()
    net = np.hypot(*(a[-1] - a[0]))
    dur = (pts[-1][0] - pts[0][0]) * dt
    r = stats[k]
    assert abs(path - float(r["path_length_um"])) < 1e-5, (k, path, r)
    assert abs(net - float(r["net_displacement_um"])) < 1e-5
    assert abs(path / dur - float(r["mean_speed_um_per_min"])) < 1e-5
    assert abs(net / path - float(r["directionality_ratio"])) < 1e-5

with open(f"{ana}/msd.csv", newline="") as f:
    msd = {int(r["lag_frames"]): r for r in csv.DictReader(f)}
for lag in (1, 2, 5):
    d2 = []
    for pts in tracks.values():
        at = {f: (x, y) for f, x, y in pts}
        for f, x, y in pts:
            if f + lag in at:
                d2.append((at[f + lag][0] - x) ** 2 + (at[f + lag][1] - y) ** 2)
    assert int(msd[lag]["pairs"]) == len(d2)
    assert abs(np.mean(d2) - float(msd[lag]["msd_um2"])) < 1e-5 * max(1, np.mean(d2)), lag

summary = json.load(open(f"{ana}/summary.json"))["population"]
angles = [math.atan2(p[-1][2] - p[0][2], p[-1][1] - p[0][1]) for p in tracks.values()]
R = math.hypot(sum(map(math.cos, angles)), sum(map(math.sin, angles)))
assert abs(R * R / len(angles) - summary["directions"]["rayleigh_test"]["statistic_z"]) < 1e-6

with open(f"{ana}/order.csv", newline="") as f:
    order = {int(r["frame"]): r for r in csv.DictReader(f)}
for frame in (0, 5):
    units = []
    for pts in tracks.values():
        at = {f: (x, y) for f, x, y in pts}
        if frame in at and frame + 1 in at:
            v = np.subtract(at[frame + 1], at[frame])
            if np.hypot(*v) > 0:
                units.append(v / np.hypot(*v))
    phi = np.hypot(*np.sum(units, axis=0)) / len(units)
    assert abs(phi - float(order[frame]["order_parameter"])) < 1e-6, (frame, phi, order[frame])

with open(f"{cmp_dir}/replicates.csv", newline="") as f:
    reps = list(csv.DictReader(f))
comparison = json.load(open(f"{cmp_dir}/summary.json"))
for d in comparison["differences"]:
    means = lambda c: [float(r["mean"]) for r in reps if r["statistic"] == d["statistic"] and r["condition"] == c]
    x, y = means(d["condition"]), means(d["reference"])
    p = mannwhitneyu(x, y, alternative="two-sided").pvalue
    assert abs(p - d["mann_whitney_p"]) < 1e-6, (d["statistic"], p, d["mann_whitney_p"])
    assert abs((np.mean(x) - np.mean(y)) - d["difference"]) < 1e-6
print(f"analysis checked: {len(tracks)} tracks, {len(comparison['differences'])} differences")
