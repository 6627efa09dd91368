"""Local field solve of one gap crossing: inductive PEEC of the reference copper in a window.

Partial element equivalent circuit (Ruehli, "Inductance calculations in a complex integrated
circuit environment", IBM J. Res. Dev. 16(5), 1972): the plane is cut into rectangular current
cells on a graded tensor grid, every pair of parallel cells has a partial mutual inductance, and
the currents that flow are those of least magnetic energy (the quasi-static inductive limit,
ωL ≫ R, a perfectly conducting zero-thickness sheet). Current continuity holds by construction:
the plane's currents are the differences of a stream function on the grid's vertices (mesh
currents), tied equal across every face that has no copper on one side. The trace above is a few
parallel sub-strips whose shares are solved too. The added inductance of a gap is
L(with the gap) - L(gap filled) on the same grid, so the window's end effects cancel.

Partial inductance of two parallel thin tapes: the closed form of Hoer & Love, "Exact inductance
equations for rectangular conductors with applications to more complicated geometries", J. Res.
NBS 69C(2), 1965, for near pairs; the filament form μ0/(4π)·l1·l2/R for far ones.
"""

from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.csgraph

__all__ = [
    "MU0_4PI_NH_PER_MM",
    "tape_kernel",
    "tape_mutual_nH",
    "graded_nodes",
    "Grid",
    "SolveResult",
    "loop_inductance",
    "crossing_added_inductance",
    "trace_strips",
    "strip_matrix",
    "window_nodes",
    "rect_slot_added_inductance",
    "NoReturnPath",
    "PlaneOperator",
]

MU0_4PI_NH_PER_MM = 0.1  # μ0/(4π) = 1e-7 H/m = 0.1 nH/mm
NEAR_RATIO = 2.0  # pairs nearer than this many times their sizes take the exact closed form
BLOCK_ROWS = 512  # rows of the dense matrices filled at a time (bounds the temporaries)


def tape_kernel(x, y, z):
    """f(x, y, z) with d^4 f / dx^2 dy^2 = 1/sqrt(x^2 + y^2 + z^2) (Hoer & Love 1965, thin tapes).
    Terms linear in x or in y are dropped: the four-corner sums cancel them, and writing
    ln(x + r) as asinh(x/q) + ln(q) keeps the far terms free of cancellation."""
    x, y, z = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    r = np.sqrt(x * x + y * y + z * z)
    qx = np.sqrt(y * y + z * z)
    qy = np.sqrt(x * x + z * z)
    with np.errstate(divide="ignore", invalid="ignore"):
        ax = np.where(qx > 0, np.arcsinh(x / np.where(qx > 0, qx, 1.0)), 0.0)
        ay = np.where(qy > 0, np.arcsinh(y / np.where(qy > 0, qy, 1.0)), 0.0)
        if not np.any(z):  # in one plane the last term is zero
            return 0.5 * y * y * x * ax + 0.5 * x * x * y * ay - (x * x + y * y) * r / 6.0
        at = np.where(z * r > 0, np.arctan(x * y / np.where(z * r > 0, z * r, 1.0)), 0.0)
    return (
        0.5 * (y * y - z * z) * x * ax
        + 0.5 * (x * x - z * z) * y * ay
        - (x * x - 2 * z * z + y * y) * r / 6.0
        - x * y * z * at
    )


def _corner_sum(a0, a1, b0, b1, c0, c1, d0, d1, z):
    """Four-fold integral of 1/R over [a0,a1]x[b0,b1] (x) and [c0,c1]x[d0,d1] (y)."""
    total = 0.0
    for sx, u in ((1, b1 - a0), (-1, b1 - a1), (-1, b0 - a0), (1, b0 - a1)):
        for sy, v in ((1, d1 - c0), (-1, d1 - c1), (-1, d0 - c0), (1, d0 - c1)):
            total = total + (sx * sy) * tape_kernel(u, v, z)
    return total


