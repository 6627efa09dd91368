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
    "gap_and_filled",
    "trace_strips",
    "strip_matrix",
    "window_nodes",
    "rect_slot_added_inductance",
    "NoReturnPath",
    "Sheet",
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
    """A tensor grid of current cells over a window (which cells hold copper is a mask given to
    each solve: one grid serves several masks)."""

    xs: np.ndarray  # node x (mm), nx + 1
    ys: np.ndarray  # node y (mm), ny + 1

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


def _partial_matrix(tapes, z=0.0):
    """Dense partial-inductance matrix (nH) of parallel tapes of one grid, in one plane or in two
    planes z apart (the same grid in both), filled by blocks."""
    n = len(tapes[0])
    m = np.empty((n, n))
    for s in range(0, n, BLOCK_ROWS):  # the upper triangle by blocks, mirrored (M is symmetric)
        e = s + BLOCK_ROWS
        block = _fill_block(tuple(v[s:e] for v in tapes), tuple(v[s:] for v in tapes), z)
        m[s:e, s:] = block
        m[s:, s:e] = block.T
    return m


class PlaneOperator:
    """The partial inductances of one grid's cells, kept to solve with several copper masks on
    the same grid (the gap and the gap filled): only the ties change between them."""

    def __init__(self, xs, ys):
        self.grid = Grid(np.asarray(xs, float), np.asarray(ys, float))
        self.xb = self.grid.x_branches()
        self.yb = self.grid.y_branches()
        self.lxx = _partial_matrix(self.xb)
        # a y-directed cell is an x-directed one with the axes swapped
        self.lyy = _partial_matrix((self.yb[2], self.yb[3], self.yb[0], self.yb[1]))
        self._between = {}
        self._vertex = {}
        self.dx, self.dy, self.xe, self.ye = _incidence(*self.grid.shape)

    def coupling(self, z_mm):
        """(x-x, y-y) partial inductances between the cells of two sheets z_mm apart (0: one
        sheet with itself), each pair of sheets' matrices built once."""
        if z_mm == 0.0:
            return self.lxx, self.lyy
        if z_mm not in self._between:
            xb, yb = self.xb, self.yb
            self._between[z_mm] = (
                _partial_matrix(xb, z_mm),
                _partial_matrix((yb[2], yb[3], yb[0], yb[1]), z_mm),
            )
        return self._between[z_mm]

    def vertex_matrix(self, z_mm):
        """K = Dx.T Lxx Dx + Dy.T Lyy Dy: the energy form over vertex stream values of two
        sheets z_mm apart (0: one sheet), built once per distance."""
        if z_mm not in self._vertex:
            lxx, lyy = self.coupling(z_mm)
            dx, dy = self.dx.tocsc(), self.dy.tocsc()
            self._vertex[z_mm] = _sandwich(dx, lxx) + _sandwich(dy, lyy)
        return self._vertex[z_mm]

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
    unknowns: int
    # the first sheet's stream value per vertex (i * (ny + 1) + j): its branch currents are the
    # differences of these (op.dx @ psi, op.dy @ psi; A for 1 A in the loop, the return < 0)
    psi: np.ndarray


class NoReturnPath(ValueError):
    """The copper in the window joins neither side to the other: no return path in it."""


@dataclass
class Sheet:
    """One conducting sheet on the operator's grid: its copper, its height relative to the first
    sheet (negative: below it) and its part in the loop: "return" (the reference plane: the
    trace's return enters and leaves it at the window's ends), "shared" (the other plane of a
    stripline: joined to the same ends, its share of the return solved) or "eddy" (a plane
    joined to nothing in the window: only closed currents, induced)."""

    copper: np.ndarray
    z_mm: float = 0.0
    role: str = "return"


def loop_inductance(op, sheets, strips, height_mm, lt=None, mt=None):
    """Loop inductance (nH) of the trace strips (height_mm above the first sheet) over the
    sheets, per unit current, without the two end connections (they are the same for any mask
    and cancel in a difference). The trace current flows in +x, the return in -x. `sheets`: a
    list of Sheet, or one copper mask (a single return sheet)."""
    if isinstance(sheets, np.ndarray):
        sheets = [Sheet(sheets)]
    nx, ny = op.grid.shape
    maps = _stream_maps(sheets, nx, ny, op.xe, op.ye)
    lt = strip_matrix(strips, height_mm) if lt is None else lt
    mts = [
        mt if (mt is not None and sh.z_mm == 0.0) else op.trace_mutual(strips, height_mm - sh.z_mm)
        for sh in sheets
    ]
    return _minimise(op, sheets, maps, mts, lt)


