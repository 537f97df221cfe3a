"""Outside check of `caravan export --to ctc` (run by tests/masks.rs in CI).

usage: check_ctc.py SYNTH_DIR EXPORT_DIR WORK_DIR

Builds the benchmark's ground-truth layout (TRA/man_trackTTT.tif, TRA/man_track.txt; Maška et
al. 2014) from the synthetic truth (truth_labels.tif, whose labels are truth.csv's track ids),
then asks py-ctcmetrics (PyPI), an implementation of the published evaluation, whether the
export is a valid result and how it scores. The export comes from a run that tracked the
truth's own masks, so every object and link is right: TRA and DET must be 1.
"""
import csv
import os
import sys

import numpy as np
import tifffile
from ctc_metrics import evaluate_sequence, validate_sequence

syn, res, work = sys.argv[1:4]
gt = os.path.join(work, "gt")
os.makedirs(f"{gt}/TRA", exist_ok=True)
labels = tifffile.imread(f"{syn}/truth_labels.tif")
for t, frame in enumerate(labels):
    tifffile.imwrite(f"{gt}/TRA/man_track{t:03d}.tif", frame.astype(np.uint16))
spans = {}
with open(f"{syn}/truth.csv", newline="") as f:
    for r in csv.DictReader(f):
        k, t, p = int(r["track_id"]), int(r["frame"]), int(r["parent_id"] or 0)
        b, e, _ = spans.get(k, (t, t, p))
        spans[k] = (min(b, t), max(e, t), p)
with open(f"{gt}/TRA/man_track.txt", "w") as f:
    f.writelines(f"{k} {b} {e} {p}\n" for k, (b, e, p) in sorted(spans.items()))
valid = validate_sequence(res, threads=1)
assert valid["Valid"] == 1, valid
scores = evaluate_sequence(res, gt, metrics=["TRA", "DET"], threads=1)
assert scores["TRA"] > 0.999 and scores["DET"] > 0.999, scores
print(f"py-ctcmetrics: valid, TRA {scores['TRA']:.4f}, DET {scores['DET']:.4f}")
