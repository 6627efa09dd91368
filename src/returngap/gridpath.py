"""Shortest way between two points of a plane through a square window, on a grid, pulled taut.

The window's free copper (on the board, outside every void) is rasterised by the crossing-number
rule at the cell centres; Dijkstra over the 8-neighbour moves between free cells (no corner
cutting) finds the way, and the way is then pulled taut against the true outlines: the turning
cells are joined by the longest straight pieces that stay clear, and each bend is slid towards
its neighbours' chord as far as it stays clear. Every piece of the result is tested against the
exact geometry, so the way is real; its length exceeds the geodesic by a fraction of a cell per
bend. A passage narrower than about a cell can be missed (the way then found, if any, is longer).
"""

import numpy as np
import shapely
from scipy import ndimage
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra

from .cuts import ring_edges

CELLS = 128          # grid cells along the window's side
END_REACH = 2        # cells round each end searched for a free cell in clear sight of it
FINE_MM = 0.1        # cells this fine get no second look: a narrower neck carries little return
                     # current (our judgement, no source)
NEAR_MM = 4.0        # the first search stops this far from pa; most ways are shorter
SLIDES = (1.0, 0.5, 0.25, 0.125, 0.0625)  # how far a bend may slide towards its chord, tried together
_R2 = np.sqrt(2.0)
_MOVES = [(0, 1, 1.0), (1, 0, 1.0), (0, -1, 1.0), (-1, 0, 1.0), (1, 1, _R2), (1, -1, _R2), (-1, 1, _R2), (-1, -1, _R2)]


def parity_grid(edges, x0, y0, size, cells):
    """cells x cells booleans [row, column]: True where the cell centre lies inside an odd number of
    the rings whose edges are `edges` (see cuts.ring_edges). Half-open rule on each row."""
    xa, ya, xb, yb = edges.T
    lo = np.maximum(np.ceil((np.minimum(ya, yb) - y0) / size - 0.5).astype(int), 0)
    hi = np.minimum(np.ceil((np.maximum(ya, yb) - y0) / size - 0.5).astype(int) - 1, cells - 1)
    count = np.maximum(hi - lo + 1, 0)
    e = np.repeat(np.arange(len(edges)), count)
    row = lo[e] + np.arange(len(e)) - np.repeat(np.cumsum(count) - count, count)
    yc = y0 + (row + 0.5) * size
    x = xa[e] + (xb[e] - xa[e]) * (yc - ya[e]) / (yb[e] - ya[e])
    col = np.clip(np.floor((x - x0) / size - 0.5).astype(int) + 1, 0, cells)
    flips = np.bincount(row * (cells + 1) + col, minlength=cells * (cells + 1)).reshape(cells, cells + 1)
    return (np.cumsum(flips, axis=1)[:, :cells] & 1).astype(bool)


def _moves(free, size):
    """The grid's moves as CSR rows: (moves per cell, target cells, lengths)."""
    h, w = free.shape
    pad = np.zeros((h + 2, w + 2), dtype=bool)
    pad[1:-1, 1:-1] = free
    ok = np.empty((8, h, w), dtype=bool)
    for k, (di, dj, _) in enumerate(_MOVES):
        np.logical_and(free, pad[1 + di:h + 1 + di, 1 + dj:w + 1 + dj], out=ok[k])
        if di and dj:  # a diagonal needs both side cells free
            ok[k] &= pad[1 + di:h + 1 + di, 1:w + 1]
            ok[k] &= pad[1:h + 1, 1 + dj:w + 1 + dj]
    cell, k = np.divmod(np.flatnonzero(ok.reshape(8, h * w).T), 8)
    step = np.array([di * w + dj for di, dj, _ in _MOVES])
    length = np.array([c for _, _, c in _MOVES]) * size
    return np.bincount(cell, minlength=h * w), cell + step[k], length[k]


def _segments(a, b):
    return shapely.linestrings(np.stack(np.broadcast_arrays(a, b), axis=-2))


