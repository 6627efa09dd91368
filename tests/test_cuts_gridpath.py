"""The numpy cut intervals against GEOS, and the grid way against geodesics that follow from
geometry."""

import math

import numpy as np
import pytest
import shapely
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from returngap.geometry.cuts import cut_intervals, ring_edges
from returngap.geometry.gridpath import window_path


def _geos_pieces(poly, origin, u, lo, hi):
    o, u = np.asarray(origin), np.asarray(u)
    cut = shapely.LineString([o + lo * u, o + hi * u])
    out = []
    for part in shapely.get_parts(cut.intersection(poly)):
        if part.geom_type == "LineString" and part.length > 1e-12:
            t = (np.asarray(part.coords) - o) @ u
            out.append((float(t.min()), float(t.max())))
    return sorted(out)


# a polygon with a hole and a notch, cut at random: the same pieces as shapely's (GEOS) intersection
NOTCHED = shapely.Polygon(
    [(0, 0), (10, 0), (10, 6), (6, 6), (6, 3), (4, 3), (4, 6), (0, 6)],
    [[(1, 1), (3, 1), (3, 2), (1, 2)]],
)


@settings(max_examples=200, deadline=None)
@given(st.floats(-2, 12), st.floats(-2, 8), st.floats(0, 2 * math.pi))
def test_cut_intervals_match_geos(x, y, angle):
    u = (math.cos(angle), math.sin(angle))
    edges = ring_edges(NOTCHED)
    off = (edges.reshape(-1, 2) - (x, y)) @ (-u[1], u[0])
    # a cut along an edge: GEOS counts the edge (boundary) as a piece, the parity rule does
    # not (no area)
    assume(not (np.abs(off.reshape(-1, 2)) < 1e-9).all(axis=1).any())
    k, t1, t2 = cut_intervals(edges, [(x, y)], [u], -20.0, 20.0)
    assert (k == 0).all()
    got = sorted(zip(t1.tolist(), t2.tolist()))
    want = _geos_pieces(NOTCHED, (x, y), u, -20.0, 20.0)
    assert len(got) == len(want)
    for a, b in zip(got, want):
        assert a == pytest.approx(b, abs=1e-9)


def test_cut_through_a_vertex_counts_once():
    # a horizontal cut through the apex of a diamond touches it (no piece); one through its middle
    # crosses 2 wide (geometry)
    diamond = shapely.Polygon([(0, -1), (1, 0), (0, 1), (-1, 0)])
    k, t1, t2 = cut_intervals(ring_edges(diamond), [(-5, 1), (-5, 0)], [(1, 0), (1, 0)], -10, 10)
    assert k.tolist() == [1] and (t2 - t1).tolist() == pytest.approx([2.0])


class _Plane:
    """Free copper = outline minus voids, with an exact clear-sight test (what the gap scan
    passes)."""

    def __init__(self, outline, voids):
        self.outline, self.voids = outline, np.array(voids, dtype=object)
        self.shrunk = shapely.buffer(self.voids, -0.005, quad_segs=2)

    def passable(self, segs):
        ok = shapely.covers(self.outline, segs)
        for v in self.shrunk:
            ok &= ~shapely.intersects(v, segs)
        return ok


def test_way_round_a_wall_is_the_two_piece_geodesic():
    # a wall from y = -3 to 3 at x = 0 (0.2 wide): the geodesic from (-1, 0) to (1, 0) bends at the
    # wall's corners (1, 3)-ish: |(-1,0)-(-0.1,3)| + 0.2 + |(0.1,3)-(1,0)| (geometry)
    wall = shapely.box(-0.1, -3, 0.1, 3)
    plane = _Plane(shapely.box(-20, -20, 20, 20), [wall])
    pa, pb = shapely.Point(-1, 0), shapely.Point(1, 0)
    got = window_path(plane.outline, plane.voids, pa, pb, 5, plane.passable)
    exact = 2 * math.hypot(0.9, 3.0) + 0.2
    assert got is not None
    length, path = got
    assert (
        exact - 1e-6 <= length <= exact + 0.1
    )  # never shorter than the geodesic; a fraction of a cell per bend
    assert plane.passable(shapely.linestrings(np.stack([path[:-1], path[1:]], axis=1))).all()


