"""Copper islands per layer, joined through plated holes into nets.

Net names come from the Gerbers' .N attributes, else from an IPC-D-356 netlist, else
stable generated names. Ground and power follow from names (or the user's lists);
when no net is named like a ground, the net with the most copper is taken as ground.
"""

import fnmatch
import itertools
import re
import weakref
from collections import Counter, defaultdict
from dataclasses import dataclass, field

import networkx as nx
import numpy as np
import shapely

from returngap.geometry.shapes import (
    disjoint_union,
    intersects_pairs,
    outline_segments,
    ranges,
    segment_lines,
    touch_components,
)
from returngap.model.runner import SERIAL

__all__ = [
    "GROUND_RE",
    "POWER_RE",
    "PLANE_AREA_FRACTION",
    "leaf",
    "LayerNets",
    "Nets",
    "touching",
    "FILL_OVERLAP",
    "POUR_STROKE_HAIR_MM",
    "POUR_MIN_MM2",
    "NetConflict",
    "classify",
    "layer_islands",
    "net_codes",
    "build_nets",
]

GROUND_RE = re.compile(
    r"^(?:[ADPSCH]?GND\w*|GND\w*|VSS\w*|0V|EARTH|CHASSIS|GROUND\w*|\w*_GND|\w*GND|"
    r"RTN\w*|\w*_RTN|V?RETURN)$",  # a supply's return (RTN) is a ground of its own
    re.I,
)
POWER_RE = re.compile(
    r"^(?:\+|-)?(?:V(?:CC|DD|EE|BUS|BAT|IN|IO|REF|CORE|SYS|PP|DDQ|TT)\w*|PWR\w*|POWER\w*|"
    r"P?\d+V\d*\w*|\d+V|V\d+\w*|\d+\.\d+V\w*|V?POE\w*[+-]?|"  # PoE rails: POE+, POE-
    r"VC\d[+-]?)$",  # and a magnetics' centre taps carrying PoE (VC1+, VC2-)
    re.I,
)
POUR_MIN_MM2 = 25.0  # an island this large is a pour, its net a supply (common practice, no source)
POUR_STROKE_HAIR_MM = 1e-3  # a pour's outline stroke runs on its region's edge, to rounding
PLANE_AREA_FRACTION = (
    0.20  # an island this share of the board acts as a plane (common practice, no source)
)


def leaf(name):
    """Hierarchical names (/sheet/VDD33, Board_0-GND) are classed by their last part."""
    last = re.split(r"[/\\]", name)[-1]
    part = last.split("-")[-1].strip()
    return part or last.strip()  # a trailing "-" (POE-, a negative rail) is part of the name


