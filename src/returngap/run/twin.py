"""A small board's check on both cores with one fork: the twin.

On a small board a fork per parallel stage costs a good part of what it saves: each fork copies
the page tables, and both processes then pay a fault for every page either one writes (the scan's
tasks took a quarter more work forked than in one process). The twin is forked once, when the
copper layers are read. Both processes read their share of the layers and swap them, then run the
same stages, each on its own copy of the board model (the same files read by the same code: the
same model, as the forked reading has always relied on), and share the gap scan's tasks. The twin
sends its share of the findings and exits there; it never returns from the check, never calls the
caller's progress hook, and writes nothing (its output goes to the null device). Later stages run
here alone. Whatever the twin does not deliver (it failed, died or fell silent) is done here, so
an error is raised here as in one process.
"""

import gc
import os
import pickle
import select
import signal
import struct
import time

from returngap.model.runner import SERIAL
from returngap.run import parallel

__all__ = ["Twin", "TWIN_MAX_BYTES"]

# copper Gerber text up to which a board's check is run by a twin: below THREADS_MIN_SEGMENTS
# track segments with room to spare (larger boards use two threads in the stages both would run)
TWIN_MAX_BYTES = 200_000
_LEN = struct.Struct("<Q")
_PHASES = ("copper-layers", "copper-layers", "gap-scan")  # each with its own task queue


class _Gone(Exception):
    """The twin ended, or fell silent, before it sent what was asked."""


