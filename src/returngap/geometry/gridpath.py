"""Shortest way between two points of a plane through a window, on a grid, pulled taut.

The plane's free copper (on the board, outside every void) is rasterised by the crossing-number
rule at the cell centres of a fixed lattice, tile by tile as windows need it (crossings near one
another share the tiles); Dijkstra over the 8-neighbour moves between free cells (no corner
cutting) finds the way, and the way is then pulled taut against the true outlines: the turning
cells are joined by the longest straight pieces that stay clear, and each bend is slid towards
its neighbours' chord as far as it stays clear. Every piece of the result is tested against the
exact geometry, so the way is real; its length exceeds the geodesic by a fraction of a cell per
bend. A passage narrower than about a cell can be missed (the way then found, if any, is
longer)."""

import math

import numpy as np
import shapely
from scipy import ndimage
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra

from returngap.geometry.cuts import ring_edges
from returngap.geometry.shapes import ranges

__all__ = [
    "CELLS",
    "TILE",
    "SHAPE_STEP",
    "END_REACH",
    "FINE_MM",
    "NEAR_MM",
    "SLIDES",
    "parity_grid",
    "Lattice",
    "lattice_way",
    "window_path",
]

CELLS = 128  # grid cells along a window's side in window_path
TILE = 128  # lattice cells along a tile's side
SHAPE_STEP = 16  # a window's side is a whole multiple of this many cells
END_REACH = 2  # cells round each end searched for a free cell in clear sight of it
FINE_MM = 0.1  # cells this fine get no second look: a narrower neck carries little return
# current (our judgement, no source)
NEAR_MM = 4.0  # the first search stops this far from pa; most ways are shorter
SLIDES = (
    1.0,
    0.5,
    0.25,
    0.125,
    0.0625,
)  # how far a bend may slide towards its chord, tried together
_R2 = np.sqrt(2.0)
_MOVES = [
    (0, 1, 1.0),
    (1, 0, 1.0),
    (0, -1, 1.0),
    (-1, 0, 1.0),
    (1, 1, _R2),
    (1, -1, _R2),
    (-1, 1, _R2),
    (-1, -1, _R2),
]


def parity_grid(edges, x0, y0, size, cells):
    """cells x cells booleans [row, column]: True where the cell centre lies inside an odd number of
    the rings whose edges are `edges` (see cuts.ring_edges). Half-open rule on each row."""
    xa, ya, xb, yb = edges.T
    lo = np.maximum(np.ceil((np.minimum(ya, yb) - y0) / size - 0.5).astype(int), 0)
    hi = np.minimum(np.ceil((np.maximum(ya, yb) - y0) / size - 0.5).astype(int) - 1, cells - 1)
    count = np.maximum(hi - lo + 1, 0)
    e = np.repeat(np.arange(len(edges)), count)
    row = ranges(lo, count)
    yc = y0 + (row + 0.5) * size
    x = xa[e] + (xb[e] - xa[e]) * (yc - ya[e]) / (yb[e] - ya[e])
    col = np.clip(np.floor((x - x0) / size - 0.5).astype(int) + 1, 0, cells)
    flips = np.bincount(row * (cells + 1) + col, minlength=cells * (cells + 1)).reshape(
        cells, cells + 1
    )
    return (np.cumsum(flips, axis=1)[:, :cells] & 1).astype(bool)


class Lattice:
    """The free copper of a plane on a lattice of square cells anchored at the origin, rasterised
    tile by tile when a window first needs it and kept, so that crossings near one another share
    the work. void_geoms: the plane's voids, indexed by void_tree."""

    def __init__(self, outline, void_geoms, size, void_tree=None):
        self.outline, self.void_geoms, self.size = outline, void_geoms, size
        self.tree = void_tree if void_tree is not None else shapely.STRtree(void_geoms)
        self._tiles = {}

    def _tile(self, ti, tj):
        t = self._tiles.get((ti, tj))
        if t is None:
            side = TILE * self.size
            box = (tj * side, ti * side, (tj + 1) * side, (ti + 1) * side)
            near = self.void_geoms[self.tree.query(shapely.box(*box))]
            rings = ring_edges(shapely.clip_by_rect(np.concatenate([[self.outline], near]), *box))
            t = self._tiles[(ti, tj)] = parity_grid(rings, box[0], box[1], self.size, TILE)
        return t

    def window(self, cx, cy, half):
        """The free cells of a square window round (cx, cy), at least 2 * half wide, as a new array
        [row, column], and the lattice position (x, y) of its lower left corner. Its side is a whole
        number of SHAPE_STEP cells: windows of few shapes share their search graphs' structure
        (see _template)."""
        s = self.size
        n = SHAPE_STEP * math.ceil(2 * half / s / SHAPE_STEP - 1e-9)
        j0, i0 = round(cx / s - n / 2), round(cy / s - n / 2)
        ta, tb = i0 // TILE, (i0 + n - 1) // TILE
        tc, td = j0 // TILE, (j0 + n - 1) // TILE
        whole = np.block(
            [[self._tile(ti, tj) for tj in range(tc, td + 1)] for ti in range(ta, tb + 1)]
        )
        r0, c0 = i0 - ta * TILE, j0 - tc * TILE
        return whole[r0 : r0 + n, c0 : c0 + n].copy(), j0 * s, i0 * s