def tape_mutual_nH(ax, ay, bx, by, z=0.0):
    """Partial mutual inductance (nH) of two x-directed thin tapes with uniform current: tape a
    spans ax = (x0, x1), ay = (y0, y1); tape b likewise, at a height z above a's plane (mm). The
    same tape with itself gives its partial self-inductance. Arrays broadcast."""
    wa = np.asarray(ay[1], float) - ay[0]
    wb = np.asarray(by[1], float) - by[0]
    s = _corner_sum(ax[0], ax[1], bx[0], bx[1], ay[0], ay[1], by[0], by[1], z)
    return MU0_4PI_NH_PER_MM * s / (wa * wb)


def graded_nodes(lo, hi, features, growth=0.25, max_size=None):
    """Grid nodes from lo to hi, every feature position a node, cells of about `size` at each
    feature growing by `growth` per mm away from it (features: (position, size) pairs)."""
    feats = [(float(p), float(s)) for p, s in features if lo < p < hi]
    max_size = max_size or (hi - lo) / 8

    def size(t):
        return min([max_size] + [s + growth * abs(t - p) for p, s in features])

    breaks = sorted({lo, hi, *(p for p, _ in feats)})
    nodes = [lo]
    for a, b in zip(breaks[:-1], breaks[1:]):
        marks, t = [a], a
        while t < b:
            t += size(t)
            marks.append(min(t, b))
        if len(marks) > 2 and (marks[-1] - marks[-2]) < 0.5 * size(b):
            marks.pop(-2)  # a sliver cell at the end joins its neighbour
        marks = np.asarray(marks)
        nodes.extend((a + (marks[1:] - a) * (b - a) / (marks[-1] - a)).tolist())
    return np.unique(np.round(np.asarray(nodes), 9))


@dataclass
class Grid:
    """A tensor grid of current cells over a window, and which cells hold copper."""

    xs: np.ndarray  # node x (mm), nx + 1
    ys: np.ndarray  # node y (mm), ny + 1
    copper: np.ndarray  # (nx, ny) bool

    @property
    def shape(self):
        return len(self.xs) - 1, len(self.ys) - 1

    def x_branches(self):
        """x-directed cells, face k = 0..nx at every row j: port half-cells at both ends, else
        from one cell centre to the next. (x0, x1, y0, y1) arrays, k-major."""
        cx = 0.5 * (self.xs[1:] + self.xs[:-1])
        left = np.concatenate([self.xs[:1], cx])
        right = np.concatenate([cx, self.xs[-1:]])
        nx, ny = self.shape
        k = np.repeat(np.arange(nx + 1), ny)
        j = np.tile(np.arange(ny), nx + 1)
        return left[k], right[k], self.ys[j], self.ys[j + 1]

    def y_branches(self):
        """y-directed cells between cell rows k-1 and k (k = 1..ny-1) of column i, i-major."""
        cy = 0.5 * (self.ys[1:] + self.ys[:-1])
        nx, ny = self.shape
        i = np.repeat(np.arange(nx), ny - 1)
        k = np.tile(np.arange(1, ny), nx)
        return self.xs[i], self.xs[i + 1], cy[k - 1], cy[k]


def _fill_block(rows, cols, z=0.0):
    """Partial inductances (nH) of tapes `rows` against tapes `cols` (each (x0, x1, y0, y1),
    current along x): exact near, filament form far."""
    ax0, ax1, ay0, ay1 = (np.asarray(v)[:, None] for v in rows)
    bx0, bx1, by0, by1 = (np.asarray(v)[None, :] for v in cols)
    dx = 0.5 * (bx0 + bx1 - ax0 - ax1)
    dy = 0.5 * (by0 + by1 - ay0 - ay1)
    dist = np.sqrt(dx * dx + dy * dy + z * z)
    la, lb = ax1 - ax0, bx1 - bx0
    reach = NEAR_RATIO * (np.hypot(la, ay1 - ay0) + np.hypot(lb, by1 - by0))
    with np.errstate(divide="ignore"):
        out = MU0_4PI_NH_PER_MM * la * lb / dist
    near = np.nonzero(dist < reach)
    if len(near[0]):
        a = tuple(np.broadcast_to(v, dist.shape)[near] for v in (ax0, ax1, ay0, ay1))
        b = tuple(np.broadcast_to(v, dist.shape)[near] for v in (bx0, bx1, by0, by1))
        out[near] = tape_mutual_nH(a[:2], a[2:], b[:2], b[2:], z)
    return out


