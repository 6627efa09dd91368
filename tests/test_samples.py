"""geometry/samples.py: the kept samples are those that making every sample with np.linspace and
finding each one's piece with a sorted search would keep, to the last bit."""

import numpy as np
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from returngap.geometry.samples import kept_samples, sample_counts


def _pieces(lines):
    xy, idx = shapely.get_coordinates(lines, return_index=True)
    same = idx[1:] == idx[:-1]
    a, b, piece_line = xy[:-1][same], xy[1:][same], idx[:-1][same]
    return np.concatenate([[0.0], np.cumsum(np.hypot(*(b - a).T))]), piece_line


def every_sample(lines, step, flag):
    """The plain way: every sample made, each one's piece found by np.searchsorted on the pieces
    laid end to end, then the looked ones, each line's first and the one after each looked one."""
    run, piece_line = _pieces(lines)
    lengths = shapely.length(lines)
    dists = [np.linspace(0, L, max(2, int(L / step) + 1)) for L in lengths]
    kept, flags = [], []
    for i, d in enumerate(dists):
        first, last = np.flatnonzero(piece_line == i)[[0, -1]]
        piece = np.clip(np.searchsorted(run, d + run[first], side="right") - 1, first, last)
        look = flag[piece]
        keep = look | np.r_[True, look[:-1]]
        kept.append(d[keep])
        flags.extend(look[keep].tolist())
    return kept, np.array(flags, dtype=bool)


def _same(lines, step, flag):
    run, piece_line = _pieces(lines)
    lengths = shapely.length(lines)
    got, got_flags = kept_samples(lengths, sample_counts(lengths, step), run, piece_line, flag)
    want, want_flags = every_sample(lines, step, flag)
    assert len(got) == len(want)
    for g, w in zip(got, want):
        assert g.tobytes() == w.tobytes()
    assert got_flags.tolist() == want_flags.tolist()


def test_a_sample_exactly_at_a_piece_start_belongs_to_that_piece():
    # analytic: samples every 1 mm along 10 mm then 10 mm more; only the second piece flagged
    lines = np.array([shapely.LineString([(0, 0), (10, 0), (10, 10)])], dtype=object)
    run, piece_line = _pieces(lines)
    got, flags = kept_samples([20.0], [21], run, piece_line, np.array([False, True]))
    assert got[0].tolist() == [0.0] + [float(k) for k in range(10, 21)]
    assert flags.tolist() == [False] + [True] * 11
    _same(lines, 1.0, np.array([False, True]))
    _same(lines, 1.0, np.array([True, False]))  # 0..9 looked, 10 kept as the one after


def test_a_line_of_zero_length_and_pieces_of_zero_length():
    lines = np.array(
        [
            shapely.LineString([(1, 1), (1, 1)]),
            shapely.LineString([(0, 0), (2, 0), (2, 0), (2, 3)]),
        ],
        dtype=object,
    )
    for flag in ([0, 0, 0, 0], [1, 0, 0, 0], [0, 1, 1, 0], [0, 0, 1, 1], [1, 1, 1, 1]):
        _same(lines, 0.5, np.array(flag, dtype=bool))


@settings(max_examples=300, deadline=None)
@given(
    st.lists(
        st.lists(st.tuples(st.integers(0, 40), st.integers(0, 40)), min_size=2, max_size=9),
        min_size=1,
        max_size=5,
    ),
    st.sampled_from([0.05, 0.1, 0.125, 0.25, 0.3, 1.0]),
    st.floats(0.1, 2.0),
    st.randoms(use_true_random=False),
)
def test_kept_samples_equal_those_kept_from_every_sample(points, step, scale, rnd):
    # coordinates on a grid: many samples fall exactly on a piece's start, or a hair off it
    lines = np.array(
        [shapely.LineString(np.array(p, dtype=float) * scale) for p in points], dtype=object
    )
    n_pieces = sum(len(p) - 1 for p in points)
    flag = np.array([rnd.random() < 0.3 for _ in range(n_pieces)], dtype=bool)
    _same(lines, step, flag)
