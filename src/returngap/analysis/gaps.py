"""Gap crossings: where a track's return footprint meets missing copper of its reference net.

A void here is any connected piece of (board outline - reference-net copper) on the
reference layer. The centre line crossing it, with the same plane island on both
sides, is a slot or void crossing with a geodesic detour; with different islands (or
nets) on the two sides it is a split. A footprint that only grazes an enclosed void
is reported when the interrupted share of return current is large enough. A track
ending inside a void (its own via's antipad, or running off the plane) is left to
the layer-change and plane-edge checks.
"""

import dataclasses
import functools
import hashlib
import math
from dataclasses import dataclass

import numpy as np
import shapely
import shapely.ops

from returngap import physics
from returngap.analysis import severity
from returngap.analysis.connectivity import net_codes
from returngap.analysis.references import footprint_halfwidth, footprint_polygon, line_z0
from returngap.geometry.cuts import cut_intervals, ring_edges
from returngap.geometry.gridpath import CELLS, Lattice, lattice_way
from returngap.geometry.shapes import outline_pieces, points_hull, segment_lines
from returngap.model.findings import UNSET, GapCrossing
from returngap.model.runner import SERIAL

__all__ = [
    "EPS",
    "STEP_OFF_MM",
    "MAX_STATIONS",
    "EDGE_HAIR_MM",
    "WINDOW_MM",
    "OTHER_PLANE_COVER",
    "Void",
    "ReferenceCopper",
    "interval_fraction",
    "interrupted_share",
    "stable_id",
    "slot_geometry",
    "chain_plane_nets",
    "prepared_scan",
    "gap_scan_tasks",
    "coords_along",
    "coords_along_lines",
    "majority_nets",
]

EPS = 1e-6
STEP_OFF_MM = 0.01  # how far beyond a gap's edge the detour path starts and ends
MAX_STATIONS = 160  # transverse cuts per crossing for the interrupted share
EDGE_HAIR_MM = 0.005  # a detour may graze a gap's edge by this much
# relative: two ways round a gap this close in length are equally long (a symmetric gap, where
# only float noise of where the outline's vertices start would tell them apart)
TIE_REL = 1e-9
# a stripline's other plane under this share of a crossing carries its return where it lies (our
# choice: under half, the gap common to both planes is the larger part, and the detour is kept)
OTHER_PLANE_COVER = 0.5
WINDOW_MM = 10.0  # side of the first detour window (at least); the second is three times as wide


@dataclass
class Void:
    geom: object
    enclosed: bool
    index: int

    @functools.cached_property
    def rect(self):
        return self.geom.minimum_rotated_rectangle  # one per void, however many tracks cross it

    @functools.cached_property
    def sides(self):
        """The two sides of its rectangle."""
        return _rect_sides(self.rect)

    @functools.cached_property
    def span(self):
        """The diagonal of its rectangle: no cut through it is longer."""
        return math.hypot(*self.sides)

    @functools.cached_property
    def filled_area(self):
        """Its area with its holes filled: a moat round an island of other copper (a feed track
        routed through the plane, its clearance cut round it) is a slot as long as the moat."""
        return float(shapely.area(shapely.polygons(shapely.get_exterior_ring(self.geom))))

    @functools.cached_property
    def edges(self):
        return ring_edges(self.geom)

    def edges_by(self, m, u, reach):
        """Its edges that can meet the line m + t u, |t| <= reach (which starts and ends off the
        void): all of them for a small void; for a large one those whose boxes meet short pieces of
        the stretch of line inside its box, from a tree of its edges (a single cut through all the
        edges of a large void costs more than the lookup)."""
        if len(self.edges) < 2000:
            return self.edges
        x0, y0, x1, y1 = self.geom.bounds
        with np.errstate(
            divide="ignore", invalid="ignore", over="ignore"
        ):  # the stretch of line in the box
            ta = np.where(u != 0, (np.array([x0, y0]) - m) / u, -np.inf)
            tb = np.where(u != 0, (np.array([x1, y1]) - m) / u, np.inf)
        inside = (u != 0) | ((m >= (x0, y0)) & (m <= (x1, y1)))
        if not inside.all():
            return self.edges[:0]
        lo, hi = np.minimum(ta, tb).max() - 1e-3, np.maximum(ta, tb).min() + 1e-3
        if lo > hi:
            return self.edges[:0]
        tree = self.__dict__.get("_edge_tree")
        if tree is None:
            tree = self.__dict__["_edge_tree"] = shapely.STRtree(segment_lines(self.edges))
        t = np.linspace(lo, hi, max(2, int((hi - lo) / 2.0) + 2))  # pieces about 2 mm long
        a, b = m + t[:-1, None] * u, m + t[1:, None] * u
        # each piece's box, a hair larger: an edge through a piece's end is found from both sides
        boxes = shapely.box(*(np.minimum(a, b) - 1e-6).T, *(np.maximum(a, b) + 1e-6).T)
        return self.edges[np.unique(tree.query(boxes)[1])]

    @functools.cached_property
    def rings(self):
        """Its rings (outer first) as LineStrings, and a tree of them."""
        rings = shapely.get_rings(self.geom)
        return rings, shapely.STRtree(rings)

    def ring_points(self, k):
        """Points of ring k (closed) and their distances along it (kept)."""
        cache = self.__dict__.setdefault("_ring_points", {})
        if k not in cache:
            xy = shapely.get_coordinates(self.rings[0][k])
            cache[k] = xy, np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
        return cache[k]

    def locate(self, k, pts):
        """Distances along ring k of the points nearest to pts, from the ring's nearest edges (found
        in a tree of its edges when it has many)."""
        xy, run = self.ring_points(k)
        cache = self.__dict__.setdefault("_edge_trees", {})
        if len(xy) > 65:
            tree = cache.get(k)
            if tree is None:
                tree = cache[k] = shapely.STRtree(
                    shapely.linestrings(np.stack([xy[:-1], xy[1:]], axis=1))
                )
            e = tree.query_nearest(shapely.points(pts), all_matches=False)[1]
        else:
            e = None
        a, d = xy[:-1], np.diff(xy, axis=0)
        out = []
        for p, near in zip(pts, e if e is not None else [None] * len(pts)):
            idx = np.arange(len(a)) if near is None else np.array([near])
            den = np.maximum((d[idx] ** 2).sum(axis=1), 1e-300)
            t = np.clip(((p - a[idx]) * d[idx]).sum(axis=1) / den, 0.0, 1.0)
            gap = np.hypot(*(a[idx] + t[:, None] * d[idx] - p).T)
            best = int(np.argmin(gap))
            out.append(float(run[idx[best]] + t[best] * np.sqrt(den[best])))
        return out

    def ring_by(self, pts, tol):
        """The ring both points lie within tol of, or None."""
        rings, tree = self.rings
        near = tree.query(pts, predicate="dwithin", distance=tol)
        both = np.intersect1d(near[1][near[0] == 0], near[1][near[0] == 1])
        return int(both[0]) if len(both) else None


