"""Tiny hand-written Gerber / Excellon cases whose answers follow from geometry."""

import math
import zipfile

import pytest
import shapely

from conftest import ROOT, gerber
from returngap.errors import InputError
from returngap.io import load

SQUARE = "G36*\nX0Y0D02*\nX10000000Y0D01*\nX10000000Y10000000D01*\nX0Y10000000D01*\nX0Y0D01*\nG37*"


def one_layer(tmp_path, body, name="c.gbr", **kw):
    (tmp_path / name).write_text(gerber(body, **kw))
    return load.load_board(tmp_path).copper[0]


def test_clear_circle_in_dark_region(tmp_path):
    # 10 x 10 dark square minus a clear circle of diameter 4: 100 - 4*pi
    layer = one_layer(tmp_path, SQUARE + "\n%LPC*%\n%ADD10C,4.000000*%\nD10*\nX5000000Y5000000D03*")
    assert layer.copper_area_mm2 == pytest.approx(
        100 - math.pi * 4, abs=2 * math.pi * 2 * 1e-3
    )  # within perimeter x chord tolerance


def test_polarity_in_file_order(tmp_path):
    # dark square, clear centre 2x2 rectangle, then a dark 1 mm circle inside the clear hole
    body = (
        SQUARE + "\n%LPC*%\n%ADD10R,2.000000X2.000000*%\nD10*\nX5000000Y5000000D03*\n%LPD*%\n"
        "%ADD11C,1.000000*%\nD11*\nX5000000Y5000000D03*"
    )
    layer = one_layer(tmp_path, body)
    assert layer.copper_area_mm2 == pytest.approx(100 - 4 + math.pi / 4, abs=math.pi * 1e-3)


def test_arc_chord_tolerance(tmp_path):
    # a full-circle arc track r = 5 mm, width 0.2: ring area 2*pi*r*w within the 1 um chord
    # tolerance
    body = "%ADD10C,0.200000*%\nD10*\nG75*\nX5000000Y0D02*\nG03X5000000Y0I-5000000J0D01*"
    layer = one_layer(tmp_path, body)
    assert layer.copper_area_mm2 == pytest.approx(2 * math.pi * 5 * 0.2, rel=1e-4)
    assert len(layer.segments) > 100  # kept as centre-line segments


def test_macro_thermal_and_obround(tmp_path):
    # obround 2 x 1: rectangle 1x1 plus a 1 mm circle
    layer = one_layer(tmp_path, "%ADD10O,2.000000X1.000000*%\nD10*\nX0Y0D03*")
    assert layer.copper_area_mm2 == pytest.approx(1 + math.pi / 4, abs=(2 + math.pi) * 1e-3)


def test_step_and_repeat_area(tmp_path):
    body = "%SRX3Y2I5.0J5.0*%\n%ADD10R,1.000000X1.000000*%\nD10*\nX0Y0D03*\n%SR*%"
    assert one_layer(tmp_path, body).copper_area_mm2 == pytest.approx(6.0, abs=1e-6)


def test_negative_polarity_plane(tmp_path):
    # negative plane file: copper = board profile minus what is drawn (one 2 mm clearance)
    (tmp_path / "edge.gbr").write_text(
        gerber(
            "%ADD10C,0.100000*%\nD10*\nX0Y0D02*\nX20000000Y0D01*\n"
            "X20000000Y10000000D01*\nX0Y10000000D01*\nX0Y0D01*",
            attrs="%TF.FileFunction,Profile,NP*%",
        )
    )
    (tmp_path / "p.gbr").write_text(
        gerber(
            "%ADD10C,2.000000*%\nD10*\nX5000000Y5000000D03*",
            attrs="%TF.FileFunction,Copper,L1,Top*%\n%TF.FilePolarity,Negative*%",
        )
    )
    b = load.load_board(tmp_path)
    assert b.outline.area == pytest.approx(200.0, abs=1e-6)
    assert b.copper[0].copper_area_mm2 == pytest.approx(200 - math.pi, abs=2 * math.pi * 1e-3)


