"""Each gerbonara 1.6.3 defect we work around, checked against geometry (one test per gap)."""

from gerbonara import ExcellonFile, GerberFile

from conftest import gerber
from returngap.geometry import shapes
from returngap.io import compat, excellon, load, roles

compat.apply()


def test_step_and_repeat_expands_every_instance():
    # 3 x 2 repeat of a flash, a line and a region: 18 objects (geometry: 6 copies of 3)
    body = """%ADD10C,1.000000*%
%SRX3Y2I10.0J5.0*%
D10*
X0Y0D03*
X1000000Y0D02*
X3000000Y0D01*
G36*
X0Y2000000D02*
X1000000Y2000000D01*
X1000000Y3000000D01*
X0Y3000000D01*
X0Y2000000D01*
G37*
%SR*%"""
    g = GerberFile.from_string(gerber(body))
    assert len(g.objects) == 18
    xs = sorted({round(o.x, 3) for o in g.objects if type(o).__name__ == "Flash"})
    assert xs == [0.0, 10.0, 20.0]


def test_region_keeps_net_attribute():
    body = """%TO.N,GND*%
G36*
X0Y0D02*
X10000000Y0D01*
X10000000Y10000000D01*
X0Y10000000D01*
X0Y0D01*
G37*
%TD*%"""
    g = GerberFile.from_string(gerber(body))
    regions = [o for o in g.objects if type(o).__name__ == "Region"]
    assert regions and regions[0].attrs.get(".N") == ("GND",)


def test_rotated_macro_rectangles_have_the_right_area():
    # centre line 4 x 1 rotated 30 deg and vector line w=1 from (0,0) to (3,3): areas 4.0 and
    # 3*sqrt(2)
    body = """%AMCL*21,1,4,1,0,0,30*%
%AMVL*20,1,1,0,0,3,3,0*%
%ADD10CL*%
%ADD11VL*%
D10*
X0Y0D03*
D11*
X20000000Y0D03*"""
    g = GerberFile.from_string(gerber(body))
    aps = shapes.ApertureShapes()
    a = [aps.shape(o.aperture).area for o in g.objects]
    assert abs(a[0] - 4.0) < 1e-6
    assert abs(a[1] - 3 * 2**0.5) < 1e-6


def test_excellon_x2_comment_sets_plating(tmp_path):
    text = (
        "M48\n; #@! TF.FileFunction,NonPlated,1,4,NPTH\nMETRIC\nT1C1.000\n%\n"
        "G90\nT1\nX1.0Y1.0\nM30\n"
    )
    role = roles.role_from_function(roles.X2_FUNC_RE.search(text).group(1))
    d = ExcellonFile.from_string(text)
    drill, _ = excellon.build_drill(
        type("F", (), {"name": "x.drl"})(), d, role, 4, text, "", role.span, "X2"
    )
    assert drill.plated is False and (drill.from_layer, drill.to_layer) == (1, 4)


def test_renamed_files_are_recognised_by_their_attributes(tmp_path):
    # gerbonara's name recognition fails on unfamiliar names; our X2 reading does not
    (tmp_path / "file1.gbr").write_text(
        gerber(
            "%ADD10C,0.2*%\nD10*\nX0Y0D02*\nX1000000Y0D01*",
            attrs="%TF.FileFunction,Copper,L2,Bot*%",
        )
    )
    (tmp_path / "file2.gbr").write_text(
        gerber(
            "%ADD10C,0.2*%\nD10*\nX0Y0D02*\nX1000000Y0D01*",
            attrs="G04 #@! TF.FileFunction,Copper,L1,Top*",
        )
    )
    b = load.load_board(tmp_path)
    assert [(c.name, c.file) for c in b.copper] == [("L1", "file2.gbr"), ("L2", "file1.gbr")]


def test_job_file_is_read(tmp_path):
    (tmp_path / "a.gbr").write_text(
        gerber("%ADD10C,0.2*%\nD10*\nX0Y0D02*\nX1000000Y0D01*", attrs="")
    )
    (tmp_path / "b.gbr").write_text(
        gerber("%ADD10C,0.2*%\nD10*\nX0Y0D02*\nX1000000Y0D01*", attrs="")
    )
    (tmp_path / "board.gbrjob").write_text(
        '{"Header": {}, "FilesAttributes": [{"Path": "a.gbr", "FileFunction": "Copper,L2,Bot"},'
        ' {"Path": "b.gbr", "FileFunction": "Copper,L1,Top"}]}'
    )
    b = load.load_board(tmp_path)
    assert [(c.name, c.file, c.identified_by) for c in b.copper] == [
        ("L1", "b.gbr", "job file"),
        ("L2", "a.gbr", "job file"),
    ]
