"""The board model is either right or loudly refused: drills from several generators, outlines among
frames and drawings, missing or broken layers, single files, shorts between labelled nets.
Every board here is our own, written by returngap.synth and edited as a generator would write it."""

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner

from returngap.cli import main
from returngap.errors import IncompleteError
from returngap.io import load
from returngap.run import pipeline
from returngap.synth import SynthBoard, Via, rect


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def four_layer(folder, job_file=True, name="q"):
    """60 x 40 mm: SIG on L1 over a GND plane on L2, a second GND plane on L3, L4 signals."""
    b = SynthBoard(name, 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.75, 10, 30.25, 30)))
    b.tracks.append((1, "SIG", [(10, 20), (50, 20)], 0.2))
    b.tracks.append((4, "SIG", [(50, 20), (55, 20)], 0.2))
    b.vias.append(Via(50, 20, "SIG"))
    b.vias.append(Via(5, 5, "GND"))
    b.vias.append(Via(55, 35, "GND"))
    b.write(folder, job_file=job_file)
    return b


KICAD_MIXED = """M48
; DRILL file {{KiCad 8.0}} date 2026-11-30
; FORMAT={{-:-/ absolute / metric / decimal}}
; #@! TF.GenerationSoftware,Kicad,Pcbnew,8.0
; #@! TF.FileFunction,MixedPlating,1,4
FMAT,2
METRIC
; #@! TA.AperFunction,Plated,PTH,ViaDrill
T1C0.300
; #@! TA.AperFunction,NonPlated,NPTH,ComponentDrill
T2C3.200
%
G90
G05
T1
{vias}
T2
X30.0Y5.0
M30
"""


def _via_lines(b):
    return "\n".join(f"X{v.x:.3f}Y{v.y:.3f}" for v in b.vias)


def test_mixed_plating_drill_is_read_with_per_tool_plating(tmp_path):
    b = four_layer(tmp_path)
    (tmp_path / "q.drl").write_text(KICAD_MIXED.format(vias=_via_lines(b)))
    board = load.load_board(tmp_path)
    [d] = board.drills
    assert d.hole_count == 4 and d.plating == "mixed" and (d.from_layer, d.to_layer) == (1, 4)
    assert d.hole_plated.tolist() == [True, True, True, False]  # the 3.2 mm hole is NPTH
    assert d.plating_source == "tool sections" and d.span_source == "X2 attribute"
    r = run("layers", tmp_path)
    assert r.exit_code == 0 and "q.drl: mixed L1-L4, 4 holes" in r.output


def test_user_mapping_wins_over_the_files_own_attribute(tmp_path):
    four_layer(tmp_path)
    st = tmp_path / "map.toml"
    st.write_text('[layers]\n"q.drl" = "drill:1-2"\n')
    board, _ = pipeline.read_board(tmp_path, st)
    [d] = board.drills
    assert (d.from_layer, d.to_layer) == (1, 2) and d.span_source == "stackup file"
    assert any(
        "q.drl: X2 attribute says 'Plated,1,4,PTH', the stackup file says 'drill:1-2'" in a
        for a in board.assumptions
    )


ALTIUM_DRILL = """M48
;Layer_Color=9474304
;FILE_FORMAT=4:4
METRIC,LZ
;TYPE=PLATED
T1F00S00C0.3000
;TYPE=NON_PLATED
T2F00S00C3.2000
%
T01
{vias}
T02
X003Y0005
M30
"""


def _altium_coord(v):  # 4:4 with trailing zeros left off
    return f"{int(round(v * 1e4)):08d}".rstrip("0") or "0"


def test_altium_type_sections_give_plating_per_tool(tmp_path):
    b = four_layer(tmp_path)
    (tmp_path / "q.drl").unlink()
    vias = "\n".join(f"X{_altium_coord(v.x)}Y{_altium_coord(v.y)}" for v in b.vias)
    (tmp_path / "q-RoundHoles.TXT").write_text(ALTIUM_DRILL.format(vias=vias))
    board = load.load_board(tmp_path)
    [d] = board.drills
    assert d.hole_count == 4 and d.hole_plated.tolist() == [True, True, True, False]
    assert np.allclose(d.holes[-1, :2], (30, 5)) and d.plating_source == "tool sections"


