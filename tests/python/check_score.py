"""Independent check of `caravan score` and of division records (run by tests/cli.rs in CI).

usage: check_score.py SYNTH_DIR RUN_DIR SCORE_JSON

- Detection counts: per frame, truth.csv and tracks.csv points (border margin and matching
  radius as score.json's setup says) matched one to one by scipy.optimize.linear_sum_assignment
  (maximum matches within the radius, then minimum total distance); TP/FP/FN must agree.
- TRA and DET recomputed from the AOGM counts with the published weights (Matula et al. 2015:
  NS 5, FN 10, FP 1, ED 1, EA 1.5, EC 1), MOTA from the CLEAR-MOT counts (Bernardin &
  Stiefelhagen 2008); the edge counts and the CLEAR-MOT counts (identity switches included)
  are themselves derived here from truth.csv and tracks.csv, not read back.
- The breaks: reference tracks not mostly tracked (no one result track on 80% of their points)
  and the cause of each event along them (missed, merged with a neighbour, wrong link,
  division missed or spurious), rederived from the same per-frame matching as above; both the
  event totals and the main cause per track must agree with score.json.
- CLEAR-MOT by an outside implementation: motmetrics (PyPI; Heindl's py-motmetrics, after
  Bernardin & Stiefelhagen 2008) fed the same points and Euclidean distances (NaN beyond the
  radius): MOTA, MOTP (mean distance of matches) and identity switches must equal score.json's.
- run.json divisions agree with tracks.csv: each daughter's parent_id is the mother, the
  mother's last frame is the event frame, each daughter starts one frame later.
"""
import csv
import json
import sys
from collections import defaultdict

import numpy as np
from scipy.optimize import linear_sum_assignment

syn, run, score_path = sys.argv[1:4]
doc = json.load(open(score_path))
setup, s = doc["setup"], doc["score"]
r, m = setup["match_radius_px"], setup["border_margin_px"]
W, H = setup["frame_size"]


def tracked_points(path):
    out = defaultdict(list)  # frame -> [(track_id, parent_id, x, y)]
    with open(path, newline="") as f:
        for row in csv.DictReader(f):
            x, y = float(row["x"]), float(row["y"])
            if m <= x <= W - 1 - m and m <= y <= H - 1 - m:
                parent = int(row["parent_id"]) if row["parent_id"] else None
                out[int(row["frame"])].append((int(row["track_id"]), parent, x, y))
    return out



def points(path):
    return {t: [(x, y) for _, _, x, y in v] for t, v in tracked_points(path).items()}


truth, found = points(f"{syn}/truth.csv"), points(f"{run}/tracks.csv")
tp = fp = fn = 0
for t in set(truth) | set(found):
    a, b = np.array(truth.get(t, [])).reshape(-1, 2), np.array(found.get(t, [])).reshape(-1, 2)
    k = 0
    if len(a) and len(b):
        d = np.hypot(a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])
        big = 1e6
        cost = np.where(d <= r, d, big)
        rows, cols = linear_sum_assignment(cost)
        k = int((cost[rows, cols] < big).sum())
    tp += k
    fp += len(b) - k
    fn += len(a) - k
# Reference points covered by a merged detection count as splits, not misses, in Caravan's
# AOGM; the plain one-to-one matching counts them as misses.
det = s["detection"]
assert (tp, fp) == (det["true_positives"], det["false_positives"]), ((tp, fp, fn), det)
assert fn == det["false_negatives"] + s["aogm_counts"]["splits"], (fn, det, s["aogm_counts"])

c = s["aogm_counts"]
w = dict(splits=5, false_negatives=10, false_positives=1, edges_to_delete=1, edges_to_add=1.5, edges_to_change=1)
aogm = sum(w[k] * c[k] for k in w)
aogm0 = 10 * c["reference_vertices"] + 1.5 * c["reference_edges"]
assert abs(aogm - s["aogm"]) < 1e-9 and abs((1 - min(aogm, aogm0) / aogm0) - s["tra"]) < 1e-9
aogmd = 5 * c["splits"] + 10 * c["false_negatives"] + c["false_positives"]
assert abs((1 - min(aogmd, 10 * c["reference_vertices"]) / (10 * c["reference_vertices"])) - s["det"]) < 1e-9
mot = s["clear_mot"]
errors = mot["false_negatives"] + mot["false_positives"] + mot["identity_switches"]
assert abs(1 - errors / mot["reference_points"] - mot["mota"]) < 1e-9

