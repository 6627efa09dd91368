"""gerbonara graphic objects -> shapely geometry, in millimetres.

Tracks stay centre-line segments with a width (cheap to query); only the copper of a
whole layer is unioned, one polarity run at a time.
"""

import math

import numpy as np
import shapely
from gerbonara import apertures as ap
from gerbonara import graphic_primitives as gp
from gerbonara.utils import MM
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from shapely import affinity

__all__ = [
    "DEFAULT_CHORD_TOL_MM",
    "near_clusters",
    "chord_count",
    "quad_segs_for",
    "arc_points",
    "ring_points",
    "polygon_from_points",
    "ring_polygon",
    "primitive_shape",
    "ApertureShapes",
    "aperture_width_mm",
    "stroke_shape",
    "intersects_pairs",
    "touch_components",
    "merge_pieces",
    "disjoint_union",
    "place_all",
    "points_hull",
    "outline_pieces",
    "outline_segments",
    "segment_lines",
    "vertex_pairs",
    "ranges",
]

DEFAULT_CHORD_TOL_MM = 0.001


def chord_count(radius, sweep, tol):
    """Chords needed so that no chord of an arc departs from it by more than tol (sagitta)."""
    if radius <= tol or sweep <= 0:
        return 1
    step = 2.0 * math.acos(max(-1.0, 1.0 - tol / radius))
    return max(1, math.ceil(sweep / step))


def quad_segs_for(radius, tol):
    """shapely buffer resolution (segments per quarter circle) meeting the chord tolerance."""
    return max(4, math.ceil(chord_count(radius, math.pi / 2, tol)))


def arc_points(x1, y1, x2, y2, cx, cy, clockwise, tol):
    """Points along a circular arc from (x1, y1) to (x2, y2) about the absolute centre (cx, cy)."""
    r = math.hypot(x1 - cx, y1 - cy)
    a1 = math.atan2(y1 - cy, x1 - cx)
    a2 = math.atan2(y2 - cy, x2 - cx)
    sweep = (a1 - a2) if clockwise else (a2 - a1)
    sweep %= 2 * math.pi
    if sweep < 1e-12:  # start == end: a full circle
        sweep = 2 * math.pi
    n = chord_count(r, sweep, tol)
    sign = -1.0 if clockwise else 1.0
    t = a1 + sign * sweep * np.arange(1, n) / n
    pts = [(x1, y1)] + list(zip(cx + r * np.cos(t), cy + r * np.sin(t))) + [(x2, y2)]
    return pts


def ring_points(outline, arc_centers, tol, scale=1.0):
    """Flatten a region or ArcPoly outline (absolute arc centres) into a point list."""
    pts = []
    n = len(outline)
    for i in range(n):
        p1 = outline[i]
        p2 = outline[(i + 1) % n]
        arc = arc_centers[i] if i < len(arc_centers) else None
        if arc and arc[0] is not None and arc[1][0] is not None:
            cw, (cx, cy) = arc
            seg = arc_points(
                p1[0] * scale,
                p1[1] * scale,
                p2[0] * scale,
                p2[1] * scale,
                cx * scale,
                cy * scale,
                cw,
                tol,
            )
            pts.extend(seg[:-1])
        else:
            pts.append((p1[0] * scale, p1[1] * scale))
    return pts


def polygon_from_points(pts, raw=None):
    """A valid polygonal geometry from a possibly self-touching ring (Gerber cut-ins); raw: the
    ring's
    polygon as drawn, when the caller already has it."""
    if len(pts) < 3:
        return shapely.Polygon()
    poly = raw if raw is not None else ring_polygon(pts)
    if not poly.is_valid:
        # "structure" repair: the ring's enclosed area (cut-ins become holes, a ring that
        # doubles over
        # itself stays filled), polygons only, and many times faster than rebuilding from linework
        poly = shapely.make_valid(poly, method="structure", keep_collapsed=False)
    return poly


def ring_polygon(pts):
    """The polygon of a ring of points as drawn (closed if open), built from one array."""
    return shapely.polygons(np.asarray(pts, dtype=float))


