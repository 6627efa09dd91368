"""Review outputs on the demo board: pictures, CSV, JUnit, HTML, waivers and baseline comparison."""

import csv
import io
import json
import shutil
import subprocess
import sys

import numpy as np
import pytest
from click.testing import CliRunner
from PIL import Image

from conftest import ROOT
from returngap.cli import main
from returngap.report import core as report
from returngap.report import render
from returngap.run.pipeline import run_check

DEMO = ROOT / "examples" / "demo-board"
sys.path.insert(0, str(ROOT / "examples"))
import make_demo_board  # noqa: E402


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


@pytest.fixture(scope="module")
def demo_out(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    run("check", DEMO, "--out", out, "--fail-on", "never")
    return out


def test_pictures_exist_decode_and_are_ticket_sized(demo_out):
    rep = json.loads((demo_out / "findings.json").read_text())
    pngs = sorted(demo_out.glob("overview*.png")) + sorted(demo_out.glob("finding-*.png"))
    # a picture for each error and warning (the default level), and the overviews
    assert len(list(demo_out.glob("finding-*.png"))) == sum(
        1 for f in rep["findings"] if f["severity"] != "info"
    )
    for p in pngs:
        img = Image.open(p)
        img.load()
        assert abs(img.size[0] - 1200) <= 10
        assert p.stat().st_size < 500_000


def test_pictures_drawn_in_two_processes_match_one(tmp_path, monkeypatch):
    """The report folder written with the pictures split over two forked processes holds the same
    files, byte for byte, as one written by this process alone."""
    from returngap.run import outputs, parallel

    result = run_check(DEMO, DEMO / "stackup.toml", workers=1)
    rep = report.findings_report(result)
    outputs.write_outputs(result, rep, tmp_path / "one", "never", workers=1, pictures="info")
    monkeypatch.setattr(parallel.threading, "active_count", lambda: 1)  # other tests' threads aside
    pools = []
    real_fork = parallel._fork
    monkeypatch.setattr(parallel, "_fork", lambda: pools.append(1) or real_fork())
    outputs.write_outputs(result, rep, tmp_path / "two", "never", workers=2, pictures="info")
    assert pools, "the two-process path did not run"
    one = sorted(p.name for p in (tmp_path / "one").iterdir())
    viewed = sum(1 for f in rep["findings"] if f.get("s21_loss_at_knee_dB") is not None)
    pictured = len(rep["findings"])  # every finding at the info level
    planes = len({f["reference_layer"] for f in rep["findings"] if f.get("reference_layer")})
    # pictures, overviews, gap pictures, JSON, CSV, JUnit, SARIF, HTML; a Touchstone and a CSV
    # per frequency view
    buses = len(outputs._bus_gaps(rep))  # a picture per gap two or more nets cross
    assert len(one) == pictured + 1 + planes + buses + 5 + 2 * viewed
    assert one == sorted(p.name for p in (tmp_path / "two").iterdir())
    for name in one:
        assert (tmp_path / "one" / name).read_bytes() == (tmp_path / "two" / name).read_bytes(), (
            name
        )


def test_finding_picture_highlights_the_finding(tmp_path):
    result = run_check(DEMO)
    rep = report.findings_report(result)
    for i, f in enumerate(rep["findings"], 1):
        p = tmp_path / f"{f['id']}.png"
        px, py = render.finding_png(result, f, i, p)
        rgb = np.asarray(Image.open(p).convert("RGB")).astype(int)
        want = np.array([int(render.MARK[f["severity"]][k : k + 2], 16) for k in (1, 3, 5)])
        x, y = int(round(px)), int(round(py))
        patch = rgb[y - 3 : y + 4, x - 3 : x + 4].reshape(-1, 3)
        assert (np.abs(patch - want).sum(axis=1) < 40).any(), (
            f"no highlight at the finding of {f['id']}"
        )


def test_csv_round_trips_into_the_json(demo_out):
    rep = json.loads((demo_out / "findings.json").read_text())
    rows = list(csv.DictReader(io.StringIO((demo_out / "findings.csv").read_text())))
    assert [r["id"] for r in rows] == [f["id"] for f in rep["findings"]]
    for r, f in zip(rows, rep["findings"]):
        for key in (
            "x_mm",
            "y_mm",
            "gap_length_mm",
            "interrupted_fraction",
            "added_inductance_nH",
            "resonance_GHz",
            "detour_mm",
        ):
            assert (float(r[key]) if r[key] != "" else None) == f.get(key), key
        if f.get("added_inductance_range_nH"):
            assert [float(r["added_inductance_low_nH"]), float(r["added_inductance_high_nH"])] == f[
                "added_inductance_range_nH"
            ]
        assert r["net"] == f["net"] and r["severity"] == f["severity"]


def test_junit_reads_back_with_a_junit_library(tmp_path):
    junitparser = pytest.importorskip("junitparser")
    out = tmp_path / "o"
    run("check", DEMO, "--out", out)  # default --fail-on error
    xml = junitparser.JUnitXml.fromfile(str(out / "junit.xml"))
    suites = list(xml) if not isinstance(xml, junitparser.TestSuite) else [xml]
    cases = [c for s in suites for c in s]
    rep = json.loads((out / "findings.json").read_text())
    expected = {("gap-crossing", n) for n in rep["nets_checked"]} | {
        (f["kind"], f["net"]) for f in rep["findings"]
    }
    assert len(cases) == len(expected)
    failed = {c.name for c in cases if any(isinstance(r, junitparser.Failure) for r in c.result)}
    assert failed == {
        f"{f['kind']} {f['net']}" for f in rep["findings"] if f["severity"] == "error"
    }


def test_html_is_self_contained(demo_out):
    page = (demo_out / "report.html").read_text()
    pictures = [
        p for pat in ("finding-*.png", "overview*.png", "gap-*.png") for p in demo_out.glob(pat)
    ]
    assert page.count("data:image/png;base64,") == len(pictures)
    rep = json.loads((demo_out / "findings.json").read_text())
    assert len(list(demo_out.glob("finding-*.png"))) == sum(
        1 for f in rep["findings"] if f["severity"] != "info"
    )
    assert "src='http" not in page and 'src="http' not in page and "<link" not in page
    assert "id='findings'" in page and "estimates" in page.lower()


def _screenshot(page, tmp_path, height):
    """A headless-Chromium screenshot (1280 px wide) of a page, as RGB ints; skips without one."""
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if not chromium:
        pytest.skip("no chromium on this machine (.ci/run installs it)")
    shot = tmp_path / f"shot-{height}.png"
    subprocess.run(
        [
            chromium,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={tmp_path / 'profile'}",
            f"--window-size=1280,{height}",
            f"--screenshot={shot}",
            page.as_uri(),
        ],
        check=True,
        capture_output=True,
        timeout=120,
    )
    return np.asarray(Image.open(shot).convert("RGB")).astype(int)


def _pixels_of(img, hexcol):
    want = np.array([int(hexcol[k : k + 2], 16) for k in (1, 3, 5)])
    return (np.abs(img - want).sum(axis=2) < 12).sum()


def test_html_renders_in_a_real_browser(demo_out, tmp_path):
    img = _screenshot(demo_out / "report.html", tmp_path, 2400)
    # the table header colour (#eef2f7) and the plane colour of the embedded pictures
    # (#c9d6e3) both show
    for hexcol in ("#eef2f7", "#c9d6e3"):
        assert _pixels_of(img, hexcol) > 500, hexcol


def _revised_demo(folder):
    """Revision B of the demo: SPI_SCK moved 0.4 mm, the via fence under ADC_MCLK removed."""
    b = make_demo_board.build()
    b.tracks = [
        (lyr, n, [(x, y + 0.4) for x, y in pts] if n == "SPI_SCK" else pts, w)
        for lyr, n, pts, w in b.tracks
    ]
    b.vias = [v for v in b.vias if v.net != "+1V8"]
    b.write(folder)
    return folder


def test_waivers_and_baseline_round_trip(tmp_path):
    old = tmp_path / "old.json"
    run("check", DEMO, "--json", old, "--fail-on", "never")
    before = {
        f["net"]: f for f in json.loads(old.read_text())["findings"] if f["kind"] == "gap-crossing"
    }
    waivers = tmp_path / "w.toml"
    waivers.write_text(
        f'[[waiver]]\nid = "{before["RMII_TXD0"]["id"]}"\nby = "R. Lindqvist"\n'
        'reason = "TXD0 is static in this build"\ndate = 2026-11-20\n\n'
        '[[waiver]]\nnet = "NO_SUCH_NET"\nby = "R. Lindqvist"\nreason = "left over"\n'
    )
    rev = _revised_demo(tmp_path / "rev-b")
    new = tmp_path / "new.json"
    r = run(
        "check",
        rev,
        "--json",
        new,
        "--baseline",
        old,
        "--waivers",
        waivers,
        "--fail-on",
        "error",
        "--new-only",
    )
    rep = json.loads(new.read_text())
    after = {f["net"]: f for f in rep["findings"] if f["kind"] == "gap-crossing"}
    assert after["RMII_TXD0"]["waiver"]["by"] == "R. Lindqvist"
    assert after["SPI_SCK"]["status"] == "unchanged" and after["SPI_SCK"]["y_mm"] == pytest.approx(
        35.4
    )
    assert "ADC_MCLK" not in after
    assert [x["net"] for x in rep["resolved"] if x["kind"] == "gap-crossing"] == ["ADC_MCLK"]
    assert [w["reason"] for w in rep["waivers"]["stale"]] == ["left over"]
    assert r.exit_code == 0  # nothing new; the unchanged TXD1 split does not count with --new-only
    r2 = run("check", rev, "--baseline", old, "--waivers", waivers, "--fail-on", "error")
    assert r2.exit_code == 1  # RMII_TXD1 is still an error and not waived


def test_bad_waiver_file_is_exit_2(tmp_path):
    w = tmp_path / "w.toml"
    w.write_text('[[waiver]]\nid = "abc"\n')
    r = CliRunner().invoke(main, ["check", str(DEMO), "--waivers", str(w)])
    assert r.exit_code == 2 and "'by' is required" in r.output


def test_the_page_shows_its_legend_in_a_real_browser(demo_out, tmp_path):
    # the top of report.html in headless Chromium: the colour key is visible there, its swatch of
    # a layer change's second plane (a colour no table or text uses) painted
    from returngap.report import render

    img = _screenshot(demo_out / "report.html", tmp_path, 420)
    assert _pixels_of(img, render.SECOND) > 200  # a 28 x 14 px swatch


def test_report_numbers_are_rounded_and_finite():
    # what a JSON reader accepts (RFC 8259 has no NaN or Infinity) and what diffs cleanly
    import math

    import numpy as np

    from returngap.report.core import DECIMALS, clean

    raw = {
        "a": 1.234567,
        "b": -0.00001,  # rounds to zero: written 0.0, never -0.0
        "c": [math.inf, -math.inf, math.nan, 2.5e-5],
        "d": (np.float64(3.14159265), {"e": [[0.123456, 7]]}),
        "f": "text",
        "g": None,
        "h": True,
    }
    got = clean(raw)
    assert got == {
        "a": 1.2346,
        "b": 0.0,
        "c": [None, None, None, 0.0],
        "d": [3.1416, {"e": [[0.1235, 7]]}],
        "f": "text",
        "g": None,
        "h": True,
    }
    assert math.copysign(1.0, got["b"]) == 1.0 and DECIMALS == 4
