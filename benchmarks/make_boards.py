"""Synthetic dense boards for the benchmark, written as real Gerber X2 and Excellon by returngap.synth.

A 4-layer board: signal tracks (random Manhattan routes of 50 segments) on L1 and L4, ground on L2
and a split power plane on L3, vias in proportion to the tracks (each with its antipads), a few
slots. Deterministic for a given segment count.
"""

import random
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from returngap.synth import SynthBoard, Via, rect  # noqa: E402


def build(n_segments, seed=1):
    rng = random.Random(seed)
    side = max(40.0, (n_segments * 1.6) ** 0.5)  # keeps track density roughly constant
    b = SynthBoard(f"bench{n_segments}", side, side, n_layers=4, dielectrics=[(0.2, 4.3), (1.0, 4.3), (0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, side, side)))
    b.planes.append((3, "+3V3", rect(0, 0, side / 2 - 0.4, side)))
    b.planes.append((3, "+1V8", rect(side / 2 + 0.4, 0, side, side)))
    for k in range(max(1, int(side // 40))):
        x = rng.uniform(5, side - 5)
        y = rng.uniform(5, side - 25)
        b.cutouts.append((2, rect(x - 0.4, y, x + 0.4, y + 15)))
    per = 50
    n_tracks = max(1, n_segments // per)
    pitch = side / (n_tracks ** 0.5 + 1)
    k = 0
    for t in range(n_tracks):
        layer = 1 if t % 2 == 0 else 4
        x, y = rng.uniform(2, side - 2), rng.uniform(2, side - 2)
        pts = [(x, y)]
        for s in range(per):
            step = rng.uniform(0.3, min(3.0, pitch))
            if s % 2 == 0:
                x = min(max(1.0, x + rng.choice((-1, 1)) * step), side - 1)
            else:
                y = min(max(1.0, y + rng.choice((-1, 1)) * step), side - 1)
            pts.append((x, y))
        net = f"SIG{t}"
        b.tracks.append((layer, net, pts, 0.1))
        b.vias.append(Via(pts[-1][0], pts[-1][1], net, drill=0.2, pad=0.4, antipad=0.7))
        k += 1
    for v in range(n_tracks // 2):
        b.vias.append(Via(rng.uniform(1, side - 1), rng.uniform(1, side - 1), "GND", drill=0.2, pad=0.4, antipad=0.7))
    return b


def main(argv):
    out = Path(argv[1])
    for n in map(int, argv[2:]):
        build(n).write(out / f"seg{n}", job_file=True)
        print(out / f"seg{n}")


if __name__ == "__main__":
    main(sys.argv)
