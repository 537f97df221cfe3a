"""Outside checks of the benchmark layouts (run by tests/masks.rs and tests/benchmark_layout.rs).

usage:
  check_ctc.py export SYNTH_DIR EXPORT_DIR WORK_DIR
      py-ctcmetrics validates the export of a run made from the truth's own masks and scores
      it against the truth at TRA = DET = 1.
  check_ctc.py score CARAVAN SYNTH_DIR EXPORT_DIR WORK_DIR
      `caravan score` on the export against the truth in the ground-truth layout must give
      the TRA, DET and every AOGM count that py-ctcmetrics gives (within 0.001 for TRA/DET).

The ground-truth layout (TRA/man_trackTTT.tif, TRA/man_track.txt; Maška et al. 2014) is built
here from the synthetic truth (truth_labels.tif, whose labels are truth.csv's track ids): a
track missing from the masks in some frame is cut there, each later stretch the child of the
one before, daughters naming their mother's last stretch (the layout's conventions).
"""
import contextlib
import csv
import io
import json
import os
import subprocess
import sys
from collections import defaultdict

import numpy as np
import tifffile
from ctc_metrics import evaluate_sequence, validate_sequence


def build_gt(syn, gt):
    os.makedirs(f"{gt}/TRA", exist_ok=True)
    labels = tifffile.imread(f"{syn}/truth_labels.tif").astype(np.int64)
    if labels.ndim == 2:
        labels = labels[None]
    parent = {}
    with open(f"{syn}/truth.csv", newline="") as f:
        for r in csv.DictReader(f):
            parent[int(r["track_id"])] = int(r["parent_id"] or 0)
    present = defaultdict(list)
    for t, frame in enumerate(labels):
        for l in np.unique(frame):
            if l:
                present[int(l)].append(t)
    new, rows, last_of = {}, [], {}
    for l in sorted(present):
        prev = None
        for t in present[l]:
            if prev is not None and t == prev[0] + 1:
                new[(l, t)] = prev[1]
                rows[prev[1] - 1][2] = t
            else:
                rows.append([len(rows) + 1, t, t, prev[1] if prev else 0, l if prev is None else None])
                new[(l, t)] = len(rows)
            prev = (t, new[(l, t)])
        last_of[l] = prev[1]
    for row in rows:
        if row[4] is not None and parent.get(row[4]) in last_of:
            row[3] = last_of[parent[row[4]]]
    for t, frame in enumerate(labels):
        out = np.zeros(frame.shape, np.uint16)
        for l in np.unique(frame):
            if l:
                out[frame == l] = new[(int(l), t)]
        tifffile.imwrite(f"{gt}/TRA/man_track{t:03d}.tif", out)
    with open(f"{gt}/TRA/man_track.txt", "w") as f:
        f.writelines(f"{a} {b} {e} {p}\n" for a, b, e, p, _ in rows)


def theirs(res, gt):
    with contextlib.redirect_stdout(io.StringIO()):
        return evaluate_sequence(res, gt, metrics=["TRA", "DET"], threads=1)


mode = sys.argv[1]
if mode == "export":
    syn, res, work = sys.argv[2:5]
    gt = os.path.join(work, "gt_export")
    build_gt(syn, gt)
    valid = validate_sequence(res, threads=1)
    assert valid["Valid"] == 1, valid
    s = theirs(res, gt)
    assert s["TRA"] > 0.999 and s["DET"] > 0.999, s
    print(f"py-ctcmetrics: valid, TRA {s['TRA']:.4f}, DET {s['DET']:.4f}")
else:
    caravan, syn, res, work = sys.argv[2:6]
    gt = os.path.join(work, "gt_score")
    build_gt(syn, gt)
    out = os.path.join(work, "layout_score.json")
    subprocess.run([caravan, "score", "--truth", gt, "--tracks", res, "-o", out], check=True, capture_output=True)
    doc = json.load(open(out))
    ours, counts = doc["score"], doc["score"]["aogm_counts"]
    assert doc["setup"]["vertex_matching"].startswith("mask overlap"), doc["setup"]
    s = theirs(res, gt)
    assert abs(s["TRA"] - ours["tra"]) < 1e-3 and abs(s["DET"] - ours["det"]) < 1e-3, (s, ours["tra"], ours["det"])
    pairs = {"AOGM_NS": "splits", "AOGM_FN": "false_negatives", "AOGM_FP": "false_positives",
             "AOGM_ED": "edges_to_delete", "AOGM_EA": "edges_to_add", "AOGM_EC": "edges_to_change"}
    for k, v in pairs.items():
        assert int(s[k]) == counts[v], (k, s[k], v, counts[v])
    print(f"py-ctcmetrics agrees: TRA {s['TRA']:.6f}, DET {s['DET']:.6f}, every AOGM count equal")
