"""One board of an audit, in its own process: `python -m returngap.batch.worker TASK.json`.

Writes the same reports as `check --out` next to the task file, and status.json last."""

import json
import resource
import signal
import sys
import warnings
from pathlib import Path

from returngap.batch.audit import base_row

__all__ = ["set_limits", "main"]


def set_limits(memory_mb):
    """This worker dies with the audit that started it (Linux) and stays within its memory limit:
    set here, at the start of its own process (a pre-exec hook in the parent's threads could
    deadlock)."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass
    if memory_mb:
        b = int(memory_mb) << 20
        resource.setrlimit(resource.RLIMIT_AS, (b, b))


def main(argv):
    task_file = Path(argv[1])
    task = json.loads(task_file.read_text())
    set_limits(task.get("memory_limit_mb"))
    here = task_file.parent
    warnings.simplefilter("ignore")
    from returngap import report
    from returngap.errors import InputError
    from returngap.model.settings import Settings
    from returngap.run.outputs import write_outputs
    from returngap.run.pipeline import run_check

    settings = Settings.from_json(task["settings"])
    try:
        # one process per board: the batch spreads boards over the cores, so no second one here
        result = run_check(task["source"], task["stackup"], settings, scratch=str(here), workers=1)
        rep = report.findings_report(result)
        write_outputs(result, rep, here, task["fail_on"], workers=1)
        counts = rep["summary"]
        bad = report.FAIL_LEVELS[task["fail_on"]]
        status = "findings" if any(f["severity"] in bad for f in rep["findings"]) else "ok"
        row = base_row(task, status)
        row.update(
            error=counts["error"],
            warning=counts["warning"],
            info=counts["info"],
            worst=rep["findings"][0]["message"] if rep["findings"] else None,
            report=f"boards/{task['board_id']}/report.html",
        )
    except InputError as e:
        row = base_row(task, "failed", str(e))
    except MemoryError:
        row = base_row(task, "failed", "out of memory (memory limit)")
    except Exception as e:  # one bad board never stops the batch
        row = base_row(task, "failed", f"could not process ({type(e).__name__}: {str(e)[:200]})")
    tmp = here / "status.json.tmp"
    tmp.write_text(json.dumps(row, indent=1))
    tmp.replace(here / "status.json")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
