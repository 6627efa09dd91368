"""Batch audit of many released board archives: isolated, resumable, on local processes or a
Dask cluster.

Each board runs in its own worker process (time and memory limits) and writes its reports
into a private folder inside the output folder, which is renamed into place when complete;
a board whose input content and settings are unchanged since its last result is skipped."""

import csv
import hashlib
import html
import io
import json
import os
import re
import shutil
import subprocess
import sys
import uuid
from concurrent.futures import ThreadPoolExecutor, as_completed
from pathlib import Path

from returngap import __version__
from returngap.io.inputs import is_fab_candidate, sniff

__all__ = [
    "FORMAT",
    "looks_like_fab_set",
    "looks_like_split_set",
    "discover",
    "content_hash",
    "audit_one",
    "base_row",
    "make_tasks",
    "run_tasks",
    "SUMMARY_FIELDS",
    "write_summary",
]

FORMAT = "returngap-audit"


def _slug(text):
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.") or "board"
    return s[:80]


def looks_like_fab_set(folder):
    """A folder holding at least one Gerber file of its own (not only in subfolders)."""
    try:
        return _has_kind(folder, "gerber")
    except OSError:
        return False


def _has_kind(folder, kind):
    try:
        return any(
            p.is_file() and not p.is_symlink() and is_fab_candidate(p) and sniff(p) == kind
            for p in folder.iterdir()
        )
    except OSError:
        return False


def looks_like_split_set(folder):
    """Gerbers in one subfolder and drills in a sibling (as some EDA exports write them): one
    board."""
    try:
        subs = [c for c in folder.iterdir() if c.is_dir() and not c.is_symlink()]
    except OSError:
        return False
    gerber_only = [c for c in subs if _has_kind(c, "gerber") and not _has_kind(c, "excellon")]
    drill_only = [c for c in subs if _has_kind(c, "excellon") and not _has_kind(c, "gerber")]
    return 2 <= len(subs) <= 4 and len(gerber_only) == 1 and len(drill_only) == 1


def discover(sources):
    """Boards under the sources: .zip archives, and folders that look like fabrication sets."""
    found = []
    for src in map(Path, sources):
        if src.is_file():
            found.append(src)
            continue
        if not src.is_dir():
            found.append(src)  # reported as failed: no such input
            continue
        for dirpath, dirnames, filenames in os.walk(src, followlinks=False):
            d = Path(dirpath)
            dirnames.sort()
            if looks_like_fab_set(d) or looks_like_split_set(d):
                found.append(d)
                dirnames[:] = []  # a fabrication set's subfolders and archives belong to it
                continue
            for fn in sorted(filenames):
                if fn.lower().endswith(".zip") and not (d / fn).is_symlink():
                    found.append(d / fn)
    boards, seen = [], set()
    for p in found:
        key = _slug(p.stem if p.suffix.lower() == ".zip" else p.name)
        ident = key + "-" + hashlib.sha1(str(p.resolve()).encode()).hexdigest()[:6]
        if ident not in seen:
            seen.add(ident)
            boards.append((ident, p))
    return sorted(boards)


def content_hash(path, extra):
    """Hash of the input bytes (every file of a folder, by relative name) and of the settings."""
    h = hashlib.sha256()
    h.update(json.dumps(extra, sort_keys=True).encode())
    p = Path(path)
    if p.is_file():
        with open(p, "rb") as f:
            while chunk := f.read(1 << 20):
                h.update(chunk)
    elif p.is_dir():
        for dirpath, dirnames, filenames in os.walk(p, followlinks=False):
            dirnames.sort()
            for fn in sorted(filenames):
                q = Path(dirpath) / fn
                if q.is_symlink():
                    continue
                h.update(q.relative_to(p).as_posix().encode() + b"\0")
                with open(q, "rb") as f:
                    while chunk := f.read(1 << 20):
                        h.update(chunk)
    else:
        h.update(b"missing")
    return h.hexdigest()


def audit_one(task):
    """Run one board in a worker process; returns its status row. Safe to call from a thread or
    a Dask worker."""
    out = Path(task["out"])
    final = out / "boards" / task["board_id"]
    status_file = final / "status.json"
    if not task["force"] and status_file.is_file():
        try:
            old = json.loads(status_file.read_text())
            if old.get("hash") == task["hash"]:
                old["skipped"] = True
                return old
        except (OSError, json.JSONDecodeError):
            pass
    work = out / ".work"
    tmp = work / f"{task['board_id']}-{uuid.uuid4().hex[:8]}"
    tmp.mkdir(parents=True, exist_ok=True)
    (tmp / "task.json").write_text(json.dumps(task))
    env = dict(os.environ, MPLCONFIGDIR=str(work / "mpl"), PYTHONDONTWRITEBYTECODE="1")
    reason = None
    try:
        p = subprocess.run(
            [sys.executable, "-m", "returngap.batch.worker", str(tmp / "task.json")],
            capture_output=True,
            text=True,
            timeout=task["time_limit_s"],
            env=env,
        )
        if p.returncode != 0 and not (tmp / "status.json").is_file():
            last = (p.stderr.strip().splitlines() or [""])[-1][:300]
            if p.returncode < 0 or "MemoryError" in p.stderr:
                reason = (
                    f"worker stopped (signal {-p.returncode}), possibly the "
                    f"{task['memory_limit_mb']} MB memory "
                    f"limit; {last}".strip("; ")
                )
            else:
                reason = f"worker failed (exit {p.returncode}): {last}"
    except subprocess.TimeoutExpired:
        reason = f"time limit of {task['time_limit_s']:g} s exceeded"
    if reason is not None or not (tmp / "status.json").is_file():
        for child in tmp.iterdir():
            if child.is_file():
                child.unlink()
            else:
                shutil.rmtree(child, ignore_errors=True)
        row = base_row(task, "failed", reason or "worker produced no result")
        (tmp / "status.json").write_text(json.dumps(row, indent=1))
    (tmp / "task.json").unlink(missing_ok=True)
    row = json.loads((tmp / "status.json").read_text())
    final.parent.mkdir(parents=True, exist_ok=True)
    if final.exists():
        old = final.with_name(final.name + f".old-{uuid.uuid4().hex[:6]}")
        os.replace(final, old)
        os.replace(tmp, final)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, final)
    row["skipped"] = False
    return row


