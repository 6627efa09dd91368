"""Distances from many points to the nearest of many straight pieces, within a fixed reach.

A tree query per point pays its own search for the nearest piece; here one query of all points
against the pieces' boxes (grown by the reach) gives every candidate pair, and their distances
are plain array arithmetic. The arithmetic is GEOS's point-to-segment distance, step by step, so
each distance equals shapely's to the last bit (tests/test_reach.py).
"""

import numpy as np
import shapely

__all__ = ["point_segment_distance", "Reach"]

# the boxes are grown by a hair more than the reach, so that no pair within it is lost to the
# rounding of the box's corners (the exact test on the distance decides)
_GROW = 1e-9
BLOCK_POINTS = 2048  # points measured together (their candidate pairs: some 20,000 on the corpus)


def point_segment_distance(px, py, ax, ay, bx, by):
    """Distance from points (px, py) to segments (ax, ay)-(bx, by), elementwise: GEOS's
    Distance::pointToSegment, in the same order of operations."""
    dx, dy = bx - ax, by - ay
    len2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        r = ((px - ax) * dx + (py - ay) * dy) / len2
        s = ((ay - py) * dx - (ax - px) * dy) / len2
    to_a = np.sqrt((px - ax) * (px - ax) + (py - ay) * (py - ay))
    to_b = np.sqrt((px - bx) * (px - bx) + (py - by) * (py - by))
    across = np.abs(s) * np.sqrt(len2)
    d = np.where(r <= 0.0, to_a, np.where(r >= 1.0, to_b, across))
    return np.where((ax == bx) & (ay == by), to_a, d)


class Reach:
    """Straight pieces (an (N, 4) array of x0, y0, x1, y1) and a reach: distances(xy) gives each
    point's distance to the nearest piece, or inf where none lies within the reach."""

    def __init__(self, pieces, reach):
        self.pieces = np.asarray(pieces, dtype=float).reshape(-1, 4)
        self.reach = float(reach)
        grow = self.reach * (1 + _GROW) + _GROW
        lo = np.minimum(self.pieces[:, :2], self.pieces[:, 2:]) - grow
        hi = np.maximum(self.pieces[:, :2], self.pieces[:, 2:]) + grow
        self.tree = shapely.STRtree(shapely.box(lo[:, 0], lo[:, 1], hi[:, 0], hi[:, 1]))

    def distances(self, xy, points=None):
        """points: the same points as shapely Points, where the caller has them already."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        out = np.full(len(xy), np.inf)
        if not len(xy) or not len(self.pieces):
            return out
        if points is None:
            points = shapely.points(xy)
        # in blocks of points: a block's candidate pairs fit in memory already in use, where all
        # pairs at once (hundreds of thousands on a large board) cost a fresh page per 4 KB of
        # every temporary array
        for a in range(0, len(xy), BLOCK_POINTS):
            block = slice(a, a + BLOCK_POINTS)
            out[block] = self._distances(xy[block], points[block])
        return out

    def _distances(self, xy, points):
        out = np.full(len(xy), np.inf)
        at, k = self.tree.query(points)
        if not len(at):
            return out
        if (np.diff(at) < 0).any():  # shapely gives them ordered by point; not relied upon
            order = np.argsort(at, kind="stable")
            at, k = at[order], k[order]
        p = self.pieces[k]
        d = point_segment_distance(xy[at, 0], xy[at, 1], p[:, 0], p[:, 1], p[:, 2], p[:, 3])
        first = np.flatnonzero(np.r_[True, at[1:] != at[:-1]])
        out[at[first]] = np.minimum.reduceat(d, first)
        out[out > self.reach] = np.inf
        return out
