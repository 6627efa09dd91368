"""Real released boards in ../shared/corpus (skipped when that folder is absent)."""

import io
import json
import re

import numpy as np
import pytest
import shapely

from conftest import ROOT, corpus_board
from returngap.run import pipeline

MAPS = ROOT / "testdata" / "corpus-maps"
BOARDS = {
    "a20-olinuxino-lime2-k2": ("a20-olinuxino-lime2-k2", MAPS / "a20-olinuxino-lime2-k2.toml", 8),
    "limesdr-usb-1v4": ("limesdr-usb-1v4", None, 12),
    "limesdr-micro-m2-1v2": ("limesdr-micro-m2-1v2", None, 8),
    "mch2022-badge": ("mch2022-badge", None, 4),
    "parallella-buddy-rev1": (
        "parallella-buddy-rev1/extracted",
        MAPS / "parallella-buddy-rev1.toml",
        14,
    ),
    "poe-gpib-adapter": ("poe-gpib-adapter", None, 6),
    "stmp157-olinuxino-lime2-b1": ("stmp157-olinuxino-lime2-b1", None, 8),
    "ulx3s-v3.1.1": ("ulx3s-v3.1.1", None, 4),
    "vesc-4.12": ("vesc-4.12", None, 4),
}
X2 = re.compile(r"(?:%TF|G04 #@! TF)\.FileFunction,Copper,L(\d+)")


@pytest.fixture(scope="module")
def loaded():
    cache = {}

    def get(slug):
        if slug not in cache:
            path, stack, _ = BOARDS[slug]
            cache[slug] = pipeline.read_board(corpus_board(path), stack)[0]
        return cache[slug]

    return get


# boards read in the default test run; `make corpus` (RETURNGAP_SLOW=1) reads them all
DEFAULT = ["limesdr-micro-m2-1v2", "mch2022-badge", "poe-gpib-adapter", "ulx3s-v3.1.1", "vesc-4.12"]


def slow_unless_default(slug):
    if slug not in DEFAULT and not __import__("os").environ.get("RETURNGAP_SLOW"):
        pytest.skip("slow corpus board; run `make corpus` (RETURNGAP_SLOW=1)")


@pytest.mark.parametrize("slug", sorted(BOARDS))
def test_board_loads(loaded, slug):
    slow_unless_default(slug)
    b = loaded(slug)
    assert len(b.copper) == BOARDS[slug][2]
    assert b.outline.area > 100
    assert all(c.copper_area_mm2 > 0 for c in b.copper)
    assert b.drills and all(d.hole_count > 0 for d in b.drills)
    assert sum(d.hole_count for d in b.drills) > 100
    # holes fall on the board (drill formats inferred where the header is silent)
    holes = np.vstack([d.holes[:, :2] for d in b.drills if len(d.holes)])
    inside = shapely.contains_xy(b.outline.buffer(0.5), holes[:, 0], holes[:, 1])
    assert inside.mean() > 0.97


@pytest.mark.parametrize(
    "slug",
    [
        "poe-gpib-adapter",
        "stmp157-olinuxino-lime2-b1",
        "ulx3s-v3.1.1",
        "mch2022-badge",
        "vesc-4.12",
    ],
)
def test_layer_order_follows_the_files_own_attributes(loaded, slug):
    slow_unless_default(slug)
    b = loaded(slug)
    root = corpus_board(BOARDS[slug][0])
    for c in b.copper:
        text = (root / c.file).read_text(encoding="latin-1")
        assert int(X2.search(text).group(1)) == int(c.name[1:]), c.file


def test_outline_is_the_board_not_its_frame_or_drawing_sheet(loaded):
    """GM6 holds the 80 x 22 mm M.2 outline joined by tabs to a break-away frame; GM1 a drawing
    sheet
    (shared/corpus/INDEX.md, item 13)."""
    b = loaded("limesdr-micro-m2-1v2")
    x0, y0, x1, y1 = b.outline.bounds
    assert (round(x1 - x0, 2), round(y1 - y0, 2)) == (80.0, 22.0)
    assert b.outline.area == pytest.approx(1743, abs=3) and b.outline_file.endswith(".GM6")