def base_row(task, status, reason=None):
    return {
        "board": task["board_id"],
        "source": task["source"],
        "status": status,
        "reason": reason,
        "error": 0,
        "warning": 0,
        "info": 0,
        "worst": None,
        "report": None,
        "hash": task["hash"],
    }


def make_tasks(sources, out, settings, stackup_dir, fail_on, force, time_limit_s, memory_limit_mb):
    """One task per board; settings (model/settings.Settings) travel whole, as JSON."""
    settings = settings.to_json()
    tasks = []
    for board_id, path in discover(sources):
        stack = None
        if stackup_dir:
            stem = path.stem if path.suffix.lower() == ".zip" else path.name
            cand = Path(stackup_dir) / f"{stem}.toml"
            stack = str(cand) if cand.is_file() else None
        extra = {
            "settings": settings,
            "fail_on": fail_on,
            "tool": __version__,
            "stackup": Path(stack).read_text() if stack else None,
        }
        tasks.append(
            {
                "board_id": board_id,
                "source": str(path),
                "stackup": stack,
                "out": str(out),
                "settings": settings,
                "fail_on": fail_on,
                "force": force,
                "time_limit_s": time_limit_s,
                "memory_limit_mb": memory_limit_mb,
                "hash": content_hash(path, extra),
            }
        )
    return tasks


def run_tasks(tasks, jobs=2, scheduler=None, progress=None):
    """The same per-board function on local threads (each waiting on its worker process) or on
    Dask."""
    rows = []
    if scheduler:
        from dask.distributed import Client
        from dask.distributed import as_completed as dask_completed

        with Client(scheduler, timeout="30s") as client:
            futures = client.map(audit_one, tasks, pure=False)
            for fut in dask_completed(futures):
                rows.append(fut.result())
                if progress:
                    progress(rows[-1])
    else:
        with ThreadPoolExecutor(max_workers=max(1, jobs)) as pool:
            for fut in as_completed([pool.submit(audit_one, t) for t in tasks]):
                rows.append(fut.result())
                if progress:
                    progress(rows[-1])
    return sorted(rows, key=lambda r: r["board"])


SUMMARY_FIELDS = [
    "board",
    "source",
    "status",
    "reason",
    "error",
    "warning",
    "info",
    "worst",
    "report",
]


def _report_link(row, e):
    return f"<a href='{e(row['report'])}'>report</a>" if row.get("report") else ""


def write_summary(out, rows):
    out = Path(out)
    totals = {s: sum(1 for r in rows if r["status"] == s) for s in ("ok", "findings", "failed")}
    data = {
        "format": FORMAT,
        "version": 1,
        "tool_version": __version__,
        "boards": len(rows),
        "totals": totals,
        "rows": [{k: r.get(k) for k in SUMMARY_FIELDS} for r in rows],
    }
    _atomic(out / "summary.json", json.dumps(data, indent=1) + "\n")
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SUMMARY_FIELDS, lineterminator="\n")
    w.writeheader()
    for r in data["rows"]:
        w.writerow({k: "" if r.get(k) is None else r.get(k) for k in SUMMARY_FIELDS})
    _atomic(out / "summary.csv", buf.getvalue())
    e = html.escape
    rows_html = "".join(
        f"<tr><td>{e(r['board'])}</td><td class='st-{e(r['status'])}'>{e(r['status'])}</td>"
        f"<td>{r['error']}</td><td>{r['warning']}</td><td>{r['info']}</td>"
        f"<td>{e(r.get('worst') or r.get('reason') or '')}</td>"
        f"<td>{_report_link(r, e)}</td></tr>"
        for r in data["rows"]
    )
    page = (
        "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>returngap "
        "audit</title><style>"
        "body{font:14px system-ui,sans-serif;margin:24px}table{border-collapse:collapse}"
        "td,th{padding:4px 8px;border-bottom:1px solid #e3e8ef;text-align:left}"
        "th{background:#eef2f7}"
        ".st-failed{color:#b24400;font-weight:600}.st-findings{color:#a66f00}"
        "</style></head><body>"
        f"<h1>Return-path audit: {len(rows)} boards</h1><p>{totals['ok']} ok, "
        f"{totals['findings']} with findings, "
        f"{totals['failed']} failed. Estimates for review; they do not replace EMC testing.</p>"
        "<table><thead><tr><th>board</th><th>status</th><th>error</th><th>warning</th><th>info</th>"
        "<th>worst finding / "
        f"reason</th><th></th></tr></thead><tbody>{rows_html}</tbody></table></body></html>\n"
    )
    _atomic(out / "summary.html", page)
    return data


def _atomic(path, text):
    tmp = path.with_name(path.name + f".{uuid.uuid4().hex[:6]}.tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)