def test_stroke_fill_pour_is_solid(tmp_path):
    # a pour drawn as overlapping 0.25 mm strokes 0.2 mm apart comes out as one solid rectangle
    lines = ["%ADD10C,0.250000*%", "D10*"]
    for k in range(51):
        y = int(k * 0.2 * 1e6)
        lines += [f"X0Y{y}D02*", f"X10000000Y{y}D01*"]
    layer = one_layer(tmp_path, "\n".join(lines))
    assert len(shapely.get_parts(layer.geometry)) == 1
    # shapely as the reference: the same strokes buffered at high resolution
    ref = shapely.union_all(
        [
            shapely.LineString([(0, k * 0.2), (10, k * 0.2)]).buffer(0.125, quad_segs=64)
            for k in range(51)
        ]
    )
    assert layer.geometry.area == pytest.approx(
        ref.area, abs=ref.exterior.length * 1e-3
    )  # 1 um chords
    assert layer.geometry.area > 10 * 10.25  # solid: no gaps between the strokes


def test_thin_stroke_beside_a_wide_one_keeps_its_own_resolution(tmp_path):
    # a 0.5 mm and a 2 mm track drawn in one run; each round end is a half circle of its own radius
    # whose chords stay within the 1 um tolerance (sagitta r(1 - cos(step/2)), plane geometry) and
    # are not finer than it needs (two steps merged would still be within tolerance otherwise)
    body = (
        "%ADD10C,2.000000*%\n%ADD11C,0.500000*%\nD10*\nX0Y0D02*\nX10000000Y0D01*\n"
        "D11*\nX0Y5000000D02*\nX10000000Y5000000D01*"
    )
    layer = one_layer(tmp_path, body)
    tol = 1e-3
    for r, y in ((1.0, 0.0), (0.25, 5.0)):
        piece = next(p for p in layer.pieces if p.contains(shapely.Point(5, y)))
        assert piece.area == pytest.approx(
            2 * r * 10 + math.pi * r * r, abs=piece.length * tol
        )  # capsule
        xy = shapely.get_coordinates(piece.exterior)[:-1]
        on_end = abs(((xy[:, 0] - 10) ** 2 + (xy[:, 1] - y) ** 2) ** 0.5 - r) < 1e-6
        cap = xy[(xy[:, 0] > 10 + 1e-9) & on_end]  # the right-hand end's half circle
        ang = sorted(math.atan2(py - y, px - 10) for px, py in cap)
        step = max(b - a for a, b in zip(ang, ang[1:]))
        assert r * (1 - math.cos(step / 2)) <= tol * 1.01
        assert (
            r * (1 - math.cos(step)) > tol or step >= math.pi / 8 - 1e-9
        )  # at least 4 per quarter


def test_net_names_are_unescaped(tmp_path):
    body = "%TO.N,/HDMI\\u002C LCD/VDD33*%\n%ADD10C,0.2*%\nD10*\nX0Y0D02*\nX1000000Y0D01*"
    assert one_layer(tmp_path, body).segment_net == ["/HDMI, LCD/VDD33"]


def test_zip_input_and_ignored_files(tmp_path):
    buf = tmp_path / "board.zip"
    with zipfile.ZipFile(buf, "w") as z:
        z.writestr("gerbers/top.gbr", gerber(SQUARE))
        z.writestr("__MACOSX/._top.gbr", "junk")
        z.writestr(".DS_Store", "junk")
        z.writestr("bom.csv", "ref,value")
        z.writestr("notes.pdf", "%PDF-1.4")
    b = load.load_board(buf)
    assert b.copper[0].file == "gerbers/top.gbr"
    assert {i["file"] for i in b.ignored} == {
        "__MACOSX/._top.gbr",
        ".DS_Store",
        "bom.csv",
        "notes.pdf",
    }


def test_hostile_zip_is_refused(tmp_path):
    buf = tmp_path / "evil.zip"
    with zipfile.ZipFile(buf, "w") as z:
        z.writestr("../../outside.gbr", gerber(SQUARE))
    with pytest.raises(InputError, match="unsafe member path"):
        load.load_board(buf)
    assert not (tmp_path.parent / "outside.gbr").exists()


def test_malformed_gerber_names_file_and_line(tmp_path):
    (tmp_path / "bad.gbr").write_text(
        "%TF.FileFunction,Copper,L1,Top*%\n%FSLAX46Y46*%\n%MOMM*%\n%ADD10C,0.2*%\nD10*\nX0Y0D02*\nG37*\nM02*\n"
    )
    with pytest.raises(InputError) as e:
        load.load_board(tmp_path)
    assert e.value.file == "bad.gbr" and e.value.line == 7
    assert "\n" not in str(e.value)