class LayerNets:
    """The copper islands of one layer and their nets.

    An island is a connected group of the layer's pieces (drawn shapes that touch or overlap); its
    polygon is the union of its pieces, built only when a check asks for it (planes, pours, floating
    copper), so signal tracks are never unioned."""

    def __init__(
        self,
        name,
        pieces,
        piece_island,
        island_net,
        segment_net,
        flash_net,
        segment_fill,
        tree=None,
    ):
        self.name = name
        self.pieces = pieces
        self.piece_island = piece_island
        self.island_net = island_net
        self.segment_net = segment_net
        self.flash_net = flash_net
        self.segment_fill = segment_fill
        self.tree = tree if tree is not None else shapely.STRtree(pieces)
        order = np.argsort(piece_island, kind="stable")
        self._order = order
        self._start = np.searchsorted(piece_island[order], np.arange(len(island_net) + 1))
        self._poly = {}
        self._union = {}
        self._masks = {}
        self._area_bounds = None
        self.island_tied = np.zeros(len(island_net), dtype=bool)

    @property
    def n_islands(self):
        return len(self.island_net)

    def members(self, i):
        return self._order[self._start[i] : self._start[i + 1]]

    def island(self, i):
        """Polygon (rarely a MultiPolygon, where pieces only touch at a point) of island i."""
        poly = self._poly.get(i)
        return poly if poly is not None else self.island_polygons([i])[0]

    def island_polygons(self, idx):
        """Polygons of many islands, unioned in a few vectorised calls (islands bucketed by piece
        count, padded; shapely releases the GIL there, so layers can go in parallel threads)."""
        idx = [int(i) for i in idx]
        need = np.array(sorted({i for i in idx if i not in self._poly}), dtype=int)
        if len(need):
            size = self._start[need + 1] - self._start[need]
            polys = np.empty(len(need), dtype=object)
            one = size == 1
            polys[one] = self.pieces[self._order[self._start[need[one]]]]
            # planes and pours (many pieces, or one of a pour's size): most pads drawn on them add
            # nothing, and a union with them costs many times one without
            many = (size > 16) | ((size > 1) & (self.piece_area_bounds()[1][need] >= POUR_MIN_MM2))
            for k in np.flatnonzero(many):
                m = self.pieces[self.members(need[k])]
                at = int(np.argmax(shapely.area(m)))
                big, rest = m[at], np.delete(m, at)
                shapely.prepare(big)
                polys[k] = shapely.union_all(
                    np.concatenate([[big], rest[~shapely.covers(big, rest)]])
                )
            bucket = np.ceil(np.log2(np.maximum(size, 1))).astype(int)
            for b in np.unique(bucket[~one & ~many]):
                rows = np.flatnonzero((bucket == b) & ~one & ~many)
                grid = np.full((len(rows), int(size[rows].max())), None, dtype=object)
                for r, k in enumerate(rows):
                    grid[r, : size[k]] = self.pieces[self.members(need[k])]
                polys[rows] = shapely.union_all(grid, axis=1)
            bad = ~shapely.is_valid(polys[one]) if one.any() else np.zeros(0, dtype=bool)
            if bad.any():  # a drawn region that crosses itself; unions come out valid
                at = np.flatnonzero(one)[bad]
                polys[at] = shapely.make_valid(polys[at])
            shapely.prepare(polys)
            self._poly.update(zip(need.tolist(), polys))
        return [self._poly[i] for i in idx]

    def island_area(self, i):
        return float(self.island(i).area)

    def island_areas(self):
        """Area of every island. An island of two valid pieces not unioned yet (a track and its
        pad, say) by inclusion-exclusion, |A u B| = |A| + |B| - |A n B|: one small overlay
        instead of a union of both outlines, several times dearer; the others from their unions
        (built once and kept)."""
        out = np.zeros(self.n_islands)
        size = np.diff(self._start)
        two = np.array(
            [k for k in np.flatnonzero(size == 2).tolist() if k not in self._poly], dtype=int
        )
        if len(two):
            a = self.pieces[self._order[self._start[two]]]
            b = self.pieces[self._order[self._start[two] + 1]]
            ok = shapely.is_valid(a) & shapely.is_valid(b)
            a, b = a[ok], b[ok]
            overlap = shapely.area(shapely.intersection(a, b))
            out[two[ok]] = shapely.area(a) + shapely.area(b) - overlap
            two = two[ok]
        rest = np.setdiff1d(np.arange(self.n_islands), two)
        if len(rest):
            out[rest] = shapely.area(np.array(self.island_polygons(rest), dtype=object))
        return out

    def piece_area_bounds(self):
        """Per island, (sum of its pieces' areas, largest piece's area): its area lies between.
        Worked out once (the pour test, the plane checks and the ground choice all ask),
        read-only."""
        if self._area_bounds is None:
            area = shapely.area(self.pieces)
            largest = np.zeros(self.n_islands)
            np.maximum.at(largest, self.piece_island, area)
            total = np.bincount(self.piece_island, weights=area, minlength=self.n_islands)
            for a in (total, largest):
                a.setflags(write=False)
            self._area_bounds = (total, largest)
        return self._area_bounds

    def islands_of(self, nets):
        """(index, polygon) of every island whose net is in `nets`."""
        idx = [i for i, n in enumerate(self.island_net) if n in nets]
        return list(zip(idx, self.island_polygons(idx)))

    def union_of(self, nets):
        """All copper of the given nets on this layer, as one geometry (cached)."""
        key = frozenset(nets)
        if key not in self._union:
            self._union[key] = disjoint_union(
                p for _, p in self.islands_of(key)
            )  # islands never touch
        return self._union[key]

    def islands_at(self, pts, distance=0.0, among=None):
        """Island index per point (-1 off copper); with distance > 0, within that distance of
        copper; with `among` (nets), on the islands of those nets only (-1 elsewhere: a point
        lies in one island at most, so the others need no exact test)."""
        out = np.full(len(pts), -1, dtype=int)
        if not len(pts) or not len(self.pieces):
            return out
        if distance > 0:
            q = self.tree.query(pts, predicate="dwithin", distance=distance)
        else:
            keep = None if among is None else self.piece_mask(among)
            q = touching(self.tree, self.pieces, np.asarray(pts), keep)
        out[q[0]] = self.piece_island[q[1]]
        return out

    def piece_mask(self, nets):
        """Per piece, whether its island's net is one of `nets` (kept per set of nets)."""
        key = frozenset(nets)
        mask = self._masks.get(key)
        if mask is None:
            island = np.array([n in key for n in self.island_net] + [False])
            mask = self._masks[key] = island[self.piece_island]
        return mask

    def net_copper(self, net):
        return self.union_of({net})


@dataclass
class Nets:
    layers: dict  # layer name -> LayerNets
    net_class: dict  # net -> ground | power | signal
    plane_nets: set
    hole_net: dict  # (drill file, hole index) -> net
    notes: list = field(default_factory=list)
    conflicts: list = field(default_factory=list)  # NetConflict: one copper, two net labels
    # two-terminal parts by the set of their two nets, and whether the data tells parts at all
    # (worked out once per board by checks/common.parts_bridging)
    two_pin_parts: tuple | None = None

    def is_signal(self, net):
        return self.net_class.get(net, "signal") == "signal"

    def plated_holes(self, board):
        """(x, y, radius, net, from, to) of every plated round hole whose net is known."""
        out = []
        for d in board.drills:
            for k, h in enumerate(d.holes):
                net = self.hole_net.get((d.file, k))
                if net and d.hole_plated[k]:
                    out.append((h[0], h[1], h[2] / 2, net, d.from_layer, d.to_layer))
        return out