def _centres(cell, x0, y0, size, cells):
    """(x, y) of the centres of the cells numbered `cell` (row-major, `cells` per row)."""
    return np.column_stack([x0 + (cell % cells + 0.5) * size, y0 + (cell // cells + 0.5) * size])


def _cells_round(p, x0, y0, size, cells):
    """Numbers of the cells within END_REACH cells of point p."""
    i0, j0 = int(np.floor((p[1] - y0) / size)), int(np.floor((p[0] - x0) / size))
    ii, jj = np.mgrid[i0 - END_REACH:i0 + END_REACH + 1, j0 - END_REACH:j0 + END_REACH + 1].reshape(2, -1)
    keep = (ii >= 0) & (ii < cells) & (jj >= 0) & (jj < cells)
    return ii[keep] * cells + jj[keep]


def _in_sight(free, near, p, x0, y0, size, passable):
    """The free cells of `near` in clear sight of p: (cell numbers, distances)."""
    cells = free.shape[0]
    near = near[free.ravel()[near]]
    c = _centres(near, x0, y0, size, cells)
    seen = passable(_segments(c, p)) if len(c) else np.zeros(0, dtype=bool)
    return near[seen], np.hypot(*(c[seen] - p).T)


def _pull_taut(pts, passable):
    """From each kept point, the farthest later point in clear sight; then each bend slid towards
    the chord of its neighbours as far as both its pieces stay clear. Returns the points, or the
    position of a point from which no later one is in sight."""
    keep, i = [0], 0
    while i < len(pts) - 1:
        later = np.arange(i + 1, len(pts))
        seen = np.flatnonzero(passable(_segments(pts[i], pts[later])))
        if not len(seen):
            return i
        i = int(later[seen[-1]])
        keep.append(i)
    p = pts[keep].copy()
    f = np.array(SLIDES)[None, :, None]
    for k0 in (1, 2, 1, 2):  # every other bend at once: its neighbours stay put meanwhile
        k = np.arange(k0, len(p) - 1, 2)
        if not len(k):
            continue
        to = p[k, None] + f * ((p[k - 1] + p[k + 1]) / 2 - p[k])[:, None]  # (bend, slide, xy)
        ok = passable(np.concatenate([_segments(p[k - 1, None], to), _segments(to, p[k + 1, None])]).ravel())
        ok = ok.reshape(2, len(k), len(SLIDES)).all(axis=0)
        best = np.argmax(ok, axis=1)
        moved = ok.any(axis=1)
        p[k[moved]] = to[moved, best[moved]]
    return p


def window_path(outline, void_geoms, pa, pb, box, passable):
    """Shortest way from pa to pb inside box (x0, y0, x1, y1, square) that stays on `outline` and out
    of `void_geoms` (those meeting the box suffice); passable(segments) -> bools tests pieces against
    the exact geometry. Returns (length, [(x, y), ...]) or None where no way is found in the window.
    A window whose grid cells are coarser than FINE_MM and show no way through is looked at once
    more on a grid twice as fine, for a passage narrower than a cell."""
    rings = ring_edges(shapely.clip_by_rect(np.concatenate([[outline], void_geoms]), *box))
    ends = np.array([[pa.x, pa.y], [pb.x, pb.y]])
    found = _grid_way(rings, ends, box, CELLS, passable)
    if found is False and (box[2] - box[0]) / CELLS > FINE_MM:
        found = _grid_way(rings, ends, box, 2 * CELLS, passable)
    return found or None


def _search(free, size, src, src_d, dst, dst_d, rows_cols, limit):
    """Dijkstra from pa (joined to the cells src at distances src_d) to pb (joined to dst) over the
    free cells of the sub-grid rows_cols = (r0, r1, c0, c1), at most `limit` long: the cells of the
    way (numbered in the whole grid), or None."""
    cells = free.shape[1]
    r0, r1, c0, c1 = rows_cols
    sub = free[r0:r1, c0:c1]
    w = c1 - c0

    def local(c):
        i, j = c // cells - r0, c % cells - c0
        ok = (i >= 0) & (i < r1 - r0) & (j >= 0) & (j < w)
        return i * w + j, ok
    s_loc, s_ok = local(src)
    t_loc, t_ok = local(dst)
    if not s_ok.any() or not t_ok.any():
        return None
    n = sub.size
    per_cell, to, length = _moves(sub, size)
    start = np.concatenate([[0], np.cumsum(per_cell), [per_cell.sum() + s_ok.sum()]])
    g = csr_matrix((np.concatenate([length, src_d[s_ok]]), np.concatenate([to, s_loc[s_ok]]), start),
                   shape=(n + 1, n + 1))
    d, pred = dijkstra(g, directed=True, indices=n, return_predecessors=True, limit=limit)  # node n: pa
    total = d[t_loc[t_ok]] + dst_d[t_ok]
    k = int(np.argmin(total))
    if not np.isfinite(total[k]):
        return None
    seq = [int(t_loc[t_ok][k])]
    while seq[-1] != n:
        seq.append(int(pred[seq[-1]]))
    seq = np.array(seq[-2::-1])
    return (seq // w + r0) * cells + seq % w + c0


def _grid_way(rings, ends, box, cells, passable):
    """The way on one grid: (length, points), None if its search or pulling failed, False where the
    grid shows the two ends apart."""
    x0, y0, x1, _ = box
    size = (x1 - x0) / cells
    free = parity_grid(rings, x0, y0, size, cells)  # inside the outline xor inside a void
    part, _ = ndimage.label(free, structure=np.ones((3, 3)))
    near = [_cells_round(p, x0, y0, size, cells) for p in ends]
    if not np.intersect1d(part.ravel()[near[0]], part.ravel()[near[1]]).any():
        return False  # no way round on this grid: spare the search
    (src, src_d), (dst, dst_d) = [_in_sight(free, c, p, x0, y0, size, passable) for c, p in zip(near, ends)]
    if not np.intersect1d(part.ravel()[src], part.ravel()[dst]).any():
        return False
    i0, j0 = int((ends[0, 1] - y0) / size), int((ends[0, 0] - x0) / size)
    reach = int(NEAR_MM / size) + END_REACH + 2
    near_box = (max(0, i0 - reach), min(cells, i0 + reach + 1), max(0, j0 - reach), min(cells, j0 + reach + 1))
    for _ in range(4):  # a thin void the grid cannot see blocks a step: close that cell, search again
        # most ways are short: first a search bounded to NEAR_MM from pa, on the cells that far round it
        seq = _search(free, size, src, src_d, dst, dst_d, near_box, NEAR_MM)
        if seq is None:
            seq = _search(free, size, src, src_d, dst, dst_d, (0, cells, 0, cells), np.inf)
        if seq is None:
            return None
        pts = np.vstack([ends[:1], _centres(seq, x0, y0, size, cells), ends[1:]])
        dp = np.diff(pts, axis=0)
        turns = np.flatnonzero(np.abs(dp[1:, 0] * dp[:-1, 1] - dp[1:, 1] * dp[:-1, 0]) > 1e-12) + 1
        at = np.r_[0, turns, len(pts) - 1]
        p = _pull_taut(pts[at], passable)
        if not isinstance(p, int):
            return float(np.hypot(*np.diff(p, axis=0).T).sum()), [tuple(map(float, q)) for q in p]
        # from turning point p nothing later is in sight: close the cells either side of the blocked steps
        j = np.arange(at[p], at[p + 1])
        hit = j[~passable(_segments(pts[j], pts[j + 1]))]
        cells_hit = np.concatenate([hit - 1, hit])
        cells_hit = seq[cells_hit[(cells_hit >= 0) & (cells_hit < len(seq))]]
        if not len(cells_hit):
            return None
        free.ravel()[cells_hit] = False
    return None
