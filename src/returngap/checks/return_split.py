"""return-split: where a closed slot leaves the return two ways round (its two ends), the share each
way takes: at DC by resistance (copper strips of the footprint's width), at high frequency by
inductance (two legs out and back, Rosa's partial inductance). A simple two-branch model."""

from returngap import physics
from returngap.checks.common import finding

__all__ = ["return_splits"]


def return_splits(board, gap_findings, settings, hs):
    out = []
    for f in gap_findings:
        ends = f.get("slot_ends_mm")
        if f["kind"] != "gap-crossing" or not ends or min(ends) <= 0:
            continue
        near, far = sorted(ends)
        s = f["gap_width_mm"] or 0.0
        l_near, l_far = 2 * near + s, 2 * far + s
        if l_far > hs.split_max_ratio * l_near:
            continue  # nearly all of it goes round the near end at every frequency
        width = max(f["trace_width_mm"] + 2 * f["height_mm"], 0.05)
        t = board.stackup.copper_thickness_mm.get(f["reference_layer"], 0.035)
        r_near = physics.copper_resistance_ohm(l_near, width, t)
        r_far = physics.copper_resistance_ohm(l_far, width, t)
        gmd = 0.2235 * (width + t)  # geometric mean distance of a flat strip (Grover, from memory)
        ind_near = 2 * physics.wire_partial_inductance_nH(near, gmd)
        ind_far = 2 * physics.wire_partial_inductance_nH(far, gmd)
        dc, hf = physics.two_branch_shares(r_near, r_far, ind_near, ind_far)
        out.append(
            finding(
                "return-split",
                "info",
                f["net"],
                f["layer"],
                f["x_mm"],
                f["y_mm"],
                reference_layer=f["reference_layer"],
                reference_net=f["reference_net"],
                branch_lengths_mm=[l_near, l_far],
                dc_share_near=dc,
                hf_share_near=hf,
                branch_resistance_ohm=[r_near, r_far],
                branch_inductance_nH=[ind_near, ind_far],
                gap_finding=f["id"],
            )
        )
    return out