class ReferenceCopper:
    """The plane copper (every plane net) of one reference layer, its voids and islands, indexed."""

    def __init__(self, layer_nets, plane_nets, outline):
        parts = layer_nets.islands_of(plane_nets)
        self.islands = np.array([p for _, p in parts], dtype=object)
        self.island_net = [layer_nets.island_net[i] for i, _ in parts]
        self.tree = shapely.STRtree(self.islands)
        copper = layer_nets.union_of(plane_nets)
        voids = shapely.get_parts(outline.difference(copper))
        edge = outline.boundary
        voids = np.array(
            [v for v in voids if v.geom_type == "Polygon" and v.area > 1e-6], dtype=object
        )
        shapely.prepare(edge)
        touches = shapely.dwithin(edge, voids, 1e-4) if len(voids) else np.zeros(0, dtype=bool)
        self.voids = [Void(v, not bool(t), k) for k, (v, t) in enumerate(zip(voids, touches))]
        self.void_geoms = np.array([v.geom for v in self.voids], dtype=object)
        self.void_tree = shapely.STRtree(self.void_geoms)
        shapely.prepare(
            self.void_geoms
        )  # a distance test against a large void then skips most of its edges
        self._shrunk = np.full(len(self.voids), None, dtype=object)
        self._have_shrunk = np.zeros(len(self.voids), dtype=bool)
        self._hulls = [None] * len(self.voids)
        self._lattices = {}
        self._along_edge = {}
        self.span_bounds = _span_bounds(self.void_geoms)
        self.outline = outline
        self.edge = edge
        shapely.prepare(outline)

    def passable(self, segs):
        """True for each straight piece of path that stays on the board and out of every void (a
        piece may
        run along a void's edge: each void is shrunk by a hair for the test)."""
        ok = shapely.covers(self.outline, segs)
        q = self.void_tree.query(segs)
        if q.shape[1]:
            hit = shapely.intersects(self.shrunk(q[1]), segs[q[0]])
            ok[q[0][hit]] = False
        return ok

    def shrunk(self, k):
        """The voids at positions k shrunk by a hair (EDGE_HAIR_MM), prepared; each built once."""
        need = k[~self._have_shrunk[k]]
        if len(need):
            need = np.unique(need)
            self._shrunk[need] = shapely.buffer(self.void_geoms[need], -EDGE_HAIR_MM, quad_segs=2)
            shapely.prepare(self._shrunk[need])
            self._have_shrunk[need] = True
        return self._shrunk[k]

    def voids_near(self, line, distance):
        """Positions (ascending) of the voids within `distance` of a line: boxes from the tree,
        then the
        prepared voids tested (the tree's own distance test would walk every edge of a large
        void)."""
        x0, y0, x1, y1 = line.bounds
        c = self.void_tree.query(
            shapely.box(x0 - distance, y0 - distance, x1 + distance, y1 + distance)
        )
        return np.sort(c[shapely.dwithin(self.void_geoms[c], line, distance)])

    @functools.cached_property
    def inset_outline(self):
        """The board outline shrunk by 10 um, built once: points outside it are at the board's
        edge."""
        inset = self.outline.buffer(-0.01)
        shapely.prepare(inset)
        return inset

    def lattice(self, size):
        """The plane's free copper on a lattice of cells `size` mm (gridpath.Lattice), kept."""
        lat = self._lattices.get(size)
        if lat is None:
            lat = self._lattices[size] = Lattice(
                self.outline, self.void_geoms, size, self.void_tree
            )
        return lat

    def along_edge(self, void):
        """Per point of a gap's outer ring (the closing one aside), whether it lies on the
        board's edge."""
        flags = self._along_edge.get(void.index)
        if flags is None:
            xy = void.ring_points(0)[0][:-1]
            flags = self._along_edge[void.index] = shapely.dwithin(
                self.edge, shapely.points(xy), 1e-4
            )
        return flags

    def hull(self, k):
        if self._hulls[k] is None:
            self._hulls[k] = shapely.convex_hull(self.void_geoms[k])
        return self._hulls[k]

    def island_at(self, point):
        for i in self.tree.query(point):
            if shapely.intersects(self.islands[i], point):
                return int(i)
        return None


SPAN_BOUND_MARGIN = 1e-9  # relative: a bound this close to the limit decides nothing


def _span_bounds(geoms):
    """Per geometry, bounds (low, high) on Void.span (the diagonal of its least-area rectangle)
    from its axis-aligned box of sides w, h and diagonal d: the rectangle's diagonal is at least
    the geometry's diameter, itself at least max(w, h); its sides are each at most the diameter
    (at most d) and its area at most w h, so its diagonal is at most sqrt(d^2 + (w h / d)^2).
    Each bound is moved outwards by a hair, so that a rounding error never decides."""
    if not len(geoms):
        return np.zeros(0), np.zeros(0)
    x0, y0, x1, y1 = shapely.bounds(geoms).T
    w, h = x1 - x0, y1 - y0
    d = np.hypot(w, h)
    with np.errstate(divide="ignore", invalid="ignore"):
        hi = np.sqrt(d**2 + np.where(d > 0, w * h / d, 0.0) ** 2)
    return np.maximum(w, h) * (1 - SPAN_BOUND_MARGIN), hi * (1 + SPAN_BOUND_MARGIN)


def interval_fraction(x1, x2, width, ref):
    if ref.other_h_mm is None:
        return physics.microstrip_fraction_between(x1, x2, width, ref.h_mm)
    return physics.stripline_fraction_between(x1, x2, ref.h_mm, ref.other_h_mm)


def interrupted_share(line, s_from, s_to, halfwidth, width, ref, gap):
    """Largest share of the return current over the gap, over transverse cuts from s_from to s_to.

    Returns (share, s at the maximum)."""
    s_from, s_to = max(0.0, s_from), min(line.length, s_to)
    if s_to <= s_from:
        return 0.0, s_from
    n = int(min(MAX_STATIONS, max(3, (s_to - s_from) / max(ref.h_mm / 4, 0.02))))
    ss = np.linspace(s_from, s_to, n)
    p, q, r = coords_along(
        line, np.concatenate([ss, np.minimum(ss + 1e-3, line.length), np.maximum(ss - 1e-3, 0.0)])
    ).reshape(3, n, 2)
    t = q - r
    t /= np.maximum(np.hypot(t[:, 0], t[:, 1]), EPS)[:, None]
    nrm = np.column_stack([-t[:, 1], t[:, 0]])
    lo = (p - halfwidth * np.abs(nrm)).min(axis=0) - 0.01
    hi = (p + halfwidth * np.abs(nrm)).max(axis=0) + 0.01
    gap = shapely.clip_by_rect(
        gap, lo[0], lo[1], hi[0], hi[1]
    )  # only the cuts' neighbourhood matters
    of_cut, x1, x2 = cut_intervals(ring_edges(gap), p, nrm, -halfwidth, halfwidth)
    if not len(of_cut):
        return 0.0, float(ss[0])
    share = np.bincount(of_cut, weights=interval_fraction(x1, x2, width, ref), minlength=n)
    k = int(np.argmax(share))
    return float(share[k]), float(ss[k])


def stable_id(*parts):
    return hashlib.sha1("|".join(str(p) for p in parts).encode()).hexdigest()[:12]


def _extent_across(void, mid, direction, reach):
    """Where a line through mid along direction leaves the void, both ways: (l1, l2, end1, end2),
    from the piece of the line inside the void that reaches mid (0, 0, mid, mid if none does)."""
    u = np.asarray(direction, dtype=float)
    m = np.asarray(mid, dtype=float)
    try:
        _, t1, t2 = cut_intervals(void.edges_by(m, u, reach), m, u, -reach, reach)
    except ValueError:  # an odd count of crossings: an edge missed at a rounding boundary
        _, t1, t2 = cut_intervals(void.edges, m, u, -reach, reach)
    gap = np.maximum(0.0, np.maximum(t1, -t2))  # each piece's distance from mid
    if not len(gap) or gap.min() >= 1e-3:
        return 0.0, 0.0, mid, mid
    k = int(np.argmin(gap))
    lo, hi = float(t1[k]), float(t2[k])
    return max(0.0, -lo), max(0.0, hi), tuple(m + lo * u), tuple(m + hi * u)


