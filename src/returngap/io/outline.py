"""The board outline: closed loops from profile and mechanical Gerbers, and the choice among them.

A mechanical layer may hold more than the board: a break-away frame joined by tabs, a whole
drawing sheet, dimension lines. Every candidate file's strokes are welded at their ends, noded
and split into faces; each face's outer ring and each connected figure's outer ring is a
candidate loop. The loop chosen is the smallest one that holds nearly all of the copper, with an
area not far from the copper's own extent; loops nested one level inside it that hold no copper
are cut-outs.
"""

import re
from dataclasses import dataclass
from pathlib import PurePosixPath

import numpy as np
import shapely
from gerbonara import graphic_objects as go
from gerbonara.utils import Inch

from returngap.errors import InputError
from returngap.geometry import shapes
from returngap.io.gerber import arc_points_mm, parse_gerber
from returngap.model.board import Problem

__all__ = [
    "CopperSample",
    "Candidates",
    "Loops",
    "OutlineChoice",
    "choose",
    "loops_of",
    "copper_sample",
    "fit",
    "pick_outline",
    "read_candidates",
]

WELD_MM = 0.005  # stroke ends closer than this are one point (writers round differently)
MIN_CONTAINED = 0.95  # share of the copper area an outline must hold (our own judgement, no source)
DRAWING_RANK = 5  # candidates of this rank are mechanical drawing layers, not named as the outline
NEAR_BEST = 0.005  # a loop within this share of the best-holding loop holds "all" the copper (same)
MAX_AREA_RATIO = 3.0  # outline area / extent of the copper inside it (our own judgement, no source)


@dataclass
class CopperSample:
    """Each copper piece as a point on its surface, with its area and bounding box: enough to test
    containment and to measure the extent of the copper inside a loop."""

    xy: np.ndarray
    area: np.ndarray
    boxes: np.ndarray
    pieces: np.ndarray

    @property
    def total(self):
        return float(self.area.sum()) or 1.0

    def covered(self, pts):
        """Per point: does copper of any layer lie there?"""
        if not len(self.pieces):
            return np.zeros(len(pts), dtype=bool)
        if getattr(self, "_tree", None) is None:
            self._tree = shapely.STRtree(self.pieces)
        hit = np.zeros(len(pts), dtype=bool)
        hit[self._tree.query(pts, predicate="intersects")[0]] = True
        return hit


def copper_sample(layers):
    pieces = np.concatenate(
        [c.pieces for c in layers if len(c.pieces)] or [np.zeros(0, dtype=object)]
    )
    if not len(pieces):
        return CopperSample(np.zeros((0, 2)), np.zeros(0), np.zeros((0, 4)), pieces)
    return CopperSample(
        shapely.get_coordinates(shapely.point_on_surface(pieces)),
        shapely.area(pieces),
        shapely.bounds(pieces),
        pieces,
    )


@dataclass
class Loops:
    """The closed figures drawn in one file."""

    faces: list  # polygons between the noded strokes (holes included, as faces of their own)
    figures: list  # each connected figure's filled outer ring


def _strokes(g, tol):
    out = []
    for obj in g.objects:
        k = 25.4 if obj.unit == Inch else 1.0
        if isinstance(obj, go.Line):
            out.append([(obj.x1 * k, obj.y1 * k), (obj.x2 * k, obj.y2 * k)])
        elif isinstance(obj, go.Arc):
            out.append(arc_points_mm(obj, k, tol))
        elif isinstance(obj, go.Region):
            pts = shapes.ring_points(obj.outline, obj.arc_centers or [], tol, k)
            if len(pts) > 2:
                out.append(list(pts) + [pts[0]])
    return [s for s in out if len(s) >= 2 and s[0] != s[-1] or len(s) > 3]


def _weld(strokes):
    """Move stroke ends that lie within WELD_MM of each other onto their mean point."""
    ends = np.array([p for s in strokes for p in (s[0], s[-1])], dtype=float)
    if not len(ends):
        return strokes
    roots = shapes.near_clusters(ends, WELD_MM)
    sums = np.zeros((len(ends), 2))
    np.add.at(sums, roots, ends)
    mean = sums / np.maximum(np.bincount(roots, minlength=len(ends)), 1)[:, None]
    out = []
    for k, s in enumerate(strokes):
        s = [tuple(p) for p in s]
        s[0], s[-1] = tuple(mean[roots[2 * k]]), tuple(mean[roots[2 * k + 1]])
        out.append(s)
    return out


