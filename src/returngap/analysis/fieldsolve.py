"""The local field solve of one gap crossing from the board's own copper (physics/peec.py).

A window round the gap (its box plus 1.5 times its length each way, our choice after the
domain-doubling check in tests/test_peec.py) is turned so the track runs along +x through the
crossing; the reference layer's plane copper in it is rasterised on a grid graded to be fine at
the track's edges, where the track meets the gap's outline, and at the gap's ends; ΔL is the
loop inductance with the gap minus that with this one gap filled (its antipads, notches and
islands stay what they are). The track is taken straight through the window along its direction
at the crossing, the planes perfect zero-thickness sheets; a second plane (a stripline's other
plane, or the next plane beyond the reference) is solved with it (second_plane).
"""

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np
import shapely

from returngap import physics
from returngap.analysis import dcsplit, references, severity
from returngap.geometry.frame import TrackFrame
from returngap.physics import peec, resistive

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
    second_plane: str | None = None  # the other sheet solved with it (a layer name)
    # a closed slot: the share of the solved return that goes round the end nearer the crossing
    hf_share_near: float | None = None


def _tangent_at(chains, net, layer, x, y):
    """Unit direction of the net's track on `layer` at the point nearest (x, y)."""
    best = references.nearest_chain(chains, net, x, y, layer)
    if best is None:
        raise LookupError(f"no track of {net} on {layer} near ({x:.2f}, {y:.2f})")
    return references.direction_at(best, x, y)


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


def second_plane(refs, finding):
    """(layer, z_mm, role) of the second sheet of a crossing's solve, or None: a stripline's
    other plane (above the trace, sharing the return), else the nearest plane layer beyond the
    reference, away from the track (closed currents only, as it is joined to the reference
    plane only through stitching vias outside the model). refs: find_references' references."""
    mine = refs.get(finding["layer"]) or []
    ref = next((r for r in mine if r.layer == finding["reference_layer"]), None)
    if ref is None:
        return None
    if ref.other_h_mm is not None:
        other = next(r for r in mine if r.layer != ref.layer)
        return other.layer, ref.h_mm + other.h_mm, "shared"
    if ref.beyond_layer is None:
        return None
    return ref.beyond_layer, -ref.beyond_mm, "eddy"


def solve_crossing(board, nets, chains, finding, refs=None):
    """The field solve of one gap-crossing finding (a mapping with the GapCrossing fields);
    refs: the layers' references, for the second sheet (none without them)."""
    t0 = time.perf_counter()
    x, y = finding["x_mm"], finding["y_mm"]
    ux, uy = _tangent_at(chains, finding["net"], finding["layer"], x, y)
    plane = nets.layers[finding["reference_layer"]].union_of(nets.plane_nets)
    d = max(finding["gap_length_mm"], 1.0)
    margin = min(WINDOW_MARGIN * d, MAX_MARGIN_MM)
    win = TrackFrame(x, y, math.degrees(math.atan2(uy, ux)))
    gap_local = win.local(_gap_polygon(plane, board.outline, x, y, d + margin))
    gx0, gy0, gx1, gy1 = gap_local.bounds
    win.box = (min(gx0, 0.0) - margin, min(gy0, 0.0) - margin)
    win.box += (max(gx1, 0.0) + margin, max(gy1, 0.0) + margin)
    plane_local = win.clip(plane)
    full = win.box
    win.box = _along_copper(win.box, plane_local.union(gap_local))
    short = min(win.box[0] - gx0, gx1 - win.box[2]) > -0.5 * margin and win.box != full
    w, h = finding["trace_width_mm"], finding["height_mm"]
    xs, ys, coarse = _grid(gap_local, w, h, win.box)
    copper = _mask(plane_local, xs, ys)
    filled = copper | _mask(gap_local, xs, ys)
    extra = second_plane(refs or {}, finding)
    sheets = []
    if extra is not None:
        other = win.clip(nets.layers[extra[0]].union_of(nets.plane_nets))
        sheets = [peec.Sheet(_mask(other, xs, ys), extra[1], extra[2])]
    result = _solve(xs, ys, copper, filled, sheets, (w, h), coarse)
    result.window_mm = [win.box[2] - win.box[0], win.box[3] - win.box[1]]
    if short:  # the loop's ends sit near the gap: they can carry part of the way round
        result.note = (result.note + "; " if result.note else "") + (
            "the plane ends near the gap along the track, so the window's ends are close to it:"
            " the solve may read low"
        )
    if result.hf_share_near is not None:  # the near end: the one nearer the crossing
        low_is_near = -gap_local.bounds[1] <= gap_local.bounds[3]
        result.hf_share_near = result.hf_share_near if low_is_near else 1 - result.hf_share_near
    result.second_plane = extra[0] if extra else None
    result.seconds = time.perf_counter() - t0
    return result


