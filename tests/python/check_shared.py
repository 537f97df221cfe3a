"""Independent check of the objects time split (run by tests/cli.rs in CI).

usage: check_shared.py RUN_DIR

README ("Time repairs the segmentation"): an object two tracks enter is split in two, both
points keep the object's label, its area and brightness are shared between them, and the
area-weighted mean of their centres is the object's centroid; run.json counts the splits.
Read here with the csv and json modules against detections.csv: every (frame, object) of
tracks.csv appears once or twice; a pair's areas and total intensities sum to the object's, and
its area-weighted centre is the object's centroid (to the 4 decimals written); single points
equal their detection; the pairs number run.json's `shared_objects_split`.
"""
import collections
import csv
import json
import sys

run_dir = sys.argv[1]
with open(f"{run_dir}/detections.csv", newline="") as f:
    dets = {(int(r["frame"]), int(r["object"])): r for r in csv.DictReader(f)}
with open(f"{run_dir}/tracks.csv", newline="") as f:
    tracks = list(csv.DictReader(f))
with open(f"{run_dir}/run.json") as f:
    run = json.load(f)

groups = collections.defaultdict(list)
for r in tracks:
    groups[(int(r["frame"]), int(r["object"]))].append(r)
assert set(groups) == set(dets), "every detection is on a track, nothing else is"
pairs = 0
for key, rows in groups.items():
    d = dets[key]
    if len(rows) == 1:
        assert (rows[0]["x"], rows[0]["y"], rows[0]["area_px"]) == (d["x"], d["y"], d["area_px"]), key
        continue
    assert len(rows) == 2, (key, len(rows))
    assert rows[0]["track_id"] != rows[1]["track_id"], key
    pairs += 1
    areas = [float(r["area_px"]) for r in rows]
    assert abs(sum(areas) - float(d["area_px"])) < 1e-3, (key, areas, d["area_px"])
    total = sum(float(r["total_intensity"]) for r in rows)
    assert abs(total - float(d["total_intensity"])) <= 0.02 + 1e-6 * total, (key, total)
    for axis in ("x", "y"):
        mean = sum(a * float(r[axis]) for a, r in zip(areas, rows)) / sum(areas)
        assert abs(mean - float(d[axis])) < 2e-4, (key, axis, mean, d[axis])
assert pairs == run["shared_objects_split"], (pairs, run["shared_objects_split"])
assert pairs > 0, "the scene of this test has merges to split"
print(f"independent reader: {pairs} split objects of {len(dets)} checked")