def loops_of(g, tol):
    """Faces and figures of one profile or mechanical Gerber; None when it draws no closed loop."""
    strokes = _strokes(g, tol)
    if not strokes:
        return None
    lines = np.array([shapely.LineString(s) for s in _weld(strokes)], dtype=object)
    lines = lines[shapely.length(lines) > 0]
    # snap-rounding on a 1 um grid nodes the strokes, T-junctions included
    noded = shapely.union_all(lines, grid_size=0.001)
    faces = [
        p for p in shapely.get_parts(shapely.polygonize(shapely.get_parts(noded))) if p.area > 1e-6
    ]
    if not faces:
        return None
    merged = shapely.union_all(faces, grid_size=0.001)
    figures = [
        shapely.Polygon(p.exterior) for p in shapely.get_parts(merged) if p.geom_type == "Polygon"
    ]
    return Loops(faces, figures)


def _contained(sample, poly):
    if not len(sample.xy):
        return 0.0, np.zeros(0, dtype=bool)
    inside = shapely.contains_xy(poly, sample.xy[:, 0], sample.xy[:, 1])
    return float(sample.area[inside].sum() / sample.total), inside


def fit(sample, poly):
    """(share of the copper area inside, outline area / extent of that copper)."""
    if not len(sample.xy):
        return 0.0, float("inf")
    share, inside = _contained(sample, poly)
    b = sample.boxes[inside]
    pts = np.concatenate([b[:, [0, 1]], b[:, [2, 1]], b[:, [2, 3]], b[:, [0, 3]]])
    hull = _hull(pts)
    return share, (poly.area / hull.area if hull.area > 0 else float("inf"))


def _hull(pts):
    """The convex hull of an (n, 2) array of points."""
    return shapes.points_hull(pts) if len(pts) >= 3 else shapely.Polygon()


def _cutouts(shell, loops_list, sample):
    """Faces inside the shell with no copper of any layer at their interior point: cut-outs. (A face
    inside a cut-out is board again and holds copper; a part outline drawn over a plane holds the
    plane's copper: both stay.)"""
    faces = [
        f
        for loops in loops_list
        for f in loops.faces
        if f.area < shell.area * 0.999 and shell.contains(f.representative_point())
    ]
    if not faces:
        return []
    pts = shapely.point_on_surface(np.array(faces, dtype=object))
    return [f for f, hit in zip(faces, sample.covered(pts)) if not hit]


def _faces_inside(loops, shell):
    pts = shapely.point_on_surface(np.array(loops.faces, dtype=object))
    return int(
        shapely.contains_xy(
            shell, shapely.get_coordinates(pts)[:, 0], shapely.get_coordinates(pts)[:, 1]
        ).sum()
    )


@dataclass
class OutlineChoice:
    polygon: object
    file: str | None
    why: str
    contained: float
    area_ratio: float


def choose(candidates, sample):
    """candidates: [(file name, Loops, rank, object count)], rank lower = more trusted source.
    Of the loops with a plausible area that hold nearly as much copper as the best one (and at least
    MIN_CONTAINED), the smallest wins; ties go to the more trusted source, then the file that draws
    fewest other figures inside the loop. None when nothing fits."""
    fits = []
    for name, loops, rank, n_objects in candidates:
        seen = set()
        for shell in loops.figures + [shapely.Polygon(f.exterior) for f in loops.faces]:
            key = round(shell.area, 3)
            if key in seen or shell.area <= 0:
                continue
            seen.add(key)
            share, ratio = fit(sample, shell)
            if share >= MIN_CONTAINED and ratio <= MAX_AREA_RATIO:
                fits.append((shell.area, rank, n_objects, name, shell, share, ratio))
    if not fits:
        return None
    # fiducials and film marks sit outside the board: the loop that holds a few of them more is the
    # frame, not the board; a loop inside the board holds visibly less
    best_share = max(f[5] for f in fits)
    fits = [f for f in fits if f[5] >= best_share - NEAR_BEST]
    smallest = min(f[0] for f in fits)
    # the same loop drawn on several layers (assembly drawings repeat the outline): the most trusted
    # source, then the plainest drawing (fewest faces inside the loop: part outlines, notes)
    same = [f for f in fits if f[0] <= smallest * 1.005]
    loops_of_file = {n: lp for n, lp, _, _ in candidates}
    _, _, _, name, shell, share, ratio = min(
        same, key=lambda f: (f[1], _faces_inside(loops_of_file[f[3]], f[4]), f[0], f[3])
    )
    rank = min(r for n, _, r, _ in candidates if n == name)
    same_file = [lp for n, lp, _, _ in candidates if n == name]
    # a drawing layer's empty faces are part outlines and keep-outs as often as cut-outs
    cuts = _cutouts(shell, same_file, sample) if rank <= DRAWING_RANK - 1 else []
    poly = shell.difference(shapely.union_all(cuts)) if cuts else shell
    why = (
        f"the smallest closed loop holding {share:.1%} of the copper"
        + (f", {len(cuts)} cut-out(s)" if cuts else "")
        + ("; a drawing layer, so no cut-outs taken from it" if rank >= DRAWING_RANK else "")
    )
    return OutlineChoice(poly, name, why, share, ratio)


