"""Sweep of the field solve over rectangular slots (D 5-50 mm, s 0.2-2 mm, h 0.1-1.6 mm, centred
and off-centre crossings) against the slot-stub closed form: the data the closed form's
calibration and range come from. Writes testdata/slot-calibration.csv (make calibrate)."""

import csv
import itertools
import sys
import time
from pathlib import Path

from returngap import physics
from returngap.physics import peec

OUT = Path(__file__).resolve().parent.parent / "testdata" / "slot-calibration.csv"


def main():
    rows = []
    for d, s, h, pos in itertools.product(
        (5, 10, 24, 50), (0.2, 0.5, 1.0, 2.0), (0.1, 0.2, 0.5, 1.6), (0.5, 0.2)
    ):
        if s > d / 4:
            continue
        w = round(1.9 * h, 3)  # about 50 ohm on FR4 (Hammerstad & Jensen 1980)
        l1 = pos * d
        t = time.perf_counter()
        solved, cells, _ = peec.rect_slot_added_inductance(d, s, h, w, offset_mm=d / 2 - l1)
        stub = physics.slot_stub_inductance_nH(l1, d - l1, s, strip_width_mm=d / 2)
        rows.append(
            dict(
                D=d,
                s=s,
                h=h,
                w=w,
                l1=l1,
                solved_nH=round(solved, 4),
                stub_nH=round(stub, 4),
                cells=cells,
                seconds=round(time.perf_counter() - t, 1),
            )
        )
        print(rows[-1], file=sys.stderr, flush=True)
    with OUT.open("w", newline="") as fh:
        wr = csv.DictWriter(fh, fieldnames=list(rows[0]))
        wr.writeheader()
        wr.writerows(rows)


if __name__ == "__main__":
    main()
