"""Evenly spaced samples along many lines, of which only those near flagged pieces are made.

A line of length L has n = max(2, int(L / step) + 1) samples, at the distances np.linspace(0, L, n)
gives (j * (L / (n - 1)), the last exactly L). A sample lies on the straight piece of its line
under its distance (pieces laid end to end on one axis, `run`). Where only the samples on some
pieces matter, the others need not exist: on a 200 mm track near a plane's edge for 2 mm, a few
dozen samples instead of thousands, the same values to the last bit.
"""

import numpy as np

__all__ = ["sample_counts", "kept_samples"]


def sample_counts(lengths, step):
    """Samples per line: max(2, int(L / step) + 1)."""
    return np.maximum(2, (np.asarray(lengths, dtype=float) / step).astype(int) + 1)


def kept_samples(lengths, counts, run, piece_line, flag):
    """(per line, the distances of its kept samples; per kept sample laid end to end, whether it
    lies on a flagged piece). Kept: every sample on a flagged piece, each line's first, and the
    one after each flagged stretch (it stands for the unflagged stretch that follows). run: the
    pieces' start distances laid end to end (one more entry than pieces); piece_line: each
    piece's line (sorted, every line has a piece); flag: per piece."""
    lengths = np.asarray(lengths, dtype=float)
    counts = np.asarray(counts)
    spacing = lengths / (counts - 1)
    lines = np.arange(len(lengths))
    first = np.searchsorted(piece_line, lines)
    last = np.searchsorted(piece_line, lines, side="right") - 1
    start = np.zeros(len(piece_line), dtype=int)  # first sample on each piece
    inner = np.ones(len(piece_line), dtype=bool)
    inner[first] = False
    start[inner] = _first_at_or_after(run, piece_line, first, spacing, counts, lengths, inner)
    end = np.empty_like(start)  # one past each piece's last sample
    end[:-1] = start[1:]
    end[last] = counts
    offset = np.concatenate([[0], np.cumsum(counts)[:-1]])
    on = flag & (end > start)
    looked = _ranges(offset[piece_line[on]] + start[on], end[on] - start[on])
    after = on & (end < counts[piece_line])
    kept = np.concatenate([looked, offset[piece_line[after]] + end[after], offset])
    kept.sort()
    kept = kept[np.r_[True, kept[1:] != kept[:-1]]]
    is_looked = np.zeros(len(kept), dtype=bool)
    is_looked[np.searchsorted(kept, looked)] = True
    line = np.searchsorted(offset, kept, side="right") - 1
    at = _distance(kept - offset[line], line, spacing, counts, lengths)
    return np.split(at, np.cumsum(np.bincount(line, minlength=len(lengths)))[:-1]), is_looked


def _distance(j, line, spacing, counts, lengths):
    """Sample j of its line's distance, as np.linspace computes it."""
    at = j.astype(float) * spacing[line] + 0.0
    end = j == counts[line] - 1
    at[end] = lengths[line[end]]
    return at


def _first_at_or_after(run, piece_line, first, spacing, counts, lengths, which):
    """For the pieces `which`: how many of their line's samples lie before the piece's start (their
    distance plus the line's start, as the sample's position on the axis, below run[piece]).
    Estimated by division, then settled by testing the positions around the estimate, so that a
    sample exactly at a piece's start goes where a sorted search of all positions would put it."""
    p = np.flatnonzero(which)
    line = piece_line[p]
    base = run[first[line]]
    sp = spacing[line]
    est = np.floor(np.divide(run[p] - base, sp, out=np.zeros(len(p)), where=sp > 0))
    n = counts[line]
    lo = np.clip(est.astype(int) - 2, 0, n)
    # the estimate is off by one at most: a window of five samples from two before it settles it
    j = lo[:, None] + np.arange(5)
    lines = np.broadcast_to(line[:, None], j.shape)
    pos = _distance(np.minimum(j, n[:, None] - 1), lines, spacing, counts, lengths)
    return lo + ((j < n[:, None]) & (pos + base[:, None] < run[p][:, None])).sum(axis=1)


def _ranges(starts, sizes):
    """The integers start, start + 1, ..., start + size - 1 of every range, in order."""
    total = int(sizes.sum())
    if not total:
        return np.zeros(0, dtype=int)
    shift = np.repeat(starts - np.concatenate([[0], np.cumsum(sizes)[:-1]]), sizes)
    return shift + np.arange(total)