def test_layer_pair_file_gives_blind_via_spans_whatever_the_case(tmp_path):
    """Layer-pair file lines name the drill files in lower case and the layers by extension."""
    b = four_layer(tmp_path, job_file=False)
    for n, ext in zip(range(1, 5), ("GTL", "G1", "G2", "GBL")):
        (tmp_path / f"q-L{n}.gbr").rename(tmp_path / f"Q.{ext}")
    (tmp_path / "q.drl").unlink()
    vias = "\n".join(f"X{_altium_coord(v.x)}Y{_altium_coord(v.y)}" for v in b.vias[:1])
    (tmp_path / "Q.TXT").write_text(
        ALTIUM_DRILL.format(
            vias="\n".join(f"X{_altium_coord(v.x)}Y{_altium_coord(v.y)}" for v in b.vias)
        )
    )
    (tmp_path / "Q.TX1").write_text(ALTIUM_DRILL.format(vias=vias).replace("T02\nX003Y0005\n", ""))
    (tmp_path / "Q.LDP").write_text(
        "Layer Pairs Export File for PCB: Q.PcbDoc\n"
        "LayersSetName=Top_Bot_Thru_Holes|DrillFile=q.txt|DrillLayers=gtl,g1,g2,gbl\n"
        "LayersSetName=L3_Bot_Blind_Vias|DrillFile=q.tx1|DrillLayers=g2,gbl\n"
    )
    board = load.load_board(tmp_path)
    spans = {d.file: (d.from_layer, d.to_layer, d.span_source) for d in board.drills}
    assert spans["Q.TX1"] == (3, 4, "layer-pair file Q.LDP") and spans["Q.TXT"][:2] == (1, 4)
    r = run("layers", tmp_path)
    assert (
        r.exit_code == 0 and "Q.TX1: plated L3-L4, 1 holes (span: layer-pair file Q.LDP" in r.output
    )


def test_drill_report_spans_when_there_is_no_layer_pair_file(tmp_path):
    b = four_layer(tmp_path, job_file=False)
    (tmp_path / "q.drl").unlink()
    vias = "\n".join(f"X{_altium_coord(v.x)}Y{_altium_coord(v.y)}" for v in b.vias)
    (tmp_path / "q.TX1").write_text(ALTIUM_DRILL.format(vias=vias))
    (tmp_path / "q.DRR").write_text(
        "NCDrill File Report For: q.PcbDoc\n\nLayer Pair : L2 to Bottom\n"
        "ASCII RoundHoles File : q.TX1\n"
    )
    [d] = load.load_board(tmp_path).drills
    assert (d.from_layer, d.to_layer) == (2, 4) and d.span_source == "drill report q.DRR"


def _outline_gerber(strokes, arcs=()):
    """A mechanical Gerber of our own, without attributes: 0.1 mm strokes, optional arcs (x1, y1,
    x2, y2, cx, cy)."""
    body = ["%FSLAX46Y46*%", "%MOMM*%", "%ADD10C,0.100000*%", "D10*", "G01*", "G75*"]
    c = lambda v: str(int(round(v * 1e6)))  # noqa: E731
    for pts in strokes:
        body.append(f"X{c(pts[0][0])}Y{c(pts[0][1])}D02*")
        body += [f"X{c(x)}Y{c(y)}D01*" for x, y in pts[1:]]
    for x1, y1, x2, y2, cx, cy in arcs:
        body += [
            f"X{c(x1)}Y{c(y1)}D02*",
            "G03*",
            f"X{c(x2)}Y{c(y2)}I{c(cx - x1)}J{c(cy - y1)}D01*",
            "G01*",
        ]
    return "\n".join(body + ["M02*", ""])