def _beside_side(edge, pieces, side):
    """The copper found lies on the given side of the track's edge line (not across the track)."""
    probe = edge.offset_curve(side * 0.002)
    near = shapely.geometrycollections(list(pieces))  # the few nearest outline pieces
    return (
        bool(len(pieces))
        and not probe.is_empty
        and (probe.distance(near) <= edge.distance(near) + 1e-6)
    )


def _rect_sides(rect):
    c = np.asarray(rect.exterior.coords)[:3] if rect.geom_type == "Polygon" else np.zeros((3, 2))
    return float(np.hypot(*(c[1] - c[0]))), float(np.hypot(*(c[2] - c[1])))


def _tangent(line, s):
    a = line.interpolate(max(0.0, s - 0.01))
    b = line.interpolate(min(line.length, s + 0.01))
    dx, dy = b.x - a.x, b.y - a.y
    n = math.hypot(dx, dy) or 1.0
    return dx / n, dy / n


def slot_geometry(void, mid, tangent, reach, aspect_limit):
    """gap length and width, the crossing's distances to the two ends, and which end is open."""
    perp = (-tangent[1], tangent[0])
    rect = void.rect
    if void.enclosed and void.filled_area >= 0.6 * rect.area:  # slot- or hole-like: its rectangle
        c = np.asarray(rect.exterior.coords)[:4]
        e1, e2 = c[1] - c[0], c[2] - c[1]
        if np.hypot(*e1) < np.hypot(*e2):
            e1, e2 = e2, e1
        length, width = float(np.hypot(*e1)), float(np.hypot(*e2))
        axis = e1 / (length or 1.0)
        centre = c.mean(axis=0)
        s = float((np.asarray(mid) - centre) @ axis)
        l1, l2 = max(0.0, length / 2 + s), max(0.0, length / 2 - s)
        elongated = width > 0 and length / width >= aspect_limit
        return dict(length=length, width=width, l1=l1, l2=l2, elongated=elongated)
    l1, l2, end1, end2 = _extent_across(void, mid, perp, reach)
    if (
        l1 + l2 <= 0
    ):  # the cut missed (the crossing runs along the gap): size it by its local outline
        disc = shapely.Point(mid).buffer(max(reach / 20, 1.0))
        # the gap clipped to the disc's box first: a large one's far edges are not walked
        near = shapely.clip_by_rect(void.geom, *disc.bounds).intersection(disc)
        if not near.is_empty:
            c = np.asarray(near.minimum_rotated_rectangle.exterior.coords)[:4]
            l1 = l2 = max(np.hypot(*(c[1] - c[0])), np.hypot(*(c[2] - c[1]))) / 2
            end1 = end2 = mid
    return dict(length=l1 + l2, width=None, l1=l1, l2=l2, end1=end1, end2=end2, elongated=True)


SHARED_MIN_VERTICES = 64  # a gap drawn with this many vertices is shrunk before the fork (ours)


class _GapScan:
    """What every chain's gap scan shares: the reference copper of each plane layer (built once) and
    the holes of each net."""

    def __init__(self, board, nets, refs, settings):
        self.board, self.nets, self.settings = board, nets, settings
        self.reach = math.hypot(*(np.subtract(board.outline.bounds[2:], board.outline.bounds[:2])))
        own_holes = {}
        for x, y, _r, net, _a, _b in nets.plated_holes(board):
            own_holes.setdefault(net, []).append((x, y))
        self.own_hole_pts = {n: shapely.points(np.array(v)) for n, v in own_holes.items()}
        self.ref_by_layer = {(s, r.layer): r for s, rs in refs.items() for r in rs}
        self.ref_by_layer_of = refs
        self._copper = {}
        self._own = {}

    def shared(self, layer, routed):
        """What both processes of a scan would each build when they first need it, built once
        beforehand: the layer's reference copper with its large gaps shrunk by the hair
        (passable; a small one, an antipad, costs little where it is needed), and where tracks
        run on it (routed), the plane copper beside them (_own_plane)."""
        rc = self.copper(layer)
        rc.shrunk(np.flatnonzero(shapely.get_num_coordinates(rc.void_geoms) >= SHARED_MIN_VERTICES))
        if routed:
            self._own_plane(layer)

    def copper(self, ref_layer):
        rc = self._copper.get(ref_layer)
        if rc is None:
            rc = self._copper[ref_layer] = ReferenceCopper(
                self.nets.layers[ref_layer], self.nets.plane_nets, self.board.outline
            )
        return rc

    def chain(self, ch, ref_nets):
        """(key, finding) of every gap one chain's footprints meet; ref_nets: {reference layer: the
        plane net under most of the chain} (see chain_plane_nets)."""
        out = []
        for ref_layer in ch.footprints:
            ref_net = ref_nets[ref_layer]  # the plane net under most of the centre line
            if ref_net is None:
                continue
            ref, other = self._reference(ch, ref_layer, ref_nets)
            hw = (
                ch.footprints.halfwidth(ref_layer)
                if other is not None or len(ch.footprints) == 1
                else footprint_halfwidth(ch.width_mm, ref, self.settings.current_fraction)
            )
            rc = self.copper(ref_layer)
            near = self._near_voids(rc, ch, hw) if rc.voids else []
            if not len(near):
                continue
            cover_of = functools.partial(self._other_cover, ch, other) if other else None
            beside = functools.partial(self._coplanar_gaps, ch)
            near, local_all, along, of = _crossings(rc, ch.line, hw, near)
            for j, vi in enumerate(near):
                void = rc.voids[int(vi)]
                for ev, s0, s1 in _events(sorted(along[of == j].tolist()), void, ch.line, hw):
                    f = self._finding(
                        ch, ref, rc, void, local_all[j], hw, ev, s0, s1, ref_net, (cover_of, beside)
                    )
                    if f is not None:
                        key = (f["net"], f["layer"], f["reference_layer"], void.index)
                        out.append((key + (round(f["x_mm"], 1), round(f["y_mm"], 1)), f))
        return out

    def _reference(self, ch, ref_layer, ref_nets):
        """(the reference as this chain sees it, the other plane's (layer, reference) or None). A
        stripline whose other plane has no plane copper under the chain is a microstrip over this
        one: the whole return is here."""
        ref = self.ref_by_layer[(ch.layer, ref_layer)]
        if ref.other_h_mm is None:
            return ref, None
        other = next(r for r in self.ref_by_layer_of[ch.layer] if r.layer != ref_layer)
        if ref_nets.get(other.layer) is None:
            return dataclasses.replace(ref, other_h_mm=None, share=1.0), None
        return ref, (other.layer, dataclasses.replace(other, other_h_mm=None, share=1.0))

    def _other_cover(self, ch, other, s_from, s_to):
        """The share of the track's centre line over this crossing that the other plane of a
        stripline lies under, antipad-sized holes (gaps the scan itself would not report) counting
        as copper, as the current weaves between them. Where the other plane is cut too, its own
        crossing is reported there."""
        rc = self.copper(other[0])
        s_from, s_to = max(0.0, s_from), min(ch.line.length, s_to)
        n = int(min(200, max(5, (s_to - s_from) / 0.1)))
        pts = shapely.points(coords_along(ch.line, np.linspace(s_from, s_to, n)))
        pt, k = rc.void_tree.query(pts)  # boxes, then the prepared voids (the tree's own test
        hit = shapely.intersects(rc.void_geoms[k], pts[pt])  # would walk a large void's edges)
        pt, k = pt[hit], k[hit]
        if not len(pt):
            return 1.0
        limit = self.settings.min_gap_length_mm
        big = np.array([not rc.voids[j].enclosed or max(rc.voids[j].sides) >= limit for j in k])
        return 1.0 - len(np.unique(pt[big])) / n

    def _coplanar_gaps(self, ch, s_from, s_to):
        """(gap on one side, gap on the other or None) between the track's edges and plane copper
        of its own layer alongside the whole stretch s_from..s_to, each at most
        settings.coplanar_max_gap_mm; None where no such copper runs beside it."""
        limit = self.settings.coplanar_max_gap_mm
        tree, pieces = self._own_plane(ch.layer)
        if tree is None or s_to <= s_from:
            return None
        piece = shapely.ops.substring(ch.line, max(0.0, s_from), min(ch.line.length, s_to))
        # no copper that near the centre line: none that near either edge (they lie w/2 from it)
        if not len(tree.query(piece, predicate="dwithin", distance=limit + ch.width_mm / 2 + 0.01)):
            return None
        gaps_found = []
        for side in (1, -1):
            edge = piece.offset_curve(side * ch.width_mm / 2)
            if edge.is_empty or edge.geom_type != "LineString":
                continue
            n = int(min(100, max(3, edge.length / 0.1)))
            pts = shapely.points(coords_along(edge, np.linspace(0, edge.length, n)))
            (_, k), d = tree.query_nearest(pts, return_distance=True, all_matches=False)
            if len(d) == n and d.max() <= limit and _beside_side(edge, pieces[np.unique(k)], side):
                gaps_found.append(float(d.max()))
        if not gaps_found:
            return None
        return gaps_found[0], (gaps_found[1] if len(gaps_found) > 1 else None)

    def _own_plane(self, layer):
        """(tree, outline pieces) of the plane copper of a signal layer, built once. The track's
        edge lies outside that copper, so the nearest outline piece is the nearest copper."""
        if layer not in self._own:
            islands = [p for _, p in self.nets.layers[layer].islands_of(self.nets.plane_nets)]
            pieces = outline_pieces(islands)[0] if islands else np.zeros(0, dtype=object)
            self._own[layer] = (shapely.STRtree(pieces) if len(pieces) else None, pieces)
        return self._own[layer]

    def _near_voids(self, rc, ch, hw):
        """Every void the track's footprint meets, but the antipad of the track's own via (that
        belongs to its layer change) and an enclosed gap too small for any cut through it to reach
        the least gap length (never reported, see _finding). A gap larger than an antipad (a moat
        round a feed track, with the via's antipad merged into it) is a gap still."""
        limit = self.settings.min_gap_length_mm
        lo, hi = rc.span_bounds
        near = [
            k
            for k in rc.voids_near(ch.line, hw)
            if not (
                rc.voids[k].enclosed
                and (hi[k] < limit or (lo[k] < limit and rc.voids[k].span < limit))
            )
        ]
        own = self.own_hole_pts.get(ch.net)
        if own is None:
            return near
        antipad = 2 * self.settings.min_gap_length_mm
        return [
            k
            for k in near
            if not (
                rc.voids[k].enclosed
                and max(rc.voids[k].sides) < antipad
                and shapely.intersects(rc.void_geoms[k], own).any()
            )
        ]

    def _finding(self, ch, ref, rc, void, local, hw, ev, s0, s1, ref_net, ways):
        args = (
            ch,
            ref,
            rc,
            void,
            local,
            ch.line,
            hw,
            ev,
            s0,
            s1,
            self.reach,
            self.settings,
            ref_net,
            ways,
        )
        try:
            return _finding(self.board, *args)
        except shapely.errors.GEOSException:
            # GEOS can fail on a nearly degenerate outline ("side location conflict"): once more
            # with the gap snapped to a 1 nm grid, which makes it clean
            snapped = (*args[:4], shapely.set_precision(local, 1e-6), *args[5:])
            return _finding(self.board, *snapped)