def _labels(copper, nx, ny, xe, ye, eddy):
    """Vertex groups of one sheet: the two vertices of a branch with no copper on one side are
    one group; the bottom edge is one group, the top edge another (all four edges one, for a
    sheet joined to nothing)."""
    bx, by = _blocked(copper)
    n_vert = (nx + 1) * (ny + 1)
    bottom = np.arange(nx + 1) * (ny + 1)
    top = bottom + ny
    rim = [bottom, top]
    if eddy:
        rim = [
            np.concatenate(
                [bottom, top[::-1], np.arange(ny + 1), nx * (ny + 1) + np.arange(ny + 1)]
            )
        ]
    chains = [np.stack([r[:-1], r[1:]]) for r in rim]
    edges = np.concatenate([np.stack(xe)[:, bx], np.stack(ye)[:, by], *chains], axis=1)
    g = scipy.sparse.coo_matrix((np.ones(edges.shape[1]), edges), shape=(n_vert, n_vert))
    return scipy.sparse.csgraph.connected_components(g, directed=False)[1], bottom[0], top[0]


def _stream_maps(sheets, nx, ny, xe, ye):
    """Per sheet (P, psi0): its vertex stream values are P @ unknowns + psi0. The return
    sheet's top edge is at -1 (the whole return crossing any line across the window); with a
    shared sheet, a share g moves to it: its top at -g, the return sheet's at -1 + g."""
    labs = [_labels(sh.copper, nx, ny, xe, ye, sh.role == "eddy") for sh in sheets]
    open_ = [
        sh.role != "eddy" and lab[lab_b] != lab[lab_t]
        for sh, (lab, lab_b, lab_t) in zip(sheets, labs)
    ]
    if not any(open_):
        raise NoReturnPath("no copper joins the window's two ends")
    carriers = [k for k, o in enumerate(open_) if o]
    ncol = 0
    cols = []
    for lab, lab_b, lab_t in labs:
        free = np.unique(lab[(lab != lab[lab_b]) & (lab != lab[lab_t])])
        col = np.full(lab.max() + 1, -1)
        col[free] = ncol + np.arange(len(free))
        ncol += len(free)
        cols.append(col)
    share_col = ncol if len(carriers) > 1 else None
    ncol += share_col is not None
    maps = []
    for k, (lab, _, lab_t) in enumerate(labs):
        rows = np.nonzero(cols[k][lab] >= 0)[0]
        entries = [(rows, cols[k][lab[rows]], np.ones(len(rows)))]
        top = np.nonzero(lab == lab[lab_t])[0]
        psi0 = np.zeros(len(lab))
        if k == carriers[0]:
            psi0[top] = -1.0
        if share_col is not None and k in carriers:
            sign = 1.0 if k == carriers[0] else -1.0
            entries.append((top, np.full(len(top), share_col), np.full(len(top), sign)))
        r, c, v = (np.concatenate(e) for e in zip(*entries))
        maps.append((scipy.sparse.csr_matrix((v, (r, c)), shape=(len(lab), ncol)), psi0))
    return maps


def _sandwich(p, k, q=None):
    """p.T @ k @ q for sparse p, q and a dense symmetric k (q defaults to p), by two sparse
    products (k = k.T spares a transposed copy)."""
    q = p if q is None else q
    left = np.ascontiguousarray((p.T @ k).T)  # k @ p, columns by rows: k symmetric
    return np.asarray(q.T @ left).T


