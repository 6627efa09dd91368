"""Writes the demo board: an invented 4-layer data-logger for a tidal-gauge buoy ("tidelog-r2").

L1 signals, L2 ground plane, L3 power plane split into 3V3 and 1V8, L4 signals.
Deliberate problems, each one a thing the check should report:
  1. SPI_SCK on L1 crosses an 18 mm isolation slot cut into the L2 ground plane.
  2. The RMII pair RMII_TXD0/RMII_TXD1 on L4 crosses the 3V3/1V8 split in L3.
  3. ADC_MCLK on L1 runs across a fence of merged via antipads in L2 (a slot made of holes).
  4. SD_CMD on L1 runs beside a 5 mm keep-out void in L2 (its footprint grazes it; the return
     barely bends, so it is below the noise floor and shown only with --all).
Everything else (a 12-line data bus, sensor lines, bottom-side control lines) runs over solid
copper.

Usage: python examples/make_demo_board.py [FOLDER]   (default: examples/demo-board)
"""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from returngap.synth import SynthBoard, Via, rect  # noqa: E402


def circle(cx, cy, r, n=48):
    import math

    return [
        (cx + r * math.cos(2 * math.pi * k / n), cy + r * math.sin(2 * math.pi * k / n))
        for k in range(n)
    ]


def build():
    b = SynthBoard(
        "tidelog-r2", 80.0, 50.0, n_layers=4, dielectrics=[(0.18, 4.2), (1.13, 4.5), (0.18, 4.2)]
    )
    b.planes.append((2, "GND", rect(0.3, 0.3, 79.7, 49.7)))
    b.planes.append((3, "+3V3", rect(0.3, 0.3, 44.8, 49.7)))
    b.planes.append((3, "+1V8", rect(45.6, 0.3, 79.7, 49.7)))
    # 1. isolation slot in the ground plane, 18 mm x 0.8 mm, under SPI_SCK
    b.cutouts.append((2, rect(61.6, 26.0, 62.4, 44.0)))
    b.tracks.append((1, "SPI_SCK", [(52.0, 35.0), (72.0, 35.0), (74.0, 37.0)], 0.15))
    # 4. keep-out void for a mounting boss, 5 mm across
    b.cutouts.append((2, circle(20.0, 41.0, 2.5)))
    b.tracks.append((1, "SD_CMD", [(6.0, 38.2), (34.0, 38.2)], 0.15))
    # 3. a fence of vias on another net whose antipads merge into a slot
    for k in range(8):
        b.vias.append(Via(70.0, 4.0 + 1.0 * k, "+1V8", drill=0.25, pad=0.45, antipad=1.1))
    b.tracks.append((1, "ADC_MCLK", [(52.0, 7.5), (78.0, 7.5)], 0.15))
    # 2. RMII pair on the bottom layer, crossing the L3 split
    for k, net in enumerate(("RMII_TXD0", "RMII_TXD1")):
        y = 12.0 + 0.45 * k
        b.tracks.append((4, net, [(30.0, y), (60.0, y)], 0.15))
    # clean tracks: a data bus over solid ground, with its own vias down to L4
    for k in range(12):
        y = 14.0 + 0.5 * k
        net = f"DB{k}"
        xv = 40.0 + 0.9 * (k % 2)
        b.tracks.append((1, net, [(4.0, y), (30.0, y), (34.0, y + 4.0), (xv, y + 4.0)], 0.12))
        b.vias.append(Via(xv, y + 4.0, net, drill=0.25, pad=0.45, antipad=0.8))
        b.tracks.append((4, net, [(xv, y + 4.0), (42.0, y + 4.0)], 0.12))
    # decoupling capacitors bridging GND (L2) and +3V3 (L3) next to the bus vias: the bus's return
    # crosses between the two planes through them
    for ref, y in (("C12", 17.0), ("C13", 24.5)):
        b.pads.append((1, 43.5, y, 0.6, 0.5, "GND", (ref, "1")))
        b.pads.append((1, 43.5, y + 1.0, 0.6, 0.5, "+3V3", (ref, "2")))
        b.vias.append(Via(43.5, y - 0.6, "GND"))
        b.vias.append(Via(43.5, y + 1.6, "+3V3"))
        b.tracks.append((1, "GND", [(43.5, y), (43.5, y - 0.6)], 0.3))
        b.tracks.append((1, "+3V3", [(43.5, y + 1.0), (43.5, y + 1.6)], 0.3))
    for k, net in enumerate(("I2C_SCL", "I2C_SDA", "TEMP_1W", "BARO_INT")):
        b.tracks.append((1, net, [(5.0, 4.0 + k), (40.0, 4.0 + k)], 0.15))
    for k, net in enumerate(("MODEM_TX", "MODEM_RX", "MODEM_RTS")):
        b.tracks.append((4, net, [(50.0, 30.0 + k), (76.0, 30.0 + k)], 0.15))
    # ground stitching: a 6 mm grid, kept clear of tracks, pads and other vias
    import shapely

    keep_out = shapely.union_all(
        [shapely.LineString(pts).buffer(w / 2 + 0.5) for _, _, pts, w in b.tracks]
        + [shapely.Point(v.x, v.y).buffer(1.2) for v in b.vias]
        + [shapely.Polygon(p).buffer(0.6) for _, p in b.cutouts]
        + [shapely.box(44.6, 0, 45.8, 50)]
    )
    for x in range(3, 80, 6):
        for y in range(3, 50, 6):
            if not keep_out.intersects(shapely.Point(x, y)):
                b.vias.append(Via(float(x), float(y), "GND" if x < 44 or y % 12 == 3 else "GND"))
    for x, y in ((10.0, 26.0), (30.0, 44.0), (50.0, 44.0), (74.0, 20.0)):  # +3V3 / +1V8 feed vias
        b.vias.append(Via(x, y, "+3V3" if x < 45 else "+1V8"))
    return b


def main(argv):
    folder = Path(argv[1]) if len(argv) > 1 else Path(__file__).resolve().parent / "demo-board"
    build().write(folder)
    print(f"wrote {folder}")


if __name__ == "__main__":
    main(sys.argv)
