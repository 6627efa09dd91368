"""return split: where a closed slot leaves the return two ways round (its two ends), the share each
way takes: at DC by resistance (copper strips of the footprint's width), at high frequency by
inductance (two legs out and back, Rosa's partial inductance). A simple two-branch model; its
numbers become fields of the crossing (`return_split`), not findings of their own."""

import dataclasses

from returngap import physics

__all__ = ["with_return_splits"]


def with_return_splits(board, findings, settings):
    """The findings, each gap crossing of a closed slot (its return going round it, not through
    the other plane) with its two-way split; a split only where the far way is within
    settings.split_max_ratio of the near one (otherwise nearly all goes the near way)."""
    return [_with_split(board, f, settings) for f in findings]


def _with_split(board, f, settings):
    ends = f.get("slot_ends_mm")
    if f["kind"] != "gap-crossing" or not f["gap_enclosed"] or not ends or min(ends) <= 0:
        return f
    if f["return_path"] != "detour":
        return f
    near, far = sorted(ends)
    s = f["gap_width_mm"] or 0.0
    l_near, l_far = 2 * near + s, 2 * far + s
    if l_far > settings.split_max_ratio * l_near:
        return f
    width = max(f["trace_width_mm"] + 2 * f["height_mm"], 0.05)
    t = board.stackup.copper_thickness_mm.get(f["reference_layer"], 0.035)
    r_near = physics.copper_resistance_ohm(l_near, width, t)
    r_far = physics.copper_resistance_ohm(l_far, width, t)
    gmd = 0.2235 * (width + t)  # geometric mean distance of a flat strip (Grover, from memory)
    ind_near = 2 * physics.wire_partial_inductance_nH(near, gmd)
    ind_far = 2 * physics.wire_partial_inductance_nH(far, gmd)
    dc, hf = physics.two_branch_shares(r_near, r_far, ind_near, ind_far)
    split = dict(
        branch_lengths_mm=[l_near, l_far],
        dc_share_near=dc,
        hf_share_near=hf,
        branch_resistance_ohm=[r_near, r_far],
        branch_inductance_nH=[ind_near, ind_far],
    )
    return dataclasses.replace(f, return_split=split)
