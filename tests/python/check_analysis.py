"""Independent check of `caravan analyze` and `caravan compare` outputs (run by tests/cli.rs).

usage: check_analysis.py RUN_DIR ANALYSIS_DIR COMPARISON_DIR

Recomputed here with numpy/scipy from tracks.csv and run.json (tracks of >= 10 points, as the
default filter): per-track path length, net displacement, mean speed (over steps between
consecutive frames), missing frames and directionality; the pooled MSD with overlapping
windows and the per-cell mean of time-averaged MSDs; the chosen motion model refitted to
msd.csv with scipy.optimize.curve_fit and its AICc (Burnham & Anderson 2002); the Rayleigh
statistic of net-displacement directions (Zar 2010); the order parameter per frame (Vicsek
1995); the neighbour correlation C(r) of Cavagna et al. (2010) on the bins of
neighbour_correlation.csv. For the comparison: each
replicate's mean speed derived from its own tracks.csv (the manifest's entries), checked
against replicates.csv, and scipy.stats.mannwhitneyu, Hedges' g and the exact permutation test
on those derived means (the other statistics on the means replicates.csv writes), then Holm's
adjustment.
"""
import csv
import json
import math
import os
import sys
from collections import defaultdict

import numpy as np
from itertools import combinations
from scipy.optimize import curve_fit
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
    frames = np.array([f for f, _, _ in pts])
    consecutive = np.diff(frames) == 1
    steps = np.hypot(*np.diff(a, axis=0).T)[consecutive]
    r = stats[k]
    assert abs(path - float(r["path_length_um"])) < 1e-5, (k, path, r)
    assert abs(net - float(r["net_displacement_um"])) < 1e-5
    assert abs(steps.mean() / dt - float(r["mean_speed_um_per_min"])) < 1e-5
    assert int(r["missing_frames"]) == frames[-1] - frames[0] + 1 - len(frames)
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
    # The mean over cells of each cell's own (time-averaged) MSD.
    own = []
    for pts in tracks.values():
        at = {f: (x, y) for f, x, y in pts}
        d = [(at[f + lag][0] - x) ** 2 + (at[f + lag][1] - y) ** 2 for f, x, y in pts if f + lag in at]
        if d:
            own.append(np.mean(d))
    assert int(msd[lag]["cells"]) == len(own)
    assert abs(np.mean(own) - float(msd[lag]["per_cell_mean_msd_um2"])) < 1e-5 * max(1, np.mean(own)), lag
    lo, hi = float(msd[lag]["msd_ci95_low_um2"]), float(msd[lag]["msd_ci95_high_um2"])
    assert lo < float(msd[lag]["msd_um2"]) < hi, (lag, lo, hi)

# The chosen model refitted to the written MSD points by scipy (weights: pairs per lag, as
# sigma = 1/sqrt(pairs)), and its AICc = n ln(RSS/n) + 2k + 2k(k+1)/(n-k-1) with RSS weighted by
# pairs over their mean (Burnham & Anderson 2002).
population = json.load(open(f"{ana}/summary.json"))["population"]
model = population["motion_model"]
first, last = population["fit_lags_frames"]
pts = [msd[k] for k in range(first, last + 1)]
t = np.array([float(q["lag_min"]) for q in pts])
y = np.array([float(q["msd_um2"]) for q in pts])
w = np.array([float(q["pairs"]) for q in pts])
w = w / w.mean()
shapes = {
    "diffusion": (lambda t, d: 4 * d * t, [1.0]),
    "diffusion+noise": (lambda t, d, c: 4 * d * t + c, [1.0, 0.1]),
    "diffusion_with_drift": (lambda t, d, b: 4 * d * t + b * t * t, [1.0, 0.01]),
    "diffusion_with_drift+noise": (lambda t, d, b, c: 4 * d * t + b * t * t + c, [1.0, 0.01, 0.1]),
    # Fürth's walk in expm1 form, 4D(t + P expm1(-t/P)): a walk straight over the lags fitted
    # has P thousands of times t, where 1 - exp(-t/P) as written keeps only a few digits.
    "persistent_random_walk": (lambda t, d, p: 4 * d * (t + p * np.expm1(-t / p)), None),
    "persistent_random_walk+noise": (lambda t, d, p, c: 4 * d * (t + p * np.expm1(-t / p)) + c, None),
}
chosen = next(c for c in model["candidates"] if c["model"] == model["chosen"])
f, p0 = shapes[chosen["model"]]
params = chosen["parameters"]
value = lambda prefix: next(v["value"] for k, v in params.items() if k.startswith(prefix))
if p0 is None:  # start the walk from the reported values: the check is of the optimum
    p0 = [value("diffusion_coefficient"), value("persistence_time")]
    if chosen["model"].endswith("+noise"):
        p0.append(4 * value("localisation_error") ** 2)
