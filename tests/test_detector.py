"""Gap crossings on analytic boards: answers from geometry and the closed forms of the physics."""

import math

import pytest

from boards import H, slot_board, stripline_board
from returngap.model.settings import Settings
from returngap.physics import formulas as physics
from returngap.run.pipeline import run_check


def gaps(folder, **kw):
    return [
        f
        for f in run_check(folder, settings=Settings(**kw)).findings
        if f["kind"] == "gap-crossing"
    ]


def test_centred_slot_detour_is_slot_length(tmp_path):
    D, s = 20.0, 0.5
    f = gaps(slot_board(tmp_path, D=D, s=s))
    assert len(f) == 1
    f = f[0]
    assert (f["gap_type"], f["net"], f["layer"], f["reference_layer"], f["reference_net"]) == (
        "slot",
        "CLK",
        "L1",
        "L2",
        "GND",
    )
    # half the slot out along one edge, half back (REFERENCE 2.4): detour ~ D, path ~ D + s
    assert f["detour_mm"] == pytest.approx(D, rel=0.05)
    assert f["detour_method"] == "taut-hull"  # a convex gap: the way round its hull is the geodesic
    path = f["detour_path_mm"]
    length = sum(math.dist(a, b) for a, b in zip(path[:-1], path[1:]))
    assert length == pytest.approx(D + s, rel=0.05)
    assert (f["x_mm"], f["y_mm"]) == pytest.approx((30.0, 20.0), abs=0.01)
    assert f["gap_length_mm"] == pytest.approx(D, abs=1e-6) and f["gap_width_mm"] == pytest.approx(
        s, abs=1e-6
    )
    # a closed slot in a buried plane: half-wave at er 4.3, a little below c/(2 D sqrt(er)) =
    # 3.61 GHz for D = 20 (slot-antenna theory); the moment-method solve of a 24 x 1 mm slot sits
    # 4.5 % below that bare value (REFERENCE 12): the range spans the two
    bare = 299.792458 / (2 * D * math.sqrt(4.3))
    assert 0.95 * bare <= f["resonance_GHz"] < bare
    assert f["resonance_range_GHz"][1] == pytest.approx(bare, rel=1e-3)
    # the whole footprint crosses: the share it holds, 90 % (REFERENCE 1.1, finite width adds
    # a little)
    assert 0.89 < f["interrupted_fraction"] <= 0.95
    lo, hi = f["added_inductance_range_nH"]
    assert lo <= f["added_inductance_nH"] <= hi
    # the range holds the field solve of the same slot with the L3 plane 1 mm below
    # (physics/peec.py, checked on its own against Hammerstad & Jensen and the reference
    # sheet's independent solve)
    from returngap.physics import peec

    solved, _, _ = peec.rect_slot_added_inductance(D, s, H, 0.2, below_mm=1.0)
    assert lo <= solved <= hi
    assert f["inductance_method"] == "calibrated slot-stub model"


@pytest.mark.parametrize("offset", [3.0, 5.0, -6.0])
def test_off_centre_slot_goes_round_the_near_end(tmp_path, offset):
    D = 20.0
    f = gaps(slot_board(tmp_path, D=D, offset=offset))
    assert len(f) == 1
    # the nearer end is D/2 - |e| away: out and back = D - 2|e|
    assert f[0]["detour_mm"] == pytest.approx(D - 2 * abs(offset), rel=0.05)


def test_solid_plane_reports_nothing(tmp_path):
    assert gaps(slot_board(tmp_path, solid=True)) == []


def test_void_under_no_track_is_not_reported(tmp_path):
    from returngap.synth import rect

    f = gaps(slot_board(tmp_path, extra_void=rect(5, 30, 25, 31)))  # 10 mm away from the track
    assert len(f) == 1 and f[0]["x_mm"] == pytest.approx(30.0)