def test_narrow_passage_found_on_the_finer_grid():
    # a 0.6 mm wall across a 30 mm window with a 0.15 mm slit: no row of the 30/128 mm grid runs
    # through the slit, two rows of the twice finer grid do; the way goes through it
    walls = [shapely.box(-0.3, 0.075, 0.3, 15), shapely.box(-0.3, -15, 0.3, -0.075)]
    outline = shapely.box(-15, -15, 15, 15)
    plane = _Plane(outline, walls)
    got = window_path(
        outline, plane.voids, shapely.Point(-1, 0.3), shapely.Point(1, 0.3), 15, plane.passable
    )
    assert got is not None
    exact = 2 * math.hypot(0.7, 0.3 - 0.075) + 0.6  # round the slit's two near corners (geometry)
    assert exact - 1e-6 <= got[0] <= exact + 0.15


def test_no_way_through_a_closed_wall():
    outline = shapely.box(-5, -5, 5, 5)
    plane = _Plane(outline, [shapely.box(-0.1, -6, 0.1, 6)])
    assert (
        window_path(
            outline, plane.voids, shapely.Point(-1, 0), shapely.Point(1, 0), 5, plane.passable
        )
        is None
    )


# a large gap (thousands of edges): a wavy disc with wavy holes, as big pour voids are
_T = np.linspace(0, 2 * np.pi, 3000, endpoint=False)
_WAVY = shapely.Polygon(
    np.column_stack([(20 + np.sin(40 * _T)) * np.cos(_T), (20 + np.sin(40 * _T)) * np.sin(_T)]),
    [
        np.column_stack(
            [
                cx + (3 + 0.3 * np.sin(25 * _T[::5])) * np.cos(_T[::5]),
                cy + (3 + 0.3 * np.sin(25 * _T[::5])) * np.sin(_T[::5]),
            ]
        )
        for cx, cy in ((-8, 0), (8, 3), (0, -10))
    ],
)


@settings(max_examples=200, deadline=None)
@given(st.floats(-25, 25), st.floats(-25, 25), st.floats(0, 2 * math.pi))
def test_cut_through_a_large_gap_from_its_nearby_edges_alone(x, y, angle):
    """The edges a large gap's tree finds near a line give the same pieces of that line as all its
    edges do (the shortcut the slot extents take)."""
    from returngap.analysis.gaps import Void

    void = Void(_WAVY, True, 0)
    assert len(void.edges) >= 2000
    u = (math.cos(angle), math.sin(angle))
    near = void.edges_by(np.array([x, y]), np.array(u), 100.0)
    assert len(near) < len(void.edges)
    k, t1, t2 = cut_intervals(near, [(x, y)], [u], -100.0, 100.0)
    k0, s1, s2 = cut_intervals(void.edges, [(x, y)], [u], -100.0, 100.0)
    assert t1.tolist() == pytest.approx(s1.tolist(), abs=1e-9) and t2.tolist() == pytest.approx(
        s2.tolist(), abs=1e-9
    )


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.tuples(st.floats(-50, 50), st.floats(-50, 50)), min_size=2, max_size=8, unique=True
    ),
    st.lists(st.floats(-5, 200), min_size=1, max_size=6),
)
def test_points_along_a_track_match_shapely(points, fractions):
    # reference: shapely's own LineString.interpolate, one point at a time
    from returngap.analysis.gaps import coords_along, coords_along_lines

    line = shapely.LineString(points)
    assume(line.length > 1e-3)
    s = np.array(fractions) / 100 * line.length
    got = coords_along(line, s)
    want = np.array([line.interpolate(float(min(max(v, 0.0), line.length))).coords[0] for v in s])
    assert np.allclose(got, want, atol=1e-9)
    # and the many-lines form, for one line, to the last bit
    assert np.array_equal(got, coords_along_lines([line], [s]))