def lattice_way(lattice, finer, pa, pb, half, passable):
    """Shortest way from pa to pb within a window at least 2 * half wide round their midpoint, on
    `lattice` (see window_path for what it returns); where the lattice shows no way through and its
    cells are coarser than FINE_MM, once more on `finer` (a lattice of cells half the size), for a
    passage narrower than a cell."""
    ends = np.array([[pa.x, pa.y], [pb.x, pb.y]])
    cx, cy = ends.mean(axis=0)
    free, x0, y0 = lattice.window(cx, cy, half)
    found = _grid_way(free, x0, y0, lattice.size, ends, passable)
    if found is False and lattice.size > FINE_MM and finer is not None:
        free, x0, y0 = finer.window(cx, cy, half)
        found = _grid_way(free, x0, y0, finer.size, ends, passable)
    return found or None


def window_path(outline, void_geoms, pa, pb, half, passable):
    """Shortest way from pa to pb within a square window 2 * half wide round their midpoint that
    stays
    on `outline` and out of `void_geoms` (those meeting the window suffice); passable(segments) ->
    bools tests pieces against the exact geometry. Returns (length, [(x, y), ...]) or None where no
    way is found in the window. The window has CELLS cells a side; where they are coarser than
    FINE_MM and show no way through, it is looked at once more with cells half the size."""
    size = 2 * half / CELLS
    voids = np.asarray(void_geoms, dtype=object)
    tree = shapely.STRtree(voids)
    return lattice_way(
        Lattice(outline, voids, size, tree),
        Lattice(outline, voids, size / 2, tree),
        pa,
        pb,
        half,
        passable,
    )


def _template(h, w):
    """The move structure of an h x w grid plus one start node, as CSR index arrays (built once per
    grid shape, shared read-only): row c holds the 8 moves of cell c, the start node's row every
    cell. A move off the grid lands on some other cell (clipped, or wrapped to the next row): _graph
    gives every such move an infinite weight. Only the weights change from window to window."""
    t = _TEMPLATES.get((h, w))
    if t is None:
        n = h * w
        step = np.array([di * w + dj for di, dj, _ in _MOVES], dtype=np.int32)
        to = np.clip(np.arange(n, dtype=np.int32)[:, None] + step, 0, n - 1)
        indices = np.concatenate([to.ravel(), np.arange(n, dtype=np.int32)])
        indptr = np.arange(0, 8 * n + 1, 8, dtype=np.int32)
        t = _TEMPLATES[(h, w)] = (indices, np.append(indptr, np.int32(9 * n)))
    return t


_TEMPLATES = {}
_UNIT = np.array([c for _, _, c in _MOVES])


def _graph(free, size, src, src_d):
    """The grid's moves between free cells (no corner cutting) with their lengths, and the start
    node (number h*w) joined to the cells src at distances src_d; a blocked move weighs inf, which
    the search never takes."""
    h, w = free.shape
    n = h * w
    pad = np.zeros((h + 2, w + 2), dtype=bool)
    pad[1:-1, 1:-1] = free
    ok = np.empty((8, h, w), dtype=bool)  # one plane per move: contiguous writes
    for k, (di, dj, _) in enumerate(_MOVES):
        np.logical_and(free, pad[1 + di : h + 1 + di, 1 + dj : w + 1 + dj], out=ok[k])
        if di and dj:  # a diagonal needs both side cells free
            ok[k] &= pad[1 + di : h + 1 + di, 1 : w + 1]
            ok[k] &= pad[1 : h + 1, 1 + dj : w + 1 + dj]
    data = np.empty(9 * n)
    with np.errstate(divide="ignore"):  # a move's length over 1 (free) or 0 (blocked: inf)
        np.divide(
            (_UNIT * size)[:, None, None], ok, out=data[: 8 * n].reshape(h, w, 8).transpose(2, 0, 1)
        )
    data[8 * n :] = np.inf
    data[8 * n + src] = src_d
    indices, indptr = _template(h, w)
    return csr_matrix((data, indices, indptr), shape=(n + 1, n + 1))