popt, _ = curve_fit(f, t, y, p0=p0, sigma=1 / np.sqrt(w), maxfev=20000)
rss = float(np.sum(w * (y - f(t, *popt)) ** 2))
n, k = len(t), len(popt)
aicc = n * math.log(rss / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)
assert abs(aicc - chosen["aicc"]) < 1e-3 * max(1.0, abs(aicc)), (aicc, chosen["aicc"])
d_key = next(k for k in params if k.startswith("diffusion_coefficient"))
assert abs(popt[0] - params[d_key]["value"]) < 1e-3 * abs(popt[0]), (popt, params)
low, high = params[d_key]["ci95"]
assert low <= params[d_key]["value"] <= high

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

# Cavagna et al. (2010), Eq. 1-2: per frame, velocities (consecutive frames) minus their mean,
# scaled by their root mean square; products of pairs averaged per distance bin (the bins as
# written in neighbour_correlation.csv).
with open(f"{ana}/neighbour_correlation.csv", newline="") as f:
    bins = list(csv.DictReader(f))
edges = [float(b["to_um"]) for b in bins]
sums, counts = np.zeros(len(edges)), np.zeros(len(edges), dtype=int)
frames = sorted({f for pts in tracks.values() for f, _, _ in pts})
for frame in frames:
    pos, vel = [], []
    for pts in tracks.values():
        at = {f: (x, y) for f, x, y in pts}
        if frame in at and frame + 1 in at:
            pos.append(at[frame])
            vel.append(np.subtract(at[frame + 1], at[frame]) / dt)
    if len(vel) < 2:
        continue
    dv = np.array(vel) - np.mean(vel, axis=0)
    rms = math.sqrt(np.mean(np.sum(dv * dv, axis=1)))
    if rms == 0:
        continue
    u, pos = dv / rms, np.array(pos)
    for i in range(len(u)):
        for j in range(i + 1, len(u)):
            dist = math.hypot(*(pos[i] - pos[j]))
            # The edges are written to 6 decimals, and the first is the median neighbour
            # distance, which one pair has exactly: half a unit of the last decimal is allowed.
            b = next((k for k, e in enumerate(edges) if dist <= e + 5e-7), None)
            if b is not None:
                sums[b] += u[i] @ u[j]
                counts[b] += 1
for b, row in enumerate(bins):
    assert int(row["pairs"]) == counts[b], (b, row, counts[b])
    if counts[b]:
        assert abs(sums[b] / counts[b] - float(row["correlation"])) < 1e-5, (b, row, sums[b] / counts[b])

with open(f"{cmp_dir}/replicates.csv", newline="") as f:
    reps = list(csv.DictReader(f))
comparison = json.load(open(f"{cmp_dir}/summary.json"))


def replicate_mean_speed(folder):
    # Mean over the run's tracks of >= 10 points of their mean step speed (steps between
    # consecutive frames), um/min, derived here from its tracks.csv and run.json (not read from
    # replicates.csv).
    rec = json.load(open(os.path.join(folder, "run.json")))["input"]["stack"]["calibration"]
    um, minutes = rec["pixel_size_um"], rec["frame_interval_s"] / 60.0
    by_track = defaultdict(list)
    with open(os.path.join(folder, "tracks.csv"), newline="") as f:
        for r in csv.DictReader(f):
            by_track[int(r["track_id"])].append((int(r["frame"]), float(r["x"]) * um, float(r["y"]) * um))
    speeds = []
    for pts in by_track.values():
        if len(pts) < 10:
            continue
        pts.sort()
        a = np.array([(x, y) for _, x, y in pts])
        consecutive = np.diff([f for f, _, _ in pts]) == 1
        speeds.append(np.hypot(*np.diff(a, axis=0).T)[consecutive].mean() / minutes)
    return float(np.mean(speeds))


