"""Both cores for independent tasks: one forked child shares the task list with this process, so it
inherits the tasks' data instead of receiving it pickled, and starts in a few milliseconds (a
process
pool takes several times longer, which small boards cannot afford)."""

import gc
import os
import pickle
import struct
import threading
from concurrent.futures import ThreadPoolExecutor

_PR_SET_PDEATHSIG = 1
MAX_SHARED_TASKS = 4096  # the queue's numbers must fit a pipe's buffer (64 KiB on Linux) at once
THREADS_MIN_SEGMENTS = (
    10_000  # below this two threads wait on each other's Python more than they gain
)
in_child = False  # True in a forked child: what a task returns there is pickled back to the parent


def workers_for(want=0):
    """How many processes to use: `want` (0 = every core, at most two); one when forking is unsafe
    (threads running, as in a batch run, could hold locks) or not offered by the platform."""
    want = want or min(2, os.cpu_count() or 1)
    if want < 2 or threading.active_count() > 1 or not hasattr(os, "fork"):
        return 1
    return want


class _InOrder:
    """Stands in for a thread pool on a small board: the same calls, done here one after another."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def map(self, fn, *items):
        return map(fn, *items)


def board_segments(board):
    """Track segments on all of a board's copper: the measure of its size for two_threads."""
    return sum(len(c.segments) for c in board.copper)


def two_threads(segments):
    """A pool of two threads for work on `segments` track segments' worth of geometry (shapely lets
    go of the GIL in its vectorised calls), or, below THREADS_MIN_SEGMENTS, a stand-in that does the
    same work in this thread: on a small board the threads' turns at the interpreter cost more than
    the second core gives (a 2,500-segment board checks about a tenth faster without them)."""
    return ThreadPoolExecutor(2) if segments >= THREADS_MIN_SEGMENTS else _InOrder()


def fork_map(task, n, workers):
    """[task(0), ..., task(n-1)]; with more than one worker, this process and one forked child take
    the tasks in turn from a shared queue (uneven tasks balance themselves), and the child sends
    its results back pickled. In this process alone when only one worker, or when no child can be
    started. Tasks the child did not finish (it failed or died) are done here, in order, so that an
    exception in a task is raised here as it would be in one process."""
    if workers > 1 and 1 < n <= MAX_SHARED_TASKS:
        try:
            return _shared(task, n)
        except _NoChild:
            pass
    return [task(k) for k in range(n)]


class _NoChild(Exception):
    pass


def _fork():
    return os.fork()


def _die_with_parent():
    try:  # Linux: the child never outlives the process that forked it
        import ctypes
        import signal

        ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL))
    except (OSError, AttributeError):
        pass


def _shared(task, n):
    # the queue: the task numbers written to a pipe at once, then read four bytes at a time by both
    # processes (a pipe hands each read whole to one reader); an empty pipe with no writer reads as
    # the end
    try:
        r, w = os.pipe()
        q, qw = os.pipe()
    except OSError:
        raise _NoChild from None
    os.write(qw, struct.pack(f"{n}i", *range(n)))
    os.close(qw)

    def claim():
        b = os.read(q, 4)
        return struct.unpack("i", b)[0] if len(b) == 4 else n

    def stop():
        while os.read(q, 4096):
            pass

    gc.freeze()  # the child's collector then leaves the inherited objects (and their pages) alone
    try:
        pid = _fork()
    except OSError:
        gc.unfreeze()
        for fd in (r, w, q):
            os.close(fd)
        raise _NoChild from None
    if pid == 0:
        _child(task, n, claim, stop, r, w)  # never returns
    gc.unfreeze()
    os.close(w)
    done, error = {}, None
    try:
        while (k := claim()) < n:
            done[k] = task(k)
    except BaseException as e:
        stop()  # the child finishes the task in hand and reports
        error = e
    with os.fdopen(r, "rb") as f:
        data = f.read()  # the end comes when the child has written all: it only has to exit now
    os.close(q)
    _reap(pid)
    if error is not None:
        raise error
    try:
        theirs = pickle.loads(data)
    except Exception:
        theirs = []  # the child died
    done.update(theirs)
    return [done[k] if k in done else task(k) for k in range(n)]


_exiting = []  # children that have sent their results and are still exiting


def _reap(pid):
    """Collect this child and any earlier one that has exited since; one still exiting (a large
    process takes milliseconds to unmap) is collected later instead of waited for."""
    for p in _exiting + [pid]:
        try:
            done = os.waitpid(p, os.WNOHANG)[0] != 0
        except ChildProcessError:
            done = True
        if done:
            if p in _exiting:
                _exiting.remove(p)
        elif p == pid:
            _exiting.append(p)


def _child(task, n, claim, stop, r, w):
    """The forked child's whole life: take tasks until none are left, send the results, exit (never
    returning into the caller's code)."""
    global in_child
    try:
        in_child = True
        os.close(r)
        _die_with_parent()
        out = []
        try:
            while (k := claim()) < n:
                out.append((k, task(k)))
        except BaseException:
            stop()  # the failed task is done again in the parent, which raises its error
        with os.fdopen(w, "wb") as f:
            f.write(pickle.dumps(out, protocol=pickle.HIGHEST_PROTOCOL))
    finally:
        os._exit(0)
