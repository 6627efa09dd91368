"""Both cores for independent tasks: forked workers inherit the task's data instead of pickling it."""

import multiprocessing
import os
import threading
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

_TASK = None  # the callable the forked workers run, inherited by fork


def _run(k):
    return _TASK(k)


def workers_for(want=0):
    """How many processes to use: `want` (0 = every core, at most two); one when forking is unsafe
    (threads running, as in a batch run, could hold locks) or not offered by the platform."""
    want = want or min(2, os.cpu_count() or 1)
    if want < 2 or threading.active_count() > 1 or "fork" not in multiprocessing.get_all_start_methods():
        return 1
    return want


def fork_map(task, n, workers):
    """[task(0), ..., task(n-1)], in `workers` forked processes when more than one; in this process
    when only one, or when no second process can be started. An exception in a task is re-raised."""
    global _TASK
    if workers > 1 and n > 1:
        _TASK = task
        try:
            with ProcessPoolExecutor(min(workers, n), mp_context=multiprocessing.get_context("fork")) as pool:
                return list(pool.map(_run, range(n)))
        except (OSError, BrokenProcessPool):
            pass  # no second process here: do it all in this one
        finally:
            _TASK = None
    return [task(k) for k in range(n)]