def touching(tree, pieces, geoms, keep=None):
    """(query index, piece index) of each geometry touching or overlapping a piece: bounding boxes
    from the tree, then exact tests with the larger geometry of each pair prepared (a plane with
    thousands of antipads is never re-scanned for each pad that sits on it). keep: per piece,
    whether to look at it at all."""
    q = tree.query(geoms)
    if keep is not None:
        q = q[:, keep[q[1]]]
    if not q.shape[1]:
        return q
    counts = _VERTEX_COUNTS.get(tree)
    if counts is None:
        counts = _VERTEX_COUNTS[tree] = shapely.get_num_coordinates(tree.geometries)
    return q[:, intersects_pairs(geoms[q[0]], pieces[q[1]], nb=counts[q[1]])]


_VERTEX_COUNTS = weakref.WeakKeyDictionary()  # tree -> vertex count of each of its geometries


def _region_islands(piece_island, tree, pieces, regions):
    """Island of each dark region: that of the largest piece it meets (its own copper; a point on
    the region as drawn may fall in a clear cut-out holding another net's track)."""
    if not regions:
        return np.zeros(0, dtype=int)
    polys = np.array([r[0] for r in regions], dtype=object)
    out = _island_index(
        piece_island,
        tree,
        shapely.get_coordinates(shapely.point_on_surface(polys)).reshape(-1, 2),
    )
    reg, piece = tree.query(polys)  # boxes only: the exact test below stops at the first hit
    if len(reg):
        # per region, its candidates largest first (of equal ones, the later found first)
        order = np.lexsort((-np.arange(len(reg)), -shapely.area(pieces[piece]), reg))
        reg, piece = reg[order], piece[order]
        hit = _first_meeting(polys, pieces, reg, piece)
        out[reg[hit]] = piece_island[piece[hit]]
    return out


def _first_meeting(polys, pieces, reg, piece):
    """Position of the first candidate piece that meets its region, for each region that one meets
    (candidates grouped by region, in the order to try them). Tried in growing blocks, so that a
    region whose own copper comes first (nearly all) costs one exact test."""
    start = np.flatnonzero(np.r_[True, reg[1:] != reg[:-1]])
    end = np.r_[start[1:], len(reg)]
    found = []
    live, at, size = np.arange(len(start)), start.copy(), 1
    while len(live):
        stop = np.minimum(at + size, end[live])
        count = stop - at
        k = ranges(at, count)
        group = np.repeat(live, count)
        ok = shapely.intersects(pieces[piece[k]], polys[reg[k]])  # the pieces are prepared
        g, first = np.unique(group[ok], return_index=True)  # k ascends: the first hit of each
        found.append(k[ok][first])
        more = ~np.isin(live, g) & (stop < end[live])
        live, at, size = live[more], stop[more], size * 4
    return np.concatenate(found)


def _segment_islands(layer, piece_island, tree):
    """Island of each segment: that of the piece its own stroke drew (which holds the segment's
    middle), else of the piece its middle lies on (_island_index)."""
    s = layer.segments
    mid = np.column_stack([(s[:, 0] + s[:, 2]) / 2, (s[:, 1] + s[:, 3]) / 2])
    own = layer.segment_piece
    if own is None or len(own) != len(s):
        return _island_index(piece_island, tree, mid)
    out = np.full(len(s), -1, dtype=int)
    known = own >= 0
    out[known] = piece_island[own[known]]
    out[~known] = _island_index(piece_island, tree, mid[~known])
    return out


def _island_index(piece_island, tree, xy):
    """Island containing each point; nearest island for points that fall on no copper."""
    if len(xy) == 0:
        return np.zeros(0, dtype=int)
    pts = shapely.points(xy)
    out = np.full(len(xy), -1, dtype=int)
    cand = touching(tree, tree.geometries, pts)
    out[cand[0]] = piece_island[cand[1]]
    miss = np.nonzero(out < 0)[0]
    if len(miss):
        near = tree.query_nearest(pts[miss], all_matches=False)
        out[miss[near[0]]] = piece_island[near[1]]
    return out


FILL_OVERLAP = 1.6  # strokes covering an island this many times over are a pour, not tracks