tp_pts, fp_pts = tracked_points(f"{syn}/truth.csv"), tracked_points(f"{run}/tracks.csv")
found_of, merged = {}, set()
for t in set(tp_pts) | set(fp_pts):
    a, b = tp_pts.get(t, []), fp_pts.get(t, [])
    matched_b = set()
    if a and b:
        d = np.array([[np.hypot(p[2] - q[2], p[3] - q[3]) for q in b] for p in a])
        cost = np.where(d <= r, d, 1e6)
        for i, j in zip(*linear_sum_assignment(cost)):
            if cost[i, j] < 1e6:
                found_of[(t, a[i][0])] = b[j][0]
                matched_b.add(j)
    for p in a:
        if (t, p[0]) not in found_of and any(j in matched_b and np.hypot(p[2] - q[2], p[3] - q[3]) <= r for j, q in enumerate(b)):
            merged.add((t, p[0]))
found_first, found_parent = {}, {}
for t, pts in fp_pts.items():
    for tid, parent, _, _ in pts:
        found_first[tid] = min(found_first.get(tid, t), t)
        if parent is not None:
            found_parent[tid] = parent
by_track = defaultdict(list)
for t, pts in tp_pts.items():
    for tid, parent, _, _ in pts:
        by_track[tid].append((t, parent))
causes = ["missed_detection", "merged_with_neighbour", "wrong_link", "division_missed", "division_spurious"]
events_total = dict.fromkeys(causes, 0)
main_total = dict.fromkeys(causes, 0)
not_mostly = 0
for tid, pts in by_track.items():
    pts.sort()
    cover = defaultdict(int)
    for t, _ in pts:
        if (t, tid) in found_of:
            cover[found_of[(t, tid)]] += 1
    if max(cover.values(), default=0) >= 0.8 * len(pts):
        continue
    not_mostly += 1
    events, previous = [], None
    for k, (t, parent) in enumerate(pts):
        f = found_of.get((t, tid))
        if f is None:
            events.append("merged_with_neighbour" if (t, tid) in merged else "missed_detection")
            continue
        if previous is not None and previous != f:
            events.append("division_spurious" if found_parent.get(f) == previous else "wrong_link")
        elif previous is None and k == 0 and parent is not None and found_first[f] < t:
            events.append("division_missed")
        previous = f
    for e in events:
        events_total[e] += 1
    if events:
        # The cause with the most events; ties to the earliest.
        main_total[max(causes, key=lambda c: (events.count(c), -events.index(c) if c in events else 0))] += 1
b = s["breaks"]
assert b["tracks_not_mostly_tracked"] == not_mostly, (b, not_mostly)


# AOGM edge counts derived here from truth.csv and tracks.csv with the matching above (not
# read back from score.json): edges join consecutive points of a track (gaps allowed) and a
# mother's last point to each daughter's first point (Matula et al. 2015).
def graph(pts_by_frame):
    tracks = defaultdict(list)
    for t, pts in pts_by_frame.items():
        for tid, parent, _, _ in pts:
            tracks[tid].append((t, parent))
    edges = {}
    for tid, pts in tracks.items():
        pts.sort()
        for (a, _), (b2, _) in zip(pts, pts[1:]):
            edges[((a, tid), (b2, tid))] = "continuation"
        parent = pts[0][1]
        if parent in tracks:
            edges[((max(f for f, _ in tracks[parent]), parent), (pts[0][0], tid))] = "division"
    return edges


reference_edges, result_edges = graph(tp_pts), graph(fp_pts)
truth_of = {(t, f): (t, tid) for (t, tid), f in found_of.items()}
covered, delete, change = set(), 0, 0
for (u, v), kind in result_edges.items():
    mapped = (truth_of.get(u), truth_of.get(v))
    if None not in mapped and mapped in reference_edges:
        covered.add(mapped)
        change += reference_edges[mapped] != kind
    else:
        delete += 1
derived = dict(edges_to_delete=delete, edges_to_add=len(reference_edges) - len(covered), edges_to_change=change,
               reference_edges=len(reference_edges), reference_vertices=sum(len(v) for v in tp_pts.values()))
assert all(c[k] == v for k, v in derived.items()), (derived, c)

