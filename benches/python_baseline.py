"""The plain scientific-Python way of doing Caravan's job, for the speed benchmark.

usage: python_baseline.py RECORDING.tif OUT_TRACKS.csv DIAMETER_PX

One frame at a time: Gaussian smoothing, Otsu threshold, Euclidean distance transform, peak
seeds, seeded watershed, region measurements (scipy.ndimage, scikit-image); then frame-to-frame
linking by scipy.optimize.linear_sum_assignment with a maximum step. Written as a careful
scientist would write it, not tuned; single process, as such scripts are.
"""
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


rows = []
previous, previous_ids, next_id = np.empty((0, 2)), [], 1
with tifffile.TiffFile(path) as tif:
    for t, page in enumerate(tif.pages):
        points = segment(page.asarray())
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
rows.sort()
with open(out, "w") as f:
    f.write("track_id,parent_id,frame,x,y\n")
    for tid, t, x, y in rows:
        f.write(f"{tid},,{t},{x:.4f},{y:.4f}\n")