def primitive_shape(prim, tol):
    """One gerbonara primitive (already in mm) as a shapely polygon."""
    if isinstance(prim, gp.Circle):
        return shapely.Point(prim.x, prim.y).buffer(prim.r, quad_segs=quad_segs_for(prim.r, tol))
    if isinstance(prim, gp.Rectangle):
        # built here: gerbonara's own to_arc_poly() drops the rotation
        box = shapely.box(-prim.w / 2, -prim.h / 2, prim.w / 2, prim.h / 2)
        box = affinity.rotate(box, prim.rotation or 0.0, origin=(0, 0), use_radians=True)
        return affinity.translate(box, prim.x, prim.y)
    if isinstance(prim, gp.ArcPoly):
        return polygon_from_points(ring_points(prim.outline, prim.arc_centers or [], tol))
    if isinstance(prim, gp.Line):
        r = prim.width / 2
        return (
            shapely.LineString([(prim.x1, prim.y1), (prim.x2, prim.y2)]).buffer(
                r, quad_segs=quad_segs_for(r, tol)
            )
            if r > 0
            else shapely.Polygon()
        )
    if isinstance(prim, gp.Arc):
        pts = arc_points(prim.x1, prim.y1, prim.x2, prim.y2, prim.cx, prim.cy, prim.clockwise, tol)
        r = prim.width / 2
        return (
            shapely.LineString(pts).buffer(r, quad_segs=quad_segs_for(r, tol))
            if r > 0
            else shapely.Polygon()
        )
    raise TypeError(f"unsupported primitive {type(prim).__name__}")


class ApertureShapes:
    """Flash shape of each aperture at the origin, built once: dark primitives add, clear ones
    cut only the aperture itself (holes, macro exposure-off), in order."""

    def __init__(self, tol=DEFAULT_CHORD_TOL_MM):
        self.tol = tol
        self._cache = {}

    def shape(self, aperture):
        key = id(aperture)
        hit = self._cache.get(key)
        if hit is None:
            acc = shapely.Polygon()
            for prim in aperture.flash(0, 0, MM, True):
                s = primitive_shape(prim, self.tol)
                acc = acc.union(s) if prim.polarity_dark else acc.difference(s)
            hit = (aperture, acc)  # keep the aperture alive so its id stays unique
            self._cache[key] = hit
        return hit[1]


def aperture_width_mm(aperture):
    """Stroke width of a drawing aperture (diameter for circles, smaller side for others)."""
    if isinstance(aperture, ap.CircleAperture):
        return aperture.unit.convert_to(MM, aperture.diameter)
    try:
        return float(aperture.equivalent_width(MM))
    except Exception:
        b = ApertureShapes().shape(aperture).bounds
        return min(b[2] - b[0], b[3] - b[1]) if b and not math.isnan(b[0]) else 0.0


def stroke_shape(points, aperture, shapes, tol):
    """Area swept by an aperture along a polyline."""
    if isinstance(aperture, ap.CircleAperture) and not getattr(aperture, "hole_dia", None):
        r = aperture_width_mm(aperture) / 2
        if len(points) == 1 or r <= 0:
            return (
                shapely.Point(points[0]).buffer(r, quad_segs=quad_segs_for(r, tol))
                if r > 0
                else shapely.Polygon()
            )
        return shapely.LineString(points).buffer(r, quad_segs=quad_segs_for(r, tol))
    # Any other aperture: union of hulls of the shape at the ends of each straight piece
    # (exact for convex apertures).
    base = shapes.shape(aperture)
    pieces = []
    for (xa, ya), (xb, yb) in (
        zip(points[:-1], points[1:]) if len(points) > 1 else [(points[0], points[0])]
    ):
        pieces.append(
            shapely.convex_hull(
                shapely.union(affinity.translate(base, xa, ya), affinity.translate(base, xb, yb))
            )
        )
    return shapely.union_all(pieces)


def intersects_pairs(a, b, na=None, nb=None):
    """Elementwise intersects, evaluated from the side with more vertices (prepared there); na, nb:
    the vertex counts when already known (counting a plane's vertices again per query is costly)."""
    na = shapely.get_num_coordinates(a) if na is None else na
    nb = shapely.get_num_coordinates(b) if nb is None else nb
    b_big = nb >= na
    ok = np.empty(len(a), dtype=bool)
    ok[b_big] = shapely.intersects(b[b_big], a[b_big])
    ok[~b_big] = shapely.intersects(a[~b_big], b[~b_big])
    return ok


def touch_components(pieces, tree):
    """Island index per piece: connected components of the touch graph (C-speed, no Python loop)."""
    n = len(pieces)
    if not n:
        return np.zeros(0, dtype=int), 0, np.zeros((2, 0), dtype=int)
    pairs = tree.query(pieces)
    pairs = pairs[:, pairs[0] < pairs[1]]
    nc = shapely.get_num_coordinates(pieces)
    pairs = pairs[
        :, intersects_pairs(pieces[pairs[0]], pieces[pairs[1]], nc[pairs[0]], nc[pairs[1]])
    ]
    graph = coo_matrix((np.ones(pairs.shape[1], dtype=np.int8), (pairs[0], pairs[1])), shape=(n, n))
    count, labels = connected_components(graph, directed=False)
    # number islands by their first piece, so that names stay stable for the same files
    first = np.full(count, n, dtype=int)
    np.minimum.at(first, labels, np.arange(n))
    rank = np.empty(count, dtype=int)
    rank[np.argsort(first, kind="stable")] = np.arange(count)
    return rank[labels], count, pairs


