"""How independent units of work are run. Analysis code takes a runner and asks it to run a list
of tasks or to give a pool for per-layer geometry; it never forks or starts threads itself. The
default here does everything in this thread, in order; run/parallel.py has the runner that uses
both cores, and the one policy of when that pays."""

__all__ = ["InOrder", "Serial", "SERIAL"]


class InOrder:
    """Stands in for a thread pool: the same calls, done here one after another."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def map(self, fn, *items):
        return map(fn, *items)


class Serial:
    """Runs every task here, in order."""

    def processes(self, kind, work):
        """How many processes `tasks` would use for `work` units of this kind of work."""
        return 1

    def tasks(self, task, n, kind="", work=0, pack=None, unpack=None, first=None):
        """[task(0), ..., task(n - 1)]. pack / unpack: what a result needs to cross between
        processes (and back), where a runner uses more than one. first: work of this process
        alone (it keeps what that work leaves), done before its first task; a runner of two
        processes lets the other one start on the tasks meanwhile."""
        if first is not None:
            first()
        return [task(k) for k in range(n)]

    def threads(self, work=0):
        """A pool (with .map) for per-layer geometry worth `work` track segments."""
        return InOrder()

    def threaded(self, work=0):
        """Whether threads(work) gives a pool of more than one thread."""
        return False


SERIAL = Serial()