def _fill_segments(layer, ln, seg_isl, pairs):
    """Segments of islands drawn as overlapping strokes (Eagle-style pours): their stroke area adds
    up to far more than the island's own area, which single tracks never do. Only islands with
    enough stroke area to qualify are unioned to find out."""
    s = layer.segments
    if not len(s) or not ln.n_islands:
        return np.zeros(len(s), dtype=bool)
    stroke = np.hypot(s[:, 2] - s[:, 0], s[:, 3] - s[:, 1]) * s[:, 4]
    per_island = np.bincount(seg_isl, weights=stroke, minlength=ln.n_islands)
    count = np.bincount(seg_isl, minlength=ln.n_islands)
    fill_island = np.zeros(ln.n_islands, dtype=bool)
    cand = (per_island > FILL_OVERLAP * 2.0) & (count >= 8)
    if cand.any():
        # an island is at least as large as its largest piece: a poured region with tracks on it is
        # ruled out without looking at overlaps
        total, largest = ln.piece_area_bounds()
        cand &= per_island > FILL_OVERLAP * largest
    if cand.any():
        # Bonferroni: union area >= sum of piece areas - sum of pairwise overlaps; islands
        # whose bound already rules a pour out (single tracks: pieces overlap only at their
        # ends) are not unioned. A pair overlaps by no more than its boxes do: islands that this
        # looser bound rules out already need no exact overlaps either
        a, b = pairs
        keep = cand[ln.piece_island[a]]
        a, b = a[keep], b[keep]
        box = _box_overlaps(ln, a, b)
        rough = total - np.bincount(ln.piece_island[a], weights=box, minlength=ln.n_islands)
        cand &= per_island > FILL_OVERLAP * rough
        keep = cand[ln.piece_island[a]]
        a, b = a[keep], b[keep]
        lower = total.copy()
        overlap = shapely.area(shapely.intersection(ln.pieces[a], ln.pieces[b]))
        lower -= np.bincount(ln.piece_island[a], weights=overlap, minlength=ln.n_islands)
        for i in np.nonzero(cand & (per_island > FILL_OVERLAP * lower))[0]:
            isl_area = ln.island_area(int(i))
            fill_island[i] = per_island[i] > FILL_OVERLAP * isl_area and isl_area > 2.0
    return fill_island[seg_isl]


def _box_overlaps(ln, a, b):
    """Per pair of pieces (a[k], b[k]), the area their bounding boxes share: at least their own
    overlap (a hair more, so that rounding never makes it less)."""
    bb = shapely.bounds(ln.pieces[np.concatenate([a, b])]).reshape(2, len(a), 4)
    w = np.minimum(bb[0, :, 2], bb[1, :, 2]) - np.maximum(bb[0, :, 0], bb[1, :, 0])
    h = np.minimum(bb[0, :, 3], bb[1, :, 3]) - np.maximum(bb[0, :, 1], bb[1, :, 1])
    return np.clip(w, 0, None) * np.clip(h, 0, None) * (1 + 1e-9) + 1e-12