def _crossings(rc, line, hw, near):
    """The voids near a track clipped to its box (the void outside all plane copper can be as large
    as the board), and where the track enters and leaves each: (voids, clipped, [start, end] per
    piece, void of each piece)."""
    lx0, ly0, lx1, ly1 = line.bounds
    near = np.asarray(near, dtype=int)
    local_all = shapely.clip_by_rect(
        rc.void_geoms[near], lx0 - hw - 0.1, ly0 - hw - 0.1, lx1 + hw + 0.1, ly1 + hw + 0.1
    )
    keep = ~shapely.is_empty(local_all)
    near, local_all = near[keep], local_all[keep]
    try:
        crossed = shapely.intersection(line, local_all)
    except shapely.errors.GEOSException:  # a nearly degenerate outline: snapped to 1 nm
        crossed = shapely.intersection(line, shapely.set_precision(local_all, 1e-6))
    parts, of = shapely.get_parts(crossed, return_index=True)
    ok = (shapely.get_type_id(parts) == 1) & (shapely.length(parts) > 0)
    parts, of = parts[ok], of[ok]
    along = np.sort(_ends_along(line, parts), axis=0).T if len(parts) else np.zeros((0, 2))
    return near, local_all, along, of


def _events(pieces, void, line, hw):
    """("cross", s0, s1) per crossing (pieces closer than the footprint merge; a track that ends
    inside the void is left to the edge check), or one ("graze", ...) for an enclosed void
    beside."""
    merged = []
    for s0, s1 in pieces:
        if merged and s0 - merged[-1][1] < hw:
            merged[-1][1] = max(merged[-1][1], s1)
        else:
            merged.append([s0, s1])
    events = [
        ("cross", s0, s1)
        for s0, s1 in merged
        if not (s0 <= STEP_OFF_MM or s1 >= line.length - STEP_OFF_MM)
    ]
    if not pieces and void.enclosed:
        events.append(("graze", None, None))
    return events


def chain_plane_nets(nets, chains, runner=SERIAL, first=None, work=None):
    """Per chain, {reference layer: the plane net under most of its centre line (or None)}, with one
    tree query per reference layer for all chains; the gap scan and the edge check both use it.
    Each layer is one job of a pool of the runner's threads; first(layer), when given, is done in
    that job before the lookup (one thread per layer: GEOS builds a prepared piece's indexes at
    its first use, and two threads must never build them together); work: the pool's size of
    work in track segments (the chains' own, by default)."""
    out = [{} for _ in chains]
    by_ref = {}
    for i, ch in enumerate(chains):
        for r in ch.footprints:
            by_ref.setdefault(r, []).append(i)

    def one(r):
        if first is not None:
            first(r)
        return majority_nets(nets.layers[r], nets.plane_nets, [chains[i].line for i in by_ref[r]])

    if work is None:
        work = sum(len(ch.line.coords) - 1 for ch in chains)  # the tracks' segments, about
    with runner.threads(work) as pool:  # shapely lets go of the GIL in the tree queries
        found = list(pool.map(one, by_ref))
    for r, nets_found in zip(by_ref, found):
        for i, n in zip(by_ref[r], nets_found):
            out[i][r] = n
    return out