def merge_pieces(pieces):
    """Union of many pieces (antipads, pads), cheap when few of them overlap: only pieces that touch
    are unioned, group by group; the groups are disjoint, so together they form a valid MultiPolygon
    without one large union."""
    arr = np.array([p for p in pieces if p is not None and not p.is_empty], dtype=object)
    if len(arr) < 32:
        return shapely.union_all(arr) if len(arr) else shapely.Polygon()
    bad = ~shapely.is_valid(arr)
    if bad.any():
        arr[bad] = shapely.make_valid(arr[bad])
    label, count, _ = touch_components(arr, shapely.STRtree(arr))
    order = np.argsort(label, kind="stable")
    start = np.searchsorted(label[order], np.arange(count + 1))
    parts = [
        arr[order[start[k]]]
        if start[k + 1] - start[k] == 1
        else shapely.union_all(arr[order[start[k] : start[k + 1]]])
        for k in range(count)
    ]
    return disjoint_union(parts)


def disjoint_union(geoms):
    """Union of geometries known not to touch one another: their polygons side by side already
    form a
    valid MultiPolygon, with no overlay work."""
    parts = shapely.get_parts(np.array(list(geoms), dtype=object))
    polys = [q for q in parts if q.geom_type == "Polygon" and not q.is_empty]
    return shapely.multipolygons(np.array(polys, dtype=object)) if polys else shapely.Polygon()


def place_all(bases, xy):
    """Each base shape moved by its (x, y), in one vectorised pass over all their coordinates."""
    if not len(bases):
        return []
    geoms = np.array(bases, dtype=object)
    off = np.repeat(
        np.asarray(xy, dtype=float).reshape(-1, 2), shapely.get_num_coordinates(geoms), axis=0
    )
    return list(shapely.transform(geoms, lambda c: c + off))


def points_hull(pts):
    """The convex hull of an (n, 2) array of points (n >= 2), taken of one line through them all:
    GEOS hulls the vertices, so it is the same to the bit as the hull of a MultiPoint of them, and
    about ten times faster to make (no point geometry per point)."""
    return shapely.convex_hull(shapely.linestrings(pts))


def near_clusters(xy, reach):
    """Single-linkage clusters of points within `reach` of each other: per point, the smallest
    position in its cluster (a label)."""
    pts = shapely.points(np.asarray(xy, dtype=float).reshape(-1, 2))
    a, b = shapely.STRtree(pts).query(pts, predicate="dwithin", distance=reach)
    parent = np.arange(len(pts))

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in zip(a.tolist(), b.tolist()):
        ri, rj = root(i), root(j)
        if ri != rj:
            parent[max(ri, rj)] = min(ri, rj)
    return np.array([root(i) for i in range(len(pts))], dtype=int)


def vertex_pairs(lines):
    """The straight pieces of lines (or rings), an (N, 4) array [x0, y0, x1, y1], and the line each
    piece belongs to."""
    xy, of_line = shapely.get_coordinates(lines, return_index=True)
    same = of_line[1:] == of_line[:-1]
    return np.column_stack([xy[:-1][same], xy[1:][same]]), of_line[:-1][same]


def segment_lines(pieces):
    """An (N, 4) array of straight pieces [x0, y0, x1, y1] as N two-point LineStrings."""
    return shapely.linestrings(np.asarray(pieces).reshape(-1, 2, 2))


def outline_segments(polygons):
    """The outlines of `polygons` as their straight pieces, an (N, 4) array [x0, y0, x1, y1], and
    each piece's polygon (no geometry made per piece)."""
    rings = shapely.boundary(np.asarray(polygons, dtype=object))
    parts, part_owner = shapely.get_parts(rings, return_index=True)
    pieces, of_part = vertex_pairs(parts)
    return pieces, part_owner[of_part]


def outline_pieces(polygons):
    """The outlines of `polygons` cut into their straight pieces, and each piece's polygon: a
    distance to a whole pour tests every vertex of its outline, a piece's only its two, so a
    tree of pieces answers "how near is copper" at the cost of the few pieces nearby."""
    xy, owner = outline_segments(polygons)
    return segment_lines(xy), owner


def ranges(starts, counts):
    """starts[k], starts[k] + 1, ... (counts[k] of them) for every k, laid end to end in one array
    (a scalar start serves every k)."""
    counts = np.asarray(counts)
    return np.repeat(starts - (np.cumsum(counts) - counts), counts) + np.arange(counts.sum())
