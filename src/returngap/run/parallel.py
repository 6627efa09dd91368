"""Both cores for independent tasks, and the one policy of when that pays.

One forked child shares the task list with this process, so it inherits the tasks' data instead
of receiving it pickled, and starts in a few milliseconds (a process pool takes several times
longer, which small boards cannot afford). This module is the only one that forks or starts
threads; analysis code gets a `Parallel` (or the serial default of model/runner.py) and asks it.
"""

import contextlib
import gc
import logging
import os
import pickle
import select
import signal
import struct
import threading
import time
from concurrent.futures import ThreadPoolExecutor

from returngap.model.runner import InOrder

__all__ = [
    "POLICY",
    "THREADS_MIN_SEGMENTS",
    "Parallel",
    "fork_map",
    "fewer_collections",
    "two_threads",
    "workers_for",
]

log = logging.getLogger("returngap")

# the least work, per kind, for which a second process pays (measured with make bench)
POLICY = {
    "copper-layers": 20_000,  # bytes of copper Gerber text
    "gap-scan": 10,  # track chains (the other checks run beside it in the same processes)
    "pictures": 6,  # pictures to draw
    "frequency-view": 8,  # findings whose insertion-loss curves are computed
}
# below this many track segments two threads wait on each other's Python more than they gain
THREADS_MIN_SEGMENTS = 10_000
CHILD_SILENCE_S = (
    900.0  # a child that sends nothing for this long is taken as stuck (our own limit)
)
MAX_SHARED_TASKS = 4096  # the queue's numbers must fit a pipe's buffer (64 KiB on Linux) at once
_PR_SET_PDEATHSIG = 1


# a check builds millions of small objects that all live to its end (the board model): the
# collector's default pace walks them again and again for nothing (measured with make bench)
RUN_GC_THRESHOLDS = (50_000, 50, 1000)


@contextlib.contextmanager
def fewer_collections():
    """The cyclic collector at a slower pace for one run, its own pace restored after."""
    before = gc.get_threshold()
    gc.set_threshold(*RUN_GC_THRESHOLDS)
    try:
        yield
    finally:
        gc.set_threshold(*before)


def workers_for(want=0):
    """How many processes to use: `want` (0 = every core, at most two); one when forking is unsafe
    (threads running, as in a batch run, could hold locks) or not offered by the platform."""
    want = want or min(2, os.cpu_count() or 1)
    if want < 2 or threading.active_count() > 1 or not hasattr(os, "fork"):
        return 1
    return want


def two_threads(segments):
    """A pool of two threads for work on `segments` track segments' worth of geometry (shapely lets
    go of the GIL in its vectorised calls), or, below THREADS_MIN_SEGMENTS, a stand-in that does the
    same work in this thread: on a small board the threads' turns at the interpreter cost more than
    the second core gives (a 2,500-segment board checks about a tenth faster without them)."""
    return ThreadPoolExecutor(2) if _threaded(segments) else InOrder()


def _threaded(segments):
    return segments >= THREADS_MIN_SEGMENTS


class Parallel:
    """The pipeline's runner: both cores where POLICY says the work is worth it."""

    def __init__(self, workers=0):
        self.workers = workers  # 0: every core (at most two); 1: this process only

    def processes(self, kind, work):
        return 1 if work < POLICY[kind] else workers_for(self.workers)

    def tasks(self, task, n, kind, work=0, pack=None, unpack=None, first=None):
        return fork_map(task, n, self.processes(kind, work), pack, unpack, first)

    def threads(self, work=0):
        return two_threads(work)

    def threaded(self, work=0):
        return _threaded(work)


def fork_map(task, n, workers, pack=None, unpack=None, first=None):
    """[task(0), ..., task(n-1)]; with more than one worker, this process and one forked child take
    the tasks in turn from a shared queue (uneven tasks balance themselves), and the child sends
    its results back pickled (pack(result) there, unpack(...) here, when given). In this process
    alone when only one worker, or when no child can be started. Tasks the child did not finish
    (it failed, died or fell silent) are done here, in order, so that an exception in a task is
    raised here as it would be in one process. first (when given) is this process's own work,
    done here before it takes a task: the child starts on the tasks meanwhile."""
    if workers > 1 and 1 < n <= MAX_SHARED_TASKS:
        try:
            return _shared(task, n, pack, unpack, first)
        except _NoChild:
            pass
    if first is not None:
        first()
    return [task(k) for k in range(n)]


class _NoChild(Exception):
    pass


def _fork():
    return os.fork()


def _die_with_parent():
    try:  # Linux: the child never outlives the process that forked it
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL))
    except (OSError, AttributeError):
        pass