def _minimise(op, sheets, maps, mts, lt):
    """Least magnetic energy over the sheets' stream values, in vertex space: the vertex
    matrices K = D.T L D of the grid (one per distance between sheets, kept by the operator)
    carry every partial inductance; a mask only merges vertices (maps)."""
    n = len(sheets)
    kk = {
        (i, j): op.vertex_matrix(abs(sheets[i].z_mm - sheets[j].z_mm))
        for i in range(n)
        for j in range(n)
    }
    ps = [p.tocsc() for p, _ in maps]
    psi0 = [v for _, v in maps]
    mv = [op.dx.T @ m for m in mts]  # trace mutual per vertex value
    a = sum(_sandwich(ps[i], kk[i, j], ps[j]) for i in range(n) for j in range(n))
    k0 = [sum(kk[i, j] @ psi0[j] for j in range(n)) for i in range(n)]
    b0 = sum(ps[i].T @ k0[i] for i in range(n))
    bm = sum(ps[i].T @ mv[i] for i in range(n))
    sol = _spd_solve(a, np.column_stack([b0, bm]))
    # stream values as an affine function of the strip currents t: psi = v0 + V t
    v0 = [psi0[i] - ps[i] @ sol[:, 0] for i in range(n)]
    vt = [-(ps[i] @ sol[:, 1:]) for i in range(n)]
    kv0 = [sum(kk[i, j] @ v0[j] for j in range(n)) for i in range(n)]
    kvt = [sum(kk[i, j] @ vt[j] for j in range(n)) for i in range(n)]
    q = lt + sum(vt[i].T @ kvt[i] + vt[i].T @ mv[i] + mv[i].T @ vt[i] for i in range(n))
    c = sum(vt[i].T @ kv0[i] + mv[i].T @ v0[i] for i in range(n))
    e0 = 0.5 * sum(v0[i] @ kv0[i] for i in range(n))
    t = _shares(q, c)
    energy = 0.5 * t @ q @ t + c @ t + e0
    psi = v0[0] + vt[0] @ t
    return SolveResult(
        loop_nH=float(2.0 * energy),
        trace_shares=t,
        unknowns=a.shape[0],
        psi=psi,
    )


def _spd_solve(a, rhs):
    """a x = rhs for a symmetric positive definite a: Cholesky, then two triangular solves
    (scipy's cho_solve copies and checks more than its work for a few right-hand sides)."""
    low = scipy.linalg.cho_factor(a, lower=True, overwrite_a=True, check_finite=False)[0]
    y = scipy.linalg.solve_triangular(low, rhs, lower=True, check_finite=False)
    return scipy.linalg.solve_triangular(low, y, lower=True, trans="T", check_finite=False)


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


def gap_and_filled(grid_xs, grid_ys, copper_gap, copper_filled, width_mm, height_mm, others=()):
    """(loop with the gap or None, loop with it filled): one operator, two masks of the reference
    sheet, the other sheets (Sheet) the same in both; None where the gap leaves no copper path
    across the window (the filled loop is still solved)."""
    op = PlaneOperator(grid_xs, grid_ys)
    strips = trace_strips(grid_xs[0], grid_xs[-1], width_mm)
    mt = op.trace_mutual(strips, height_mm)
    lt = strip_matrix(strips, height_mm)
    others = list(others)
    filled = loop_inductance(op, [Sheet(copper_filled)] + others, strips, height_mm, lt, mt)
    try:
        gap = loop_inductance(op, [Sheet(copper_gap)] + others, strips, height_mm, lt, mt)
    except NoReturnPath:
        gap = None
    return gap, filled


def crossing_added_inductance(
    grid_xs, grid_ys, copper_gap, copper_filled, width_mm, height_mm, others=()
):
    """(ΔL nH, loop with the gap, loop filled, unknowns); NoReturnPath where the gap leaves no
    copper path across the window."""
    gap, filled = gap_and_filled(
        grid_xs, grid_ys, copper_gap, copper_filled, width_mm, height_mm, others
    )
    if gap is None:
        raise NoReturnPath("no copper joins the window's two ends")
    return gap.loop_nH - filled.loop_nH, gap, filled, gap.unknowns


def window_nodes(x_feats, y_feats, box, growth=0.3):
    """Graded nodes of a window box (x0, y0, x1, y1) fine at the given features ((pos, size))."""
    x0, y0, x1, y1 = box
    return graded_nodes(x0, x1, x_feats, growth), graded_nodes(y0, y1, y_feats, growth)


def rect_slot_added_inductance(
    length_mm, width_mm, height_mm, trace_mm, offset_mm=0.0, margin=1.5, fine=1.0, below_mm=None
):
    """ΔL (nH) and grid of a trace crossing a rectangular slot in an unbounded plane at right
    angles, `offset_mm` from the slot's middle, with a whole plane `below_mm` under the slotted
    one where given (joined to nothing in the window): the analytic case the solver is checked
    and the closed form calibrated on. Returns (ΔL, cells, unknowns)."""
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
    extra = [] if below_mm is None else [Sheet(np.ones_like(gap), -below_mm, "eddy")]
    dl, _, _, unknowns = crossing_added_inductance(xs, ys, ~gap, np.ones_like(gap), w, h, extra)
    return dl, gap.size, unknowns
