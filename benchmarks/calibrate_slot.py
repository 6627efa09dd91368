"""Sweeps of the field solve over rectangular slots against the slot-stub closed form: the data
the closed form's calibration and range come from (make calibrate).

- testdata/slot-calibration.csv: one plane; D 5-50 mm, s 0.2-2 mm, h 0.1-1.6 mm (w = 1.9 h),
  crossed at the middle and at a fifth of the length.
- testdata/slot-calibration-below.csv: 0.5 mm slots, D 5-50 mm, h 0.1-0.5 mm, with a whole plane
  0.2-1.6 mm under the slotted one (joined to nothing in the window), against the one-plane solve.
"""

import csv
import itertools
import sys
import time
from pathlib import Path

from returngap import physics
from returngap.physics import peec

TESTDATA = Path(__file__).resolve().parent.parent / "testdata"


def one_plane():
    for d, s, h, pos in itertools.product(
        (5, 10, 24, 50), (0.2, 0.5, 1.0, 2.0), (0.1, 0.2, 0.5, 1.6), (0.5, 0.2)
    ):
        if s > d / 4:
            continue
        row = _slot(d, s, h, pos)
        row["solved_nH"] = row.pop("one_plane_nH")
        stub = physics.slot_stub_inductance_nH(row["l1"], d - row["l1"], s, strip_width_mm=d / 2)
        yield {**row, "stub_nH": round(stub, 4)}


def _slot(d, s, h, pos, below=None):
    """One rectangular slot solved alone (and with a whole plane `below` mm under it, where
    given), crossed at `pos` of its length by a 50 ohm-like trace: a row of the sweep."""
    w = round(1.9 * h, 3)  # about 50 ohm on FR4 (Hammerstad & Jensen 1980)
    l1 = pos * d
    t = time.perf_counter()
    one, cells, _ = peec.rect_slot_added_inductance(d, s, h, w, offset_mm=d / 2 - l1)
    row = dict(D=d, s=s, h=h, w=w, l1=l1, one_plane_nH=round(one, 4), cells=cells)
    if below is not None:
        two, _, _ = peec.rect_slot_added_inductance(
            d, s, h, w, offset_mm=d / 2 - l1, below_mm=below
        )
        row.update(below=below, solved_nH=round(two, 4))
    return {**row, "seconds": round(time.perf_counter() - t, 1)}


def plane_below():
    for d, s, h, below, pos in itertools.product(
        (5, 10, 24, 50), (0.5,), (0.1, 0.2, 0.5), (0.2, 0.5, 1.0, 1.6), (0.5, 0.2)
    ):
        if pos != 0.5 and d != 24:
            continue
        yield _slot(d, s, h, pos, below)


def write(rows, name):
    rows = list(rows)
    with (TESTDATA / name).open("w", newline="") as fh:
        wr = csv.DictWriter(fh, fieldnames=list(rows[0]))
        wr.writeheader()
        wr.writerows(rows)


def main(which=("one", "below")):
    def logged(rows):
        for r in rows:
            print(r, file=sys.stderr, flush=True)
            yield r

    if "one" in which:
        write(logged(one_plane()), "slot-calibration.csv")
    if "below" in which:
        write(logged(plane_below()), "slot-calibration-below.csv")


if __name__ == "__main__":
    main(sys.argv[1:] or ("one", "below"))