def _solve(xs, ys, copper, filled, sheets, trace, coarse):
    note = f"grid coarsened {coarse:.2f}x to fit {MAX_CELLS} cells" if coarse > 1 else ""
    gap, ref = peec.gap_and_filled(xs, ys, copper, filled, *trace, sheets)
    if gap is None:
        note = "no return path in the window: the gap splits it"
    return CrossingSolve(
        added_inductance_nH=None if gap is None else gap.loop_nH - ref.loop_nH,
        loop_with_gap_nH=None if gap is None else gap.loop_nH,
        loop_filled_nH=ref.loop_nH,
        grid_cells=int(copper.size),
        unknowns=int(ref.unknowns),
        seconds=0.0,
        window_mm=[],
        note=note,
        # the caller turns it to the near end's
        hf_share_near=None if gap is None else _share_round_low_end(xs, ys, copper, gap.psi),
    )


def _share_round_low_end(xs, ys, copper, psi):
    """The share of the return passing the gap's -y end: the stream value is one number all over
    a gap, so what flows between it and the window's bottom edge goes round that end."""
    i = int(np.clip(np.searchsorted(xs, 0.0) - 1, 0, len(xs) - 2))
    j = int(np.clip(np.searchsorted(ys, 0.0) - 1, 0, len(ys) - 2))
    if copper[i, j]:
        return None  # the crossing point is on copper: no gap here to split round
    ny = len(ys) - 1
    bottom, top, inside = psi[i * (ny + 1)], psi[i * (ny + 1) + ny], psi[i * (ny + 1) + j]
    total = top - bottom
    return float((inside - bottom) / total) if abs(total) > 1e-12 else None


def as_fields(solve):
    """The solve as the finding's `field_solve` mapping (units in the names)."""
    return {k: v for k, v in dataclasses.asdict(solve).items() if v not in ("", None)}


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
    split = finding.get("return_split")
    if split and solve.hf_share_near is not None:  # the solved currents replace the two strips
        split = {**split, "hf_share_near": solve.hf_share_near, "hf_method": "field-solve"}
    return dataclasses.replace(
        finding,
        return_split=split if split else finding.return_split,
        added_inductance_nH=est,
        added_inductance_range_nH=[SOLVE_LOW * est, SOLVE_HIGH * est],
        inductance_method="field-solve",
        reflection_fraction=refl,
        severity=severity.gap_crossing(
            refl * finding["interrupted_fraction"], lowest, knee, settings
        ),
        field_solve=fields,
    )


def solve_nearest(board, nets, chains, findings, settings, refs=None):
    """The findings, the settings.field_solves crossings nearest the budget solved."""
    chosen = {id(f) for f in nearest_budget(findings, settings, settings.field_solves)}
    return [
        solve_one(board, nets, chains, f, settings, refs) if id(f) in chosen else f
        for f in findings
    ]


def solve_one(board, nets, chains, finding, settings, refs=None):
    """The finding solved; where it cannot be, the closed form kept and the reason said."""
    try:
        solved = solve_crossing(board, nets, chains, finding, refs)
        return _with_dc_split(board, nets, chains, with_solve(finding, solved, settings))
    except (LookupError, peec.NoReturnPath) as e:  # the closed form stays, the reason is said
        note = {"note": f"not solved: {e}", "closed_form_nH": finding["added_inductance_nH"]}
        return dataclasses.replace(finding, field_solve=note)


def _with_dc_split(board, nets, chains, finding):
    """A closed slot's return split with its DC share from the resistive solve of the plane, fed
    at the track's ends (analysis/dcsplit.py); the strip model kept where it cannot be had."""
    split = finding.get("return_split")
    if not split:
        return finding
    plane = nets.layers[finding["reference_layer"]].union_of(nets.plane_nets)
    try:
        reach = 2 * max(finding["gap_length_mm"], 1.0) + dcsplit.MARGIN_MM  # the whole slot
        gap = _gap_polygon(plane, board.outline, finding["x_mm"], finding["y_mm"], reach)
        dc = dcsplit.dc_split(chains, finding, plane, gap)
    except (LookupError, resistive.NotConnected) as e:
        return dataclasses.replace(finding, return_split={**split, "dc_note": str(e)})
    split = {
        **split,
        "dc_share_near": dc.share_near,
        "dc_method": "resistive grid, fed at the track's ends",
        "dc_cell_mm": dc.cell_mm,
    }
    return dataclasses.replace(finding, return_split=split)
