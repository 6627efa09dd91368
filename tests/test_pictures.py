"""Pictures a reviewer can attach to a ticket: what is drawn (legend entries, labels, captions,
severity by shape and word), per-plane overviews, the picture level, and `returngap show`."""

import json

import matplotlib
import pytest
from click.testing import CliRunner

from conftest import ROOT
from returngap.cli import main
from returngap.report import core as report
from returngap.report import render
from returngap.run.pipeline import run_check

DEMO = ROOT / "examples" / "demo-board"
STACKUP = DEMO / "stackup.toml"


@pytest.fixture(scope="module")
def demo():
    result = run_check(DEMO, STACKUP)
    return result, report.findings_report(result)


def _drawn(monkeypatch, draw):
    """The figure a render function drew (kept for the next picture; we look at it first)."""
    kept = []
    monkeypatch.setattr(render, "_done", lambda fig: kept.append(fig))
    draw()
    return kept[-1]


def test_a_crossing_picture_explains_itself(demo, monkeypatch, tmp_path):
    result, rep = demo
    i, f = next((i, f) for i, f in enumerate(rep["findings"], 1) if f["gap_type"] == "split")
    fig = _drawn(monkeypatch, lambda: render.finding_png(result, f, i, tmp_path / "a.png"))
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert f"+3V3 copper on {f['reference_layer']}" in labels
    assert "+1V8 copper (the split's other side)" in labels  # the split's two sides by name
    assert "gap (no copper)" in labels
    assert "return footprint (where 90 % of the return flows)" in labels
    assert f"track {f['net']} on {f['layer']}" in labels
    assert f"{f['severity']}: this finding" in labels
    # severity by word in the title and by shape on the mark, not by colour alone
    assert f["severity"].upper() in ax.get_title()
    assert "seen from top" in ax.get_title()  # L4 is the bottom layer
    marks = [ln.get_marker() for ln in ax.get_lines()]
    assert render.SHAPE[f["severity"]] in marks
    caption = " ".join(t.get_text() for t in fig.texts)
    assert "estimate, see the report's assumptions" in caption and f"{f['id']}" in caption
    # tick labels readable at 800 px (the picture is 1200 px wide): at least 10 pt
    assert min(t.get_fontsize() for t in ax.get_xticklabels()) >= 10


def test_the_gap_is_drawn_above_the_footprint(demo, monkeypatch, tmp_path):
    result, rep = demo
    i, f = next((i, f) for i, f in enumerate(rep["findings"], 1) if f["gap_type"] == "slot")
    fig = _drawn(monkeypatch, lambda: render.finding_png(result, f, i, tmp_path / "b.png"))
    patches = fig.axes[0].patches
    gap_z = max(p.get_zorder() for p in patches if _hex(p.get_edgecolor()) == render.GAP)
    foot = matplotlib.colors.to_rgba(render.FOOTPRINT)
    foot_z = max(p.get_zorder() for p in patches if p.get_facecolor() == pytest.approx(foot))
    assert gap_z > foot_z


def _hex(rgba):
    return matplotlib.colors.to_hex(rgba, keep_alpha=False)


def test_overview_numbers_errors_and_warnings_apart(demo, monkeypatch, tmp_path):
    result, _ = demo
    rep = report.findings_report(run_check(DEMO, STACKUP, _fast_edges()))
    fig = _drawn(monkeypatch, lambda: render.overview_png(result, rep, tmp_path / "o.png", "L2"))
    ax = fig.axes[0]
    fig.canvas.draw()
    text_box = matplotlib.text.Text.get_window_extent  # the number alone, not its leader line
    boxes = [text_box(t) for t in ax.texts if t.get_text().isdigit()]
    over_l2 = [f for f in rep["findings"] if f.get("reference_layer") == "L2"]
    assert len(boxes) == sum(1 for f in over_l2 if f["severity"] != "info")
    clashes = sum(1 for k, a in enumerate(boxes) for b in boxes[k + 1 :] if a.overlaps(b))
    assert clashes <= 1  # a dense via row of 12 within 2 mm: numbers placed clear of each other
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "error (numbered as in the table)" in legend


def _fast_edges():
    from returngap.model.settings import Settings

    return Settings(rise_time_ns=0.2)  # the demo's reference changes become warnings


