"""split bridge: a split between two plane nets has no way round in its plane; the return crosses
where a two-terminal part (a stitching capacitor) bridges the two nets. Its numbers become fields
of the crossing: the nearest bridging part, and the added inductance of the way to it and through
it: the slot-stub model with the stub shorted at the part (the split runs on, open, beyond it;
the calibrated closed form) plus a mounted part's loop (1 nH, 0.5-1.5 nH, from memory). Where no
part bridges the nets, the crossing says so (and whether the data tells parts at all) and keeps
its bound."""

import dataclasses
import math

from returngap import physics
from returngap.analysis import severity
from returngap.checks.common import DEFAULT_PART_LOOP_NH, parts_bridging

__all__ = ["with_split_bridges"]


def with_split_bridges(board, nets, refs, findings, settings):
    """The findings, each split between two plane nets with its bridge (or the lack of one)."""
    return [_bridged(board, nets, refs, f, settings) for f in findings]


def _bridged(board, nets, refs, f, settings):
    if f["kind"] != "gap-crossing" or f["return_path"] != "split" or not f.get("side_nets"):
        return f
    a, b = f["side_nets"]
    parts, known = parts_bridging(board, nets, a, b)
    if not parts:
        return dataclasses.replace(f, bridge_part=None, parts_known=known)
    x, y = f["x_mm"], f["y_mm"]
    d, ref_des = min((math.hypot(px - x, py - y), rd) for rd, px, py in parts)
    ref = next(r for r in refs[f["layer"]] if r.layer == f["reference_layer"])
    reach = max(d, f["trace_width_mm"])
    beyond = max(f["gap_length_mm"], reach)  # the split runs on past the part, open
    below = ref.beyond_mm if ref.other_h_mm is None else None
    est, lo, hi = physics.slot_crossing_inductance_nH(
        reach, beyond, max(f["gap_width_mm"], 0.01), f["trace_width_mm"], ref.h_mm, True, below
    )
    est, lo, hi = est + DEFAULT_PART_LOOP_NH, lo + 0.5, hi + 1.5
    refl = physics.series_inductance_reflection(est, f["z0_ohm"], f["rise_time_ns"])
    knee = settings.knee_GHz_for(f["net"])
    share = f["interrupted_fraction"]
    return dataclasses.replace(
        f,
        bridge_part=ref_des,
        bridge_distance_mm=d,
        parts_known=True,
        added_inductance_nH=est,
        added_inductance_range_nH=[lo, hi],
        inductance_method="split bridged by a part: stub model to it + mounted part loop",
        reflection_fraction=refl,
        severity=severity.gap_crossing(refl * share, min(f["resonance_range_GHz"]), knee, settings),
    )
