"""run/twin.py: a small board's check shared with one forked twin gives what one process gives,
never lets the twin return from the check, and does here whatever the twin does not deliver."""

import json
import logging
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
    two = _report(run_check(DEMO, STACK, workers=2))
    assert twins, "no twin was forked"
    assert '"kind": "gap-crossing"' in one and one == two


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