def prepared_scan(board, nets, refs, chains, settings, workers=1, runner=SERIAL):
    """(what the gap scan shares, the plane net under each chain per reference layer; see
    chain_plane_nets). Where the scan runs in several processes, each reference layer's copper is
    built here once, in the same job of the runner's threads as that layer's plane-net lookup,
    and shared."""
    scan = _GapScan(board, nets, refs, settings)
    if workers <= 1:
        return scan, chain_plane_nets(nets, chains, runner)
    shapely.prepare(board.outline)  # shared by the threads: prepared once, beforehand
    routed = {ch.layer for ch in chains}
    work = board.track_segments
    # what both processes would build (scan.shared) is worth building here only where the
    # layers share two threads; in this thread alone it costs what each process spends on it
    first = (
        (lambda layer: scan.shared(layer, layer in routed))
        if runner.threaded(work)
        else scan.copper
    )
    return scan, chain_plane_nets(nets, chains, runner, first=first, work=work)


def gap_scan_tasks(scan, chains, plane_nets_of, workers=1):
    """The gap scan cut into independent slices of chains, for a runner's tasks (as many slices as
    suit `workers` processes): returns (tasks, combine); combine(results of the tasks, in order)
    gives the gap-crossing findings, as dicts, the same and in the same order however many
    processes ran. scan, plane_nets_of: prepared_scan(...)."""
    n = workers * 16  # many small slices, taken in turn: uneven chains balance out
    # the longest chains (which cross the most) dealt out first, so that the slices taken last
    # are light and neither process waits long for the other at the end
    longest = np.argsort([-ch.line.length for ch in chains], kind="stable")
    tasks = [
        functools.partial(_scan_slice, scan, chains, plane_nets_of, longest[k::n].tolist())
        for k in range(n)
    ]

    def combine(parts):
        out = [None] * len(chains)
        for part in parts:
            for i, r in part:
                out[i] = r
        findings, seen = [], set()
        for found in out:
            for key, f in found:
                if key not in seen:
                    seen.add(key)
                    findings.append(f)
        return findings

    return tasks, combine


def _scan_slice(scan, chains, plane_nets_of, which):
    return [(i, scan.chain(chains[i], plane_nets_of[i])) for i in which]


def _ends_along(line, parts):
    """Distances along `line` of the first and last points of each LineString in `parts`, as a
    (2, len(parts)) array, located in one vectorised call."""
    ends = np.concatenate([shapely.get_point(parts, 0), shapely.get_point(parts, -1)])
    return shapely.line_locate_point(line, ends).reshape(2, -1)


def _stretch_near(line, hw, region):
    """The stretch of line within hw of the region's box: a footprint of half-width hw reaches
    the box only from there, so buffering it alone is exact inside the box."""
    x0, y0, x1, y1 = region.bounds
    return shapely.clip_by_rect(
        line, x0 - hw - 0.01, y0 - hw - 0.01, x1 + hw + 0.01, y1 + hw + 0.01
    )


def _footprint_overlap(piece, hw, region):
    """Area of the return footprint (flat-capped buffer of half-width hw) of `piece`, the track's
    stretch near `region` (_stretch_near), inside the region."""
    if piece.is_empty:
        return 0.0
    return float(shapely.area(shapely.intersection(footprint_polygon(piece, hw), region)))


def _hull_detour(rc, pa, pb, gap_hull):
    """The two ways round `gap_hull` (a gap's convex hull) and both ends, shorter first: the
    geodesic when the
    gap is convex (or the ends lie outside its hull) and nothing else is in the way. An end in a
    pocket
    of the hull (between the vias of a fence, say) first walks straight out of it, away from the
    other
    end. Returns (the first way that stays in copper or None, the shorter way's length)."""
    ends = np.array([[pa.x, pa.y], [pb.x, pb.y]])
    lead = [None, None]
    if gap_hull.geom_type == "Polygon":
        inside = shapely.contains_xy(gap_hull, ends[:, 0], ends[:, 1])
        for k in np.flatnonzero(inside):
            p, other = ends[k], ends[1 - k]
            u = (p - other) / max(float(np.hypot(*(p - other))), 1e-12)
            reach = float(
                np.hypot(
                    gap_hull.bounds[2] - gap_hull.bounds[0], gap_hull.bounds[3] - gap_hull.bounds[1]
                )
            )
            ray = shapely.LineString([p, p + u * (reach + 1.0)])
            out = ray.intersection(gap_hull.exterior)
            if out.is_empty:
                continue
            q = (
                min(shapely.get_coordinates(out), key=lambda c: float(np.hypot(*(c - p))))
                + u * STEP_OFF_MM
            )
            lead[k] = p.copy()
            ends[k] = q
    found = _hull_ring(ends, shapely.get_coordinates(gap_hull))
    if found is None:
        return None, None  # an end inside the hull (a pocket of the gap): no taut way round it
    ways = []
    for step in (1, -1):
        c = _ring_walk(*found, step)
        if lead[0] is not None:
            c = np.vstack([lead[0], c])
        if lead[1] is not None:
            c = np.vstack([c, lead[1]])
        ways.append((float(np.hypot(*np.diff(c, axis=0).T).sum()), c))
    if _before(ways[1], ways[0]):
        ways.reverse()
    # both ways' pieces in one test
    ok = rc.passable(
        shapely.linestrings(np.concatenate([np.stack([c[:-1], c[1:]], axis=1) for _, c in ways]))
    )
    first = len(ways[0][1]) - 1
    for (length, c), clear in zip(ways, (ok[:first].all(), ok[first:].all())):
        if clear:
            return (length, [tuple(map(float, p)) for p in c]), ways[0][0]
    return None, ways[0][0]


def _before(a, b):
    """Whether way a, (length, points), is taken before way b: the shorter; of two equally long
    (TIE_REL), the lower, then the one further left, so that a symmetric gap's choice never hangs
    on where its outline happens to start."""
    if abs(a[0] - b[0]) > TIE_REL * max(a[0], b[0]):
        return a[0] < b[0]
    return tuple(np.mean(a[1], axis=0)[::-1]) < tuple(np.mean(b[1], axis=0)[::-1])


