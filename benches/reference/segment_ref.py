"""Flood-fill reference for the segmentation benchmark (benches/segment.rs): the same job done
straightforwardly with scikit-image and SciPy.

Usage: python3 segment_ref.py STACK.npy SLICE FRAME ROW COL
Prints JSON {"seconds": ..., "regions": ...}: the time to segment every slice and frame of a
[slice, frame, row, col] stack from one seed, the way cinegauge does in outline: grow in the
seed's slice and frame (threshold halfway between the blood median inside and the wall median
of a ring outside, refined 4 times), carry it through the frames of that slice and from there
slice by slice (each start point the deepest pixel of the previous region), hole filling.
"""
import json
import sys
import time

import numpy as np
from scipy import ndimage
from skimage.filters import threshold_otsu
from skimage.segmentation import flood


def grow(img, start, threshold, refinements=4):
    region = None
    for _ in range(refinements + 1):
        if img[start] < threshold:
            break
        region = ndimage.binary_fill_holes(flood(img >= threshold, start, connectivity=1))
        inside = img[ndimage.binary_erosion(region) & (img >= threshold)]
        ring = img[ndimage.binary_dilation(region, iterations=3) & ~ndimage.binary_dilation(region)]
        if inside.size == 0 or ring.size == 0:
            break
        nxt = 0.5 * (np.median(inside) + np.median(ring))
        if abs(nxt - threshold) <= 0.005 * abs(np.median(inside)):
            break
        threshold = nxt
    return None if region is None else (region, threshold)


def deepest(mask, img, threshold):
    d = ndimage.distance_transform_edt(mask)
    d[img < threshold] = -1
    p = np.unravel_index(np.argmax(d), d.shape)
    return p if d[p] >= 0 else None


def main():
    stack = np.load(sys.argv[1])
    s0, f0, r0, c0 = (int(v) for v in sys.argv[2:6])
    ns, nf = stack.shape[:2]
    start = time.perf_counter()
    img = stack[s0, f0]
    w = img[max(r0 - 28, 0):r0 + 29, max(c0 - 28, 0):c0 + 29]
    regions = {}
    regions[(s0, f0)] = grow(img, (r0, c0), threshold_otsu(w))
    order = [(f, f - 1) for f in range(f0 + 1, nf)] + [(f, f + 1) for f in range(f0 - 1, -1, -1)]
    for f, frm in order:
        prev = regions.get((s0, frm))
        if prev is None:
            continue
        mask, t = prev
        p = deepest(mask, stack[s0, f], t)
        if p is not None:
            regions[(s0, f)] = grow(stack[s0, f], p, t)
    for f in range(nf):
        for path in (range(s0 + 1, ns), range(s0 - 1, -1, -1)):
            prev = regions.get((s0, f))
            for s in path:
                if prev is None:
                    break
                mask, t = prev
                p = deepest(mask, stack[s, f], t)
                prev = grow(stack[s, f], p, t) if p is not None else None
                if prev is not None:
                    regions[(s, f)] = prev
    areas = sum(int(m.sum()) for (m, _) in regions.values() if m is not None)
    print(json.dumps({"seconds": time.perf_counter() - start, "regions": len(regions),
                      "pixels": areas}))


main()
