"""The layering holds: analysis never knows how it is run, settings reach batch workers whole, and
the forked child can neither hang nor silently lose work."""

import ast
import dataclasses
import json
import os
import time
from pathlib import Path

import pytest

from returngap.batch import audit
from returngap.model.settings import Settings
from returngap.run import parallel

PKG = Path(__file__).resolve().parents[1] / "src" / "returngap"
PURE = (
    "io",
    "geometry",
    "analysis",
    "checks",
    "physics",
    "model",
)  # never import run/, cli, batch/
MAX_FUNCTION_LINES = 60


def _imports(path):
    """Every returngap module a file imports, as dotted names."""
    out = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("returngap"):
            out.add(node.module)
            out.update(f"{node.module}.{a.name}" for a in node.names)
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name.startswith("returngap"))
    return out


def _modules(*packages):
    for pkg in packages:
        yield from sorted((PKG / pkg).rglob("*.py"))


def test_no_arrow_from_the_analysis_layers_into_run_cli_or_batch():
    bad = []
    for path in _modules(*PURE):
        for name in _imports(path):
            if name.startswith(("returngap.run", "returngap.cli", "returngap.batch")):
                bad.append(f"{path.relative_to(PKG)} imports {name}")
    assert not bad, bad


def test_batch_never_imports_the_command_line():
    bad = [
        f"{p.relative_to(PKG)}"
        for p in _modules("batch")
        if any(n.startswith("returngap.cli") for n in _imports(p))
    ]
    assert not bad, bad


def test_only_run_forks_or_starts_threads():
    words = ("os.fork", "ThreadPoolExecutor(", "threading.Thread(", "multiprocessing")
    bad = []
    for path in _modules(*PURE, "report"):
        text = path.read_text()
        bad += [f"{path.relative_to(PKG)}: {w}" for w in words if w in text]
    assert not bad, bad


def test_no_long_functions_in_the_analysis_layers():
    long = []
    for path in _modules(*PURE):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                n = node.end_lineno - node.lineno + 1
                if n > MAX_FUNCTION_LINES:
                    long.append(f"{path.relative_to(PKG)}:{node.lineno} {node.name} ({n} lines)")
    assert not long, long


def test_every_module_says_what_it_exports():
    missing = [
        str(p.relative_to(PKG))
        for p in _modules(*PURE, "run", "report", "batch")
        if p.name != "__init__.py" and "__all__" not in p.read_text()
    ]
    assert not missing, missing


def _odd(field):
    """A value of the field's type that no default has."""
    v = field.default
    if isinstance(v, bool):
        return not v
    if isinstance(v, (int, float)):
        return v * 1.5 + 0.125
    if field.name == "net_classes":
        return ({"name": "fast", "nets": ["DDR_*"], "rise_time_ns": 0.1, "check": True},)
    if isinstance(v, tuple):
        return ("CLK*", "DQ?")
    return 2.5  # the optional floats (max_freq_GHz)


def test_settings_travel_whole_to_a_batch_worker(tmp_path):
    """Every field, set to a value no default has, reaches the worker unchanged."""
    fields = dataclasses.fields(Settings)
    odd = Settings(**{f.name: _odd(f) for f in fields})
    board = tmp_path / "in" / "b"
    board.mkdir(parents=True)
    (board / "x.gbr").write_text("%FSLAX46Y46*%\n%MOMM*%\nM02*\n")
    [task] = audit.make_tasks(
        [tmp_path / "in"], tmp_path / "out", odd, None, "error", False, 60, 1024
    )
    sent = json.loads(json.dumps(task))  # the task file the worker reads
    got = Settings.from_json(sent["settings"])
    for f in fields:
        assert getattr(got, f.name) == getattr(odd, f.name), f.name
        assert getattr(got, f.name) != f.default, f.name  # the test would notice a lost field


@pytest.fixture
def forking_allowed(monkeypatch):
    monkeypatch.setattr(parallel.threading, "active_count", lambda: 1)  # other tests' threads aside


