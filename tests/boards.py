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


def stripline_board(folder, h1=0.2, h2=0.6, both=False):
    """L3 track between GND planes on L2 (h1 above) and L4 (h2 below); a slot in L2 (and, with
    both, the same slot in L4)."""
    b = SynthBoard("s", 60, 40, n_layers=4, dielectrics=[(0.2, 4.3), (h1, 4.3), (h2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((4, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.75, 10, 30.25, 30)))
    if both:
        b.cutouts.append((4, rect(29.75, 10, 30.25, 30)))
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


def pour_between_planes_board(folder, solid_below=True):
    """40 x 30 mm, 4 layers: L1 solid GND; L2 a GND pour round five tracks of its own (0.6 mm
    openings); L3 the track SIG, crossing under all five openings; L4 solid GND (h = 0.1 mm below
    L3; the L2 pour is 0.4 mm above it). Without solid_below, L4 carries no plane."""
    b = SynthBoard("p", 40, 30, n_layers=4, dielectrics=[(0.1, 4.3), (0.4, 4.3), (0.1, 4.3)])
    b.planes.append((1, "GND", rect(0, 0, 40, 30)))
    b.planes.append((2, "GND", rect(0, 0, 40, 30)))
    if solid_below:
        b.planes.append((4, "GND", rect(0, 0, 40, 30)))
    for k in range(5):
        y = 5 + 5 * k
        b.cutouts.append((2, rect(2, y - 0.3, 38, y + 0.3)))
        b.tracks.append((2, f"L2_SIG{k}", [(3, y), (37, y)], 0.2))
    b.tracks.append((3, "SIG", [(20, 2), (20, 28)], 0.15))
    b.vias.append(Via(1, 1, "GND"))
    b.vias.append(Via(39, 29, "GND"))
    b.write(folder)
    return folder


def feed_track_board(folder, feed_width=0.5, clearance=0.25):
    """60 x 40 mm, 4 layers: L1 track CLK over a GND plane on L2 (h = 0.2 mm), GND on L3. A 5 V
    feed track (net P5V, feed_width wide) runs through the L2 plane from (10, 20) to (50, 20), its
    clearance cut round it: a slot 40 mm long with the feed track inside. CLK crosses it at
    x = 30."""
    b = SynthBoard("f", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    half = feed_width / 2 + clearance
    b.cutouts.append((2, rect(10 - half, 20 - half, 50 + half, 20 + half)))
    b.tracks.append((2, "P5V", [(10, 20), (50, 20)], feed_width))
    b.vias += [Via(10, 20, "P5V"), Via(50, 20, "P5V")]
    b.tracks.append((1, "CLK", [(30, 5), (30, 35)], 0.2))
    b.vias.append(Via(5, 5, "GND"))
    b.vias.append(Via(55, 35, "GND"))
    b.write(folder)
    return folder


def narrow_split_board(folder, strip=2.0):
    """60 x 40 mm, 4 layers: L1 track CLK along y = 10 over a GND strip on L2 `strip` mm wide,
    split across at x = 30 by a 0.5 mm gap; the plane's bulk (GND, y 20..40) lies apart."""
    b = SynthBoard("n", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes.append((2, "GND", rect(0, 10 - strip / 2, 60, 10 + strip / 2)))
    b.planes.append((2, "GND", rect(0, 20, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.75, 10 - strip, 30.25, 10 + strip)))
    b.tracks.append((1, "CLK", [(10, 10), (50, 10)], 0.2))
    b.vias.append(Via(5, 30, "GND"))
    b.write(folder)
    return folder


def off_plane_neck_board(folder):
    """60 x 40 mm, 4 layers: the L2 GND plane covers x < 30 only; CLK on L1 runs from (10, 20) to
    (40, 20) 0.2 mm wide, then on to (50, 20) 0.3 mm wide: 20 mm off the plane, in two widths."""
    b = SynthBoard("o", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 30, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.tracks.append((1, "CLK", [(10, 20), (40, 20)], 0.2))
    b.tracks.append((1, "CLK", [(40, 20), (50, 20)], 0.3))
    b.vias.append(Via(5, 5, "GND"))
    b.write(folder)
    return folder


def coplanar_board(folder, gap=0.15, sides=2):
    """slot_board's 20 x 0.5 mm slot under CLK (L1, 0.2 mm wide, h = 0.2 mm), with GND poured on
    L1 beside the track, `gap` mm from its edges, on one or both sides (stitched to L2)."""
    b = SynthBoard("c", 60, 40, n_layers=4, dielectrics=[(H, 4.3), (1.0, 4.3), (H, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 60, 40)))
    b.planes.append((3, "GND", rect(0, 0, 60, 40)))
    b.cutouts.append((2, rect(29.75, 10, 30.25, 30)))
    edge = 0.1 + gap
    b.planes.append((1, "GND", rect(5, 20 + edge, 55, 30)))
    if sides == 2:
        b.planes.append((1, "GND", rect(5, 10, 55, 20 - edge)))
    b.tracks.append((1, "CLK", [(10, 20), (50, 20)], 0.2))
    for x in (8, 20, 40, 52):
        b.vias.append(Via(x, 25, "GND"))
        if sides == 2:
            b.vias.append(Via(x, 15, "GND"))
    b.write(folder)
    return folder