# CLEAR-MOT derived here (Bernardin & Stiefelhagen 2008): each reference track keeps last
# frame's partner while it stays within the radius; the rest are matched one to one; a
# reference track whose partner changes is an identity switch.
last, mot_derived = {}, dict(false_negatives=0, false_positives=0, identity_switches=0, matches=0)
for t in sorted(set(tp_pts) | set(fp_pts)):
    tr, fo = tp_pts.get(t, []), fp_pts.get(t, [])
    dist = lambda i, j: np.hypot(tr[i][2] - fo[j][2], tr[i][3] - fo[j][3])
    pairs, used_f = [], set()
    for i, p in enumerate(tr):
        js = [j for j, q in enumerate(fo) if q[0] == last.get(p[0])]
        if js and js[0] not in used_f and dist(i, js[0]) <= r:
            pairs.append((i, js[0]))
            used_f.add(js[0])
    rest_t = [i for i in range(len(tr)) if i not in {a for a, _ in pairs}]
    rest_f = [j for j in range(len(fo)) if j not in used_f]
    if rest_t and rest_f:
        d = np.array([[dist(i, j) for j in rest_f] for i in rest_t])
        cost = np.where(d <= r, d, 1e6)
        pairs += [(rest_t[a], rest_f[b2]) for a, b2 in zip(*linear_sum_assignment(cost)) if cost[a, b2] < 1e6]
    for i, j in pairs:
        previous = last.get(tr[i][0])
        last[tr[i][0]] = fo[j][0]
        mot_derived["identity_switches"] += previous is not None and previous != fo[j][0]
    mot_derived["matches"] += len(pairs)
    mot_derived["false_negatives"] += len(tr) - len(pairs)
    mot_derived["false_positives"] += len(fo) - len(pairs)
assert all(mot[k] == v for k, v in mot_derived.items()), (mot_derived, mot)
reference_points = sum(len(v) for v in tp_pts.values())
mota = 1 - (mot_derived["false_negatives"] + mot_derived["false_positives"] + mot_derived["identity_switches"]) / reference_points
assert abs(mota - mot["mota"]) < 1e-9, (mota, mot["mota"])
assert b["events"] == events_total, (b["events"], events_total)
assert b["by_main_cause"] == main_total, (b["by_main_cause"], main_total)

run_record = json.load(open(f"{run}/run.json"))
tracks = defaultdict(list)
with open(f"{run}/tracks.csv", newline="") as f:
    for row in csv.DictReader(f):
        tracks[int(row["track_id"])].append((int(row["frame"]), row["parent_id"]))
events = run_record["divisions"]
assert isinstance(run_record["gaps_closed"], int) and run_record["gaps_closed"] >= 0
for e in events:
    assert max(f for f, _ in tracks[e["mother"]]) == e["frame"], e
    for d in e["daughters"]:
        assert min(f for f, _ in tracks[d]) == e["frame"] + 1, e
        assert all(p == str(e["mother"]) for _, p in tracks[d]), e
with_parent = {t for t, pts in tracks.items() if pts[0][1]}
assert with_parent == {d for e in events for d in e["daughters"]}
print(f"score checked: {tp} matches, TRA {s['tra']:.4f}; {len(events)} divisions consistent")

# CLEAR-MOT by motmetrics: per frame the truth and result ids inside the border margin, the
# Euclidean distances (NaN beyond the radius, where no match is allowed).
import motmetrics as mm


acc = mm.MOTAccumulator(auto_id=False)
gt, hyp = tp_pts, fp_pts
for t in sorted(set(gt) | set(hyp)):
    a, b = gt.get(t, []), hyp.get(t, [])
    d = np.full((len(a), len(b)), np.nan)
    for i, (_, _, x, y) in enumerate(a):
        for j, (_, _, u, v) in enumerate(b):
            dist = np.hypot(x - u, y - v)
            if dist <= r:
                d[i, j] = dist
    acc.update([p[0] for p in a], [p[0] for p in b], d, frameid=t)
summary = mm.metrics.create().compute(acc, metrics=["mota", "motp", "num_switches"], name="run")
theirs = summary.loc["run"]
assert abs(theirs["mota"] - mot["mota"]) < 1e-9, (theirs["mota"], mot["mota"])
assert abs(theirs["motp"] - mot["motp_px"]) < 1e-9, (theirs["motp"], mot["motp_px"])
assert int(theirs["num_switches"]) == mot["identity_switches"], (theirs["num_switches"], mot["identity_switches"])
print(f"motmetrics agrees: MOTA {theirs['mota']:.6f}, MOTP {theirs['motp']:.6f}, switches {int(theirs['num_switches'])}")