def test_blind_via_span_comes_from_the_layer_pair_file(loaded):
    """.LDP: the .TX1 file spans g4..gbl = L5-L8 (INDEX.md item 12); its holes land on L5 and L8
    pads."""
    b = loaded("limesdr-micro-m2-1v2")
    spans = {d.file.rsplit(".", 1)[1]: (d.from_layer, d.to_layer, d.plating) for d in b.drills}
    assert spans == {"TX1": (5, 8, "plated"), "TXT": (1, 8, "mixed")}
    tx1 = next(d for d in b.drills if d.file.endswith(".TX1"))
    assert tx1.hole_count == 124 and "layer-pair file" in tx1.span_source
    txt = next(d for d in b.drills if d.file.endswith(".TXT"))
    assert int((~txt.hole_plated).sum()) == 8  # the 0.8 mm NPTH tool (INDEX.md; .DRR)


def test_altium_drill_spans_and_plating_are_reported(loaded):
    slow_unless_default("limesdr-usb-1v4")
    b = loaded("limesdr-usb-1v4")
    assert all(
        (d.from_layer, d.to_layer) == (1, 12) and "layer-pair file" in d.span_source
        for d in b.drills
    )
    round_holes = next(d for d in b.drills if "RoundHoles" in d.file)
    assert round_holes.plating == "mixed" and round_holes.plating_source == "tool sections"


@pytest.mark.parametrize("slug", sorted(BOARDS))
def test_no_corpus_board_is_incomplete(loaded, slug):
    slow_unless_default(slug)
    assert not loaded(slug).problems


def test_job_file_contradiction_is_reported(loaded):
    b = loaded("poe-gpib-adapter")
    assert any("job file says 'Copper,L5,Inr'" in a and "In1_Cu" in a for a in b.assumptions)
    assert not b.problems  # the job file's numbering is wrong, its layer count is right


def test_job_file_stackup_is_used(loaded):
    b = loaded("poe-gpib-adapter")
    job = json.loads(next(corpus_board("poe-gpib-adapter").glob("*.gbrjob")).read_text())
    diel = [float(x["Thickness"]) for x in job["MaterialStackup"] if x["Type"] == "Dielectric"]
    assert b.stackup.source == "job file"
    assert [round(d.thickness_mm, 6) for d in b.stackup.dielectrics] == [round(t, 6) for t in diel]


def test_unattributed_drill_formats_are_inferred(loaded):
    slow_unless_default("parallella-buddy-rev1")
    for slug in ("parallella-buddy-rev1", "a20-olinuxino-lime2-k2"):
        b = loaded(slug)
        assert b.drills[0].hole_count > 1000


def _pygerber_raster(path, dpmm):
    pg = pytest.importorskip("pygerber.gerberx3.api.v2")
    from PIL import Image
    from pygerber.common.rgba import RGBA

    black, white = RGBA.from_rgba(0, 0, 0, 255), RGBA.from_rgba(255, 255, 255, 255)
    scheme = pg.ColorScheme(
        background_color=black,
        clear_color=black,
        solid_color=white,
        clear_region_color=black,
        solid_region_color=white,
    )
    pf = pg.GerberFile.from_file(path).parse(on_parser_error=pg.OnParserErrorEnum.Warn)
    info = pf.get_info()
    buf = io.BytesIO()
    pf.render_raster(buf, color_scheme=scheme, dpmm=dpmm, image_format=pg.ImageFormatEnum.PNG)
    return (
        np.asarray(Image.open(buf).convert("L")) > 127,
        float(info.min_x_mm),
        float(info.max_y_mm),
    )