class Twin(parallel.Parallel):
    """The pipeline's runner (see the module's text): as Parallel, but for a small board the copper
    layers and the gap scan are shared with one twin forked for the whole check. finish() must
    be called when the check ends, however it ends."""

    def __init__(self, workers=0):
        super().__init__(workers)
        self.pid = None  # the twin, seen from here (until it is collected)
        self.in_twin = False  # True in the twin itself
        self.active = False  # the twin takes part in the stages (until the gap scan's end)
        self._queues = []  # per phase: [read end, write end (here only, until written)]
        self._phase = 0
        self._recv = self._send = None

    def tasks(self, task, n, kind, work=0, pack=None, unpack=None, first=None):
        if self.pid is None and not self.in_twin and kind == "copper-layers":
            if self._worth_a_twin(n, work):
                self._fork(n)
        if self.active and n > parallel.MAX_SHARED_TASKS:  # both processes see it alike
            self._retire()  # the twin ends; this process goes on alone
        if self.active and kind == "copper-layers" and self._phase < 2:
            return self._swapped(task, n, pack, unpack, first)
        if self.active and kind == "gap-scan":
            return self._shared_last(task, n, pack, unpack)
        if self.active:  # no other kind comes before the gap scan: here alone, to be safe
            return SERIAL.tasks(task, n, kind, work, pack, unpack, first)
        return super().tasks(task, n, kind, work, pack, unpack, first)

    def processes(self, kind, work):
        if self.active:
            return 2 if kind == "gap-scan" and work >= parallel.POLICY[kind] else 1
        return super().processes(kind, work)

    def hook(self, fn):
        """The caller's hook (a progress line, say) as the check should call it: never in the
        twin."""
        return lambda *a, **k: None if self.in_twin else fn(*a, **k)

    def finish(self):
        """The check's end, however it ends: the twin exits (it never returns from the check);
        here, the twin is stopped if still running, and every pipe closed."""
        self._retire()
        fds = [fd for q in self._queues for fd in q] + [self._recv, self._send]
        for fd in fds:
            if fd is not None:
                os.close(fd)
        self._queues, self._recv, self._send = [], None, None

    def _retire(self):
        """The twin's part ends: in the twin, the process does; here, a twin still running (it had
        nothing left to do, or the check ends early) is stopped."""
        if self.in_twin:
            os._exit(0)
        if self.pid is not None:
            _stop(self.pid)
        self.pid, self.active = None, False

    def _worth_a_twin(self, n, work):
        return (
            1 < n <= parallel.MAX_SHARED_TASKS
            and work <= TWIN_MAX_BYTES
            and super().processes("copper-layers", work) > 1
        )

    def _fork(self, n):
        pipes = []
        try:
            for _ in range(len(_PHASES) + 2):
                pipes.append(os.pipe())
        except OSError:
            for fd in [fd for pair in pipes for fd in pair]:
                os.close(fd)
            return
        *queues, (up_r, up_w), (down_r, down_w) = pipes
        os.write(queues[0][1], struct.pack(f"{n}i", *range(n)))
        os.close(queues[0][1])
        queues[0] = (queues[0][0], None)
        gc.freeze()  # the twin's collector then leaves the inherited objects (and pages) alone
        try:
            pid = parallel._fork()
        except OSError:
            gc.unfreeze()
            for fd in [q for pair in queues for q in pair if q is not None]:
                os.close(fd)
            for fd in (up_r, up_w, down_r, down_w):
                os.close(fd)
            return
        self.active = True
        if pid == 0:
            self.in_twin = True
            for fd in [w for _, w in queues if w is not None] + [up_r, down_w]:
                os.close(fd)
            self._queues = [[r, None] for r, _ in queues]
            self._recv, self._send = down_r, up_w
            _quiet()
            return
        gc.unfreeze()
        self.pid = pid
        os.close(up_w)
        os.close(down_r)
        self._queues = [[r, w] for r, w in queues]
        self._recv, self._send = up_r, down_w

    def _claim(self, phase, n):
        """The phase's queue, its task numbers written when this process (not the twin) first
        gets to it: (claim, stop) as parallel._claims gives them."""
        q = self._queues[phase]
        if q[1] is not None:
            os.write(q[1], struct.pack(f"{n}i", *range(n)))
            os.close(q[1])
            q[1] = None
        return parallel._claims(q[0], n)

    def _swapped(self, task, n, pack, unpack, first):
        """Copper layers: each process builds those it takes and sends them to the other."""
        claim, _ = self._claim(self._phase, n)
        self._phase += 1
        if first is not None and not self.in_twin:
            first()  # meanwhile the twin starts on the layers
        done = {}
        while (k := claim()) < n:
            done[k] = task(k)
        mine = [(k, pack(v) if pack else v) for k, v in done.items()]
        try:
            theirs = pickle.loads(self._swap(pickle.dumps(mine, pickle.HIGHEST_PROTOCOL)))
        except (_Gone, pickle.UnpicklingError, EOFError):
            if self.in_twin:
                os._exit(0)
            self._lost()
            theirs = []
        done.update((k, unpack(v) if unpack else v) for k, v in theirs)
        if first is not None and self.in_twin:
            first()  # the twin's own reading of what needs no copper, once it has sent its part
        return _in_order(done, task, n)

    def _shared_last(self, task, n, pack, unpack):
        """The gap scan: both take tasks; the twin sends its results and exits."""
        claim, stop = self._claim(2, n)
        done = {}
        if self.in_twin:
            try:
                while (k := claim()) < n:
                    done[k] = pack(task(k)) if pack else task(k)
            except BaseException:  # the task is done again here, which raises its error
                stop()
            with os.fdopen(self._send, "wb") as f:  # its end closed: the parent reads to there
                f.write(pickle.dumps(list(done.items()), -1))
            os._exit(0)
        try:
            while (k := claim()) < n:
                done[k] = task(k)
        finally:
            self.active = False  # later stages run here alone
        if len(done) < n:  # the twin took the rest
            try:
                theirs = pickle.loads(parallel._read_from(self.pid, self._recv))
            except (pickle.UnpicklingError, EOFError):
                self._lost()
                theirs = []
            done.update((k, unpack(v) if unpack else v) for k, v in theirs)
        return _in_order(done, task, n)

    def _lost(self):
        parallel.log.debug("twin: the other process ended without its results; done here")
        self._retire()

    def _swap(self, data):
        """Send data to the other process and receive its message, both at once (neither waits
        on a full pipe)."""
        os.set_blocking(self._send, False)
        try:
            return self._exchange(memoryview(_framed(data)))
        finally:
            os.set_blocking(self._send, True)

    def _exchange(self, out):
        got, last = bytearray(), time.monotonic()
        while out or not _complete(got):
            want_read = not _complete(got)
            r, w, _ = select.select(
                [self._recv] if want_read else [], [self._send] if out else [], [], 1.0
            )
            if w:
                try:
                    out = out[os.write(self._send, out[: 1 << 16]) :]
                except BlockingIOError:
                    pass
                except BrokenPipeError:
                    raise _Gone from None
            if r:
                chunk = os.read(self._recv, 1 << 20)
                if not chunk:
                    raise _Gone
                got += chunk
                last = time.monotonic()
            elif not w:
                self._check_alive(last)
        return _message(got)

    def _check_alive(self, last):
        if self.in_twin:
            if os.getppid() == 1:  # its parent is gone
                os._exit(0)
            return
        if parallel._exited(self.pid) or time.monotonic() - last > parallel.CHILD_SILENCE_S:
            raise _Gone


def _in_order(done, task, n):
    return [done[k] if k in done else task(k) for k in range(n)]


def _framed(data):
    return _LEN.pack(len(data)) + data


def _complete(got):
    return len(got) >= _LEN.size and len(got) >= _LEN.size + _LEN.unpack_from(got)[0]


def _message(got):
    return bytes(got[_LEN.size : _LEN.size + _LEN.unpack_from(got)[0]])


def _quiet():
    """The twin dies with its parent and prints nothing (its output goes to the null device)."""
    parallel._die_with_parent()
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)
    os.dup2(null, 2)
    os.close(null)


def _stop(pid):
    """Stop and collect the twin; one already collected (its number may be another's now) is left
    alone."""
    if pid not in parallel._collected:
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    parallel._reap(pid)
