"""Batch audit: good boards reported, bad ones failed with a reason, nothing outside --out,
resumable, Dask."""

import json
import os
import shutil
import signal
import subprocess
import sys
import time
import zipfile

import pytest

from boards import hazard_board, slot_board
from conftest import ROOT

DEMO = ROOT / "examples" / "demo-board"


def _zip_folder(folder, target, rename=None):
    with zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as z:
        for p in sorted(folder.iterdir()):
            z.write(p, (rename(p.name) if rename else p.name))


N_ZIPS = 8  # every kind of good board once, two of them renamed
N_FOLDERS = 2
N_BOARDS = N_ZIPS + N_FOLDERS + 6  # the zips, two plain folders, six bad inputs


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    """16 inputs: 10 good (zips and folders, some renamed), 6 bad."""
    root = tmp_path_factory.mktemp("batch")
    src = root / "archives"
    src.mkdir()
    seeds = root / "seeds"
    kinds = {"demo": DEMO}
    for i, off in enumerate((0.0, 2.0, 4.0, -3.0)):
        kinds[f"slot{i}"] = slot_board(seeds / f"slot{i}", offset=off)
    kinds["split"] = slot_board(seeds / "split", split=True)
    kinds["solid"] = slot_board(seeds / "solid", solid=True)
    kinds["hazard"] = hazard_board(seeds / "hazard")
    good = []
    n = 0
    while len(good) < N_ZIPS:
        for name, folder in kinds.items():
            if len(good) >= N_ZIPS:
                break
            n += 1
            target = src / f"rev{n:02d}-{name}.zip"
            # some archives have their files renamed: X2 attributes still identify every layer
            rename = (
                (lambda fn, n=n: f"film{n}-" + fn.replace(".gbr", ".art")) if n % 3 == 0 else None
            )
            _zip_folder(folder, target, rename)
            good.append(target.stem)
    for k in range(N_FOLDERS):  # plain folders nested in the tree
        dst = src / "released" / f"board{k}"
        shutil.copytree(kinds[f"slot{k}"], dst)
        good.append(f"board{k}")
    bad = {}
    data = (src / "rev01-demo.zip").read_bytes()
    (src / "truncated-a.zip").write_bytes(data[: len(data) // 2])
    (src / "truncated-b.zip").write_bytes(data[:100])
    bad["truncated-a"] = bad["truncated-b"] = "zip"
    with zipfile.ZipFile(src / "traversal.zip", "w") as z:
        z.writestr("ok.gbr", (DEMO / "tidelog-r2-L1.gbr").read_text())
        z.writestr("../../../escaped.gbr", "G04 x*\nM02*\n")
    bad["traversal"] = "unsafe member path"
    with zipfile.ZipFile(src / "bomb.zip", "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("huge.gbr", b"0" * (64 << 20))
    bad["bomb"] = "possible zip bomb"
    bad_board = src / "unreadable"
    shutil.copytree(kinds["slot0"], bad_board)
    (bad_board / "t-L2.gbr").write_text(
        "%TF.FileFunction,Copper,L2,Inr*%\n%FSLAX46Y46*%\n%MOMM*%\nD11*\nX0Y0D03*\nM02*\n"
    )
    bad["unreadable"] = "undefined aperture 11"
    with zipfile.ZipFile(src / "locked.zip", "w") as z:
        z.writestr("a.gbr", "x")
    raw = bytearray((src / "locked.zip").read_bytes())
    raw[6] |= 1  # mark the member encrypted (general-purpose flag bit 0) in the local header ...
    cd = raw.rfind(b"PK\x01\x02")
    raw[cd + 8] |= 1  # ... and in the central directory
    (src / "locked.zip").write_bytes(bytes(raw))
    bad["locked"] = "encrypted member"
    return root, src, good, bad


def _snapshot(root, skip):
    return sorted(
        str(p.relative_to(root)) for p in root.rglob("*") if skip not in p.parents and p != skip
    )


def _audit(*args, timeout=600):
    return subprocess.run(
        [sys.executable, "-m", "returngap.cli", "audit", *map(str, args)],
        capture_output=True,
        text=True,
        timeout=timeout,
        env=dict(os.environ, CI="1"),
    )


def _rows(out):
    data = json.loads((out / "summary.json").read_text())
    return data, {r["board"].rsplit("-", 1)[0]: r for r in data["rows"]}


def test_batch_reports_good_and_fails_bad_and_writes_only_out(batch):
    root, src, good, bad = batch
    out = root / "out"
    before = _snapshot(root, out)
    p = _audit(src, "--out", out, "--jobs", "2", "--time-limit", "120")
    assert p.returncode == 1, p.stderr
    data, rows = _rows(out)
    assert data["boards"] == len(good) + len(bad) == N_BOARDS
    for name in good:
        assert rows[name]["status"] in ("ok", "findings"), (name, rows[name]["reason"])
        assert (out / rows[name]["report"]).is_file()
    for name, why in bad.items():
        assert rows[name]["status"] == "failed" and why in rows[name]["reason"], (
            name,
            rows[name]["reason"],
        )
    assert data["totals"]["failed"] == len(bad)
    assert data["totals"]["ok"] == sum(
        1 for n in good if "solid" in n
    )  # solid planes report nothing
    assert data["totals"]["ok"] + data["totals"]["findings"] == len(good)
    assert _snapshot(root, out) == before  # nothing written outside --out
    assert not (root.parent / "escaped.gbr").exists()
    assert not (out / ".work").exists()
    lines = (out / "summary.csv").read_text().splitlines()
    assert len(lines) == N_BOARDS + 1 and lines[0].startswith("board,source,status")


def test_killed_audit_resumes_without_redoing(batch, tmp_path):
    root, src, good, bad = batch
    out = tmp_path / "out"
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "returngap.cli",
            "audit",
            str(src),
            "--out",
            str(out),
            "--jobs",
            "1",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
        env=dict(os.environ, CI="1"),
    )
    deadline = time.time() + 300
    while time.time() < deadline and len(list(out.glob("boards/*/status.json"))) < 5:
        time.sleep(0.2)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    done = {p.parent.name: p.stat().st_mtime_ns for p in out.glob("boards/*/status.json")}
    assert 5 <= len(done) < N_BOARDS
    p = _audit(src, "--out", out, "--jobs", "2")
    assert "unchanged" in p.stdout
    after = {p.parent.name: p.stat().st_mtime_ns for p in out.glob("boards/*/status.json")}
    assert all(after[k] == v for k, v in done.items())  # nothing redone
    assert len(after) == N_BOARDS  # nothing lost
    ref = root / "out"
    if (ref / "summary.json").exists():
        strip = lambda d: [
            {k: v for k, v in r.items() if k not in ("source", "report")} for r in d["rows"]
        ]
        assert strip(json.loads((out / "summary.json").read_text())) == strip(
            json.loads((ref / "summary.json").read_text())
        )
    p2 = _audit(src, "--out", out, "--force", "--jobs", "2")
    assert f"{N_BOARDS} run" in p2.stdout


def test_dask_path_gives_the_same_summary(batch, tmp_path):
    pytest.importorskip("dask.distributed")
    from dask.distributed import LocalCluster

    root, src, good, bad = batch
    with LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        protocol="tcp",
        dashboard_address=None,
    ) as cluster:
        out = tmp_path / "dask"
        p = _audit(src, "--out", out, "--scheduler", cluster.scheduler_address)
    assert p.returncode == 1, p.stderr
    ref = root / "out"  # the local run of the first test, when it ran
    if not (ref / "summary.json").exists():
        ref = tmp_path / "local"
        _audit(src, "--out", ref, "--jobs", "2")
    strip = lambda d: [{k: v for k, v in r.items() if k not in ("report",)} for r in d["rows"]]
    assert strip(json.loads((out / "summary.json").read_text())) == strip(
        json.loads((ref / "summary.json").read_text())
    )


def test_time_limit_marks_the_board_failed(tmp_path):
    slot_board(tmp_path / "in" / "slow")
    _audit(tmp_path / "in", "--out", tmp_path / "out", "--time-limit", "0.2")
    data, rows = _rows(tmp_path / "out")
    assert rows["slow"]["status"] == "failed" and "time limit" in rows["slow"]["reason"]


def test_discovery_of_gerber_and_drill_sibling_folders(tmp_path):
    # some exports put Gerbers in one folder and drills in a sibling: that parent is one board
    from returngap.batch.audit import discover

    board = slot_board(tmp_path / "seed")
    root = tmp_path / "tree" / "rev-c"
    (root / "Gerber").mkdir(parents=True)
    (root / "NC Drill").mkdir()
    for p in board.iterdir():
        (root / ("NC Drill" if p.suffix == ".drl" else "Gerber") / p.name).write_bytes(
            p.read_bytes()
        )
    (tmp_path / "tree" / "notes.md").write_text("%FSLAX46Y46*% is how a Gerber file starts\n")
    found = discover([tmp_path / "tree"])
    assert [p for _, p in found] == [root]
