"""The local field solve of one gap crossing from the board's own copper (physics/peec.py).

A window round the gap (its box plus 1.5 times its length each way, our choice after the
domain-doubling check in tests/test_peec.py) is turned so the track runs along +x through the
crossing; the reference layer's plane copper in it is rasterised on a grid graded to be fine at
the track's edges, where the track meets the gap's outline, and at the gap's ends; ΔL is the
loop inductance with the gap minus that with this one gap filled (its antipads, notches and
islands stay what they are). The track is taken straight through the window along its direction
at the crossing, the plane a perfect zero-thickness sheet, a second plane is not modelled.
"""

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np
import shapely
import shapely.affinity

from returngap import physics
from returngap.analysis import severity
from returngap.physics import peec

__all__ = [
    "CrossingSolve",
    "solve_crossing",
    "nearest_budget",
    "solve_nearest",
    "solve_one",
    "with_solve",
    "as_fields",
    "SOLVABLE_PATHS",
    "MAX_CELLS",
]

SOLVABLE_PATHS = ("detour",)  # the return goes round the gap in this one plane
MAX_CELLS = 5000  # a bigger grid is coarsened: its dense matrices would pass ~1 GiB
WINDOW_MARGIN = 1.5  # times the gap's length, each way
MAX_MARGIN_MM = 60.0
# the solve's range: its spread against the reference sheet's independent solve (within 3 %) and
# the straight-track, one-plane idealisation of the window (our estimate, no source)
SOLVE_LOW, SOLVE_HIGH = 0.85, 1.15


@dataclass
class CrossingSolve:
    """What the solve of one crossing found."""

    added_inductance_nH: float | None  # None: no return path in the window (a split)
    loop_with_gap_nH: float | None
    loop_filled_nH: float
    grid_cells: int
    unknowns: int
    seconds: float
    window_mm: list  # [width along the track, height across it]
    note: str = ""


def _tangent_at(chains, net, layer, x, y):
    """Unit direction of the net's track on `layer` at the point nearest (x, y)."""
    p = shapely.Point(x, y)
    best = min(
        (c for c in chains if c.net == net and c.layer == layer),
        key=lambda c: c.line.distance(p),
        default=None,
    )
    if best is None:
        raise LookupError(f"no track of {net} on {layer} near ({x:.2f}, {y:.2f})")
    s = best.line.project(p)
    a = best.line.interpolate(max(0.0, s - 0.05))
    b = best.line.interpolate(min(best.line.length, s + 0.05))
    dx, dy = b.x - a.x, b.y - a.y
    n = math.hypot(dx, dy) or 1.0
    return dx / n, dy / n


def _to_local(geom, x, y, angle_deg):
    return shapely.affinity.rotate(
        shapely.affinity.translate(geom, -x, -y), -angle_deg, origin=(0, 0)
    )


def _gap_polygon(plane, outline, x, y, reach):
    """The void of the plane copper at or nearest the crossing point."""
    box = shapely.Point(x, y).buffer(reach)
    voids = shapely.get_parts(outline.intersection(box).difference(plane))
    if not len(voids):
        raise LookupError(f"no gap in the plane near ({x:.2f}, {y:.2f})")
    return voids[int(np.argmin(shapely.distance(voids, shapely.Point(x, y))))]


def _features(gap_local, width, height):
    """(x features, y features) of the grid: the gap's outline where the track's band meets it,
    the track's edges, the gap's far ends."""
    s_fine = min(width, height) / 4
    band = shapely.box(-1e6, -width / 2 - height, 1e6, width / 2 + height)
    x0, y0, x1, y1 = gap_local.bounds
    under = gap_local.intersection(band)
    ux = under.bounds if not under.is_empty else (x0, 0, x1, 0)
    gap_w = max(ux[2] - ux[0], 1e-3)
    fx = min(gap_w, height) / 4
    x_feats = [(ux[0], fx), (ux[2], fx)]
    y_feats = [(-width / 2, s_fine), (width / 2, s_fine), (0.0, s_fine)]
    y_feats += [(y0, min(gap_w, height) / 2), (y1, min(gap_w, height) / 2)]
    return x_feats, y_feats


def _grid(gap_local, width, height, box):
    x_feats, y_feats = _features(gap_local, width, height)
    coarse = 1.0
    while True:
        xs, ys = peec.window_nodes(
            [(p, s * coarse) for p, s in x_feats], [(p, s * coarse) for p, s in y_feats], box
        )
        if (len(xs) - 1) * (len(ys) - 1) <= MAX_CELLS:
            return xs, ys, coarse
        coarse *= 1.4


def _along_copper(box, copper):
    """The window cut, along the track, to the run of copper under it that holds the crossing:
    the loop's ends must land on copper (a window past the board's edge has none)."""
    x0, y0, x1, y1 = box
    run = shapely.LineString([(x0, 0.0), (x1, 0.0)]).intersection(copper)
    for part in shapely.get_parts(run):
        a, _, b, _ = part.bounds
        if a <= 0.0 <= b:
            return (max(x0, a), y0, min(x1, b), y1)
    return box


def _mask(geom, xs, ys):
    cx, cy = 0.5 * (xs[1:] + xs[:-1]), 0.5 * (ys[1:] + ys[:-1])
    gx, gy = np.meshgrid(cx, cy, indexing="ij")
    return shapely.contains_xy(geom, gx, gy)


