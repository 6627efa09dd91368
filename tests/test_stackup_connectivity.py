"""Stackup sources and net building, against values that follow from the files."""

import pytest

from boards import slot_board
from returngap.analysis import connectivity, stackup
from returngap.errors import InputError
from returngap.io import config, ipc356
from returngap.model.board import Board
from returngap.run.pipeline import read_board


def _board(n):
    b = Board("x", "x", copper=[None] * n, drills=[], outline=None)
    b.job = {}
    return b


def test_job_stackup_with_strings_nan_and_split_dielectric():
    # KiCad-style quirks (REFERENCE 9.2): numbers as strings, "NaN" er, one dielectric split in two
    job = {
        "MaterialStackup": [
            {"Type": "Copper", "Thickness": "0.035"},
            {
                "Type": "Dielectric",
                "Name": "F.Cu/In1.Cu (1/2)",
                "Thickness": "0.1",
                "DielectricConstant": "4.0",
            },
            {
                "Type": "Dielectric",
                "Name": "F.Cu/In1.Cu (2/2)",
                "Thickness": 0.1,
                "DielectricConstant": 5.0,
            },
            {"Type": "Copper", "Thickness": 0.035},
            {"Type": "Dielectric", "Name": "core", "Thickness": 1.2, "DielectricConstant": "NaN"},
            {"Type": "Copper"},
        ]
    }
    notes = []
    st = stackup.from_job(job, 3, notes)
    assert [d.thickness_mm for d in st.dielectrics] == pytest.approx([0.2, 1.2])
    # series capacitors: 0.2 / (0.1/4 + 0.1/5) = 4.444
    assert st.dielectrics[0].er == pytest.approx(0.2 / (0.1 / 4 + 0.1 / 5))
    assert st.dielectrics[1].er == stackup.DEFAULT_ER and any("no permittivity" in n for n in notes)
    assert st.height_mm("L1", "L3") == pytest.approx(0.2 + 1.2 + 0.035)


