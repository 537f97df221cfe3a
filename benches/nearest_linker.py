"""The floor of the accuracy table: a plain nearest-neighbour linker given the right gate.

Reads a run's detections.csv (the same detections Caravan linked), links each frame to the
next greedily (closest pair first, each detection used once, pairs farther than the gate
never), and writes a tracks.csv with track_id, parent_id, frame, x, y. The gate that gives
the highest MOTA against the truth is "the right gate"; the caller scores each gate with
`caravan score` and keeps the best (benches/accuracy.sh).

    python nearest_linker.py DETECTIONS.csv GATE_PX OUT_TRACKS.csv
"""
import csv
import sys

import numpy as np
from scipy.spatial import cKDTree


def main(detections, gate, out):
    frames = {}
    with open(detections, newline="") as f:
        for row in csv.DictReader(f):
            frames.setdefault(int(row["frame"]), []).append((float(row["x"]), float(row["y"])))
    next_id = 1
    previous_ids, previous_points = [], np.empty((0, 2))
    rows = []
    for t in sorted(frames):
        points = np.array(frames[t])
        ids = [0] * len(points)
        if len(previous_points) and len(points):
            tree = cKDTree(points)
            pairs = []
            for i, hits in enumerate(tree.query_ball_point(previous_points, gate)):
                for j in hits:
                    d = float(np.hypot(*(points[j] - previous_points[i])))
                    pairs.append((d, i, j))
            pairs.sort()
            used_i, used_j = set(), set()
            for d, i, j in pairs:
                if i in used_i or j in used_j:
                    continue
                used_i.add(i)
                used_j.add(j)
                ids[j] = previous_ids[i]
        for j in range(len(points)):
            if ids[j] == 0:
                ids[j] = next_id
                next_id += 1
            rows.append((ids[j], t, points[j][0], points[j][1]))
        previous_ids, previous_points = ids, points
    rows.sort()
    with open(out, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["track_id", "parent_id", "frame", "x", "y"])
        for tid, t, x, y in rows:
            w.writerow([tid, "", t, f"{x:.3f}", f"{y:.3f}"])


if __name__ == "__main__":
    main(sys.argv[1], float(sys.argv[2]), sys.argv[3])