def _partial_matrix(tapes):
    """Dense partial-inductance matrix (nH) of parallel tapes in one plane, filled by blocks."""
    n = len(tapes[0])
    m = np.empty((n, n))
    for s in range(0, n, BLOCK_ROWS):  # the upper triangle by blocks, mirrored (M is symmetric)
        e = s + BLOCK_ROWS
        block = _fill_block(tuple(v[s:e] for v in tapes), tuple(v[s:] for v in tapes))
        m[s:e, s:] = block
        m[s:, s:e] = block.T
    return m


class PlaneOperator:
    """The partial inductances of one grid's cells, kept to solve with several copper masks on
    the same grid (the gap and the gap filled): only the ties change between them."""

    def __init__(self, xs, ys):
        self.grid = Grid(np.asarray(xs, float), np.asarray(ys, float), None)
        self.xb = self.grid.x_branches()
        self.yb = self.grid.y_branches()
        self.lxx = _partial_matrix(self.xb)
        # a y-directed cell is an x-directed one with the axes swapped
        self.lyy = _partial_matrix((self.yb[2], self.yb[3], self.yb[0], self.yb[1]))

    def trace_mutual(self, strips, height_mm):
        """Mutual inductance (nH) of each x-branch with each trace sub-strip (x0, x1, y0, y1)."""
        return _trace_block(self.xb, strips, height_mm)


def _trace_block(xb, strips, z):
    """Exact closed form for every pair: a trace strip spans the window, so no pair is far."""
    out = np.empty((len(xb[0]), len(strips)))
    for k, (x0, x1, y0, y1) in enumerate(strips):
        out[:, k] = tape_mutual_nH((xb[0], xb[1]), (xb[2], xb[3]), (x0, x1), (y0, y1), z)
    return out


def _incidence(nx, ny):
    """Sparse maps from vertex stream values to x- and y-branch currents, and each branch's two
    vertices (vertex (i, j) is number i * (ny + 1) + j)."""
    nv = ny + 1
    k = np.repeat(np.arange(nx + 1), ny)
    j = np.tile(np.arange(ny), nx + 1)
    xa, xb = k * nv + j, k * nv + j + 1  # current +x = psi(xb) - psi(xa)
    i = np.repeat(np.arange(nx), ny - 1)
    kk = np.tile(np.arange(1, ny), nx)
    ya, yb = i * nv + kk, (i + 1) * nv + kk  # current +y = psi(ya) - psi(yb)
    n_vert = (nx + 1) * nv

    def matrix(plus, minus):
        rows = np.arange(len(plus))
        data = np.concatenate([np.ones(len(plus)), -np.ones(len(plus))])
        return scipy.sparse.csr_matrix(
            (data, (np.concatenate([rows, rows]), np.concatenate([plus, minus]))),
            shape=(len(plus), n_vert),
        )

    return matrix(xb, xa), matrix(ya, yb), (xa, xb), (ya, yb)


def _blocked(copper):
    """Which x- and y-branches have no copper on one side (they carry no current)."""
    nx, ny = copper.shape
    pad = np.ones((nx + 2, ny), dtype=bool)  # a port half-cell is open where its cell is copper
    pad[1:-1] = copper
    x_open = pad[:-1] & pad[1:]
    y_open = copper[:, :-1] & copper[:, 1:]
    return ~x_open.reshape(-1), ~y_open.reshape(-1)