def test_user_stackup_file(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('[[dielectric]]\nbetween = ["L1", "L2"]\nthickness_mm = 0.3\ner = 3.9\n')
    cfg = config.load_stackup_file(p)
    st = stackup.build_stackup(_board(2), cfg)
    assert (st.source, st.dielectrics[0].thickness_mm, st.dielectrics[0].er) == (
        "stackup file",
        0.3,
        3.9,
    )


def test_bad_stackup_file_is_one_line(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text("er = 'four'\n")
    with pytest.raises(InputError, match="er must be a number"):
        config.load_stackup_file(p)
    p.write_text("[[dielectric]\n")
    with pytest.raises(InputError) as e:
        config.load_stackup_file(p)
    assert e.value.line == 1


def test_default_stackup_is_stated():
    b = _board(4)
    st = stackup.build_stackup(b, {})
    assert [round(d.thickness_mm, 3) for d in st.dielectrics] == [0.2, 1.06, 0.2]
    assert any("no stackup given" in a for a in b.assumptions)


def test_nets_join_through_vias_and_take_names(tmp_path):
    b, cfg = read_board(slot_board(tmp_path, solid=True, own_via=True))
    nets = connectivity.build_nets(b, cfg)
    # CLK on L1 and on L4 are one net through its via; GND planes on L2 and L3 are ground
    assert "CLK" in nets.layers["L4"].segment_net
    assert nets.net_class["GND"] == "ground" and nets.net_class["CLK"] == "signal"


def test_unnamed_nets_and_the_ground_rule(tmp_path):
    # strip every .N attribute: names are generated, and the net with most copper becomes ground
    folder = slot_board(tmp_path, solid=True)
    for f in folder.glob("*.gbr"):
        f.write_text("\n".join(x for x in f.read_text().splitlines() if not x.startswith("%TO.N")))
    b, cfg = read_board(folder)
    nets = connectivity.build_nets(b, cfg)
    names = set(nets.net_class)
    assert all(n.startswith("UNNAMED_") for n in names)
    gnd = [n for n, c in nets.net_class.items() if c == "ground"]
    assert len(gnd) == 1 and any("taken as ground" in a for a in b.assumptions)
    again = connectivity.build_nets(read_board(folder)[0], cfg)
    assert sorted(again.net_class.items()) == sorted(nets.net_class.items())  # stable names


def test_net_classes_from_names():
    cls = connectivity.classify(
        ["GND", "AGND", "/power/+3V3", "VDD_CORE", "1V8", "Board_0-GND", "CLK", "SDA"]
        + ["/eth/VC2-", "VC1+", "VCLK"],
        {},
    )
    assert cls == {
        "GND": "ground",
        "AGND": "ground",
        "/power/+3V3": "power",
        "VDD_CORE": "power",
        "1V8": "power",
        "Board_0-GND": "ground",
        "CLK": "signal",
        "SDA": "signal",
        "/eth/VC2-": "power",  # a magnetics' centre tap, PoE power
        "VC1+": "power",
        "VCLK": "signal",
    }


def test_ipc356_records(tmp_path):
    # REFERENCE 10 #33, #34 (KiCad-written IPC-D-356A lines)
    text = (
        "C  IPC-D-356A test\nP  JOB   x\nP  UNITS CUST 0\n"
        "317/N023            D1    -1    D0394PA00X+035309Y-027829X0669Y0669R000S0\n"
        "317NET-(D381-A)     VIA        MD0079PA00X+036506Y-028140X0138Y0000R000S3\n999\n"
    )
    p = tmp_path / "n.ipc"
    p.write_text(text)
    pts = ipc356.parse_netlist(type("F", (), {"name": "n.ipc", "path": p})())
    assert pts[0].net == "/N023" and pts[0].refdes == "D1" and pts[0].pin == "1"
    assert (pts[0].x, pts[0].y) == pytest.approx((3.5309 * 25.4, -2.7829 * 25.4))
    assert pts[1].is_via and pts[1].net == "NET-(D381-A)"


def _regions_by_predicate_query(piece_island, tree, pieces, polys):
    """The plain way: every piece meeting each region, by shapely's own predicate query, the
    largest kept (of equal ones, the one found last)."""
    reg, piece = tree.query(polys, predicate="intersects")
    out = {}
    for r, p in zip(reg.tolist(), piece.tolist()):
        if r not in out or pieces[p].area >= pieces[out[r]].area:
            out[r] = p
    return {r: int(piece_island[p]) for r, p in out.items()}


@pytest.mark.parametrize("seed", range(6))
def test_region_island_is_that_of_the_largest_piece_it_meets(seed):
    # reference: shapely's STRtree predicate query over every candidate
    import numpy as np
    import shapely

    from returngap.geometry.shapes import touch_components

    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 20, (60, 2))
    radii = rng.choice([0.3, 0.3, 0.6, 1.5, 4.0], 60)  # equal sizes on purpose: ties
    pieces = shapely.buffer(shapely.points(centres), radii, quad_segs=4)
    shapely.prepare(pieces)
    tree = shapely.STRtree(pieces)
    piece_island, _, _ = touch_components(pieces, tree)
    polys = shapely.box(*rng.uniform(0, 18, (25, 2)).T, *(rng.uniform(0, 18, (25, 2)) + 2).T)
    regions = [(p, None, None) for p in polys]
    got = connectivity._region_islands(piece_island, tree, pieces, regions)
    want = _regions_by_predicate_query(piece_island, tree, pieces, polys)
    assert want, "the case must have regions on copper"
    for r, island in want.items():
        assert got[r] == island


def test_pour_outline_strokes_are_those_on_a_region_edge():
    # reference: shapely's own distance from each stroke's ends and middle to each region's edge
    import numpy as np
    import shapely

    from returngap.model.board import CopperLayer

    outer = [(0.0, 0.0), (10.0, 0.0), (10.0, 6.0), (0.0, 6.0)]
    hole = [(4.0, 2.0), (6.0, 2.0), (6.0, 4.0), (4.0, 4.0)]
    pour = shapely.Polygon(outer, [hole])
    strokes = [
        (0.0, 0.0, 10.0, 0.0),  # along an edge, end to end
        (10.0, 6.0, 10.0, 0.0),  # the same, drawn backwards
        (-0.0, 6.0, 0.0, 0.0),  # a signed zero: same place, other bytes
        (2.0, 6.0, 7.0, 6.0),  # part of an edge only
        (6.0, 2.0, 6.0, 4.0),  # along the hole's edge
        (0.0, 0.0, 10.0, 6.0),  # across the pour: a track
        (4.0, 2.0, 6.0, 4.0),  # from corner to corner of the hole, through it
        (10.0015, 0.0, 10.0015, 3.0),  # alongside, 1.5 um off: beyond the hair
    ]
    layer = CopperLayer(name="L2", file="pour.gbr", side="inner")
    layer.segments = np.array([s + (0.25,) for s in strokes])
    layer.regions = [(pour, "GND", None)]
    got = connectivity._pour_strokes(layer)
    edge = pour.boundary
    hair = connectivity.POUR_STROKE_HAIR_MM
    want = [
        all(
            shapely.dwithin(edge, shapely.Point(p), hair)
            for p in ((xa, ya), (xb, yb), ((xa + xb) / 2, (ya + yb) / 2))
        )
        for xa, ya, xb, yb in strokes
    ]
    assert want == [True, True, True, True, True, False, False, False]
    assert got.tolist() == want


class _JobPool:
    """A pool that runs each job in turn and tells which job is running (to see what each one
    touches); `mapped` keeps every list of jobs given to it."""

    def __init__(self):
        self.job, self.mapped = None, []

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def map(self, fn, items):
        items = list(items)
        self.mapped.append(items)
        out = []
        for n, item in enumerate(items):
            self.job = (len(self.mapped), n)
            out.append(fn(item))
        self.job = None
        return out


def test_no_two_jobs_of_one_pool_share_a_layer(monkeypatch):
    # GEOS builds a prepared geometry's indexes at its first use and is not safe when two threads
    # build them together (a crash seen with a board's two drill files on one layer): each job of
    # the net-building and scan set-up pools works on one layer of its own
    from conftest import corpus_board
    from returngap.analysis import gaps
    from returngap.model.runner import Serial

    board_dir = corpus_board("ulx3s-v3.1.1")
    board, cfg = read_board(board_dir, workers=1)
    assert len(board.drills) >= 2  # plated and non-plated files, both through every layer
    pool = _JobPool()

    class Runner(Serial):
        def threads(self, work=0):
            return pool

        def threaded(self, work=0):
            return True  # the scan set-up then also builds what both processes share

    seen = {}  # (pool call, job) -> layers whose pieces or copper it used
    real_touching = connectivity.touching

    def touching(tree, pieces, geoms, keep=None):
        if pool.job is not None:
            seen.setdefault(pool.job, set()).add(id(pieces))
        return real_touching(tree, pieces, geoms, keep)

    monkeypatch.setattr(connectivity, "touching", touching)
    real_copper = gaps._GapScan.copper

    def copper(scan, layer):
        seen.setdefault(pool.job, set()).add(id(scan.nets.layers[layer].pieces))
        return real_copper(scan, layer)

    monkeypatch.setattr(gaps._GapScan, "copper", copper)
    real_own = gaps._GapScan._own_plane

    def own_plane(scan, layer):
        if pool.job is not None:
            seen.setdefault(pool.job, set()).add(id(scan.nets.layers[layer].pieces))
        return real_own(scan, layer)

    monkeypatch.setattr(gaps._GapScan, "_own_plane", own_plane)
    nets = connectivity.build_nets(board, cfg, Runner())
    from returngap.analysis import references
    from returngap.model.settings import Settings

    refs, _ = references.find_references(board, nets, Settings())
    chains = references.chains(board, nets, refs, Settings())
    gaps.prepared_scan(board, nets, refs, chains, Settings(), workers=2, runner=Runner())
    by_call = {}
    for (call, _), layers in seen.items():
        for layer in layers:
            by_call.setdefault((call, layer), 0)
            by_call[(call, layer)] += 1
    assert seen and max(by_call.values()) == 1


@pytest.mark.parametrize("collide", [False, True])
def test_strokes_along_edges_match_byte_for_byte(collide, monkeypatch):
    # reference: numpy's own exact matching of the rows' bytes; with every hash made equal, the
    # rows that share a hash are all compared whole
    import numpy as np

    rng = np.random.default_rng(11)
    edges = np.round(rng.uniform(-5, 5, (300, 4)), 3)
    strokes = np.vstack(
        [
            edges[:100],  # drawn as the edge
            edges[100:150][:, [2, 3, 0, 1]],  # drawn backwards
            np.round(rng.uniform(-5, 5, (100, 4)), 3),  # elsewhere
            edges[150:160] + 1e-12,  # a hair off
        ]
    )
    strokes[0, 0] = -0.0 if strokes[0, 0] == 0.0 else strokes[0, 0]
    edges[1, 0], strokes[1, 0] = 0.0, -0.0  # the same number, other bytes
    if collide:
        monkeypatch.setattr(connectivity, "_row_hash", lambda a: np.zeros(len(a), np.uint64))
    keys = connectivity._row_keys
    want = np.isin(keys(strokes), np.concatenate([keys(edges), keys(edges[:, [2, 3, 0, 1]])]))
    s = np.column_stack([strokes, np.full(len(strokes), 0.2)])
    got = connectivity._along_region_edges(s, edges)
    assert got.tolist() == want.tolist()
    assert 140 <= want.sum() < 160


def test_island_areas_are_those_of_the_islands_unions():
    """Islands of one, two (a track and its pad: inclusion-exclusion) and three pieces, and a
    plane with a pad on it: each area that of the union of its pieces (shapely's union as the
    reference; the overlaps follow from geometry)."""
    import numpy as np
    import shapely

    from returngap.analysis.connectivity import LayerNets

    track = shapely.LineString([(0, 0), (10, 0)]).buffer(0.1)
    pad = shapely.box(9.5, -0.5, 10.5, 0.5)
    lone = shapely.box(20, 20, 21, 22)
    three = [shapely.box(30, 0, 32, 1), shapely.box(31, 0, 33, 1), shapely.box(32, 0, 34, 1)]
    plane, on_plane = shapely.box(-50, -50, -10, -10), shapely.box(-20, -20, -19, -19)
    pieces = np.array([track, pad, lone, *three, plane, on_plane], dtype=object)
    piece_island = np.array([0, 0, 1, 2, 2, 2, 3, 3])
    ln = LayerNets("L1", pieces, piece_island, ["A"] * 4, [], [], None)
    want = [
        shapely.union_all(pieces[piece_island == i]).area for i in range(4)
    ]  # shapely's union: the reference
    assert ln.island_areas() == pytest.approx(want, rel=1e-12)
    assert want[0] == pytest.approx(track.area + 1.0 - pad.intersection(track).area)
    assert want[2] == pytest.approx(4.0) and want[3] == pytest.approx(1600.0)


def _stroke_layer(strokes):
    """A layer of round-ended strokes (x0, y0, x1, y1, width), a piece each, with its islands."""
    import numpy as np
    import shapely

    from returngap.analysis.connectivity import LayerNets, touch_components
    from returngap.model.board import CopperLayer

    s = np.array(strokes, dtype=float)
    pieces = shapely.buffer(shapely.linestrings(s[:, :4].reshape(-1, 2, 2)), s[:, 4] / 2)
    island, count, pairs = touch_components(pieces, shapely.STRtree(pieces))
    layer = CopperLayer(name="L1", file="strokes.gbr", side="top")
    layer.segments = s
    ln = LayerNets("L1", pieces, island, ["N"] * count, [], [], None)
    return layer, ln, island, pairs


def test_strokes_filling_an_area_are_a_pour_and_tracks_are_not():
    """Eagle draws a pour as strokes that overlap many times over: twenty 0.5 mm strokes 0.25 mm
    apart. A track of ten 0.5 mm strokes end to end (ruled out by how little their boxes
    overlap), and a star of eight strokes through one point (whose boxes overlap far more than
    they do: ruled out by their own overlaps), are not. Reference: the rule itself (stroke area
    over 1.6 times the island's area), with shapely's union for the island's area."""
    import numpy as np
    import shapely

    from returngap.analysis import connectivity

    hatch = [(0.0, 0.25 * k, 10.0, 0.25 * k, 0.5) for k in range(20)]
    track = [(20.0 + k, 0.0, 21.0 + k, 0.0, 0.5) for k in range(10)]
    star = [
        (45 + 5 * np.cos(a), 5 + 5 * np.sin(a), 45 - 5 * np.cos(a), 5 - 5 * np.sin(a), 0.2)
        for a in np.arange(8) * np.pi / 8
    ]
    layer, ln, island, pairs = _stroke_layer(hatch + track + star)
    got = connectivity._fill_segments(layer, ln, island, pairs)
    s = layer.segments
    stroke = np.hypot(s[:, 2] - s[:, 0], s[:, 3] - s[:, 1]) * s[:, 4]
    want = []
    for i in island.tolist():
        union = shapely.union_all(ln.pieces[island == i]).area
        want.append(bool(stroke[island == i].sum() > connectivity.FILL_OVERLAP * union))
    assert want == [True] * 20 + [False] * 18
    assert got.tolist() == want


def test_tracks_are_grouped_by_net_and_width_in_sorted_order():
    """Segments 0..5 of nets B, A, B, A, B, A and widths (0.2, 0.2, 0.25, 0.2, 0.2, 0.3): the
    groups (A, 0.2), (A, 0.3), (B, 0.2), (B, 0.25), each in the segments' own order (by hand)."""
    import numpy as np

    from returngap.analysis.references import _net_width_groups

    nets = ["B", "A", "B", "A", "B", "A", "C"]
    widths = np.array([0.2, 0.2, 0.25, 0.20000001, 0.2, 0.3])
    keys, rows, counts = _net_width_groups(nets, np.arange(6), widths)
    assert keys == [("A", 0.2), ("A", 0.3), ("B", 0.2), ("B", 0.25)]
    assert rows.tolist() == [1, 3, 5, 0, 4, 2]
    assert counts.tolist() == [2, 1, 2, 1]
