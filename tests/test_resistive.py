"""The DC sheet solve (physics/resistive.py) against Ohm's law and symmetry."""

import numpy as np
import pytest

from returngap.physics import resistive


def _channels(narrow, wide, length=180, height=81, pad=60):
    """A sheet with a long wall across its middle, leaving a channel below and one above."""
    copper = np.ones((2 * pad + length, height), bool)
    copper[pad : pad + length, narrow : height - wide] = False
    return copper


def test_two_channels_share_the_current_as_their_conductances():
    # Ohm's law, parallel resistors: channels 2 and 8 cells wide, 180 long carry 1/5 and 4/5;
    # the mouths' spreading resistance adds a little more to the narrow one (below 10 %)
    copper = _channels(2, 8)
    v = resistive.sheet_potential(copper, (5, 40), (copper.shape[0] - 6, 40))
    mid = copper.shape[0] // 2
    below = resistive.flow_across_column(v, mid, np.arange(0, 2))
    above = resistive.flow_across_column(v, mid, np.arange(73, 81))
    assert below + above == pytest.approx(1.0, abs=1e-9)  # Kirchhoff: all of it passes
    assert 0.2 <= below <= 0.2 * 1.10


def test_a_symmetric_sheet_splits_evenly():
    # symmetry: a wall in the middle of a sheet fed on its axis
    copper = _channels(10, 10, length=40, height=61, pad=20)
    v = resistive.sheet_potential(copper, (2, 30), (77, 30))
    below = resistive.flow_across_column(v, 40, np.arange(0, 10))
    assert below == pytest.approx(0.5, abs=1e-9)


def test_unjoined_copper_is_refused():
    copper = np.ones((20, 10), bool)
    copper[10, :] = False
    with pytest.raises(resistive.NotConnected):
        resistive.sheet_potential(copper, (2, 5), (17, 5))
