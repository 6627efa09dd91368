"""DC current in a thin copper sheet on a square raster: the sheet's conduction (Kirchhoff's laws on
a resistor grid, each cell joined to its four neighbours by one square of sheet resistance; the
standard finite-difference form of Laplace's equation). Copper is a boolean array [i, j] (i along
x, j along y); the current enters at one cell and leaves at another. The sheet resistance cancels
from any share of the current, so none is asked for."""

import numpy as np
import scipy.sparse
import scipy.sparse.csgraph
import scipy.sparse.linalg

__all__ = ["NotConnected", "sheet_potential", "flow_across_column"]


class NotConnected(ValueError):
    """The feed and the drain lie on copper the sheet does not join."""


def _links(copper):
    """(a, b) index pairs of neighbouring copper cells, cells numbered in raster order."""
    idx = np.arange(copper.size).reshape(copper.shape)
    pairs = []
    for sl_a, sl_b in (
        ((slice(None, -1), slice(None)), (slice(1, None), slice(None))),
        ((slice(None), slice(None, -1)), (slice(None), slice(1, None))),
    ):
        both = copper[sl_a] & copper[sl_b]
        pairs.append((idx[sl_a][both], idx[sl_b][both]))
    return np.concatenate([p[0] for p in pairs]), np.concatenate([p[1] for p in pairs])


def sheet_potential(copper, feed, drain):
    """Potential (in units of the sheet resistance times 1 A) on every cell of `copper` for 1 A fed
    at cell `feed` (i, j) and drawn at `drain`; NaN off the copper or on pieces not joined to the
    feed. Raises NotConnected when the two cells are not joined."""
    a, b = _links(copper)
    n = copper.size
    graph = scipy.sparse.coo_matrix((np.ones(len(a)), (a, b)), shape=(n, n)).tocsr()
    _, label = scipy.sparse.csgraph.connected_components(graph, directed=False)
    fi, di = np.ravel_multi_index(feed, copper.shape), np.ravel_multi_index(drain, copper.shape)
    if not (copper.flat[fi] and copper.flat[di]) or label[fi] != label[di]:
        raise NotConnected("the feed and the drain are not joined by copper")
    keep = np.flatnonzero((label == label[fi]) & copper.ravel())
    pos = -np.ones(n, int)
    pos[keep] = np.arange(len(keep))
    sel = (pos[a] >= 0) & (pos[b] >= 0)
    pa, pb = pos[a[sel]], pos[b[sel]]
    m = len(keep)
    lap = scipy.sparse.coo_matrix(
        (
            np.concatenate([np.ones(len(pa)) * -1, np.ones(len(pa)) * -1, np.ones(2 * len(pa))]),
            (np.concatenate([pa, pb, pa, pb]), np.concatenate([pb, pa, pa, pb])),
        ),
        shape=(m, m),
    ).tocsr()
    rhs = np.zeros(m)
    rhs[pos[fi]], rhs[pos[di]] = 1.0, -1.0
    ground = pos[di]  # the drain at 0 V makes the system definite
    free = np.arange(m) != ground
    v = np.zeros(m)
    v[free] = scipy.sparse.linalg.spsolve(lap[free][:, free].tocsc(), rhs[free])
    out = np.full(n, np.nan)
    out[keep] = v
    return out.reshape(copper.shape)


def flow_across_column(potential, i, rows):
    """Current (A) from column i to column i+1 through the given rows: the potential drop across
    each joined pair of cells (one square each)."""
    drop = potential[i, rows] - potential[i + 1, rows]
    return float(np.nansum(drop))