@pytest.mark.parametrize(
    "slug,layer", [("poe-gpib-adapter", "L2"), ("vesc-4.12", "L3"), ("mch2022-badge", "L3")]
)
def test_copper_agrees_with_pygerber(loaded, slug, layer):
    """Independent rasterisation by pygerber: area within 1 %, no disagreeing blob 5 px wide."""
    if slug == "mch2022-badge":
        slow_unless_default("parallella-buddy-rev1")  # 30 s of pygerber: in make corpus only
    ndimage = pytest.importorskip("scipy.ndimage")
    b = loaded(slug)
    c = b.layer(layer)
    dpmm = 50
    img, x0, y1 = _pygerber_raster(corpus_board(BOARDS[slug][0]) / c.file, dpmm)
    assert abs(img.sum() / dpmm**2 - c.copper_area_mm2) / c.copper_area_mm2 < 0.01
    rows, cols = img.shape
    best = None
    for dr in (-1, 0, 1):  # pygerber's raster sits about a pixel off its own bbox
        for dc in (-1, 0, 1):
            xs = x0 + (np.arange(cols) + 0.5 + dc) / dpmm
            ys = y1 - (np.arange(rows) + 0.5 + dr) / dpmm
            gx, gy = np.meshgrid(xs[::4], ys[::4])
            ours = shapely.contains_xy(c.geometry, gx, gy)
            miss = np.count_nonzero(ours != img[::4, ::4])
            if best is None or miss < best[0]:
                best = (miss, dr, dc)
    _, dr, dc = best
    xs = x0 + (np.arange(cols) + 0.5 + dc) / dpmm
    ys = y1 - (np.arange(rows) + 0.5 + dr) / dpmm
    ours = np.zeros_like(img)
    for r0 in range(0, rows, 512):
        gx, gy = np.meshgrid(xs, ys[r0 : r0 + 512])
        ours[r0 : r0 + 512] = shapely.contains_xy(c.geometry, gx, gy)
    blobs = ndimage.binary_opening(ours != img, structure=np.ones((5, 5)))
    assert not blobs.any(), f"{blobs.sum()} px disagree in blobs 5 px wide or more"


SLOW = pytest.mark.skipif(
    not __import__("os").environ.get("RETURNGAP_SLOW"),
    reason="full corpus check is slow; run `make corpus` (RETURNGAP_SLOW=1)",
)
QUICK = ["poe-gpib-adapter", "vesc-4.12"]


@pytest.mark.parametrize("slug", sorted(BOARDS))
def test_check_runs_to_completion(slug):
    if slug not in QUICK and not __import__("os").environ.get("RETURNGAP_SLOW"):
        pytest.skip("full corpus check is slow; run `make corpus` (RETURNGAP_SLOW=1)")
    path, stack, _ = BOARDS[slug]
    r = pipeline.run_check(corpus_board(path), stack)
    assert r.chains
    copper = {}
    for f in r.findings:
        if f.get(
            "detour_path_mm"
        ):  # every detour stays in plane copper (a path may hug an edge by 6 um)
            ref = f["reference_layer"]
            if ref not in copper:
                copper[ref] = r.nets.layers[ref].union_of(r.nets.plane_nets).buffer(0.006)
            assert shapely.LineString(f["detour_path_mm"]).difference(copper[ref]).length < 1e-3, f[
                "id"
            ]
        assert f["severity"] in ("error", "warning", "info")
        if f["kind"] != "gap-crossing":
            continue
        assert f["gap_length_mm"] >= 0 and 0 <= f["interrupted_fraction"] <= 1
        assert (f["detour_mm"] is None) == (f["gap_type"] == "split")


def test_inferred_drill_format_matches_the_netlist(loaded):
    # the Allegro drill file states no format; its holes must sit on the IPC-D-356 via records
    slow_unless_default("parallella-buddy-rev1")
    b = loaded("parallella-buddy-rev1")
    vias = np.array([(p.x, p.y) for p in b.netlist if p.is_via])
    holes = np.vstack([d.holes[:, :2] for d in b.drills])
    tree = shapely.STRtree(shapely.points(holes))
    d = tree.query_nearest(shapely.points(vias), return_distance=True)[1]
    assert len(vias) > 1000 and np.mean(d < 0.01) > 0.95