def test_job_file_disagreement_prefers_the_gerber(tmp_path):
    (tmp_path / "a.gbr").write_text(gerber(SQUARE, attrs="%TF.FileFunction,Copper,L1,Top*%"))
    (tmp_path / "b.gbr").write_text(gerber(SQUARE, attrs="%TF.FileFunction,Copper,L2,Bot*%"))
    (tmp_path / "j.gbrjob").write_text(
        '{"Header": {}, "FilesAttributes": [{"Path": "b.gbr", "FileFunction": "Copper,L5,Inr"}]}'
    )
    b = load.load_board(tmp_path)
    assert b.copper[1].file == "b.gbr"
    assert any("job file says 'Copper,L5,Inr'" in a for a in b.assumptions)


def _two_layer_with_drill(tmp_path, drill_text):
    pads = "%ADD10C,1.000000*%\nD10*\nX10000000Y10000000D03*\nX30000000Y20000000D03*"
    (tmp_path / "t.gbr").write_text(gerber(pads, attrs="%TF.FileFunction,Copper,L1,Top*%"))
    (tmp_path / "b.gbr").write_text(gerber(pads, attrs="%TF.FileFunction,Copper,L2,Bot*%"))
    (tmp_path / "holes.drl").write_text(drill_text)
    return load.load_board(tmp_path)


def test_drill_with_silent_header_is_inferred(tmp_path):
    # no format in the header: coordinates as 3.5 mm without suppression; inference puts holes
    # on the pads
    b = _two_layer_with_drill(
        tmp_path, "M48\nMETRIC\nT1C0.400\n%\nT1\nX01000000Y01000000\nX03000000Y02000000\nM30\n"
    )
    holes = b.drills[0].holes
    assert holes[:, :2].ravel().tolist() == pytest.approx([10, 10, 30, 20])
    assert any("inferred" in a for a in b.assumptions)


def test_excellon_slot_g85(tmp_path):
    # REFERENCE 10 #35: X1Y1G85X3Y1 with a 1 mm tool -> slot (1,1)-(3,1), width 1
    b = _two_layer_with_drill(
        tmp_path,
        "M48\nMETRIC\nT01C1.000\n%\nT01\nX10.000Y10.000\nX1.000Y1.000G85X3.000Y1.000\nM30\n",
    )
    slot = b.drills[0].slots[0]
    assert slot.tolist() == pytest.approx([1, 1, 3, 1, 1])


def test_inch_drill_converted_to_mm(tmp_path):
    b = _two_layer_with_drill(
        tmp_path, "M48\nINCH,TZ\nT1C0.0157\n%\nT1\nX0.3937Y0.3937\nX1.1811Y0.7874\nM30\n"
    )
    assert b.drills[0].holes[:, :2].ravel().tolist() == pytest.approx([10, 10, 30, 20], abs=1e-3)
    assert b.drills[0].holes[0, 2] == pytest.approx(0.3988, abs=1e-3)


def test_layers_read_in_two_processes_match_one(tmp_path, monkeypatch):
    """Copper layers parsed in forked workers come back (as WKB) identical to those read in this
    process, and a bad layer's error still names its file and line."""
    import numpy as np

    from returngap.run import parallel

    demo = ROOT / "examples" / "demo-board"
    one = load.load_board(demo)
    monkeypatch.setitem(parallel.POLICY, "copper-layers", 1)
    monkeypatch.setattr(parallel.threading, "active_count", lambda: 1)  # other tests' threads aside
    pools = []
    real_fork = parallel._fork
    monkeypatch.setattr(parallel, "_fork", lambda: pools.append(1) or real_fork())
    two = load.load_board(demo, runner=parallel.Parallel(2))
    assert pools, "the two-process path did not run"
    assert [c.name for c in one.copper] == [c.name for c in two.copper]
    for a, b in zip(one.copper, two.copper):
        assert len(a.pieces) and shapely.equals_exact(a.pieces, b.pieces, 0).all()
        assert np.array_equal(a.segments, b.segments) and a.segment_net == b.segment_net
        assert [(shapely.to_wkb(p), n) for p, n, _ in a.regions] == [
            (shapely.to_wkb(p), n) for p, n, _ in b.regions
        ]
    assert one.assumptions == two.assumptions
    assert [d.holes.tolist() for d in one.drills] == [d.holes.tolist() for d in two.drills]
    (tmp_path / "top.gbr").write_text(gerber(SQUARE))
    (tmp_path / "bottom.gbr").write_text(
        "%TF.FileFunction,Copper,L2,Bot*%\n%FSLAX46Y46*%\n%MOMM*%\n%ADD10C,0.2*%\n"
        "D10*\nX0Y0D02*\nG37*\nM02*\n"
    )
    with pytest.raises(InputError) as e:
        load.load_board(tmp_path, runner=parallel.Parallel(2))
    assert e.value.file == "bottom.gbr" and e.value.line == 7