def _profile_candidates(roles, bf, texts, notes, parsed_cache):
    """Outline candidates, most trusted first: (file, rank, parsed Gerber)."""
    ranked = []
    for name, role in roles.items():
        if role.kind == "profile":
            rank = {"stackup file": 0, "X2 attribute": 1, "job file": 2}.get(role.source, 3)
            if rank == 3 and not OUTLINE_NAME_RE.search(PurePosixPath(name).name):
                rank = 5  # the name rules call every mechanical layer an outline
            ranked.append((rank, name))
        elif role.kind == "other" and MECHANICAL_NAME_RE.search(PurePosixPath(name).name):
            # a layer named as the outline before a drawing layer that may also show it
            ranked.append((4 if OUTLINE_NAME_RE.search(PurePosixPath(name).name) else 5, name))
    by_name = {f.name: f for f in bf.fab}
    out = []
    for rank, name in sorted(ranked):
        if name not in parsed_cache:
            try:
                parsed_cache[name] = parse_gerber(by_name[name], texts[name], notes)
            except InputError as e:
                if rank < 4:
                    raise
                notes.append(f"{name}: not usable as an outline ({e.message})")
                parsed_cache[name] = None
        if parsed_cache[name] is not None:
            out.append((name, rank, parsed_cache[name]))
    return out


OUTLINE_NAME_RE = re.compile(
    r"(\.gko|\.gml|edge[_.-]?cuts|outline|profile|dimension|contour)", re.I
)


MECHANICAL_NAME_RE = re.compile(
    r"(\.gm\d+|\.gko|\.gml|edge[_.-]?cuts|outline|profile|dimension|mech)", re.I
)


@dataclass
class Candidates:
    """The profile and mechanical files, read before the copper is (their reading needs none of
    it): (file, loops, rank, object count) of each that draws a closed loop, whether the stackup
    file names one, every file tried, the notes their reading gave, and an error to raise when
    the outline is chosen."""

    looked: list
    user: bool
    tried: list
    notes: list
    error: Exception | None = None


def read_candidates(roles, bf, texts, tol):
    """Every outline candidate file parsed and its loops found (the stackup file's own when it
    names one)."""
    notes = []
    try:
        cands = _profile_candidates(roles, bf, texts, notes, {})
        user = [c for c in cands if c[1] == 0]
        looked = []
        for name, rank, g in user or cands:
            loops = loops_of(g, tol)
            if loops is not None:
                looked.append((name, loops, rank, len(g.objects)))
    except Exception as e:  # raised where the outline is chosen, as if read there
        return Candidates([], False, [], notes, e)
    return Candidates(looked, bool(user), [n for n, _, _ in cands], notes)


def pick_outline(candidates, layers, notes, problems):
    """The board outline (see outline.py) and where it came from, from the candidates read by
    read_candidates. A profile the user names is used as named; when nothing fits, the copper's
    own extent stands in, stated."""
    sample = copper_sample(layers)
    notes.extend(candidates.notes)
    if candidates.error is not None:
        raise candidates.error
    looked, user = candidates.looked, candidates.user
    if looked and not len(sample.xy):  # only negative copper: nothing to test a loop against yet
        name, loops = looked[0][0], looked[0][1]
        return (
            max(loops.figures, key=lambda p: p.area),
            name,
            "the most trusted profile file, as drawn (no positive copper to test it against)",
        )
    if user and looked:
        name, loops = looked[0][0], looked[0][1]
        shell = max(loops.figures, key=lambda p: p.area)
        share, ratio = fit(sample, shell)
        if share < MIN_CONTAINED or ratio > MAX_AREA_RATIO:
            problems.append(
                Problem(
                    name,
                    f"the outline the stackup file names holds {share:.0%} of the copper "
                    f"and is {ratio:.1f} times the copper's extent",
                )
            )
        cuts = _cutouts(shell, [loops], sample)
        poly = shell.difference(shapely.union_all(cuts)) if cuts else shell
        why = "named as the profile in the stackup file" + (
            f", {len(cuts)} cut-out(s)" if cuts else ""
        )
        return poly, name, why
    choice = choose(looked, sample)
    if choice is not None:
        return choice.polygon, choice.file, choice.why
    pts = np.vstack(
        [shapely.get_coordinates(shapely.convex_hull(c.pieces)) for c in layers if len(c.pieces)]
        or [np.zeros((0, 2))]
    )
    hull = _hull(pts)
    tried = ", ".join(candidates.tried) or "none"
    notes.append(
        f"no closed outline holds the copper (files tried: {tried}); board outline taken as the "
        "convex hull of all copper"
    )
    return hull, None, "the convex hull of all copper (no outline file fits)"
