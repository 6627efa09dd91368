"""Distances within a reach (geometry/reach.py) against shapely's own distance and tree search."""

import numpy as np
import pytest
import shapely

from returngap.geometry import reach as reach_module
from returngap.geometry.reach import Reach, point_segment_distance


def _random_case(seed, n_pts=400, n_segs=300):
    rng = np.random.default_rng(seed)
    segs = rng.uniform(0, 20, (n_segs, 4))
    segs[:20, 2:] = segs[:20, :2]  # zero-length pieces
    segs[20:40, 3] = segs[20:40, 1]  # level pieces
    pts = rng.uniform(-2, 22, (n_pts, 2))
    # points on pieces, at their ends and on their lines beyond the ends
    t = rng.uniform(-0.5, 1.5, 100)
    a, b = segs[40:140, :2], segs[40:140, 2:]
    on = a + t[:, None] * (b - a)
    return segs, np.vstack([pts, on, segs[:50, :2], segs[50:100, 2:]])


def test_point_segment_distance_equals_shapely_to_the_bit():
    # shapely (GEOS) is the reference: every distance, degenerate pieces included, bit for bit
    segs, pts = _random_case(1)
    rng = np.random.default_rng(2)
    k = rng.integers(0, len(segs), len(pts))
    s = segs[k]
    ours = point_segment_distance(pts[:, 0], pts[:, 1], s[:, 0], s[:, 1], s[:, 2], s[:, 3])
    theirs = shapely.distance(shapely.points(pts), shapely.linestrings(s.reshape(-1, 2, 2)))
    assert np.array_equal(ours, theirs)


@pytest.mark.parametrize("block", [reach_module.BLOCK_POINTS, 7, 1])
def test_reach_equals_a_bounded_nearest_search(block, monkeypatch):
    # shapely's tree search with max_distance (distance <= reach counts) is the reference; the
    # points measured in blocks of any size (a block of 7 ends in the middle of the case)
    monkeypatch.setattr(reach_module, "BLOCK_POINTS", block)
    for seed, reach in ((3, 0.3), (4, 1.0), (5, 0.05)):
        segs, pts = _random_case(seed)
        tree = shapely.STRtree(shapely.linestrings(segs.reshape(-1, 2, 2)))
        (hit, _), dist = tree.query_nearest(
            shapely.points(pts), max_distance=reach, return_distance=True, all_matches=False
        )
        want = np.full(len(pts), np.inf)
        want[hit] = dist
        got = Reach(segs, reach).distances(pts)
        assert np.array_equal(got, want)
        assert np.isfinite(got).sum() > 50  # the case has points both within and beyond reach
        assert np.isinf(got).sum() > 50


def test_reach_keeps_a_point_exactly_at_the_reach():
    # a level piece from 0 to 10: a point 0.5 above its middle or 0.5 past its end is at 0.5
    segs = np.array([[0.0, 0.0, 10.0, 0.0]])
    pts = np.array([[5.0, 0.5], [10.5, 0.0], [5.0, 0.5000001], [-0.5, 0.0]])
    got = Reach(segs, 0.5).distances(pts)
    assert got.tolist() == [0.5, 0.5, np.inf, 0.5]


def test_reach_with_nothing_to_measure():
    assert Reach(np.zeros((0, 4)), 1.0).distances(np.array([[0.0, 0.0]])).tolist() == [np.inf]
    assert Reach(np.array([[0.0, 0.0, 1.0, 0.0]]), 1.0).distances(np.zeros((0, 2))).size == 0