@dataclass
class SolveResult:
    """One solve: the loop inductance and the currents it found."""

    loop_nH: float
    trace_shares: np.ndarray
    x_currents: np.ndarray  # per x-branch (A, for 1 A in the loop; the return is negative)
    y_currents: np.ndarray
    unknowns: int


class NoReturnPath(ValueError):
    """The copper in the window joins neither side to the other: no return path in it."""


def loop_inductance(op, copper, strips, height_mm, lt=None, mt=None):
    """Loop inductance (nH) of the trace strips over the grid's copper mask, per unit current,
    without the two end connections (they are the same for any mask and cancel in a
    difference). The return flows in -x in the plane, the trace current in +x."""
    nx, ny = op.grid.shape
    dx, dy, xe, ye = _incidence(nx, ny)
    bx, by = _blocked(copper)
    n_vert = (nx + 1) * (ny + 1)
    ties = np.concatenate([np.stack(xe)[:, bx], np.stack(ye)[:, by]], axis=1)
    bottom = np.arange(nx + 1) * (ny + 1)
    top = bottom + ny
    chain = np.concatenate(
        [np.stack([bottom[:-1], bottom[1:]]), np.stack([top[:-1], top[1:]])], axis=1
    )
    edges = np.concatenate([ties, chain], axis=1)
    g = scipy.sparse.coo_matrix((np.ones(edges.shape[1]), edges), shape=(n_vert, n_vert))
    _, label = scipy.sparse.csgraph.connected_components(g, directed=False)
    lb, lt_ = label[bottom[0]], label[top[0]]
    if lb == lt_:
        raise NoReturnPath("no copper joins the window's two ends")
    psi0 = np.where(label == lt_, -1.0, 0.0)
    free = np.unique(label[(label != lb) & (label != lt_)])
    col = np.full(label.max() + 1, -1)
    col[free] = np.arange(len(free))
    rows = np.nonzero(col[label] >= 0)[0]
    p = scipy.sparse.csr_matrix(
        (np.ones(len(rows)), (rows, col[label[rows]])), shape=(n_vert, len(free))
    )
    return _minimise(op, dx, dy, p, psi0, strips, height_mm, lt, mt)


def _minimise(op, dx, dy, p, psi0, strips, height_mm, lt, mt):
    bx, by = (dx @ p).tocsc(), (dy @ p).tocsc()
    ix0, iy0 = dx @ psi0, dy @ psi0
    a = (bx.T @ (bx.T @ op.lxx).T).T + (by.T @ (by.T @ op.lyy).T).T
    mt = op.trace_mutual(strips, height_mm) if mt is None else mt
    lt = strip_matrix(strips, height_mm) if lt is None else lt
    b0 = bx.T @ (op.lxx @ ix0) + by.T @ (op.lyy @ iy0)
    bm = bx.T @ mt
    factor = scipy.linalg.cho_factor(a, lower=True, check_finite=False)
    sol = scipy.linalg.cho_solve(factor, np.column_stack([b0, bm]), check_finite=False)
    # plane currents as an affine function of the strip currents t: I = i0 + G t
    i0x, i0y = ix0 - bx @ sol[:, 0], iy0 - by @ sol[:, 0]
    gx, gy = -(bx @ sol[:, 1:]), -(by @ sol[:, 1:])
    lgx, li0x = op.lxx @ gx, op.lxx @ i0x
    q = gx.T @ lgx + (gy.T @ (op.lyy @ gy)) + gx.T @ mt + mt.T @ gx + lt
    c = gx.T @ li0x + gy.T @ (op.lyy @ i0y) + mt.T @ i0x
    e0 = 0.5 * (i0x @ li0x + i0y @ (op.lyy @ i0y))
    t = _shares(q, c)
    energy = 0.5 * t @ q @ t + c @ t + e0
    return SolveResult(
        loop_nH=float(2.0 * energy),
        trace_shares=t,
        x_currents=i0x + gx @ t,
        y_currents=i0y + gy @ t,
        unknowns=a.shape[0],
    )