def _chain_detour(rc, void, pa, pb):
    """The geodesic round one gap when nothing else is in the way, or None. The way round a single
    obstacle turns only towards it, so the shortest way that keeps the gap's outline between the two
    ends on one side is the convex hull of that stretch of outline and the ends (when the straight
    line between the ends is an edge of that hull); of the two stretches (either way round) the one
    with the shorter hull is taken, and only when it stays clear of every other void is it returned,
    as then nothing shorter exists. A way is at least |pa q| + |q pb| long for any point q it goes
    round, which spares the longer stretch's hull where that bound already exceeds the shorter
    way."""
    ends = np.array([[pa.x, pa.y], [pb.x, pb.y]])
    if not shapely.intersects(rc.shrunk(np.array([void.index]))[0], shapely.LineString(ends)):
        return None  # the straight line between the ends misses this gap: the way is not round it
    k = void.ring_by(shapely.points(ends), 2 * STEP_OFF_MM)
    if k is None:
        return None  # the ends lie by different rings of the gap
    xy, run = void.ring_points(k)
    m = len(xy) - 1  # the ring's points, the last repeating the first
    lo, hi = sorted(void.locate(k, ends))
    i, j = int(np.searchsorted(run[:m], lo, side="right")), int(np.searchsorted(run[:m], hi))
    if i == j or (i == 0 and j == m):
        return None  # a stretch without a corner: the ends sit by one edge
    edge = rc.along_edge(void) if k == 0 and not void.enclosed else None
    stretches = []
    for q, flags in (
        (xy[i:j], edge[i:j] if edge is not None else None),
        (
            np.concatenate([xy[j:m], xy[:i]]),
            np.concatenate([edge[j:m], edge[:i]]) if edge is not None else None,
        ),
    ):
        if flags is not None and flags.any():
            continue  # this way runs along the board's edge: off the board
        step = max(1, len(q) // 256)  # a bound from some of the points is a bound still
        bound = float(
            np.max(np.hypot(*(q[::step] - ends[0]).T) + np.hypot(*(q[::step] - ends[1]).T))
        )
        stretches.append((bound, q))
    stretches.sort(key=lambda t: t[0])
    best = None
    for bound, q in stretches:
        if best is not None and bound > best[0] * (1 + TIE_REL):
            break
        way = _hull_arc(ends, q)
        if way is None:
            return None  # an end in a pocket of the stretch: not a plain hull
        if best is None or _before(way, best):
            best = way
    if best is None:
        return None
    length, path = best
    if not rc.passable(shapely.linestrings(np.stack([path[:-1], path[1:]], axis=1))).all():
        return None
    return length, [tuple(map(float, p)) for p in path]


def _hull_arc(ends, pts):
    """The way from ends[0] to ends[1] along the convex hull of them and pts, round pts: (length,
    points), or None where the straight line between the ends is not an edge of that hull."""
    found = _hull_ring(ends, pts)
    if found is None:
        return None
    ring, ia, ib = found
    n = len(ring)
    if (ib - ia) % n == 1:  # the direct edge runs forwards: the way round goes backwards
        c = _ring_walk(ring, ia, ib, -1)
    elif (ia - ib) % n == 1:
        c = _ring_walk(ring, ia, ib, 1)
    else:
        return None
    return float(np.hypot(*np.diff(c, axis=0).T).sum()), c


def _hull_ring(ends, pts):
    """The convex hull of the two ends and pts, as its ring's points (the closing one aside), with
    the positions of the two ends on it; None where the hull is not a polygon or an end is not on
    its ring (it lies inside)."""
    hull = points_hull(np.vstack([ends, pts]))
    if hull.geom_type != "Polygon":
        return None
    ring = shapely.get_coordinates(hull.exterior)[:-1]
    ia = np.flatnonzero(np.hypot(*(ring - ends[0]).T) < 1e-9)
    ib = np.flatnonzero(np.hypot(*(ring - ends[1]).T) < 1e-9)
    if not len(ia) or not len(ib):
        return None
    return ring, int(ia[0]), int(ib[0])


def _ring_walk(ring, ia, ib, step):
    """The ring's points from position ia to ib, both included, going forwards (step 1) or back
    (-1)."""
    n = len(ring)
    return ring[(ia + step * np.arange((step * (ib - ia)) % n + 1)) % n]


def _local_geodesic(rc, pa, pb, void_pos, hw):
    """Detour path round the gap: first the exact way round the gap alone when nothing else is
    in the
    way (_chain_detour); else the shortest way on a grid of the copper in a window round the
    crossing, pulled taut (gridpath), in a small window and then one three times as wide, so that
    large voids stay cheap; last, the taut way round the whole gap's hull. Returns (length, path,
    method) or None; method is "taut-hull", "grid-path", or "hull-estimate" where no way is found
    nearby and the shorter way round the whole hull serves as the estimate."""
    void_geom = rc.void_geoms[void_pos]
    chain = _chain_detour(rc, rc.voids[void_pos], pa, pb)
    if chain is not None:
        return chain[0], chain[1], "taut-hull"
    vx0, vy0, vx1, vy1 = void_geom.bounds
    r = max(WINDOW_MM / 2, 4 * hw)
    # cells of a fixed family of lattices (nearby crossings share their cells), coarser only for a
    # window so wide that it would have more than 1.5 gridpath.CELLS cells a side
    cell = WINDOW_MM / CELLS * 2 ** max(0, math.ceil(math.log2(2 * r / (1.5 * WINDOW_MM)) - 1e-9))
    cx, cy = (pa.x + pb.x) / 2, (pa.y + pb.y) / 2
    for level in range(2):
        g = lattice_way(
            rc.lattice(cell * 3**level), rc.lattice(cell * 3**level / 2), pa, pb, r, rc.passable
        )
        if g is not None:
            return g[0], g[1], "grid-path"
        if cx - r <= vx0 and cy - r <= vy0 and cx + r >= vx1 and cy + r >= vy1:
            break  # the window held the whole gap: a wider one shows nothing more
        r *= 3
    way, shorter = _hull_detour(rc, pa, pb, rc.hull(void_pos))
    if way is not None:
        return way[0], way[1], "taut-hull"
    return (shorter, None, "hull-estimate") if shorter is not None else None


def coords_along(line, s):
    """(x, y) at distances s along a LineString, as an (n, 2) array, interpolated in numpy (one pass
    over its vertices, where shapely walks the line again for every point); coords_along_lines
    for one line."""
    xy = shapely.get_coordinates(line)
    run = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
    at = np.clip(s, 0.0, run[-1])
    return np.column_stack([np.interp(at, run, xy[:, 0]), np.interp(at, run, xy[:, 1])])


def coords_along_lines(lines, dists):
    """(x, y) at distances dists[i] along lines[i], for many LineStrings in one interpolation: the
    lines are laid end to end on one distance axis, a unit gap between one's end and the next's
    start."""
    xy, idx = shapely.get_coordinates(np.asarray(lines, dtype=object), return_index=True)
    seg = np.hypot(*np.diff(xy, axis=0).T)
    seg[idx[1:] != idx[:-1]] = 1.0
    run = np.concatenate([[0.0], np.cumsum(seg)])
    k = np.arange(len(dists))
    start = run[np.searchsorted(idx, k)]
    length = run[np.searchsorted(idx, k, side="right") - 1] - start
    count = [len(d) for d in dists]
    flat = np.concatenate(dists) if dists else np.zeros(0)
    at = np.clip(flat, 0.0, np.repeat(length, count)) + np.repeat(start, count)
    return np.column_stack([np.interp(at, run, xy[:, 0]), np.interp(at, run, xy[:, 1])])


def majority_nets(ln, plane_nets, lines, samples=17):
    """Per centre line, the plane net under most of its sample points (None where no plane copper is
    under it; ties go to the later name); every line's points looked up in one tree query."""
    lines = np.asarray(lines, dtype=object)
    if not len(lines):
        return []
    frac = np.linspace(0.0, 1.0, samples)
    pts = shapely.points(coords_along_lines(lines, list(np.outer(shapely.length(lines), frac))))
    isl = ln.islands_at(pts, among=plane_nets)  # other islands' nets count for nothing
    which = np.repeat(np.arange(len(lines)), samples)
    names, net_of = net_codes(ln.island_net, set(plane_nets).__contains__)
    net_of = np.append(net_of, -1)  # island -1: off copper
    c = net_of[isl]
    ok = c >= 0
    out = [None] * len(lines)
    if ok.any():
        pair, count = np.unique(which[ok] * len(names) + c[ok], return_counts=True)
        for p, _ in sorted(
            zip(pair.tolist(), count.tolist()), key=lambda t: (t[1], t[0] % len(names))
        ):
            out[p // len(names)] = names[
                p % len(names)
            ]  # the last written wins: most samples, then name
    return out


def _graze_span(line, local, hw, w, ref, settings):
    """(distance, middle, span) along the track of a graze, measured along the filament just inside
    the void's nearest edge; None when it cannot interrupt enough or only touches the footprint."""
    d = line.distance(local)
    if interval_fraction(d, hw, w, ref) < settings.min_interrupted_fraction:
        return None  # even a void filling the footprint beyond d holds less (|x| >= d there)
    piece = _stretch_near(line, hw, local)
    if _footprint_overlap(piece, hw, local) < 1e-4:
        return None  # it only touches the footprint
    near_line, _ = shapely.shortest_line(line, local).coords
    mid_s = line.project(shapely.Point(near_line))
    near = local.intersection(piece.buffer(hw, cap_style="flat"))
    corners = (
        np.asarray(near.exterior.coords)
        if near.geom_type == "Polygon"
        else shapely.get_coordinates(near)
    )
    at = shapely.line_locate_point(line, shapely.points(corners)) if len(corners) else []
    span = (float(min(at)), float(max(at))) if len(at) else (mid_s, mid_s)
    return d, mid_s, span


def _graze_sides(line, local, rc, d):
    """Points (and their islands) just before and after the void, on a line beside the track that
    touches it; Nones when there is none."""
    for side in (1, -1):
        off = line.offset_curve(side * (d + 0.02))
        if off.is_empty or off.geom_type != "LineString" or off.distance(local) >= 1e-6:
            continue
        cr = [q for q in shapely.get_parts(off.intersection(local)) if q.geom_type == "LineString"]
        if not cr:
            return None, None, None, None
        ss = np.sort(_ends_along(off, np.array(cr, dtype=object)), axis=None).tolist()
        if ss[0] > STEP_OFF_MM and ss[-1] < off.length - STEP_OFF_MM:
            pa = off.interpolate(ss[0] - STEP_OFF_MM)
            pb = off.interpolate(ss[-1] + STEP_OFF_MM)
            return pa, pb, rc.island_at(pa), rc.island_at(pb)
        return None, None, None, None
    return None, None, None, None


def _way_round(rc, void, hw, ev, pa, pb, ia, ib):
    """(detour, path, method, split): the way round the gap inside the plane island, or a split."""
    detour, path, method = None, None, None
    split = ev == "cross" and (ia is None or ib is None or ia != ib)
    if not split and pa is not None and ia is not None and ia == ib:
        g = _local_geodesic(rc, pa, pb, void.index, hw)
        if g is not None:
            detour = max(0.0, g[0] - pa.distance(pb))
            path, method = g[1], g[2]
    if ev == "graze" and detour is None:
        detour = 0.0
    if ev == "cross" and detour is None and not split:
        split = True  # no path found inside the plane island: treat as a split
    return detour, path, method, split


def _gap_type(split, void, geo):
    if split:
        return "split"
    if void.enclosed:
        return "slot" if geo["elongated"] else "void"
    return "slot"  # a notch cut in from the plane's edge


def _slot_ends(rc, void, gap_type, geo):
    """(closed-end stub, other stub, open at one end): a notch's open end is the one that reaches
    the plane's outer edge; the stub model keeps the closed one."""
    if void.enclosed or gap_type != "slot":
        return geo["l1"], geo["l2"], False
    end1 = shapely.Point(geo["end1"])
    e1_open = end1.distance(rc.edge) < 0.05 or not rc.inset_outline.contains(end1)
    return (geo["l2"], geo["l1"], True) if e1_open else (geo["l1"], geo["l2"], True)


def _gap_estimate(board, ch, ref, settings, slot_len, width, ends, split=False):
    """Added inductance (the slot-stub model calibrated on our field solves, with the range that
    covers the calibration sweep), impedance, reflection and resonances of one crossing. A split
    has no way round in its plane: until the path through a bridging part or another plane is
    modelled, it keeps the older bound (geometric mean of the handbook formula over the whole
    gap and the stub model), the handbook figure as the range's top."""
    l_closed, l_open, open_one_end = ends
    below = ref.beyond_mm if ref.other_h_mm is None else None  # a plane beyond confines it
    est, lo, hi = physics.slot_crossing_inductance_nH(
        l_closed,
        l_open,
        max(width, 0.01),
        ch.width_mm,
        ref.h_mm,
        l2_open=open_one_end,
        below_mm=below,
    )
    method = "calibrated slot-stub model"
    if split:
        hsdd = physics.hsdd_slot_inductance_nH(slot_len, ch.width_mm)
        est, lo, hi = math.sqrt(hsdd * est) if est > 0 else hsdd, min(lo, hsdd), max(hi, hsdd)
        method = "split: geometric mean of the handbook slot formula and the stub model"
    z0 = line_z0(board, ch.layer, ch.width_mm, ref)
    refl = physics.series_inductance_reflection(est, z0, settings.rise_ns_for(ch.net))
    f_res, f_low, f_high, eeff = physics.slot_resonance_estimate(
        slot_len, width, ref.plane_er, ref.plane_substrate_mm, open_at_one_end=open_one_end
    )
    return {
        "est": est,
        "lo": lo,
        "hi": hi,
        "z0": z0,
        "refl": refl,
        "f_res": f_res,
        "f_low": f_low,
        "f_high": f_high,
        "eeff": eeff,
        "method": method,
        "return_plane": "round",  # the return goes round the gap in this plane
    }


def _other_returns(board, ch, ref, settings, ways, ev, crossed, span, share, e):
    """The estimate where the return need not go round the gap: the other plane of a stripline
    under at least OTHER_PLANE_COVER of the crossing, or plane copper of the track's own layer
    beside it (coplanar). The return takes the way of least inductance (the ways are in
    parallel), so another way is taken only where it adds less; below the noise floor already,
    no other way is looked for."""
    if e["est"] < settings.min_added_nH and not settings.show_all:
        return e
    alt = _other_way(board, ch, ref, settings, ways, ev, crossed, span, share, e)
    return alt if alt is not None and alt["est"] < e["est"] else e


def _other_way(board, ch, ref, settings, ways, ev, crossed, span, share, e):
    cover_of, beside = ways if ways is not None else (None, None)
    over = (crossed[1] - crossed[0]) if ev == "cross" else (span[1] - span[0]) * min(1.0, share)
    where = crossed if ev == "cross" else span  # where the reference plane is missing
    cover = cover_of(*where) if cover_of is not None else 0.0
    if cover >= OTHER_PLANE_COVER:  # where the other plane is cut too, that is its own finding
        return _one_plane_estimate(board, ch, ref, settings, over * cover, cover, e)
    # the copper beside must run on past the gap by the footprint's spread to carry the return
    reach = (span[1] - span[0] - (crossed[1] - crossed[0])) / 2 if ev == "cross" else 0.0
    gaps_beside = (
        beside(crossed[0] - reach, crossed[1] + reach)
        if beside is not None and ev == "cross"
        else None
    )
    if gaps_beside is not None:
        return _coplanar_estimate(board, ch, ref, settings, over, gaps_beside, e)
    return None


def _coplanar_estimate(board, ch, ref, settings, over_mm, gaps_beside, e):
    """Plane copper of the track's own layer runs beside it over the gap: the return follows it
    (a coplanar line there): the rise from the line's L' to the coplanar waveguide's, over the
    crossed length."""
    t = board.stackup.copper_thickness_mm.get(ch.layer, 0.035)
    l_line = physics.track_inductance_nH_per_mm(ch.width_mm, ref.h_mm, ref.other_h_mm, t)
    l_cpw = physics.cpw_inductance_nH_per_mm(ch.width_mm, *gaps_beside)
    est = max(0.0, l_cpw - l_line) * over_mm
    refl = physics.series_inductance_reflection(est, e["z0"], settings.rise_ns_for(ch.net))
    sides = "both sides" if gaps_beside[1] is not None else "one side"
    return {
        **e,
        "est": est,
        "lo": est,
        "hi": est,
        "refl": refl,
        "method": f"coplanar: own-layer plane copper beside the track on {sides}",
        "return_plane": "coplanar",
    }


def _one_plane_estimate(board, ch, ref, settings, over_mm, cover, e):
    """The other plane of the stripline lies under the crossing (`cover`: the share of it): the
    return moves there for the crossed length it covers, a local rise of the line's inductance,
    not a loop round the gap."""
    t = board.stackup.copper_thickness_mm.get(ch.layer, 0.035)
    est = physics.one_plane_missing_inductance_nH(ch.width_mm, ref.h_mm, ref.other_h_mm, t, over_mm)
    refl = physics.series_inductance_reflection(est, e["z0"], settings.rise_ns_for(ch.net))
    return {
        **e,
        "est": est,
        "lo": est,
        "hi": est,
        "refl": refl,
        "method": "one plane missing: stripline to microstrip over the other plane"
        + ("" if cover >= 0.999 else f" (under {100 * cover:.0f} % of the crossing)"),
        "return_plane": "other",
    }


def _side_nets(rc, split, sides):
    """[net, net] of the copper either side of a split between two nets; UNSET otherwise."""
    ia, ib = sides
    if split and ib is not None and ia is not None and rc.island_net[ib] != rc.island_net[ia]:
        return [rc.island_net[ia], rc.island_net[ib]]
    return UNSET


def _where(line, local, hw, ch, ref, settings, ev, s0, s1):
    """(middle, span along the track, distance to the void) of a crossing or a graze; None for a
    graze below the thresholds."""
    if ev == "cross":
        return (s0 + s1) / 2, (s0 - hw, s1 + hw), None
    graze = _graze_span(line, local, hw, ch.width_mm, ref, settings)
    if graze is None:
        return None
    d, mid_s, span = graze
    return mid_s, span, d


def _sides(line, local, rc, ev, s0, s1, d):
    """Points just before and after the gap, and the plane islands they are in."""
    if ev != "cross":
        return _graze_sides(line, local, rc, d)
    pa = line.interpolate(max(0.0, s0 - STEP_OFF_MM))
    pb = line.interpolate(min(line.length, s1 + STEP_OFF_MM))
    return pa, pb, rc.island_at(pa), rc.island_at(pb)


def _finding(
    board, ch, ref, rc, void, local, line, hw, ev, s0, s1, reach, settings, ref_net, ways=None
):
    """The gap-crossing finding of one track over one gap (a crossing or a graze), or None when it
    is below the reporting thresholds."""
    where = _where(line, local, hw, ch, ref, settings, ev, s0, s1)
    if where is None:
        return None
    mid_s, span, d = where
    # the gap's size first: a short enclosed gap (an antipad) is not reported, whatever it
    # interrupts
    mid = line.interpolate(mid_s)
    tangent = _tangent(line, mid_s)
    geo = slot_geometry(void, (mid.x, mid.y), tangent, reach, settings.slot_aspect_ratio)
    if geo["length"] < settings.min_gap_length_mm and void.enclosed:
        return None
    share, _ = interrupted_share(line, span[0], span[1], hw, ch.width_mm, ref, local)
    if share < settings.min_interrupted_fraction:
        return None
    pa, pb, ia, ib = _sides(line, local, rc, ev, s0, s1, d)
    est = functools.partial(
        _estimate, board, ch, ref, rc, void, geo, settings, ways, ev, (s0, s1), span, share
    )
    split = ev == "cross" and (ia is None or ib is None or ia != ib)
    first = None if split or settings.show_all else est(False)
    if first is not None and first[2]["est"] < settings.min_added_nH:
        return None  # below the noise floor: no way round to look for
    detour, path, method, split = _way_round(rc, void, hw, ev, pa, pb, ia, ib)
    if ev == "cross" and not split and detour < settings.min_detour_mm:
        return None
    width, ends, e = first if first is not None and not split else est(split)
    gap_type = _gap_type(split, void, geo)
    x, y = float(mid.x), float(mid.y)
    side_nets = _side_nets(rc, split, (ia, ib))
    return _gap_record(
        ch,
        ref,
        ref_net,
        ev,
        gap_type,
        x,
        y,
        geo["length"],
        width,
        share,
        e,
        settings,
        (detour, method, path, split),
        ends,
        void.enclosed,
        side_nets,
        void.geom.bounds,
    )


def _estimate(board, ch, ref, rc, void, geo, settings, ways, ev, crossed, span, share, split):
    """(gap width, stub ends, estimate) of a crossing, split or not, the other ways included."""
    width = (
        geo["width"]
        if geo["width"] is not None and not split
        else (crossed[1] - crossed[0] if ev == "cross" else 0.0)
    )
    ends = _slot_ends(rc, void, _gap_type(split, void, geo), geo)
    e = _gap_estimate(board, ch, ref, settings, geo["length"], width, ends, split)
    e = _other_returns(board, ch, ref, settings, ways, ev, crossed, span, share, e)
    return width, ends, e


_RETURN_PATHS = {"other": "other plane", "coplanar": "coplanar"}


def _severity(ch, e, share, settings):
    """The ladder's word on one crossing: its reflection times the share it interrupts; its
    resonance counts only where the return goes round the gap (not through the other plane)."""
    resonance = e["f_low"] if e["return_plane"] == "round" else None
    knee = settings.knee_GHz_for(ch.net)
    return severity.gap_crossing(e["refl"] * min(1.0, share), resonance, knee, settings)


def _gap_record(
    ch,
    ref,
    ref_net,
    ev,
    gap_type,
    x,
    y,
    slot_len,
    width,
    share,
    e,
    settings,
    way,
    ends,
    enclosed,
    side_nets,
    gap_bounds,
):
    detour, method, path, split = way
    l_closed, l_open, open_one_end = ends
    return GapCrossing(
        id=stable_id("gap-crossing", ch.layer, ref.layer, ch.net, f"{x:.1f}", f"{y:.1f}", gap_type),
        gap_type=gap_type,
        severity=_severity(ch, e, share, settings),
        net=ch.net,
        layer=ch.layer,
        reference_layer=ref.layer,
        reference_net=ref_net,
        x_mm=x,
        y_mm=y,
        gap_length_mm=slot_len,
        gap_width_mm=width,
        detour_mm=detour,
        detour_method=method,
        interrupted_fraction=min(1.0, share),
        added_inductance_nH=e["est"],
        added_inductance_range_nH=[e["lo"], e["hi"]],
        inductance_method=e["method"],
        return_path=_RETURN_PATHS.get(e["return_plane"]) or ("split" if split else "detour"),
        rise_time_ns=settings.rise_ns_for(ch.net),
        gap_id=stable_id("gap", ref.layer, *(f"{v:.2f}" for v in gap_bounds)),
        gap_enclosed=enclosed,
        resonance_GHz=e["f_res"],
        resonance_range_GHz=[e["f_low"], e["f_high"]],
        resonance_er_eff=e["eeff"],
        resonance_mode="quarter-wave" if open_one_end else "half-wave",
        reflection_fraction=e["refl"],
        z0_ohm=e["z0"],
        trace_width_mm=ch.width_mm,
        height_mm=ref.h_mm,
        line_type=ref.kind,
        plane_share=ref.share,
        crossing=ev,
        detour_path_mm=[[round(a, 4), round(b, 4)] for a, b in path] if path else None,
        slot_ends_mm=[l_closed, l_open] if gap_type == "slot" else None,
        side_nets=side_nets,
    )