def solve_crossing(board, nets, chains, finding):
    """The field solve of one gap-crossing finding (a mapping with the GapCrossing fields)."""
    t0 = time.perf_counter()
    x, y = finding["x_mm"], finding["y_mm"]
    ux, uy = _tangent_at(chains, finding["net"], finding["layer"], x, y)
    angle = math.degrees(math.atan2(uy, ux))
    ref_layer = finding["reference_layer"]
    plane = nets.layers[ref_layer].union_of(nets.plane_nets)
    d = max(finding["gap_length_mm"], 1.0)
    margin = min(WINDOW_MARGIN * d, MAX_MARGIN_MM)
    gap = _gap_polygon(plane, board.outline, x, y, d + margin)
    gap_local = _to_local(gap, x, y, angle)
    gx0, gy0, gx1, gy1 = gap_local.bounds
    box = (
        min(gx0, 0.0) - margin,
        min(gy0, 0.0) - margin,
        max(gx1, 0.0) + margin,
        max(gy1, 0.0) + margin,
    )
    window = shapely.box(*box)
    # the window in board coordinates, so only the copper near it is turned
    back = shapely.affinity.translate(shapely.affinity.rotate(window, angle, origin=(0, 0)), x, y)
    plane_local = _to_local(plane.intersection(back), x, y, angle)
    box = _along_copper(box, plane_local.union(gap_local))
    w, h = finding["trace_width_mm"], finding["height_mm"]
    xs, ys, coarse = _grid(gap_local, w, h, box)
    copper = _mask(plane_local, xs, ys)
    filled = copper | _mask(gap_local, xs, ys)
    return _solve(xs, ys, copper, filled, w, h, box, coarse, t0)


def _solve(xs, ys, copper, filled, w, h, box, coarse, t0):
    note = f"grid coarsened {coarse:.2f}x to fit {MAX_CELLS} cells" if coarse > 1 else ""
    op = peec.PlaneOperator(xs, ys)
    strips = peec.trace_strips(xs[0], xs[-1], w)
    mt = op.trace_mutual(strips, h)
    lt = peec.strip_matrix(strips, h)
    ref = peec.loop_inductance(op, filled, strips, h, lt, mt)
    try:
        gap = peec.loop_inductance(op, copper, strips, h, lt, mt)
        dl, loop = gap.loop_nH - ref.loop_nH, gap.loop_nH
    except peec.NoReturnPath:
        dl, loop, note = None, None, "no return path in the window: the gap splits it"
    return CrossingSolve(
        added_inductance_nH=dl,
        loop_with_gap_nH=loop,
        loop_filled_nH=ref.loop_nH,
        grid_cells=int(copper.size),
        unknowns=int(ref.unknowns),
        seconds=time.perf_counter() - t0,
        window_mm=[box[2] - box[0], box[3] - box[1]],
        note=note,
    )


def as_fields(solve):
    """The solve as the finding's `field_solve` mapping (units in the names)."""
    return {k: v for k, v in dataclasses.asdict(solve).items() if v != ""}


def nearest_budget(findings, settings, n):
    """The n solvable gap crossings whose reflection lies nearest the reflection budget (on a log
    scale): where a better number can change the severity."""
    cands = [
        f
        for f in findings
        if f["kind"] == "gap-crossing"
        and f["return_path"] in SOLVABLE_PATHS
        and f["reflection_fraction"] > 0
    ]

    def distance(f):
        effect = f["reflection_fraction"] * f["interrupted_fraction"]
        return abs(math.log(max(effect, 1e-9) / settings.reflection_budget))

    return sorted(cands, key=distance)[: max(0, n)]


def with_solve(finding, solve, settings):
    """The finding with the solve's inductance in place of the closed form's (its reflection and
    severity from it), the closed-form figure kept in `field_solve`."""
    fields = as_fields(solve)
    fields["closed_form_nH"] = finding["added_inductance_nH"]
    if solve.added_inductance_nH is None:
        return dataclasses.replace(finding, field_solve=fields)
    est = max(0.0, solve.added_inductance_nH)
    refl = physics.series_inductance_reflection(est, finding["z0_ohm"], finding["rise_time_ns"])
    knee = settings.knee_GHz_for(finding["net"])
    lowest = min(finding["resonance_range_GHz"])
    return dataclasses.replace(
        finding,
        added_inductance_nH=est,
        added_inductance_range_nH=[SOLVE_LOW * est, SOLVE_HIGH * est],
        inductance_method="field-solve",
        reflection_fraction=refl,
        severity=severity.gap_crossing(
            refl * finding["interrupted_fraction"], lowest, knee, settings
        ),
        field_solve=fields,
    )


def solve_nearest(board, nets, chains, findings, settings):
    """The findings, the settings.field_solves crossings nearest the budget solved."""
    chosen = {id(f) for f in nearest_budget(findings, settings, settings.field_solves)}
    return [solve_one(board, nets, chains, f, settings) if id(f) in chosen else f for f in findings]


def solve_one(board, nets, chains, finding, settings):
    """The finding solved; where it cannot be, the closed form kept and the reason said."""
    try:
        return with_solve(finding, solve_crossing(board, nets, chains, finding), settings)
    except (LookupError, peec.NoReturnPath) as e:  # the closed form stays, the reason is said
        note = {"note": f"not solved: {e}", "closed_form_nH": finding["added_inductance_nH"]}
        return dataclasses.replace(finding, field_solve=note)
