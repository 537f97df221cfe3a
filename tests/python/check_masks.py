"""Independent check of a run made from label masks (run by tests/masks.rs).

usage: check_masks.py MASKS.tif RUN_DIR

Reads the masks with tifffile and measures every labelled object with
skimage.measure.regionprops (area, centroid): detections.csv must hold the same objects, one
per label per frame, with the same area and centroid (x = column, y = row).
"""
import csv
import sys

import numpy as np
import tifffile
from skimage.measure import regionprops

masks, run = sys.argv[1:3]
stack = tifffile.imread(masks)
if stack.ndim == 2:
    stack = stack[None]
with open(f"{run}/detections.csv", newline="") as f:
    rows = list(csv.DictReader(f))
checked = 0
for t, frame in enumerate(stack):
    mine = sorted((float(r["area_px"]), float(r["x"]), float(r["y"])) for r in rows if int(r["frame"]) == t)
    theirs = sorted((float(p.area), p.centroid[1], p.centroid[0]) for p in regionprops(frame.astype(np.int64)))
    assert len(mine) == len(theirs), (t, len(mine), len(theirs))
    for a, b in zip(mine, theirs):
        assert a[0] == b[0] and abs(a[1] - b[1]) < 1e-3 and abs(a[2] - b[2]) < 1e-3, (t, a, b)
        checked += 1
print(f"masks checked: {checked} objects in {len(stack)} frames")