def test_work_a_dead_child_left_is_redone_here(forking_allowed):
    parent = os.getpid()

    def task(k):
        if os.getpid() != parent and k >= 2:
            os._exit(3)  # the child dies in the middle of its share
        return k * k

    assert parallel.fork_map(task, 40, 2) == [k * k for k in range(40)]


def test_a_silent_child_is_stopped_and_its_work_redone(forking_allowed, monkeypatch):
    monkeypatch.setattr(parallel, "CHILD_SILENCE_S", 1.0)
    parent = os.getpid()

    def task(k):
        if os.getpid() != parent:
            time.sleep(3600)  # stuck: it never sends anything
        return -k

    t = time.monotonic()
    assert parallel.fork_map(task, 6, 2) == [-k for k in range(6)]
    assert time.monotonic() - t < 30


def test_first_job_runs_once_here_while_the_child_takes_tasks(forking_allowed):
    # the parent's own job runs before it takes a task: the child, started at once, takes the
    # first tasks meanwhile; the job's effect stays in the parent, the results are those of one
    # process
    parent, seen, where = os.getpid(), [], {}

    def first():
        time.sleep(0.3)
        seen.append(os.getpid())

    def task(k):
        return k, os.getpid()

    done = parallel.fork_map(task, 8, 2, first=first)
    assert [k for k, _ in done] == list(range(8))
    for k, pid in done:
        where[k] = pid
    assert seen == [parent]
    assert where[0] != parent  # taken by the child while the parent was busy with its own job
    assert parallel.fork_map(task, 8, 1, first=first)[0] == (0, parent) and seen == [parent] * 2


def test_a_task_error_is_raised_here_as_in_one_process(forking_allowed):
    def task(k):
        if k == 5:
            raise ValueError("bad layer 5")
        return k

    with pytest.raises(ValueError, match="bad layer 5"):
        parallel.fork_map(task, 12, 2)


def test_findings_are_typed_one_class_per_kind():
    """Every finding of the demo board is an instance of its kind's class, and the report schema
    and the classes name the same kinds."""
    from returngap import report
    from returngap.model.findings import KINDS, Finding
    from returngap.run.pipeline import run_check

    demo = PKG.parents[1] / "examples" / "demo-board"
    found = run_check(demo, demo / "stackup.toml", workers=1).findings
    assert found and all(isinstance(f, KINDS[f["kind"]]) for f in found)
    assert {type(f) for f in found} >= {KINDS["gap-crossing"], KINDS["reference-change"]}
    enum = report.schema()["properties"]["findings"]["items"]["properties"]["kind"]["enum"]
    assert set(enum) == set(KINDS)
    with pytest.raises(TypeError):  # a field the kind does not have is refused
        KINDS["edge-run"](
            id="x",
            severity="info",
            net="N",
            layer="L1",
            x_mm=0,
            y_mm=0,
            message="m",
            run_length_mm=1,
            edge_distance_mm=1,
            edge_distance_h=1,
            beyond_edge_fraction=0,
            height_mm=0.2,
            detour_mm=3,
        )
    assert issubclass(KINDS["net-conflict"], Finding)


def test_only_the_report_composes_sentences():
    """The checks return numbers (typed findings have no message); the report says them."""
    from returngap import report
    from returngap.model.findings import KINDS
    from returngap.run.pipeline import run_check

    assert not any("message" in {f.name for f in dataclasses.fields(c)} for c in KINDS.values())
    demo = PKG.parents[1] / "examples" / "demo-board"
    result = run_check(demo, demo / "stackup.toml", workers=1)
    assert all("message" not in f for f in result.findings)
    rep = report.findings_report(result)
    assert all(
        f["message"].startswith(f["net"]) or f["kind"] == "floating-copper" for f in rep["findings"]
    )


def test_the_collector_s_pace_is_the_caller_s_again_after_a_run_even_a_failed_one():
    import gc

    before = gc.get_threshold()
    with parallel.fewer_collections():
        assert gc.get_threshold() == parallel.RUN_GC_THRESHOLDS
    assert gc.get_threshold() == before
    with pytest.raises(RuntimeError), parallel.fewer_collections():
        raise RuntimeError("a check that fails")
    assert gc.get_threshold() == before