base = os.path.dirname(os.path.abspath(comparison["manifest"]))
derived = {(e["condition"], e["replicate"]): replicate_mean_speed(os.path.join(base, e["path"]))
           for e in comparison["entries"]}
speed_rows = [r for r in reps if r["statistic"] == "mean_speed_um_per_min"]
assert len(speed_rows) == len(derived) > 0, (len(speed_rows), len(derived))
for r in speed_rows:
    assert abs(derived[(r["condition"], r["replicate"])] - float(r["mean"])) < 1e-5, r
for d in comparison["differences"]:
    means = lambda c: [float(r["mean"]) for r in reps if r["statistic"] == d["statistic"] and r["condition"] == c]
    if d["statistic"] == "mean_speed_um_per_min":
        means = lambda c: [v for (cond, _), v in sorted(derived.items()) if cond == c]
    x, y = means(d["condition"]), means(d["reference"])
    p = mannwhitneyu(x, y, alternative="two-sided").pvalue
    assert abs(p - d["mann_whitney_p"]) < 1e-6, (d["statistic"], p, d["mann_whitney_p"])
    assert abs((np.mean(x) - np.mean(y)) - d["difference"]) < 1e-6
    # Hedges' g (Hedges 1981): Cohen's d on the pooled sample s.d. times 1 - 3/(4(n1+n2) - 9).
    n1, n2 = len(x), len(y)
    pooled = np.sqrt(((n1 - 1) * np.var(x, ddof=1) + (n2 - 1) * np.var(y, ddof=1)) / (n1 + n2 - 2))
    g = (np.mean(x) - np.mean(y)) / pooled * (1 - 3 / (4 * (n1 + n2) - 9))
    # (replicates.csv holds the means to 6 decimals, so agreement is to about 1e-5 relative)
    assert abs(g - d["hedges_g"]) < 1e-4 * max(1.0, abs(g)), (d["statistic"], g, d["hedges_g"])
    # The exact permutation test of replicate means (Fisher 1935; Pitman 1937), enumerated here
    # with itertools: the share of assignments of the pooled means to groups of these sizes
    # whose |difference of means| reaches the observed one (within one assignment's weight,
    # since the other statistics' means are read at 6 decimals).
    pooled, total = list(x) + list(y), sum(x) + sum(y)
    observed = abs(np.mean(x) - np.mean(y))
    sums = [sum(pooled[i] for i in c) for c in combinations(range(n1 + n2), n1)]
    diffs = [abs(s / n1 - (total - s) / n2) for s in sums]
    perm = sum(dd >= observed - 1e-9 * max(observed, 1e-12) for dd in diffs) / len(diffs)
    assert d["permutation_method"] == "exact", d["permutation_method"]
    assert abs(perm - d["permutation_p"]) <= 1.0 / len(diffs) + 1e-9, (d["statistic"], perm, d["permutation_p"])
# Holm (1979) over the statistics compared for each condition, recomputed from the reported
# permutation p values.
for cond in {d["condition"] for d in comparison["differences"]}:
    family = [d for d in comparison["differences"] if d["condition"] == cond and d["permutation_p"] is not None]
    order = sorted(range(len(family)), key=lambda k: (family[k]["permutation_p"], k))
    running = 0.0
    for i, k in enumerate(order):
        running = max(running, min(1.0, (len(family) - i) * family[k]["permutation_p"]))
        assert abs(running - family[k]["permutation_p_holm"]) < 1e-9, (cond, family[k]["statistic"])
print(f"analysis checked: {len(tracks)} tracks, {len(comparison['differences'])} differences")