def _shares(q, c):
    """Strip currents of least energy that add up to 1 (a small KKT system)."""
    n = len(c)
    kkt = np.zeros((n + 1, n + 1))
    kkt[:n, :n] = 0.5 * (q + q.T)
    kkt[:n, n] = kkt[n, :n] = 1.0
    return np.linalg.solve(kkt, np.concatenate([-c, [1.0]]))[:n]


def strip_matrix(strips, height_mm):
    s = np.asarray(strips, float)
    return tape_mutual_nH(
        (s[:, None, 0], s[:, None, 1]),
        (s[:, None, 2], s[:, None, 3]),
        (s[None, :, 0], s[None, :, 1]),
        (s[None, :, 2], s[None, :, 3]),
        0.0,
    )


def trace_strips(x0, x1, width_mm, n=5, centre_y=0.0):
    """The trace as n sub-strips, narrower at its edges where its current crowds (cosine
    spacing), spanning the window in x."""
    edges = centre_y + 0.5 * width_mm * -np.cos(np.linspace(0.0, np.pi, n + 1))
    return [(x0, x1, float(a), float(b)) for a, b in zip(edges[:-1], edges[1:])]


def crossing_added_inductance(grid_xs, grid_ys, copper_gap, copper_filled, width_mm, height_mm):
    """(ΔL nH, loop with the gap, loop filled, unknowns): one operator, two masks."""
    op = PlaneOperator(grid_xs, grid_ys)
    strips = trace_strips(grid_xs[0], grid_xs[-1], width_mm)
    mt = op.trace_mutual(strips, height_mm)
    lt = strip_matrix(strips, height_mm)
    filled = loop_inductance(op, copper_filled, strips, height_mm, lt, mt)
    gap = loop_inductance(op, copper_gap, strips, height_mm, lt, mt)
    return gap.loop_nH - filled.loop_nH, gap, filled, gap.unknowns


def window_nodes(x_feats, y_feats, box, growth=0.3):
    """Graded nodes of a window box (x0, y0, x1, y1) fine at the given features ((pos, size))."""
    x0, y0, x1, y1 = box
    return graded_nodes(x0, x1, x_feats, growth), graded_nodes(y0, y1, y_feats, growth)


def rect_slot_added_inductance(
    length_mm, width_mm, height_mm, trace_mm, offset_mm=0.0, margin=1.5, fine=1.0
):
    """ΔL (nH) and grid of a trace crossing a rectangular slot in an unbounded plane at right
    angles, `offset_mm` from the slot's middle: the analytic case the solver is checked and the
    closed form calibrated on. Returns (ΔL, cells, unknowns)."""
    d, s, h, w = length_mm, width_mm, height_mm, trace_mm
    lo, hi = -d / 2 - offset_mm, d / 2 - offset_mm
    fx, fy, fe = min(s, h) / 4 * fine, min(w, h) / 4 * fine, min(s, h) / 2 * fine
    big = margin * d
    xs, ys = window_nodes(
        [(-s / 2, fx), (s / 2, fx)],
        [(-w / 2, fy), (w / 2, fy), (lo, fe), (hi, fe)],
        (-s / 2 - big, lo - big, s / 2 + big, hi + big),
    )
    cx, cy = 0.5 * (xs[1:] + xs[:-1]), 0.5 * (ys[1:] + ys[:-1])
    gap = (np.abs(cx)[:, None] < s / 2) & ((cy > lo) & (cy < hi))[None, :]
    dl, _, _, unknowns = crossing_added_inductance(xs, ys, ~gap, np.ones_like(gap), w, h)
    return dl, gap.size, unknowns
