"""The plain scientific-Python way of doing Caravan's job, for the speed benchmark.

usage: python_baseline.py RECORDING.tif OUT_TRACKS.csv DIAMETER_PX [WORKERS]

Per frame: Gaussian smoothing, Otsu threshold, Euclidean distance transform, peak seeds,
seeded watershed, region measurements (scipy.ndimage, scikit-image); then frame-to-frame
linking by scipy.optimize.linear_sum_assignment with a maximum step. Written as a careful
scientist would write it, not tuned. With WORKERS > 1 the frames are segmented by that many
worker processes (multiprocessing.Pool, each opening the file once), as a scientist with
several cores would run it; linking stays in the main process.
"""
import multiprocessing
import sys

import numpy as np
import tifffile
from scipy import ndimage as ndi
from scipy.optimize import linear_sum_assignment
from skimage.feature import peak_local_max
from skimage.filters import threshold_otsu
from skimage.measure import regionprops
from skimage.segmentation import watershed

path, out, diameter = sys.argv[1], sys.argv[2], float(sys.argv[3])
workers = int(sys.argv[4]) if len(sys.argv) > 4 else 1
max_step = 0.6 * diameter


def segment(frame):
    smooth = ndi.gaussian_filter(frame.astype(np.float32), sigma=max(1.0, diameter / 10))
    mask = smooth > threshold_otsu(smooth)
    mask = ndi.binary_fill_holes(mask)
    distance = ndi.distance_transform_edt(mask)
    peaks = peak_local_max(distance, min_distance=max(1, int(diameter / 3)), labels=ndi.label(mask)[0], exclude_border=False)
    markers = np.zeros(frame.shape, dtype=np.int32)
    markers[tuple(peaks.T)] = np.arange(1, len(peaks) + 1)
    labels = watershed(-distance, markers, mask=mask)
    min_area = 0.2 * np.pi * (diameter / 2) ** 2
    return np.array([(p.centroid[1], p.centroid[0]) for p in regionprops(labels, intensity_image=frame) if p.area >= min_area])


_tif = None


def open_once():
    global _tif
    _tif = tifffile.TiffFile(path)


def segment_page(t):
    return segment(_tif.pages[t].asarray())


def all_points():
    """Each frame's centroids, in frame order."""
    with tifffile.TiffFile(path) as tif:
        frames = len(tif.pages)
    if workers <= 1:
        open_once()
        return [segment_page(t) for t in range(frames)]
    with multiprocessing.Pool(workers, initializer=open_once) as pool:
        return list(pool.imap(segment_page, range(frames), chunksize=2))


def link(per_frame):
    rows = []
    previous, previous_ids, next_id = np.empty((0, 2)), [], 1
    for t, points in enumerate(per_frame):
        ids = [0] * len(points)
        if len(previous) and len(points):
            d = np.hypot(previous[:, None, 0] - points[None, :, 0], previous[:, None, 1] - points[None, :, 1])
            r, c = linear_sum_assignment(np.where(d <= max_step, d, 1e6))
            for i, j in zip(r, c):
                if d[i, j] <= max_step:
                    ids[j] = previous_ids[i]
        for j in range(len(points)):
            if ids[j] == 0:
                ids[j], next_id = next_id, next_id + 1
            rows.append((ids[j], t, points[j, 0], points[j, 1]))
        previous, previous_ids = points, ids
    return rows


if __name__ == "__main__":
    rows = link(all_points())
    rows.sort()
    with open(out, "w") as f:
        f.write("track_id,parent_id,frame,x,y\n")
        for tid, t, x, y in rows:
            f.write(f"{tid},,{t},{x:.4f},{y:.4f}\n")