def test_outline_beside_a_break_away_frame_on_a_mechanical_layer(tmp_path):
    """The board joined by tabs to a frame (T-junctions), one edge 0.1 um short of its corner; a
    drawing
    sheet 20x the board on another layer. The outline must be the board."""
    four_layer(tmp_path, job_file=False)
    (tmp_path / "q-profile.gbr").unlink()
    board = [[(0, 0), (60, 0), (60, 40)], [(60, 40.0001), (0, 40), (0, 0)]]
    frame = [[(-10, -10), (70, -10), (70, 50), (-10, 50), (-10, -10)]]
    tabs = [[(20, 0), (20, -10)], [(23, 0), (23, -10)], [(20, 40), (20, 50)], [(23, 40), (23, 50)]]
    (tmp_path / "q.GM6").write_text(_outline_gerber(board + frame + tabs))
    sheet = [[(-100, -100), (300, -100), (300, 200), (-100, 200), (-100, -100)]]
    (tmp_path / "q.GM1").write_text(_outline_gerber(sheet + frame))
    b = load.load_board(tmp_path)
    assert b.outline.area == pytest.approx(2400, abs=0.5) and b.outline_file == "q.GM6"
    assert not b.problems
    r = run("layers", tmp_path)
    assert (
        r.exit_code == 0
        and "outline from q.GM6: the smallest closed loop holding 100.0% of the copper" in r.output
    )


def test_outline_of_arcs(tmp_path):
    """A 60 x 40 rounded rectangle (r = 5) drawn as four lines and four arcs: area 2400 - (4 -
    pi) r^2."""
    four_layer(tmp_path, job_file=False)
    r = 5
    lines = [
        [(r, 0), (60 - r, 0)],
        [(60, r), (60, 40 - r)],
        [(60 - r, 40), (r, 40)],
        [(0, 40 - r), (0, r)],
    ]
    arcs = [
        (60 - r, 0, 60, r, 60 - r, r),
        (60, 40 - r, 60 - r, 40, 60 - r, 40 - r),
        (r, 40, 0, 40 - r, r, 40 - r),
        (0, r, r, 0, r, r),
    ]
    text = _outline_gerber(lines, arcs).replace(
        "%FSLAX46Y46*%", "%TF.FileFunction,Profile,NP*%\n%FSLAX46Y46*%"
    )
    (tmp_path / "q-profile.gbr").write_text(text)
    b = load.load_board(tmp_path)
    assert b.outline.area == pytest.approx(2400 - (4 - math.pi) * r * r, rel=1e-4)


def test_a_frame_alone_is_not_taken_as_the_outline(tmp_path):
    """Only a drawing frame 20x the board's area: not the outline; the copper's extent, stated."""
    four_layer(tmp_path, job_file=False)
    (tmp_path / "q-profile.gbr").write_text(
        _outline_gerber(
            [[(-100, -100), (200, -100), (200, 100), (-100, 100), (-100, -100)]]
        ).replace("%FSLAX46Y46*%", "%TF.FileFunction,Profile,NP*%\n%FSLAX46Y46*%")
    )
    b = load.load_board(tmp_path)
    assert b.outline_file is None and b.outline.area == pytest.approx(2400, rel=0.01)
    assert any(
        "no closed outline holds the copper" in a and "q-profile.gbr" in a for a in b.assumptions
    )


@pytest.mark.parametrize("damage", ["empty", "junk", "truncated"])
def test_broken_plane_file_is_refused_and_layers_keep_their_names(tmp_path, damage):
    four_layer(tmp_path)
    plane = tmp_path / "q-L2.gbr"
    text = plane.read_text()
    if damage == "empty":
        plane.write_text("")
    elif damage == "junk":
        plane.write_bytes(bytes(np.random.default_rng(1).integers(0, 256, 3000, dtype=np.uint8)))
    else:  # cut off in a region, mid-command
        plane.write_text(text[: text.index("G37*") - 5])
    r = run("check", tmp_path)
    assert r.exit_code == 2
    lines = [ln for ln in r.output.splitlines() if ln.startswith("returngap: incomplete:")]
    assert lines and any("q-L2.gbr" in ln or "L2:" in ln for ln in lines), r.output
    if damage == "truncated":
        assert any("q-L2.gbr" in ln and "truncated" in ln for ln in lines)
    else:
        assert any("q-L2.gbr" in ln and "job file says it is copper L2" in ln for ln in lines)
    out = tmp_path / "rep.json"
    r = run("check", tmp_path, "--allow-incomplete", "--json", out, "--fail-on", "never")
    assert r.exit_code == 0 and "INCOMPLETE" in r.output
    rep = json.loads(out.read_text())
    assert rep["summary"]["status"] == "incomplete" and rep["problems"]
    assert [c["name"] for c in rep["board"]["copper_layers"]] == ["L1", "L2", "L3", "L4"]
    assert rep["board"]["copper_layers"][2]["file"] == "q-L3.gbr"  # the old L3 is not renamed L2