def _segments(a, b):
    return shapely.linestrings(np.stack(np.broadcast_arrays(a, b), axis=-2))


def _centres(cell, x0, y0, size, w):
    """(x, y) of the centres of the cells numbered `cell` (row-major, w per row)."""
    return np.column_stack([x0 + (cell % w + 0.5) * size, y0 + (cell // w + 0.5) * size])


_ROUND = np.mgrid[-END_REACH : END_REACH + 1, -END_REACH : END_REACH + 1].reshape(2, -1)


def _cells_round(p, x0, y0, size, shape):
    """Numbers of the cells within END_REACH cells of point p."""
    h, w = shape
    ii = int(np.floor((p[1] - y0) / size)) + _ROUND[0]
    jj = int(np.floor((p[0] - x0) / size)) + _ROUND[1]
    keep = (ii >= 0) & (ii < h) & (jj >= 0) & (jj < w)
    return ii[keep] * w + jj[keep]


def _in_sight(free, near, ends, x0, y0, size, passable):
    """For each end, the free cells of its `near` cells in clear sight of it: [(cells, distances)],
    tested in one call."""
    w = free.shape[1]
    near = [c[free.ravel()[c]] for c in near]
    centres = [_centres(c, x0, y0, size, w) for c in near]
    segs = np.concatenate([_segments(c, p) for c, p in zip(centres, ends)])
    seen = passable(segs) if len(segs) else np.zeros(0, dtype=bool)
    out, at = [], 0
    for c, xy, p in zip(near, centres, ends):
        s = seen[at : at + len(c)]
        at += len(c)
        out.append((c[s], np.hypot(*(xy[s] - p).T)))
    return out


def _raster_clear(free, x0, y0, size, a, b):
    """For each straight piece a[k] -> b[k]: True where every sample along it, half a cell apart,
    lies in a free cell; samples within a cell and a half of either end are not looked at (the ends
    of a way sit just outside a gap, in cells whose centres may lie in it). A quick screen only:
    the pieces it passes are tested against the exact geometry afterwards."""
    a, b = np.broadcast_arrays(np.atleast_2d(a), np.atleast_2d(b))
    d = b - a
    length = np.hypot(d[:, 0], d[:, 1])
    n = np.maximum(np.ceil(length / (size / 2)).astype(int), 1) + 1
    k = np.repeat(np.arange(len(a)), n)
    t = ranges(0, n) / (n[k] - 1)
    along = t * length[k]
    look = (along > 1.5 * size) & (length[k] - along > 1.5 * size)
    k, t = k[look], t[look]
    h, w = free.shape
    col = np.floor((a[k, 0] + t * d[k, 0] - x0) / size).astype(int)
    row = np.floor((a[k, 1] + t * d[k, 1] - y0) / size).astype(int)
    inside = (row >= 0) & (row < h) & (col >= 0) & (col < w)
    bad = ~inside
    bad[inside] = ~free[row[inside], col[inside]]
    return np.bincount(k[bad], minlength=len(a)) == 0


def _farthest_in_sight(pts, clear, block=None):
    """Indices kept when from each kept point the farthest later point in sight is taken next;
    clear(a, b) -> bools, for pieces a[k] -> b[k] (either may be one point). With `block`, later
    points are looked at in growing blocks of that many, up to the first block holding one out of
    sight (ways seldom come back into sight); every point's first block is judged in one call.
    Returns the list, or the position of a point from which no later point is in sight."""
    keep, i, n = [0], 0, len(pts)
    first = _first_blocks(pts, clear, block) if block is not None else None
    while i < n - 1:
        if block is None:
            later = np.arange(i + 1, n)
            seen = later[clear(pts[i], pts[later])]
        else:
            start, size = i + 1, block
            later = np.arange(start, min(n, start + size))
            vis = first[i]
            seen = later[vis]
            while vis.all() and start + size < n:
                start, size = start + size, 2 * size
                later = np.arange(start, min(n, start + size))
                vis = clear(pts[i], pts[later])
                seen = later[vis]
            if not len(seen):  # the first block's ends: keep the last point in sight before it
                seen = np.arange(i + 1, start)[-1:] if start > i + 1 else seen
        if not len(seen):
            return i
        i = int(seen[-1])
        keep.append(i)
    return keep


def _first_blocks(pts, clear, block):
    """Per point i, whether each of the next `block` points (fewer near the end) is in sight."""
    n = len(pts)
    count = np.minimum(block, n - 1 - np.arange(n - 1))
    i = np.repeat(np.arange(n - 1), count)
    j = ranges(np.arange(n - 1) + 1, count)
    vis = clear(pts[i], pts[j]) if len(i) else np.zeros(0, dtype=bool)
    return np.split(vis, np.cumsum(count)[:-1])


def _pull_taut(pts, passable, raster=None):
    """From each kept point, the farthest later point in clear sight; then each bend slid towards
    the chord of its neighbours as far as both its pieces stay clear. Sight is judged on the grid
    first (raster(a, b) -> bools), and the pieces so chosen are tested against the exact geometry
    in one call; where one fails, sight is judged exactly throughout. Returns the points, or the
    position of a point from which no later one is in sight."""
    keep = None
    if raster is not None:
        keep = _farthest_in_sight(pts, raster, block=8)
        if isinstance(keep, list) and not passable(_segments(pts[keep][:-1], pts[keep][1:])).all():
            keep = None
    if not isinstance(keep, list):
        keep = _farthest_in_sight(pts, lambda p, later: passable(_segments(p, later)))
        if not isinstance(keep, list):
            return keep
    p = pts[keep].copy()
    f = np.array(SLIDES)[None, :, None]
    for k0 in (1, 2, 1, 2):  # every other bend at once: its neighbours stay put meanwhile
        k = np.arange(k0, len(p) - 1, 2)
        if not len(k):
            continue
        to = p[k, None] + f * ((p[k - 1] + p[k + 1]) / 2 - p[k])[:, None]  # (bend, slide, xy)
        ok = passable(
            np.concatenate([_segments(p[k - 1, None], to), _segments(to, p[k + 1, None])]).ravel()
        )
        ok = ok.reshape(2, len(k), len(SLIDES)).all(axis=0)
        best = np.argmax(ok, axis=1)
        moved = ok.any(axis=1)
        p[k[moved]] = to[moved, best[moved]]
    return p


def _search(graph, dst, dst_d, limit):
    """Dijkstra from the start node (the last) over `graph` (see _graph), at most `limit` long,
    to the
    cells dst (joined to pb at distances dst_d): the cells of the way, or None."""
    n = graph.shape[0] - 1
    d, pred = dijkstra(graph, directed=True, indices=n, return_predecessors=True, limit=limit)
    total = d[dst] + dst_d
    k = int(np.argmin(total))
    if not np.isfinite(total[k]):
        return None
    seq = [int(dst[k])]
    while True:
        prev = int(pred[seq[-1]])
        if prev == n:
            break
        seq.append(prev)
    return np.array(seq[::-1])


def _grid_way(free, x0, y0, size, ends, passable):
    """The way between the two ends on one grid of free cells (lower left corner at x0, y0; the
    search may close cells in it): (length, points), None if its search or pulling failed, False
    where the grid shows the two ends apart."""
    w = free.shape[1]
    part, _ = ndimage.label(free, structure=np.ones((3, 3)))
    near = [_cells_round(p, x0, y0, size, free.shape) for p in ends]
    if not np.intersect1d(part.ravel()[near[0]], part.ravel()[near[1]]).any():
        return False  # no way round on this grid: spare the search
    (src, src_d), (dst, dst_d) = _in_sight(free, near, ends, x0, y0, size, passable)
    if not np.intersect1d(part.ravel()[src], part.ravel()[dst]).any():
        return False
    raster = lambda a, b: _raster_clear(free, x0, y0, size, a, b)  # noqa: E731 (free may change below)
    for _ in range(
        4
    ):  # a thin void the grid cannot see blocks a step: close that cell, search again
        graph = _graph(free, size, src, src_d)
        # most ways are short: first a search that stops NEAR_MM from pa, then the whole window
        seq = _search(graph, dst, dst_d, NEAR_MM)
        if seq is None:
            seq = _search(graph, dst, dst_d, np.inf)
        if seq is None:
            return None
        pts = np.vstack([ends[:1], _centres(seq, x0, y0, size, w), ends[1:]])
        dp = np.diff(pts, axis=0)
        turns = np.flatnonzero(np.abs(dp[1:, 0] * dp[:-1, 1] - dp[1:, 1] * dp[:-1, 0]) > 1e-12) + 1
        at = np.r_[0, turns, len(pts) - 1]
        p = _pull_taut(pts[at], passable, raster)
        if not isinstance(p, int):
            return float(np.hypot(*np.diff(p, axis=0).T).sum()), [tuple(map(float, q)) for q in p]
        # from turning point p nothing later is in sight: close the cells either side of
        # the blocked steps
        j = np.arange(at[p], at[p + 1])
        hit = j[~passable(_segments(pts[j], pts[j + 1]))]
        cells_hit = np.concatenate([hit - 1, hit])
        cells_hit = seq[cells_hit[(cells_hit >= 0) & (cells_hit < len(seq))]]
        if not len(cells_hit):
            return None
        free.ravel()[cells_hit] = False
    return None