def _queue(n):
    """The task numbers written to a pipe at once, then read four bytes at a time by both processes
    (a pipe hands each read whole to one reader); an empty pipe with no writer reads as the end."""
    q, qw = os.pipe()
    os.write(qw, struct.pack(f"{n}i", *range(n)))
    os.close(qw)
    return (q, *_claims(q, n))


def _claims(q, n):
    """(claim, stop) on a queue's read end q: claim() takes the next task number (n once none is
    left), stop() takes all that are left, so that no process takes another."""

    def claim():
        b = os.read(q, 4)
        return struct.unpack("i", b)[0] if len(b) == 4 else n

    def stop():
        while os.read(q, 4096):
            pass

    return claim, stop


def _shared(task, n, pack, unpack, first=None):
    try:
        r, w = os.pipe()
        q, claim, stop = _queue(n)
    except OSError:
        raise _NoChild from None
    gc.freeze()  # the child's collector then leaves the inherited objects (and their pages) alone
    try:
        pid = _fork()
    except OSError:
        gc.unfreeze()
        for fd in (r, w, q):
            os.close(fd)
        raise _NoChild from None
    if pid == 0:
        _child(task, n, claim, stop, r, w, pack)  # never returns
    gc.unfreeze()
    os.close(w)
    done, error, data = {}, None, b""
    try:
        try:
            if first is not None:
                first()
            while (k := claim()) < n:
                done[k] = task(k)
        except BaseException as e:
            stop()  # the child finishes the task in hand and reports
            error = e
        data = _read_from(pid, r)
    finally:
        os.close(r)
        os.close(q)
        _reap(pid)
    if error is not None:
        raise error
    try:
        theirs = pickle.loads(data)
    except Exception:
        theirs = []  # the child died, or was stopped
    done.update((k, unpack(v) if unpack else v) for k, v in theirs)
    redo = [k for k in range(n) if k not in done]
    if redo:
        log.debug(
            "parallel: %d of %d task(s) the other process did not finish, done here", len(redo), n
        )
    return [done[k] if k in done else task(k) for k in range(n)]


def _read_from(pid, r, silence_s=None):
    """All the child writes, until it closes its end; b"" when it dies first or sends nothing
    for `silence_s` seconds while still alive (then it is stopped: its tasks are redone here)."""
    silence_s = CHILD_SILENCE_S if silence_s is None else silence_s
    chunks, last = [], time.monotonic()
    while True:
        ready, _, _ = select.select([r], [], [], 1.0)
        if ready:
            chunk = os.read(r, 1 << 20)
            if not chunk:
                return b"".join(chunks)
            chunks.append(chunk)
            last = time.monotonic()
            continue
        if _exited(
            pid
        ):  # what it wrote before it ended is still in the pipe (a partial one fails later)
            while chunk := os.read(r, 1 << 20):
                chunks.append(chunk)
            if not chunks:
                log.debug("parallel: the other process ended without its results")
            return b"".join(chunks)
        if time.monotonic() - last > silence_s:
            log.debug("parallel: the other process sent nothing for %.0f s; stopped", silence_s)
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            return b""


def _exited(pid):
    try:
        return os.waitpid(pid, os.WNOHANG)[0] != 0 and _forget(pid)
    except ChildProcessError:
        return True


def _forget(pid):
    if pid in _exiting:
        _exiting.remove(pid)
    _collected.add(pid)
    return True


_exiting = []  # children that have sent their results and are still exiting
_collected = set()  # children already collected by the liveness check


def _reap(pid):
    """Collect this child and any earlier one that has exited since; one still exiting (a large
    process takes milliseconds to unmap) is collected later instead of waited for."""
    if pid in _collected:
        _collected.discard(pid)
        pid = None
    for p in _exiting + ([pid] if pid is not None else []):
        try:
            done = os.waitpid(p, os.WNOHANG)[0] != 0
        except ChildProcessError:
            done = True
        if done:
            if p in _exiting:
                _exiting.remove(p)
        elif p == pid:
            _exiting.append(p)


def _child(task, n, claim, stop, r, w, pack):
    """The forked child's whole life: take tasks until none are left, send the results, exit (never
    returning into the caller's code)."""
    try:
        os.close(r)
        _die_with_parent()
        out = []
        try:
            while (k := claim()) < n:
                result = task(k)
                out.append((k, pack(result) if pack else result))
        except BaseException:
            stop()  # the failed task is done again in the parent, which raises its error
        with os.fdopen(w, "wb") as f:
            f.write(pickle.dumps(out, protocol=pickle.HIGHEST_PROTOCOL))
    finally:
        os._exit(0)