def _pour_strokes(layer):
    """Strokes drawn along the edge of a dark region of their layer: a pour's outline drawn round
    its filled polygon (the older KiCad way). Pour copper, never a signal: a signal track crosses
    a region's edge, it does not follow it (a track inside a region's clear cut-out lies away
    from the region's own edge, so it stays a track)."""
    s = layer.segments
    if not len(s) or not layer.regions:
        return np.zeros(len(s), dtype=bool)
    xy, edge_region = outline_segments([r[0] for r in layer.regions])
    out = _along_region_edges(s, xy)  # nearly every one, where the writer drew them so
    rest = np.flatnonzero(~out)
    if not len(rest):
        return out
    edge_tree = shapely.STRtree(segment_lines(xy))
    ends = s[rest, :4].reshape(-1, 2, 2)
    n_reg = len(layer.regions)
    on_edge = None  # (stroke, region) keys whose three points all lie on that region's edge
    for pts in (ends[:, 0], ends[:, 1], ends.mean(axis=1)):
        pt, e = edge_tree.query(
            shapely.points(pts), predicate="dwithin", distance=POUR_STROKE_HAIR_MM
        )
        keys = np.unique(pt.astype(np.int64) * n_reg + edge_region[e])
        on_edge = keys if on_edge is None else np.intersect1d(on_edge, keys, assume_unique=True)
    out[rest[on_edge // n_reg]] = True
    return out


def _along_region_edges(s, edges):
    """Strokes (rows of s) drawn exactly from one end of a region's edge (a row of `edges`, see
    shapes.outline_segments) to the other, either way: all three of their points lie on that
    edge (the test of _pour_strokes, passed at once). Rows match byte for byte (a -0.0 only takes
    the long way), looked up by a hash of their bytes and then compared whole."""
    if not len(edges):
        return np.zeros(len(s), dtype=bool)
    want = np.ascontiguousarray(s[:, :4], dtype=np.float64)
    both = np.ascontiguousarray(np.concatenate([edges, edges[:, [2, 3, 0, 1]]]), dtype=np.float64)
    h_want, h_both = _row_hash(want), _row_hash(both)
    order = np.argsort(h_both, kind="stable")
    at = np.minimum(np.searchsorted(h_both[order], h_want), len(order) - 1)
    first = order[at]  # the first edge row of the stroke's hash, where there is one
    hashed = h_both[first] == h_want
    out = hashed & (want.view(np.uint64) == both[first].view(np.uint64)).all(axis=1)
    odd = np.flatnonzero(hashed & ~out)  # two different rows under one hash: compare them all
    if len(odd):
        out[odd] = np.isin(_row_keys(want[odd]), _row_keys(both))
    return out


_HASH_MIX = np.array(
    [0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9, 0xD6E8FEB86659FD93],
    dtype=np.uint64,
)


def _row_hash(a):
    """A 64-bit mix of each row's four floats' bits (wrapping products and sums)."""
    return (a.view(np.uint64) * _HASH_MIX).sum(axis=1, dtype=np.uint64)


def _row_keys(a):
    """Each row of four floats as one 32-byte key (rows compare equal when their bytes do)."""
    return np.ascontiguousarray(a, dtype=np.float64).view(np.dtype((np.void, 32))).ravel()


@dataclass
class NetConflict:
    """Copper joined into one net (touching, or through a plated hole) that carries another net's
    label too: a short in the released data, or a label the writer got wrong."""

    net: str  # the label most of the copper carries
    other: str  # the other label
    layer: str  # where the other label's copper joins it
    x: float
    y: float
    labels: int  # how many objects carry the other label there
    part: str | None = None  # a part whose own pads carry both labels there (a net tie, a jumper)


def _labelled_point(board, li, island, name, per_layer):
    """Where on an island an object carries the given label: a flash, a stroke or a region."""
    layer = board.copper[li]
    piece_island, _, seg_isl, fl_isl, _, _ = per_layer[layer.name]
    for k, (n, i) in enumerate(zip(layer.flash_net, fl_isl)):
        if n == name and i == island:
            return float(layer.flashes[k, 0]), float(layer.flashes[k, 1])
    for k, (n, i) in enumerate(zip(layer.segment_net, seg_isl)):
        if n == name and i == island:
            s = layer.segments[k]
            return float((s[0] + s[2]) / 2), float((s[1] + s[3]) / 2)
    c = layer.islands_found[3] if layer.islands_found else []
    for (poly, n, _), i in zip(layer.regions, c):
        if n == name and i == island:
            p = poly.representative_point()
            return p.x, p.y
    return None


def _tie_part(board, comp, per_layer, a, b):
    """A part with a pad on each label on one island (its pads joined by copper right there: a net
    tie or a jumper)."""
    for li, island in comp:
        layer = board.copper[li]
        fl_isl = per_layer[layer.name][3]
        parts = {a: set(), b: set()}
        for n, i, part in zip(layer.flash_net, fl_isl, layer.flash_part):
            if part and i == island and n in parts:
                parts[n].add(part[0])
        both = sorted(parts[a] & parts[b])
        if both:
            return both[0]
    return None


def _conflicts(board, comp, votes, per_layer, name, tally):
    """One NetConflict per other label in a component: at the island where that label is
    strongest."""
    out = []
    for other in sorted(n for n in tally if n != name):
        li, island = max(
            (node for node in comp if votes.get(node, {}).get(other)),
            key=lambda node: (votes[node][other], -node[0], -node[1]),
        )
        at = _labelled_point(board, li, island, other, per_layer)
        if at is None:  # a netlist point only
            b = shapely.bounds(
                board.copper[li].pieces[per_layer[board.copper[li].name][0] == island]
            )
            at = (
                float((b[:, 0].min() + b[:, 2].max()) / 2),
                float((b[:, 1].min() + b[:, 3].max()) / 2),
            )
        out.append(
            NetConflict(
                name,
                other,
                board.copper[li].name,
                at[0],
                at[1],
                int(votes[(li, island)][other]),
                _tie_part(board, comp, per_layer, name, other),
            )
        )
    return out


def classify(names, user_cfg):
    cls = {}
    g_globs = user_cfg.get("ground_nets", []) if user_cfg else []
    p_globs = user_cfg.get("power_nets", []) if user_cfg else []
    for n in names:
        if any(fnmatch.fnmatchcase(n, g) for g in g_globs):
            cls[n] = "ground"
        elif any(fnmatch.fnmatchcase(n, g) for g in p_globs):
            cls[n] = "power"
        elif GROUND_RE.match(leaf(n)):
            cls[n] = "ground"
        elif POWER_RE.match(leaf(n)):
            cls[n] = "power"
        else:
            cls[n] = "signal"
    return cls


def net_codes(names, keep=None):
    """(the distinct names that `keep` accepts, all of them without it, sorted; per name, its
    position among those, -1 for any other): names as small integers that numpy sorts and counts."""
    uniq = sorted(n for n in set(names) if keep is None or keep(n))  # each name asked once
    code = dict(zip(uniq, range(len(uniq))))
    return uniq, np.fromiter(map(code.get, names, itertools.repeat(-1)), int, len(names))


def _tally(islands, names, weight):
    """(island, net, votes) for each net the named objects give an island, `weight` votes per
    object (counted in numpy, not one by one)."""
    uniq, c = net_codes(names, bool)
    if not uniq:
        return []
    ok = c >= 0
    pair, count = np.unique(np.asarray(islands)[ok] * len(uniq) + c[ok], return_counts=True)
    return [
        (p // len(uniq), uniq[p % len(uniq)], weight * k)
        for p, k in zip(pair.tolist(), count.tolist())
    ]


def _layer_votes(layer, seg_isl, fl_isl, reg_isl):
    """The net labels one layer's own objects give its islands, (island, net, votes) in turn:
    segments', flashes', then named pours' (which speak for their island)."""
    return (
        _tally(seg_isl, layer.segment_net, 1)
        + _tally(fl_isl, layer.flash_net, 1)
        + _tally(reg_isl, [r[1] for r in layer.regions], 5)
    )


def layer_islands(layer):
    """Islands of one layer's pieces, the island under each segment, flash and region, the
    strokes that outline a pour (_pour_strokes) and the net labels the layer's own objects give
    its islands (_layer_votes); kept on the layer (as layer.islands_found, with its pieces' tree
    as layer.piece_tree), so that the import can work them out for each layer as it reads it, on
    either core."""
    pieces = layer.pieces
    shapely.prepare(pieces)  # point and hole tests below and in later stages
    tree = shapely.STRtree(pieces)
    piece_island, count, pairs = touch_components(pieces, tree)
    seg_isl = fl_isl = reg_isl = np.zeros(0, dtype=int)
    votes = []
    if count:
        seg_isl = _segment_islands(layer, piece_island, tree)
        fl_isl = _island_index(piece_island, tree, layer.flashes[:, :2])
        reg_isl = _region_islands(piece_island, tree, pieces, layer.regions)
        votes = _layer_votes(layer, seg_isl, fl_isl, reg_isl)
    strokes = _pour_strokes(layer)
    layer.islands_found = (piece_island, seg_isl, fl_isl, reg_isl, count, pairs, strokes, votes)
    layer.piece_tree = tree


def _layer_islands(layer):
    """layer_islands' results, worked out here unless the import did (a tree rebuilt where the layer
    came from another process, which sends no tree)."""
    if layer.islands_found is None:
        layer_islands(layer)
    elif layer.piece_tree is None:
        shapely.prepare(layer.pieces)
        layer.piece_tree = shapely.STRtree(layer.pieces)
    piece_island, seg_isl, fl_isl, reg_isl, count, pairs, _, votes = layer.islands_found
    return piece_island, layer.piece_tree, seg_isl, fl_isl, count, pairs, votes


def build_nets(board, user_cfg=None, runner=SERIAL):
    """Nets of the board: islands per layer joined through plated holes, named and classed; the
    per-layer geometry in the runner's pool (shapely's vectorised calls release the GIL)."""
    size = board.track_segments
    with runner.threads(size) as pool:
        found = list(pool.map(_layer_islands, board.copper))
    g, votes, per_layer = _island_graph(board, found)
    with runner.threads(size) as pool:
        hole_nodes, tied = _join_through_holes(board, g, per_layer, pool)
    _netlist_votes(board, votes, per_layer)
    node_net, unnamed, conflicts = _name_components(board, g, votes, per_layer)
    _generated_names(board, per_layer, unnamed, node_net)
    layers = _layer_nets(board, per_layer, node_net, tied)
    net_class = classify(sorted(set(node_net.values())), user_cfg)
    wanted = _ground_candidates(layers, net_class)
    # one job per layer (its pours, planes and ground candidates), the costliest first: a board's
    # layers differ several times over in the copper they union, and few layers balance badly
    order = sorted(
        range(len(board.copper)), key=lambda li: -_union_work(layers[board.copper[li].name])
    )
    with runner.threads(size) as pool:
        done = list(
            pool.map(
                lambda li: _pours_and_planes(board, layers, per_layer, li, net_class, wanted),
                order,
            )
        )
    found = [done[order.index(li)] for li in range(len(board.copper))]
    big = set().union(*(b for b, _, _ in found))
    poured = set().union(*(p for _, p, _ in found))
    notes = _ground_and_power(net_class, big, [g for _, _, g in found] if wanted else None)
    notes += _poured_nets(net_class, poured)
    plane_nets = {n for n, c in net_class.items() if c in ("ground", "power")}
    hole_net = {k: node_net[v] for k, v in hole_nodes.items()}
    for note in notes:
        board.assume(note)
    return Nets(layers, net_class, plane_nets, hole_net, notes, conflicts)


def _island_graph(board, found):
    """A node per island of every layer, and the net labels its own objects give it."""
    g = nx.Graph()
    per_layer = {}
    votes = defaultdict(Counter)
    for li, (layer, (piece_island, tree, seg_isl, fl_isl, count, pairs, own)) in enumerate(
        zip(board.copper, found)
    ):
        for island, net, k in own:  # worked out where the layer was read (layer_islands)
            votes[(li, island)][net] += k
        g.add_nodes_from((li, int(i)) for i in range(count))
        per_layer[layer.name] = (piece_island, tree, seg_isl, fl_isl, count, pairs)
    return g, votes, per_layer


def _hole_shapes(drill):
    holes = shapely.buffer(
        shapely.points(drill.holes[:, :2]), np.maximum(drill.holes[:, 2] / 2, 0.01)
    )
    slots = []
    if len(drill.slots):
        lines = shapely.linestrings([[(s[0], s[1]), (s[2], s[3])] for s in drill.slots])
        slots = list(shapely.buffer(lines, drill.slots[:, 4] / 2))
    return np.array(list(holes) + slots, dtype=object)


def _join_through_holes(board, g, per_layer, pool):
    """Edges between the islands a plated hole passes through (within its span); returns the first
    island of each hole, and per layer the islands with a hole in them (not floating). Each layer
    is looked at in the pool (shapely lets go of the GIL), one thread per layer: GEOS builds a
    prepared piece's indexes at its first use, and two threads must never build them together.
    The results are taken in file, then layer order."""
    layer_pos = {c.name: i for i, c in enumerate(board.copper)}
    geoms = [_hole_shapes(drill) for drill in board.drills]
    work = []  # (drill position, layer position)
    for k, drill in enumerate(board.drills):
        for ln in range(drill.from_layer, drill.to_layer + 1):
            li = layer_pos.get(f"L{ln}")
            if li is not None and per_layer[f"L{ln}"][4] and len(geoms[k]):
                work.append((k, li))
    layers = sorted({li for _, li in work})

    def on_layer(li):
        return {k: _holes_on_layer(board, per_layer, geoms[k], k, li) for k, m in work if m == li}

    by_layer = dict(zip(layers, pool.map(on_layer, layers)))
    found = [by_layer[li][k] for k, li in work]
    tied = defaultdict(set)
    hits_of = defaultdict(lambda: defaultdict(list))  # drill -> hole -> islands, layer by layer
    for (k, li), (on_pads, q_hole, q_island) in zip(work, found):
        tied[li].update(on_pads)
        hits = hits_of[k]
        for h, isl in zip(q_hole, q_island):
            if not hits[h] or hits[h][-1] != (li, int(isl)):
                hits[h].append((li, int(isl)))
    hole_nodes = {}
    for k, hits in hits_of.items():
        drill = board.drills[k]
        for h, nodes in hits.items():
            hole_nodes[(drill.file, int(h))] = nodes[0]
            g.add_edges_from(zip(nodes[:-1], nodes[1:]))
    return hole_nodes, tied


def _holes_on_layer(board, per_layer, geoms, k, li):
    """(islands a hole centre lands on, and the hole, island pairs of every plated hole that meets
    copper) of drill file k (its hole shapes: geoms) on layer li."""
    drill, layer = board.drills[k], board.copper[li]
    piece_island, tree = per_layer[layer.name][:2]
    centres = shapely.points(drill.holes[:, :2])
    on_pads = piece_island[touching(tree, layer.pieces, centres)[1]].tolist()
    plated = np.concatenate([drill.hole_plated, drill.slot_plated])
    if not plated.any():
        return on_pads, [], []
    q = touching(tree, layer.pieces, geoms)
    q = q[:, plated[q[0]]]  # non-plated holes join nothing
    return on_pads, q[0].tolist(), piece_island[q[1]].tolist()


def _netlist_votes(board, votes, per_layer):
    """Each netlist point labels the islands it lands on, on the side it is reached from (both
    sides: a through-hole pad)."""
    last = len(board.copper) - 1
    for p in board.netlist:
        sides = (0, last) if p.layers is None else ((0,) if p.layers[0] == 1 else (last,))
        for li in sides:
            piece_island, tree, _, _, count, _ = per_layer[board.copper[li].name]
            if not count:
                continue
            hit = touching(tree, board.copper[li].pieces, np.array([shapely.Point(p.x, p.y)]))[1]
            for isl in set(piece_island[hit].tolist()):
                votes[(li, int(isl))][p.net] += 3


def _name_components(board, g, votes, per_layer):
    """Each joined group of islands takes the label most of its objects carry; groups with no label
    are returned for generated names; groups with two labels give NetConflicts."""
    comps = sorted((sorted(c) for c in nx.connected_components(g)), key=lambda c: c[0])
    node_net, unnamed, conflicts = {}, [], []
    for comp in comps:
        tally = Counter()
        for node in comp:
            tally.update(votes.get(node, {}))
        if not tally:
            unnamed.append(comp)
            continue
        name = min(tally.items(), key=lambda kv: (-kv[1], kv[0]))[0]
        for node in comp:
            node_net[node] = name
        if len(tally) > 1:
            conflicts.extend(_conflicts(board, comp, votes, per_layer, name, tally))
    return node_net, unnamed, conflicts


def _generated_names(board, per_layer, unnamed, node_net):
    """Stable generated names: ordered by layer and position (the centre of an island's bounds) of
    the group's first island in that order, whatever order the pieces were drawn in."""
    centre = {}  # layer position -> per island, the centre of its bounds (all islands at once)
    for li, layer in enumerate(board.copper):
        piece_island, count = per_layer[layer.name][0], per_layer[layer.name][4]
        b = shapely.bounds(layer.pieces)
        lo = np.full((count, 2), np.inf)
        hi = np.full((count, 2), -np.inf)
        np.minimum.at(lo, piece_island, b[:, :2])
        np.maximum.at(hi, piece_island, b[:, 2:])
        centre[li] = np.round((lo + hi) / 2, 3).tolist()

    def key(comp):
        return min((li, *centre[li][i]) for li, i in comp)

    for k, comp in enumerate(sorted(unnamed, key=key)):
        for node in comp:
            node_net[node] = f"UNNAMED_{k + 1:04d}"


def _layer_nets(board, per_layer, node_net, tied):
    layers = {}
    for li, layer in enumerate(board.copper):
        piece_island, tree, seg_isl, fl_isl, count, _ = per_layer[layer.name]
        ln = LayerNets(layer.name, layer.pieces, piece_island, [None] * count, [], [], None, tree)
        ln.island_net = [node_net[(li, i)] for i in range(count)]
        ln.segment_net = [ln.island_net[i] for i in seg_isl]
        ln.flash_net = [ln.island_net[i] for i in fl_isl]
        ln.island_tied[list(tied[li] | set(fl_isl.tolist()))] = True
        layers[layer.name] = ln
    return layers


def _pours_and_planes(board, layers, per_layer, li, net_class, wanted=None):
    """Pour segments of one layer; the nets of its plane-sized islands, of its poured ones and
    (wanted: see _ground_candidates) the areas of its islands that may be the ground's."""
    layer = board.copper[li]
    ln = layers[layer.name]
    _, _, seg_isl, _, _, pairs = per_layer[layer.name]
    ln.segment_fill = _fill_segments(layer, ln, seg_isl, pairs) | layer.islands_found[6]
    signal = {n for n, c in net_class.items() if c == "signal"}  # only these can be re-classed
    return (
        _nets_with_island(ln, PLANE_AREA_FRACTION * (board.outline.area or 1.0)),
        _nets_with_island(ln, POUR_MIN_MM2, signal),
        _candidate_areas(ln, *wanted) if wanted else [],
    )


def _union_work(ln):
    """About how much copper a layer's islands union: the vertices of its pieces in islands of
    more than one piece."""
    shared = np.bincount(ln.piece_island, minlength=ln.n_islands)[ln.piece_island] > 1
    return int(shapely.get_num_coordinates(ln.pieces[shared]).sum()) if shared.any() else 0


def _nets_with_island(ln, limit, among=None):
    """Nets of the islands of one layer at least `limit` mm2 large (an island's area lies between
    its largest piece's and its pieces' sum: only islands between the two are unioned)."""
    upper, lower = ln.piece_area_bounds()
    return {
        ln.island_net[i]
        for i in np.flatnonzero(upper >= limit)
        if (among is None or ln.island_net[i] in among)
        and (lower[i] >= limit or ln.island_area(int(i)) >= limit)
    }


def _poured_nets(net_class, poured):
    """Signal-named nets with a poured island: power (a signal track never grows that large)."""
    found = sorted(n for n in poured if net_class[n] == "signal")
    for n in found:
        net_class[n] = "power"
    if not found:
        return []
    shown = ", ".join(found[:8]) + (f" and {len(found) - 8} more" if len(found) > 8 else "")
    return [
        f"{len(found)} net(s) with a poured island of {POUR_MIN_MM2:g} mm2 or more are treated as "
        f"power, not as signals: {shown}"
    ]


def _ground_candidates(layers, net_class):
    """When no net is named like a ground (and there is copper): (per net, the sum of its pieces'
    areas; the largest of the nets' least areas). Only a net whose sum reaches that can have the
    most copper, so only its islands are unioned (_candidate_areas). None otherwise."""
    if any(c == "ground" for c in net_class.values()) or not any(
        ln.n_islands for ln in layers.values()
    ):
        return None
    upper, lower = Counter(), Counter()
    for ln in layers.values():
        up, lo = ln.piece_area_bounds()
        for n, u, lw in zip(ln.island_net, up.tolist(), lo.tolist()):
            upper[n] += u
            lower[n] += lw
    return upper, max(lower.values())


def _candidate_areas(ln, upper, best):
    """(net, area) of each island of one layer whose net may have the most copper."""
    idx = [i for i, n in enumerate(ln.island_net) if upper[n] >= best]
    return [(ln.island_net[i], a) for i, a in zip(idx, shapely.area(ln.island_polygons(idx)))]


def _ground_by_copper(candidate_areas):
    """The net with the most copper, and its area, from each layer's _candidate_areas (added up in
    layer order)."""
    area_by_net = Counter()
    for found in candidate_areas:
        for n, a in found:
            area_by_net[n] += a
    gnd = max(area_by_net.items(), key=lambda kv: (kv[1], kv[0]))[0]
    return gnd, area_by_net[gnd]


def _ground_and_power(net_class, big, candidate_areas=None):
    """Ground by copper area when no net is named like one (candidate_areas: each layer's
    _candidate_areas, given then); signal nets with a plane-sized island become power nets.
    Returns the notes that say so."""
    notes = []
    if candidate_areas is not None:
        gnd, area = _ground_by_copper(candidate_areas)
        net_class[gnd] = "ground"
        notes.append(
            f"no net is named like a ground: {gnd}, the net with the most copper "
            f"({area:.0f} mm2), is taken as ground"
        )
    for n in sorted(big):
        if net_class[n] == "signal":
            net_class[n] = "power"
            notes.append(
                f"net {n} has a plane-sized island (>= {PLANE_AREA_FRACTION:.0%} of the board) "
                "and is treated as a power plane"
            )
    return notes