def test_missing_bottom_layer_without_job_file_is_found_from_the_numbering(tmp_path):
    four_layer(tmp_path, job_file=False)
    (tmp_path / "q-L4.gbr").unlink()
    with pytest.raises(IncompleteError) as e:
        pipeline.run_check(tmp_path)
    assert any(p.file == "L4" and "inner layer" in p.message for p in e.value.problems)


def test_single_copper_file_is_refused(tmp_path):
    four_layer(tmp_path)
    r = run("check", tmp_path / "q-L1.gbr")
    assert r.exit_code == 2
    assert "zero signal tracks checked: only one copper layer (q-L1.gbr)" in r.output


def test_no_drill_file_on_a_multilayer_board_is_refused(tmp_path):
    four_layer(tmp_path)
    (tmp_path / "q.drl").unlink()
    r = run("check", tmp_path)
    assert r.exit_code == 2 and "no drill holes on a board of 4 copper layers" in r.output


def test_refusal_in_junit_and_html_when_allowed(tmp_path):
    four_layer(tmp_path)
    (tmp_path / "q.drl").unlink()
    out = tmp_path / "out"
    r = run("check", tmp_path, "--allow-incomplete", "--out", out, "--fail-on", "never", "--quiet")
    assert r.exit_code == 0
    junit = (out / "junit.xml").read_text()
    assert '<property name="status" value="incomplete"/>' in junit and "<skipped message=" in junit
    assert "Incomplete board data" in (out / "report.html").read_text()


