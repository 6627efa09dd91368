"""run/twin.py: a small board's check shared with one forked twin gives what one process gives,
never lets the twin return from the check, and does here whatever the twin does not deliver."""

import json
import logging
import math
import os
import time
import zipfile
from pathlib import Path

import pytest

from returngap.analysis import connectivity, gaps
from returngap.checks import edge_run
from returngap.io import load
from returngap.report import core as report
from returngap.run import parallel, pipeline, twin
from returngap.run.pipeline import run_check

DEMO = Path(__file__).resolve().parents[1] / "examples" / "demo-board"
STACK = DEMO / "stackup.toml"


@pytest.fixture
def twins(monkeypatch):
    """Every board small enough for a twin (the demo board's copper is below the fork's least
    size), forking allowed, and the twins forked counted."""
    monkeypatch.setitem(parallel.POLICY, "copper-layers", 1)
    monkeypatch.setattr(parallel.threading, "active_count", lambda: 1)  # other tests' threads aside
    forked = []
    real = twin.Twin._fork
    monkeypatch.setattr(twin.Twin, "_fork", lambda self, n: forked.append(n) or real(self, n))
    return forked


def _report(result):
    rep = report.findings_report(result)
    for key in ("generated", "timing", "run", "tool_version"):
        rep.pop(key, None)
    return json.dumps(rep, sort_keys=True)


def test_a_twin_gives_what_one_process_gives(twins):
    one = _report(run_check(DEMO, STACK, workers=1))
    assert not twins
    fds = len(os.listdir("/proc/self/fd")) if Path("/proc/self/fd").exists() else None
    two = _report(run_check(DEMO, STACK, workers=2))
    assert twins, "no twin was forked"
    assert '"kind": "gap-crossing"' in one and one == two
    if fds is not None:  # every pipe of the twin closed again
        assert len(os.listdir("/proc/self/fd")) == fds


def test_the_twin_never_returns_from_the_check(twins, tmp_path, monkeypatch):
    me, marker = os.getpid(), tmp_path / "returned"
    # the twin waited for, not stopped: one that got out of the check would be seen here
    monkeypatch.setattr(twin, "_stop", lambda pid: os.waitpid(pid, 0))
    run_check(DEMO, STACK, workers=2)
    if os.getpid() != me:  # only a twin that got out of the check could be here
        marker.write_text(str(os.getpid()))
        os._exit(0)
    assert twins and not marker.exists()


@pytest.mark.parametrize("where", ["copper", "set-up", "scan"])
def test_what_a_dead_twin_left_is_done_here(twins, monkeypatch, caplog, where):
    """The twin dies while it reads its layers, while it builds its model, or in whatever task
    of the gap scan it takes: the check comes out the same, done here."""
    parent = os.getpid()
    one = _report(run_check(DEMO, STACK, workers=1))
    targets = {
        "copper": [(load, "_copper_layer")],
        "set-up": [(connectivity, "build_nets")],
        "scan": [(edge_run, "edge_runs"), (gaps, "_scan_slice"), (pipeline, "_area")],
    }[where]
    for module, name in targets:
        real = getattr(module, name)

        def dies_in_the_twin(*a, real=real, **k):
            if os.getpid() != parent:
                os._exit(3)
            if where == "scan":
                time.sleep(0.05)  # here slowly, so that the twin surely takes a task
            return real(*a, **k)

        monkeypatch.setattr(module, name, dies_in_the_twin)
    caplog.set_level(logging.DEBUG, logger="returngap")
    assert _report(run_check(DEMO, STACK, workers=2)) == one
    assert twins
    lost = "ended without its results" in caplog.text
    assert lost == (where != "set-up")  # after a death in the set-up the scan is all done here


