"""Where straight cuts pass through a polygon, by the crossing-number rule, in numpy.

One cut against E ring edges costs O(E) array arithmetic; GEOS's line-polygon intersection
builds an overlay graph for every cut, which on the gap scan's many short cuts costs far more.
"""

import numpy as np
import shapely

from returngap.geometry.shapes import vertex_pairs

__all__ = ["ring_edges", "cut_intervals"]


def ring_edges(geom):
    """(E, 4) array [x0, y0, x1, y1] of every ring edge (outer and holes) of a (Multi)Polygon."""
    rings = shapely.get_rings(shapely.get_parts(geom))
    if not len(rings):
        return np.zeros((0, 4))
    return vertex_pairs(rings)[0]


def cut_intervals(edges, origins, directions, lo, hi):
    """Pieces of the cuts origins[k] + t * directions[k], lo <= t <= hi (directions unit vectors),
    inside the polygon whose ring edges are `edges` (see ring_edges): arrays (cut index, t1, t2),
    ordered by cut, then t. Half-open rule (an edge crosses where its ends lie strictly on opposite
    sides, one of them on the positive side or on the line): every closed ring is crossed an even
    number of times, so sorted crossings pair up into inside pieces; touches at a vertex (no length)
    are dropped, as are runs along an edge (the polygon's area lies on one side only)."""
    origins = np.atleast_2d(np.asarray(origins, dtype=float))
    u = np.atleast_2d(np.asarray(directions, dtype=float))
    if not len(edges) or not len(origins):
        empty = np.zeros(0)
        return empty.astype(int), empty, empty
    ax = edges[None, :, 0] - origins[:, None, 0]
    ay = edges[None, :, 1] - origins[:, None, 1]
    bx = edges[None, :, 2] - origins[:, None, 0]
    by = edges[None, :, 3] - origins[:, None, 1]
    va = ax * -u[:, 1:2] + ay * u[:, 0:1]  # signed offsets from the cut's line
    vb = bx * -u[:, 1:2] + by * u[:, 0:1]
    k, e = np.nonzero((va > 0) != (vb > 0))
    ta = ax[k, e] * u[k, 0] + ay[k, e] * u[k, 1]
    tb = bx[k, e] * u[k, 0] + by[k, e] * u[k, 1]
    a, b = va[k, e], vb[k, e]
    t = ta + (tb - ta) * a / (a - b)
    order = np.lexsort((t, k))
    k, t = k[order], t[order]
    k, t1, t2 = k[0::2], np.maximum(t[0::2], lo), np.minimum(t[1::2], hi)
    keep = t2 - t1 > 1e-12  # a touch at a vertex can leave a rounding-error piece
    return k[keep], t1[keep], t2[keep]