def test_each_stroke_knows_the_piece_it_drew(tmp_path):
    # reference: shapely's point-in-polygon, the middle of every segment on the piece it drew; a
    # stroke cut by a later clear, a zero-width stroke and a continuing polyline included
    import numpy as np

    from returngap.analysis import connectivity

    body = (
        "%ADD10C,0.500000*%\n%ADD11C,0.000000*%\n%ADD12R,0.400000X0.400000*%\nD10*\n"
        "X1000000Y1000000D02*\nX9000000Y1000000D01*\n"  # cut in two by the clear below
        "%LPC*%\n%ADD13C,1.000000*%\nD13*\nX5000000Y1000000D03*\n%LPD*%\nD10*\n"
        "X1000000Y3000000D02*\nX4000000Y3000000D01*\nX4000000Y6000000D01*\n"  # one polyline
        "D11*\nX6000000Y3000000D02*\nX8000000Y3000000D01*\n"  # zero width: no piece
        "D12*\nX6000000Y6000000D02*\nX8000000Y7000000D01*\n"  # a square aperture's stroke
    )
    layer = one_layer(tmp_path, body)
    own = layer.segment_piece
    s = layer.segments
    assert len(own) == len(s) == 5
    mid = shapely.points((s[:, :2] + s[:, 2:4]) / 2)
    for k in np.flatnonzero(own >= 0):
        assert shapely.intersects(layer.pieces[own[k]], mid[k])
    assert own.tolist().count(-1) == 2  # the stroke the clear cut, and the one of zero width
    tree = shapely.STRtree(layer.pieces)
    if layer.islands_found:
        piece_island = layer.islands_found[0]
    else:
        piece_island = connectivity.touch_components(layer.pieces, tree)[0]
    got = connectivity._segment_islands(layer, piece_island, tree)
    want = connectivity._island_index(piece_island, tree, shapely.get_coordinates(mid))
    assert got.tolist() == want.tolist()


DECIMAL_NPTH = "M48\nINCH\nT1C0.0669\n%\nG90\nG05\nT1\nX4.9003Y-2.622\nX4.9003Y-2.8976\nT0\nM30\n"


def test_decimal_drill_values_read_alike_in_every_number_format():
    # gerbonara (the reference) reads a value written with its decimal point the same whatever
    # number format and zero suppression it is told: the premise for trying one per unit
    from gerbonara import ExcellonFile
    from gerbonara.cam import FileSettings

    from returngap.io.excellon import EXCELLON_CANDIDATES, _drill_points

    seen = {}
    for unit, nf, zeros in EXCELLON_CANDIDATES:
        d = ExcellonFile.from_string(
            DECIMAL_NPTH, settings=FileSettings(unit=unit, number_format=nf, zeros=zeros)
        )
        seen.setdefault(str(unit), set()).add(_drill_points(d).tobytes())
    assert all(len(v) == 1 for v in seen.values()) and len(seen) == 2


def test_format_search_tries_one_reading_per_unit_only_for_decimal_values():
    from gerbonara import ExcellonFile
    from gerbonara.utils import MM, Inch

    from returngap.io.excellon import EXCELLON_CANDIDATES, _candidates

    first = ExcellonFile.from_string(DECIMAL_NPTH)
    assert _candidates(DECIMAL_NPTH, first, Inch) == []  # the first reading was the only one
    assert [c[0] for c in _candidates(DECIMAL_NPTH, None, None)] == [MM, Inch]
    assert _candidates(DECIMAL_NPTH.replace("INCH\n", ""), first, None) == [EXCELLON_CANDIDATES[0]]
    coded = DECIMAL_NPTH.replace("X4.9003Y-2.622", "X049003Y-02622")
    assert len(_candidates(coded, first, Inch)) == len(EXCELLON_CANDIDATES) // 2
    tool = DECIMAL_NPTH.replace("T1C0.0669", "T1C00669")  # a digits-only tool size counts too
    assert len(_candidates(tool, first, None)) == len(EXCELLON_CANDIDATES)