def test_an_error_in_a_layer_is_raised_here_as_in_one_process(twins, monkeypatch):
    real = load._copper_layer

    def bad_l3(fab, *a, **k):
        if fab.name.endswith("L3.gbr"):
            raise ValueError(f"{fab.name}: broken on purpose")
        return real(fab, *a, **k)

    monkeypatch.setattr(load, "_copper_layer", bad_l3)
    with pytest.raises(ValueError, match="L3.gbr: broken on purpose"):
        run_check(DEMO, STACK, workers=1)
    with pytest.raises(ValueError, match="L3.gbr: broken on purpose"):
        run_check(DEMO, STACK, workers=2)
    assert twins


def test_the_twin_leaves_an_unpacked_archive_to_its_parent(twins, tmp_path):
    """A zip is unpacked into a scratch folder; the twin, which runs the same reading, must not
    remove it (the parent may still be reading from it), and the parent removes it at the end."""
    archive = tmp_path / "demo.zip"
    with zipfile.ZipFile(archive, "w") as z:
        for f in DEMO.iterdir():
            if f.suffix != ".toml":
                z.write(f, f.name)
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    one = _report(run_check(DEMO, STACK, workers=1)).replace(str(DEMO), "")
    got = run_check(archive, STACK, workers=2, scratch=scratch)
    assert twins
    assert len(got.findings) == len(run_check(DEMO, STACK, workers=1).findings) and one
    assert not list(scratch.iterdir())


def test_negative_layers_are_swapped_too(twins, tmp_path):
    """Positive layers read first (by both processes, swapped), then the negative ones (profile
    minus what they draw: a second round of tasks, swapped too): the same copper as one process
    reads."""
    from conftest import gerber

    (tmp_path / "edge.gbr").write_text(
        gerber(
            "%ADD10C,0.100000*%\nD10*\nX0Y0D02*\nX20000000Y0D01*\n"
            "X20000000Y10000000D01*\nX0Y10000000D01*\nX0Y0D01*",
            attrs="%TF.FileFunction,Profile,NP*%",
        )
    )
    corners = ("X1000000Y1000000", "X19000000Y1000000", "X19000000Y9000000", "X1000000Y9000000")
    pads = "%ADD10C,2.000000*%\nD10*\n" + "\n".join(f"{c}D03*" for c in corners)
    clearance = "%ADD10C,2.000000*%\nD10*\nX5000000Y5000000D03*"
    layers = [("Top", "Positive"), ("Inr", "Negative"), ("Inr", "Negative"), ("Bot", "Positive")]
    for k, (side, polarity) in enumerate(layers, 1):
        attrs = f"%TF.FileFunction,Copper,L{k},{side}*%\n%TF.FilePolarity,{polarity}*%"
        body = pads if polarity == "Positive" else clearance
        (tmp_path / f"L{k}.gbr").write_text(gerber(body, attrs=attrs))
    one = load.load_board(tmp_path)
    runner = twin.Twin(2)
    try:
        two = load.load_board(tmp_path, runner=runner)
    finally:
        runner.finish()  # the twin ends here
    assert twins and runner._phase == 2  # both rounds of layers went through the twin
    areas = [round(c.copper_area_mm2, 9) for c in two.copper]
    assert areas == [round(c.copper_area_mm2, 9) for c in one.copper]
    # a negative layer: the 20 x 10 mm profile minus the 2 mm clearance drawn on it
    assert areas[1] == areas[2] == pytest.approx(200 - math.pi, abs=2 * math.pi * 1e-3)


def test_a_round_too_large_for_the_queue_ends_the_twin(twins, monkeypatch, tmp_path):
    """More gap-scan tasks than a queue holds: both processes see it alike; the twin exits there
    and this process goes on alone, with the same findings."""
    me, marker = os.getpid(), tmp_path / "returned"
    one = _report(run_check(DEMO, STACK, workers=1))
    monkeypatch.setattr(parallel, "MAX_SHARED_TASKS", 8)  # the 4 layers fit; the scan's do not
    monkeypatch.setattr(twin, "_stop", lambda pid: os.waitpid(pid, 0))
    two = _report(run_check(DEMO, STACK, workers=2))
    if os.getpid() != me:
        marker.write_text(str(os.getpid()))
        os._exit(0)
    assert twins and two == one and not marker.exists()
