"""One board of an audit, in its own process: `python -m returngap.batchworker TASK.json`.

Writes the same reports as `check --out` next to the task file, and status.json last."""

import json
import sys
import warnings
from pathlib import Path

from .audit import base_row


def main(argv):
    task_file = Path(argv[1])
    task = json.loads(task_file.read_text())
    here = task_file.parent
    warnings.simplefilter("ignore")
    from . import report
    from .cli import write_outputs
    from .errors import InputError
    from .pipeline import run_check
    from .projector import Settings

    s = task["settings"]
    # one process per board: the batch spreads boards over the cores, so no second process here
    settings = Settings(
        rise_time_ns=s["rise_time_ns"], max_freq_GHz=s.get("max_freq_GHz"), workers=1
    )
    try:
        result = run_check(task["source"], task["stackup"], settings, scratch=str(here))
        rep = report.findings_report(result)
        write_outputs(result, rep, here, task["fail_on"])
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
