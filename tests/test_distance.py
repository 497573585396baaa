"""The exact distance transform, and a neck test that gives one answer in every process state."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from scanmass.segment.distance import exact_distance, near_distance

TESTS = Path(__file__).resolve().parent
ROOT = TESTS.parent


def _masks():
    """Filled silhouettes of tests/test_touching.py's random touching shapes, on their own grids."""
    import cv2

    sys.path.insert(0, str(TESTS))
    try:
        from test_touching import _two_lobe_masks
    finally:
        sys.path.remove(str(TESTS))
    for outer in _two_lobe_masks(40, seed=7):
        lo = outer.min(axis=0) - 3
        mask = np.zeros((int(np.ptp(outer[:, 1])) + 7, int(np.ptp(outer[:, 0])) + 7), np.uint8)
        cv2.fillPoly(mask, [np.round(outer - lo).astype(np.int32)], 1)
        yield mask


def test_exact_distance_is_scipy_edt_rounded_to_float32():
    """Every pixel equals scipy.ndimage.distance_transform_edt (reference library; the exact
    Euclidean distance, sqrt of a whole number in float64) rounded once to float32."""
    from scipy import ndimage

    for mask in _masks():
        ref = ndimage.distance_transform_edt(mask).astype(np.float32)
        got = exact_distance(mask)
        assert got.dtype == np.float32 and got.shape == mask.shape
        assert np.array_equal(got, ref)


_STATES = r"""
import json, sys, tempfile
from pathlib import Path
import cv2
import numpy as np
sys.path.insert(0, sys.argv[1])
from test_touching import _two_lobe_masks
from scanmass.segment.touching import touching_lobes

outers = list(_two_lobe_masks(400, seed=7))

def answers():
    out = []
    for o in outers:
        r = touching_lobes(o, solidity_limit=2.0)  # every silhouette searched
        out.append(None if r is None else [r.neck_width_px, *r.lobe_widths_px, *r.lobe_areas_px])
    return out

result = {}
if sys.argv[2] == "fresh":
    result["fresh"] = answers()
else:
    # the batch worker's state: one OpenCV thread, after measuring scans (tests/test_batch.py)
    import scanmass
    import test_batch as tb
    cv2.setNumThreads(1)
    folder = Path(tempfile.mkdtemp()) / "scans"
    tb._many(folder, 2)
    for k, f in enumerate(sorted(folder.glob("*.png"))):
        scanmass.measure(f, dpi=tb.DPI)
        result[f"after measure {k}"] = answers()
    # OpenCV's output buffer at each alignment the heap may hand out (the cause found)
    plain = cv2.distanceTransform
    for shift in (0, 8, 16, 24):
        def shifted(src, *args, _shift=shift, **kw):
            store = np.empty(src.size + 16, np.float32)
            skip = ((-store.ctypes.data + _shift) % 64) // 4
            dst = store[skip : skip + src.size].reshape(src.shape)
            out = plain(src, *args, dst=dst, **kw)
            assert out.ctypes.data == dst.ctypes.data
            return out
        cv2.distanceTransform = shifted
        result[f"output at {shift} bytes past 64"] = answers()
    cv2.distanceTransform = plain
print(json.dumps(result))
"""


def _run_states(mode: str) -> dict:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.run(
        [sys.executable, "-c", _STATES, str(TESTS), mode],
        capture_output=True,
        text=True,
        timeout=300,
        env=env,
        cwd=ROOT,
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_touching_lobes_gives_the_fresh_answer_in_a_batch_workers_state():
    """touching_lobes on 400 random silhouettes after one OpenCV thread and measure() calls, and with
    OpenCV's distance output at four buffer alignments, answers exactly as in a fresh process.

    OpenCV 5.1's precise distance transform rounds some pixels one float32 unit differently
    depending on the output buffer's address modulo 32 bytes; the watershed of its negation
    then split silhouette 71 differently (a neck found in one state, none in another)."""
    fresh = _run_states("fresh")["fresh"]
    assert sum(a is not None for a in fresh) >= 8  # necks found: the comparison covers both answers
    for state, got in _run_states("states").items():
        differ = [k for k, (a, b) in enumerate(zip(fresh, got)) if a != b]
        assert not differ, f"{state}: silhouettes {differ[:10]} differ from the fresh process"


def test_near_distance_is_opencvs_whole_mask_transform_where_within_the_limit():
    """Bit for bit OpenCV's 5 x 5 chamfer transform of the whole mask (the reference library
    itself, run on the whole array) wherever that is at most the limit, inf elsewhere: random
    polygons, noise masks, masks without zeros or without foreground, every tile shape."""
    import cv2

    rng = np.random.default_rng(3)
    for trial in range(160):
        h, w = (int(v) for v in rng.integers(1, 300, 2))
        mask = np.zeros((h, w), np.uint8)
        for _ in range(int(rng.integers(0, 6))):
            pts = rng.integers(-40, 340, (int(rng.integers(3, 9)), 2)).astype(np.int32)
            cv2.fillPoly(mask, [pts], int(rng.integers(0, 2)))
        if trial % 4 == 0:
            mask = (rng.random((h, w)) < rng.random()).astype(np.uint8)
        if trial % 23 == 0:
            mask[:] = trial % 2
        limit = float(rng.uniform(0.5, 40.0))
        tile = (int(rng.choice([4, 16, 64])), int(rng.choice([8, 32])))
        for invert in (False, True):
            whole = cv2.distanceTransform((1 - mask) if invert else mask, cv2.DIST_L2, 5)
            want = np.where(whole <= np.float32(limit), whole, np.float32(np.inf))
            got = near_distance(mask, limit, invert=invert, tile=tile)
            assert got.dtype == np.float32 and got.tobytes() == want.tobytes(), (trial, limit, tile, invert)


def test_a_window_short_of_the_limit_changes_opencvs_values():
    """Why near_distance pads each window by the limit: a strip of rows read with only 2 px
    of context changes some of OpenCV's values within the limit (another path, another
    float32 sum; some by one unit in the last place), so the bit-for-bit test above can fail."""
    import cv2

    mask = np.ones((200, 200), np.uint8)
    cv2.fillPoly(mask, [np.array([[20, 30], [180, 50], [120, 170], [40, 140]], np.int32)], 0)
    cv2.circle(mask, (100, 100), 25, 1, -1)
    whole = cv2.distanceTransform(mask, cv2.DIST_L2, 5)
    strip = cv2.distanceTransform(mask[62:134], cv2.DIST_L2, 5)[2:-2]
    within = whole[64:132] <= 20
    assert np.any((strip != whole[64:132]) & within)
