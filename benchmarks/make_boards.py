"""Synthetic dense boards for the benchmark, written as real Gerber X2 and Excellon by
returngap.synth.

A 4-layer board: signal tracks (meanders of 50 segments, one per cell and layer, never shorted) on
L1 and L4, ground on L2 and a split power plane on L3, vias in proportion to the tracks (each with
its antipads), a few slots. Deterministic for a given segment count.
"""

import math
import random
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from returngap.synth import SynthBoard, Via, rect  # noqa: E402


def _serpentine(rng, lo, hi, per, vertical):
    """A meander of `per` segments inside the square [lo, hi]^2 that never crosses itself: runs
    across alternate with small steps along, each run's ends jittered."""
    w = hi - lo
    step = w / (per // 2 + 1)
    pts = []
    along = lo + step / 2
    for k in range(per // 2 + 1):
        a = lo + rng.uniform(0, 0.3) * w
        b = hi - rng.uniform(0, 0.3) * w
        run = (a, b) if k % 2 == 0 else (b, a)
        pts += [(run[0], along), (run[1], along)]
        along += step
    pts = pts[: per + 1]
    return [(y, x) for x, y in pts] if vertical else pts


def build(n_segments, seed=1):
    """Tracks meander each in its own cell of a grid, one on L1 and one on L4 per cell, so nets
    never
    short (as on a released board); each track ends in a via at a corner of its cell; GND stitching
    vias sit at the other corners. Slots in the GND plane and the split in the power plane cross
    many
    cells, so there are findings to compute."""
    rng = random.Random(seed)
    side = max(40.0, (n_segments * 1.6) ** 0.5)  # keeps track density roughly constant
    b = SynthBoard(
        f"bench{n_segments}",
        side,
        side,
        n_layers=4,
        dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)],
    )
    b.planes.append((2, "GND", rect(0, 0, side, side)))
    b.planes.append((3, "+3V3", rect(0, 0, side / 2 - 0.4, side)))
    b.planes.append((3, "+1V8", rect(side / 2 + 0.4, 0, side, side)))
    for _ in range(max(1, int(side // 40))):
        x = rng.uniform(5, side - 5)
        y = rng.uniform(5, side - 25)
        b.cutouts.append((2, rect(x - 0.4, y, x + 0.4, y + 15)))
    per = 50
    n_tracks = max(2, n_segments // per)
    m = math.ceil(math.sqrt(n_tracks / 2))
    pitch = side / m
    t = 0
    for cy in range(m):
        for cx in range(m):
            if t >= n_tracks:
                break
            x0, y0 = cx * pitch, cy * pitch
            for layer, corner in (
                (1, (x0 + 0.5, y0 + 0.5)),
                (4, (x0 + pitch - 0.5, y0 + pitch - 0.5)),
            ):
                if t >= n_tracks:
                    break
                pts = [
                    (x0 + u, y0 + v)
                    for u, v in _serpentine(rng, 1.2, pitch - 1.2, per - 1, layer == 4)
                ]
                pts = [corner] + pts if layer == 1 else pts + [corner]
                net = f"SIG{t}"
                b.tracks.append((layer, net, pts, 0.1))
                b.vias.append(Via(corner[0], corner[1], net, drill=0.2, pad=0.4, antipad=0.7))
                t += 1
            if (cx + cy) % 2 == 0:
                b.vias.append(
                    Via(x0 + pitch - 0.5, y0 + 0.5, "GND", drill=0.2, pad=0.4, antipad=0.7)
                )
            elif (cx + cy) % 4 == 1:  # the power planes' own vias (else they would float)
                power = "+3V3" if x0 + pitch / 2 < side / 2 else "+1V8"
                b.vias.append(
                    Via(x0 + 0.5, y0 + pitch - 0.5, power, drill=0.2, pad=0.4, antipad=0.7)
                )
    return b


def many_findings(rows=20, cols=21):
    """A board of many small findings (rows x cols, about 400): `rows` tracks on L1 over a whole
    GND plane on L2, each crossing `cols` short slots (3 x 0.3 mm) cut under it one after another,
    and L3 GND whole: each crossing adds a few tenths of a nH (info), as on a board full of small
    antipad chains. What check --out must handle without drawing every one."""
    pitch, step = 2.0, 4.0
    width, height = 10 + cols * step, 10 + rows * pitch
    b = SynthBoard(
        "many", width, height, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)]
    )
    b.planes += [(2, "GND", rect(0, 0, width, height)), (3, "GND", rect(0, 0, width, height))]
    for r in range(rows):
        y = 5 + r * pitch + pitch / 2
        b.tracks.append((1, f"D{r:02d}", [(2, y), (width - 2, y)], 0.15))
        for c in range(cols):
            x = 7 + c * step
            b.cutouts.append((2, rect(x - 0.15, y - 1.5, x + 0.15, y + 1.5)))
    b.vias += [Via(1, 1, "GND"), Via(width - 1, height - 1, "GND"), Via(1, height - 1, "GND")]
    return b


def main(argv):
    out = Path(argv[1])
    for n in map(int, argv[2:]):
        build(n).write(out / f"seg{n}", job_file=True)
        print(out / f"seg{n}")
    many_findings().write(out / "many", job_file=True)
    print(out / "many")


if __name__ == "__main__":
    main(sys.argv)