def _check_out(tmp_path, *extra):
    out = tmp_path / "out"
    args = ["check", str(DEMO), "--stackup", str(STACKUP), "--rise-time", "0.2", "--out", str(out)]
    r = CliRunner().invoke(main, args + ["--fail-on", "never", "-q", *extra])
    assert r.exit_code == 0, r.output
    return out, json.loads((out / "findings.json").read_text())


@pytest.mark.parametrize("level, kept", [("error", {"error"}), ("none", set())])
def test_pictures_only_at_or_above_the_level(tmp_path, level, kept):
    out, rep = _check_out(tmp_path, "--pictures", level)
    pictured = {p.name for p in out.glob("finding-*.png")}
    assert pictured == {f"finding-{f['id']}.png" for f in rep["findings"] if f["severity"] in kept}
    assert (out / "overview-L2.png").exists() and (out / "overview-L3.png").exists()
    page = (out / "report.html").read_text()
    assert "below the picture level have no picture" in page


def test_show_draws_one_finding_or_one_area(tmp_path):
    out, rep = _check_out(tmp_path, "--pictures", "none")
    runner = CliRunner()
    one = tmp_path / "one.png"
    r = runner.invoke(
        main, ["show", str(out / "findings.json"), "--id", rep["findings"][0]["id"], "--png", one]
    )
    assert r.exit_code == 0 and one.stat().st_size > 10_000
    area = tmp_path / "area.png"
    r = runner.invoke(
        main,
        [
            "show",
            str(out / "findings.json"),
            "--area",
            "30,5,70,40",
            "--layer",
            "L2",
            "--png",
            area,
        ],
    )
    assert r.exit_code == 0 and area.stat().st_size > 10_000
    r = runner.invoke(
        main, ["show", str(out / "findings.json"), "--area", "1,2,3,4", "--png", area]
    )
    assert r.exit_code == 2 and "--area needs --layer" in r.output


def test_an_island_and_a_run_are_drawn_whole(tmp_path, monkeypatch):
    # a floating island's outline and an edge run's whole stretch, each with its legend entry
    from boards import hazard_board

    result = run_check(hazard_board(tmp_path / "b", stitch_pitch=8.0))
    rep = report.findings_report(result)
    for i, f in enumerate(rep["findings"], 1):
        if f["kind"] not in ("floating-copper", "edge-run"):
            continue
        fig = _drawn(
            monkeypatch, lambda f=f, i=i: render.finding_png(result, f, i, tmp_path / "p.png")
        )
        ax = fig.axes[0]
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        lo, hi = ax.get_xlim()
        if f["kind"] == "floating-copper":
            assert "the floating island (no connection)" in labels
            assert not any(lb.startswith("return footprint") for lb in labels)
            assert lo <= f["x_mm"] - 9 and hi >= f["x_mm"] + 9  # the whole 20 mm island in view
        else:
            assert "the run along or off the plane's edge" in labels
            (xa, _), (xb, _) = f["run_ends_mm"]
            assert lo <= min(xa, xb) and hi >= max(xa, xb)  # the whole run in view


def test_a_gap_that_a_bus_crosses_gets_its_own_picture(tmp_path):
    # the demo's RMII split: two nets cross it (errors), one picture of that gap, in the HTML
    out, rep = _check_out(tmp_path)
    [gap] = [g for g in rep["gaps"] if len(g["nets"]) >= 2 and g["severity"] != "info"]
    assert set(gap["nets"]) == {"RMII_TXD0", "RMII_TXD1"}
    picture = out / f"gap-{gap['gap_id']}.png"
    assert picture.exists() and picture.stat().st_size > 10_000
    assert f"gap-{gap['gap_id']}" in (out / "report.html").read_text()


def test_a_layer_change_shows_both_planes(demo, monkeypatch, tmp_path):
    # the second plane's copper edge drawn (dashed) and named, the return point named
    result, rep = demo
    i, f = next(
        (i, f)
        for i, f in enumerate(rep["findings"], 1)
        if f["kind"] == "reference-change" and f.get("bridge_part")
    )
    fig = _drawn(monkeypatch, lambda: render.finding_png(result, f, i, tmp_path / "r.png"))
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    second = f"{f['other_reference_net']} on {f['other_reference_layer']}"
    assert f"edge of the second plane, {second}" in labels
    assert any(ln.get_color() == render.SECOND for ln in ax.get_lines())
    assert any(f"return crosses at {f['bridge_part']}" in t.get_text() for t in ax.texts)