def test_full_split(tmp_path):
    f = gaps(slot_board(tmp_path, split=True))
    assert len(f) == 1
    assert f[0]["gap_type"] == "split" and f[0]["detour_mm"] is None and f[0]["severity"] == "error"
    assert f[0]["gap_length_mm"] == pytest.approx(40.0, abs=0.01)


def test_via_fence_detour_is_the_geodesic_round_the_fence(tmp_path):
    """Ten vias of another net, 1 mm pitch, antipads 1.1 mm: the antipads merge into a slot and the
    track passes between two of them, so each end of the crossing sits in a pocket between two
    antipads. The shortest way: a tangent from the end to the next antipad, round it to its outer
    side, along the fence, half round the end antipad and back the same way (geometry)."""
    from returngap.analysis.gaps import STEP_OFF_MM
    from returngap.synth import SynthBoard, Via, rect

    b = SynthBoard("f", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes += [(2, "GND", rect(0, 0, 60, 40)), (3, "GND", rect(0, 0, 60, 40))]
    b.tracks.append((1, "CLK", [(10, 20), (50, 20)], 0.2))
    b.vias += [Via(30, 15.5 + k, "P3V3", antipad=1.1) for k in range(10)]
    b.vias += [Via(5, 5, "GND"), Via(55, 35, "GND")]
    f = gaps(b.write(tmp_path) or tmp_path)
    assert len(f) == 1 and f[0]["net"] == "CLK" and f[0]["gap_type"] != "split"
    r, dy = 0.55, 0.5
    ax = math.sqrt(r * r - dy * dy) + STEP_OFF_MM  # the crossing's end, left of the fence's axis
    d = math.hypot(ax, dy)  # from the end to the next antipad's centre
    tangent = math.sqrt(d * d - r * r)
    # round the antipad from the tangent point to its outermost point
    arc = r * (math.atan2(dy, ax) - math.acos(r / d))
    way = (
        2 * (tangent + arc + 4.0) + math.pi * r
    )  # 4 mm along the fence to the end antipad's centre
    assert f[0]["detour_mm"] == pytest.approx(way - 2 * ax, abs=0.05)


@pytest.mark.parametrize("d", [0.3, 0.6, 1.0])
def test_graze_matches_closed_form(tmp_path, d):
    # footprint +-(w/2 + k h) meets a void from lateral offset d outward;
    # REFERENCE 1.1: share = (atan(x2/h) - atan(x1/h)) / pi
    w = 0.02
    f = gaps(slot_board(tmp_path, graze=d, width=w), min_interrupted_fraction=0.0, show_all=True)
    assert len(f) == 1 and f[0]["crossing"] == "graze"
    hw = w / 2 + math.tan(0.45 * math.pi) * H  # 90 % within +-k h: k = tan(0.9 pi/2) = 6.31
    expect = (math.atan(hw / H) - math.atan(d / H)) / math.pi
    assert f[0]["interrupted_fraction"] == pytest.approx(expect, rel=0.02)


def test_own_via_antipad_is_left_to_the_layer_change(tmp_path):
    assert gaps(slot_board(tmp_path, solid=True, own_via=True)) == []


def test_stripline_share(tmp_path):
    # the L4 plane is whole under the slot: below the noise floor unless asked for
    r = run_check(stripline_board(tmp_path, h1=0.2, h2=0.6), settings=Settings(show_all=True))
    f = [x for x in r.findings if x["reference_layer"] == "L2" and x["kind"] == "gap-crossing"]
    assert len(f) == 1
    # nearer plane carries h2/b of the return (REFERENCE 1.3): 0.75; the footprint holds 90 %
    # of that
    assert f[0]["plane_share"] == pytest.approx(0.75)
    hw = 0.05 + physics.stripline_halfwidth_for_fraction(0.9, 0.2, 0.6)
    assert f[0]["interrupted_fraction"] == pytest.approx(  # consistency check
        physics.stripline_fraction_between(-hw, hw, 0.2, 0.6), rel=0.02
    )
    assert 0.75 * 0.9 <= f[0]["interrupted_fraction"] <= 0.75
    assert f[0]["line_type"] == "stripline"
    assert not [
        x for x in r.findings if x["reference_layer"] == "L4" and x["kind"] == "gap-crossing"
    ]


def test_finding_ids_are_stable(tmp_path):
    a = gaps(slot_board(tmp_path / "a"))
    b = gaps(slot_board(tmp_path / "b"))
    assert [x["id"] for x in a] == [x["id"] for x in b]


def test_footprint_overlap_is_the_footprint_area_in_the_gap():
    """The local buffer gives the area of the whole footprint in the gap: from geometry (a straight
    track across a strip: 2 hw x strip width) and against shapely's buffer of the whole track."""
    import shapely

    from returngap.analysis import gaps

    line = shapely.LineString([(0, 0), (40, 0), (40, 30), (5, 30)])
    hw = 1.3
    strip = shapely.box(19.5, -5, 20.5, 5)
    assert gaps._footprint_overlap(line, hw, strip) == pytest.approx(2 * hw * 1.0, rel=1e-9)
    whole = shapely.buffer(line, hw, quad_segs=4, cap_style="flat", join_style="round")
    for region in (
        shapely.box(38, -3, 45, 3),
        shapely.box(3, 28, 8, 33),
        shapely.Point(40, 30).buffer(2),
    ):
        assert gaps._footprint_overlap(line, hw, region) == pytest.approx(
            whole.intersection(region).area, rel=1e-6
        )


def test_two_processes_give_the_same_findings(tmp_path, monkeypatch):
    """The gap scan, and the frequency views after it, split over two forked processes return
    what one process does, in the same order."""
    from pathlib import Path

    from returngap.run import parallel

    demo = Path(__file__).resolve().parents[1] / "examples" / "demo-board"
    stack = demo / "stackup.toml"
    one = run_check(demo, stack, workers=1).findings
    monkeypatch.setitem(parallel.POLICY, "gap-scan", 1)
    monkeypatch.setitem(parallel.POLICY, "frequency-view", 1)
    monkeypatch.setattr(parallel.threading, "active_count", lambda: 1)  # other tests' threads aside
    pools = []
    real_fork = parallel._fork
    monkeypatch.setattr(parallel, "_fork", lambda: pools.append(1) or real_fork())
    two = run_check(demo, stack, workers=2).findings
    assert len(pools) >= 2, "the two-process paths did not run"
    assert len(one) > 5 and one == two
    assert sum(f.get("s21_loss_at_knee_dB") is not None for f in two) >= 2


def test_threads_or_none_give_the_same_findings(monkeypatch):
    """The per-layer work done in two threads (a large board) or in order in one (a small board)
    gives the same findings, in the same order."""
    from pathlib import Path

    from returngap.run import parallel

    demo = Path(__file__).resolve().parents[1] / "examples" / "demo-board"
    stack = demo / "stackup.toml"
    monkeypatch.setattr(parallel, "THREADS_MIN_SEGMENTS", 10**9)
    started = []
    real_pool = parallel.ThreadPoolExecutor
    monkeypatch.setattr(parallel, "ThreadPoolExecutor", lambda n: started.append(n) or real_pool(n))
    alone = run_check(demo, stack, workers=1).findings
    assert not started
    monkeypatch.setattr(parallel, "THREADS_MIN_SEGMENTS", 0)
    threaded = run_check(demo, stack, workers=1).findings
    assert len(started) >= 3, "the threaded path did not run"
    assert len(alone) > 5 and alone == threaded


def test_geos_failure_on_a_gap_is_retried_on_a_snapped_outline(monkeypatch):
    """A GEOS topology error on one gap's outline does not end the check: the crossing is measured
    again on the outline snapped to a 1 nm grid and reported as before."""
    from pathlib import Path

    import shapely

    from returngap.analysis import gaps

    demo = Path(__file__).resolve().parents[1] / "examples" / "demo-board"
    stack = demo / "stackup.toml"
    plain = run_check(demo, stack, workers=1).findings
    real, calls = gaps._finding, []

    def flaky(*args):
        calls.append(1)
        if len(calls) == 1:
            raise shapely.errors.GEOSException("TopologyException: side location conflict")
        return real(*args)

    monkeypatch.setattr(gaps, "_finding", flaky)
    again = run_check(demo, stack, workers=1).findings
    assert len(calls) > 1
    assert [f["id"] for f in again] == [f["id"] for f in plain]


class _Plane:
    """The copper round some voids, with the same clear-sight test as the gap scan (each void shrunk
    by a hair), for the exact way round one gap."""

    def __init__(self, outline, voids, enclosed=True):
        import numpy as np
        import shapely

        from returngap.analysis.gaps import EDGE_HAIR_MM, Void

        self.outline = outline
        self.voids = [Void(v, enclosed, k) for k, v in enumerate(voids)]
        self._shrunk = shapely.buffer(np.array(voids, dtype=object), -EDGE_HAIR_MM, quad_segs=2)
        self.edge = outline.boundary

    def shrunk(self, k):
        return self._shrunk[k]

    def along_edge(self, void):
        import shapely

        return shapely.dwithin(self.edge, shapely.points(void.ring_points(0)[0][:-1]), 1e-4)

    def passable(self, segs):
        import shapely

        ok = shapely.covers(self.outline, segs)
        for v in self._shrunk:
            ok &= ~shapely.intersects(v, segs)
        return ok


def _chain(plane, k, a, b):
    import shapely

    from returngap.analysis.gaps import _chain_detour

    return _chain_detour(plane, plane.voids[k], shapely.Point(a), shapely.Point(b))


def test_exact_way_round_a_lone_slot():
    """Round the nearer end of a 1 x 10 mm slot: straight to its corners, across, back
    (geometry)."""
    import shapely

    plane = _Plane(shapely.box(-20, -20, 20, 20), [shapely.box(-0.5, -5, 0.5, 5)])
    got = _chain(plane, 0, (-0.51, 1.0), (0.51, 1.0))
    assert got is not None
    assert got[0] == pytest.approx(2 * math.hypot(0.01, 4.0) + 1.0, abs=1e-9)
    assert got[1][1:-1] == [(-0.5, 5.0), (0.5, 5.0)]


@pytest.mark.parametrize("start", range(4))
@pytest.mark.parametrize("reverse", [False, True])
def test_equally_long_ways_round_a_symmetric_slot_do_not_hang_on_its_outline(start, reverse):
    """A track across the middle of a 1 x 10 mm slot: both ways round are equally long
    (geometry), so the choice is ours to fix: the lower way, wherever the slot's outline starts
    and whichever way it runs."""
    import shapely

    ring = [(-0.5, -5.0), (0.5, -5.0), (0.5, 5.0), (-0.5, 5.0)]
    ring = ring[start:] + ring[:start]
    slot = shapely.Polygon(ring[::-1] if reverse else ring)
    plane = _Plane(shapely.box(-20, -20, 20, 20), [slot])
    got = _chain(plane, 0, (-0.51, 0.0), (0.51, 0.0))
    assert got is not None
    assert got[0] == pytest.approx(2 * math.hypot(0.01, 5.0) + 1.0, abs=1e-9)
    assert got[1][1:-1] == [(-0.5, -5.0), (0.5, -5.0)]


# a gap with two arms down, 5 mm below the track, and its top 6 mm above it: a bay between the arms
ARMS = (-3, -5, 3, 6), (-2, -6, 2, -3)


def test_exact_way_round_a_concave_gap_skips_its_bay():
    """Round the arms' ends, 5 mm down, the way goes straight across the mouth of the bay between
    them, corner to corner (2 x 5 + 6 mm, geometry), shorter than over the top (2 x 6 + 6 mm)."""
    import shapely

    gap = shapely.box(*ARMS[0]).difference(shapely.box(*ARMS[1]))
    plane = _Plane(shapely.box(-20, -20, 20, 20), [gap])
    got = _chain(plane, 0, (-3.01, 0.0), (3.01, 0.0))
    assert got is not None
    assert got[0] == pytest.approx(2 * math.hypot(0.01, 5.0) + 6.0, abs=1e-9)
    assert got[1][1:-1] == [(-3.0, -5.0), (3.0, -5.0)]


def test_no_exact_way_when_another_void_is_in_the_way():
    import shapely

    gap = shapely.box(*ARMS[0]).difference(shapely.box(*ARMS[1]))
    plane = _Plane(
        shapely.box(-20, -20, 20, 20), [gap, shapely.box(-0.5, -5.5, 0.5, -4.5)]
    )  # in the mouth
    assert _chain(plane, 0, (-3.01, 0.0), (3.01, 0.0)) is None


def test_no_exact_way_from_a_pocket():
    """An end under an overhang of the gap (a bar, a wall and a roof over the end) lies inside
    the hull
    of the outline it must go round: not a plain hull way (the grid takes over)."""
    import shapely

    hook = shapely.union_all(
        [shapely.box(-2, -2, 10, -1), shapely.box(-2, -1, -1.5, 1), shapely.box(-2, 1, 1, 1.5)]
    )
    plane = _Plane(shapely.box(-20, -20, 20, 20), [hook])
    assert _chain(plane, 0, (0.0, -0.99), (0.0, -2.01)) is None


def test_exact_way_round_a_notch_in_an_island_of_the_gap():
    """The ends sit on an island of copper inside the gap (a hole of it), either side of a notch cut
    into the island from its edge: the way goes round the notch's inner end, inside the island."""
    import shapely

    island = shapely.box(-5, -5, 5, 5).difference(
        shapely.box(-0.5, 1, 0.5, 6)
    )  # notch from the top
    gap = shapely.box(-10, -10, 10, 10).difference(island)
    plane = _Plane(shapely.box(-10, -10, 10, 10), [gap], enclosed=False)
    got = _chain(plane, 0, (-0.51, 3.0), (0.51, 3.0))
    assert got is not None
    assert got[0] == pytest.approx(2 * math.hypot(0.01, 2.0) + 1.0, abs=1e-9)


@pytest.mark.parametrize("seed", range(4))
def test_span_bounds_hold_the_rectangle_diagonal(seed):
    # reference: shapely's least-area rotated rectangle of each shape (circles, thin slots at any
    # angle, triangles, L shapes), its diagonal between the two bounds
    import numpy as np
    import shapely

    from returngap.analysis import gaps as scan

    rng = np.random.default_rng(seed)
    shapes = []
    for _ in range(40):
        x, y, a = rng.uniform(0, 10), rng.uniform(0, 10), rng.uniform(0, np.pi)
        long, thin = rng.uniform(0.2, 6), rng.uniform(0.05, 1.5)
        slot = shapely.LineString([(x, y), (x + long * np.cos(a), y + long * np.sin(a))])
        shapes += [
            shapely.Point(x, y).buffer(thin, quad_segs=8),
            slot.buffer(thin / 4),
            shapely.Polygon([(x, y), (x + long, y), (x, y + thin * 3)]),
            shapely.box(x, y, x + long, y + thin).union(shapely.box(x, y, x + thin, y + long)),
        ]
    geoms = np.array(shapes, dtype=object)
    lo, hi = scan._span_bounds(geoms)
    diagonal = np.array([scan._rect_sides(r) for r in shapely.oriented_envelope(geoms)])
    span = np.hypot(diagonal[:, 0], diagonal[:, 1])
    assert np.all(lo <= span) and np.all(span <= hi)
    # an antipad 1.2 mm across is known to be shorter than the least gap length without its
    # rectangle (the bound: sqrt(2.5) times the diameter, 1.90 mm)
    _, hi_pad = scan._span_bounds(np.array([shapely.Point(0, 0).buffer(0.6, quad_segs=8)]))
    assert hi_pad[0] < Settings().min_gap_length_mm == 2.0