def test_two_net_labels_on_one_copper_are_a_net_conflict(tmp_path):
    """A pad labelled SIG_B drawn inside a GND pour on L1: a short in the released data."""
    b = SynthBoard("n", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((1, "GND", rect(40, 2, 58, 12)))
    b.pads.append((1, 45, 7, 1.0, 1.0, "SIG_B", ("U7", "3")))
    b.tracks.append((1, "SIG_A", [(5, 20), (55, 20)], 0.2))
    b.vias.append(Via(5, 5, "GND"))
    b.write(tmp_path)
    result = pipeline.run_check(tmp_path)
    [f] = [f for f in result.findings if f["kind"] == "net-conflict"]
    assert f["severity"] == "error" and f["net"] == "SIG_B" and f["layer"] == "L1"
    assert f["conflicting_nets"] == ["GND", "SIG_B"] and (f["x_mm"], f["y_mm"]) == (45, 7)


def test_a_net_tie_part_is_a_stated_info(tmp_path):
    """Two pads of one part on two nets, touching (a net tie): reported, but as designed."""
    b = SynthBoard("t", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.pads.append((1, 45, 7, 1.0, 1.0, "AGND", ("NT1", "1")))
    b.pads.append((1, 45.9, 7, 1.0, 1.0, "GND", ("NT1", "2")))
    b.tracks.append((1, "SIG_A", [(5, 20), (55, 20)], 0.2))
    b.vias.append(Via(5, 5, "GND"))
    b.write(tmp_path)
    [f] = [f for f in pipeline.run_check(tmp_path).findings if f["kind"] == "net-conflict"]
    assert f["severity"] == "info" and f["joined_by_part"] == "NT1"


def test_terminal_shows_assumptions_also_when_quiet(tmp_path):
    four_layer(tmp_path, job_file=False)
    r = run("check", tmp_path, "--fail-on", "never")
    assert "assumptions and warnings" in r.output
    r = run("check", tmp_path, "--fail-on", "never", "--quiet")
    assert "assumption(s)" in r.output and len(r.output.strip().splitlines()) == 2


def test_a_profile_the_user_names_keeps_its_cut_outs(tmp_path):
    """A stackup-file profile: 60 x 40 with a 10 x 4 mm routed cut-out where no layer has copper."""
    b = SynthBoard("u", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    for n in (2, 3):
        b.planes.append((n, "GND", rect(0, 0, 60, 40)))
        b.cutouts.append((n, rect(24, 28, 36, 34)))  # the planes are pulled back round it
    b.tracks.append((1, "SIG", [(5, 10), (55, 10)], 0.2))
    b.vias.append(Via(5, 5, "GND"))
    b.write(tmp_path, job_file=False)
    (tmp_path / "u-profile.gbr").unlink()
    (tmp_path / "Dim.gbr").write_text(
        _outline_gerber(
            [
                [(0, 0), (60, 0), (60, 40), (0, 40), (0, 0)],
                [(25, 29), (35, 29), (35, 33), (25, 33), (25, 29)],
            ]
        )
    )
    st = tmp_path / "stackup.toml"
    st.write_text(st.read_text() + '\n[layers]\n"Dim.gbr" = "profile"\n')
    board, _ = pipeline.read_board(tmp_path, st)
    assert board.outline.area == pytest.approx(2400 - 40, abs=0.01)
    assert board.outline_why == "named as the profile in the stackup file, 1 cut-out(s)"


def test_thresholds_are_set_in_the_stackup_file(tmp_path):
    """[thresholds] sets any setting by name; the command line wins; an unknown name is refused."""
    four_layer(tmp_path)
    st = tmp_path / "stackup.toml"
    base = st.read_text()
    st.write_text(base + "\n[thresholds]\nedge_distance_h = 5.0\nrise_time_ns = 2.0\n")
    out = tmp_path / "r.json"
    r = run("check", tmp_path, "--stackup", st, "--json", out, "--fail-on", "never")
    assert r.exit_code == 0
    s = json.loads(out.read_text())["settings"]
    assert s["edge_distance_h"] == 5.0 and s["rise_time_ns"] == 2.0
    r = run(
        "check",
        tmp_path,
        "--stackup",
        st,
        "--json",
        out,
        "--fail-on",
        "never",
        "--rise-time",
        "0.1",
    )
    assert json.loads(out.read_text())["settings"]["rise_time_ns"] == 0.1  # the command line wins
    st.write_text(base + "\n[thresholds]\nedge_distanse_h = 5.0\n")
    r = run("check", tmp_path, "--stackup", st)
    assert (
        r.exit_code == 2
        and "stackup.toml" in r.output
        and "unknown setting 'edge_distanse_h'" in r.output
    )


def test_a_blind_via_file_without_its_layer_pair_file_takes_its_span_from_its_pads(tmp_path):
    """A drill file that states no span, whose holes have pads on L3 and L4 only, is no through
    hole."""
    b = SynthBoard("v", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.tracks.append((1, "SIG", [(10, 20), (50, 20)], 0.2))
    b.vias.append(Via(5, 5, "GND"))
    for layer in (3, 4):
        b.pads.append((layer, 40, 30, 0.5, 0.5, "GND", None))
    b.write(tmp_path, job_file=False)
    drill = ALTIUM_DRILL.format(vias=f"X{_altium_coord(40)}Y{_altium_coord(30)}").replace(
        "T02\nX003Y0005\n", ""
    )
    (tmp_path / "v.TX1").write_text(drill)
    board = load.load_board(tmp_path)
    d = next(x for x in board.drills if x.file == "v.TX1")
    assert (d.from_layer, d.to_layer) == (3, 4) and d.span_source == "where its holes have pads"
    assert any(
        "v.TX1: no layer span stated; its holes have pads on L3-L4 only" in a
        for a in board.assumptions
    )
    assert not any(
        "v.TX1: no layer span stated; taken as a through hole" in a for a in board.assumptions
    )
    through = next(x for x in board.drills if x.file == "v.drl")
    assert (through.from_layer, through.to_layer) == (1, 4)
