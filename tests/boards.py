"""Analytic test boards of our own, written as real Gerber/Excellon by returngap.synth."""

from returngap.synth import SynthBoard, Via, rect

H = 0.2  # microstrip height of these boards, mm


def slot_board(
    folder,
    D=20.0,
    s=0.5,
    offset=0.0,
    split=False,
    solid=False,
    extra_void=None,
    graze=None,
    own_via=False,
    width=0.2,
):
    """60 x 40 mm, 4 layers: L1 tracks over a GND plane on L2 (h = 0.2 mm), GND also on L3."""
    b = SynthBoard("t", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    if split:
        b.cutouts.append((2, rect(29.75, -1, 30.25, 41)))
    elif not solid and graze is None:
        b.cutouts.append(
            (2, rect(30 - s / 2, 20 - D / 2 + offset, 30 + s / 2, 20 + D / 2 + offset))
        )
    if extra_void:
        b.cutouts.append((2, extra_void))
    if graze is not None:
        # a long void beside the track: lateral offsets from `graze` to graze + 10 mm, 30
        # mm along it
        b.cutouts.append((2, rect(15, 20 + graze, 45, 30 + graze)))
    b.tracks.append((1, "CLK", [(10, 20), (50, 20)], width))
    if own_via:
        b.vias.append(Via(50, 20, "CLK", drill=0.3, pad=0.6, antipad=1.2))
        b.tracks.append((4, "CLK", [(50, 20), (55, 20)], width))
    b.vias.append(Via(5, 5, "GND"))
    b.vias.append(Via(55, 35, "GND"))
    b.write(folder)
    return folder


def stripline_board(folder, h1=0.2, h2=0.6):
    """L3 track between GND planes on L2 (h1 above) and L4 (h2 below); a slot in L2."""
    b = SynthBoard("s", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (h1, 4.3), (h2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((4, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.75, 10, 30.25, 30)))
    b.tracks.append((3, "DQS", [(10, 20), (50, 20)], 0.1))
    b.vias.append(Via(5, 5, "GND"))
    b.write(folder)
    return folder


def hazard_board(folder, stitch_dx=3.0, edge_gap=0.5, island=True, stitch_pitch=None, er=4.3):
    """For the other risk kinds (all distances from geometry):
    - SIG_A on L1 (over GND L2, h = 0.2) drops through a via at (20, 20) to L4 (over GND L3);
      the nearest GND stitching via is stitch_dx mm away (straight up).
    - SIG_B on L1 runs with its centre line edge_gap mm inside the top edge of the L2 plane (y =
    30).
    - a 20 x 5 mm unconnected copper island on L1 beside SIG_C.
    - with stitch_pitch: a GND pour on L1 whose stitching vias are stitch_pitch mm apart, next
    to SIG_D."""
    b = SynthBoard("h", 80, 40, n_layers=4, dielectrics=[(H, er), (1.0, er), (H, er)])
    b.planes.append((2, "GND", rect(0, 0, 80, 30)))
    b.planes.append((3, "GND", rect(0, 0, 80, 40)))
    b.tracks.append((1, "SIG_A", [(5, 20), (20, 20)], 0.2))
    b.vias.append(Via(20, 20, "SIG_A"))
    b.tracks.append((4, "SIG_A", [(20, 20), (35, 20)], 0.2))
    b.vias.append(Via(20, 20 + stitch_dx, "GND"))
    b.tracks.append((1, "SIG_B", [(40, 30 - edge_gap), (70, 30 - edge_gap)], 0.1))
    if island:
        b.planes.append((1, "ISLAND", rect(45, 5, 65, 10)))
        b.tracks.append((1, "SIG_C", [(40, 11), (70, 11)], 0.2))
    if stitch_pitch:
        b.planes.append((1, "GND", rect(2, 2, 36, 8)))
        for k in range(int(32 / stitch_pitch) + 1):
            b.vias.append(Via(4 + k * stitch_pitch, 3, "GND"))
        b.tracks.append((1, "SIG_D", [(2, 9), (36, 9)], 0.2))
    b.write(folder)
    return folder
