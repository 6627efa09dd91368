"""The one sentence every finding carries, composed from its fields (and the run's settings): the
checks measure, the report says it."""

__all__ = ["message"]


def message(f, settings):
    """f: a finding's fields (model/findings.py as_dict, before rounding); settings: Settings."""
    return _BY_KIND[f["kind"]](f, settings)


def _gap(f, s):
    gap_type = f["gap_type"]
    what = {"split": "crosses a split", "slot": "crosses a slot", "void": "crosses a void"}[
        gap_type
    ]
    if f["crossing"] == "graze":
        what = f"runs beside a {gap_type}"
    detour = f["detour_mm"]
    det = "no path within the plane" if detour is None else f"detour {detour:.2f} mm"
    if f["detour_method"] == "hull-estimate":
        det = f"detour about {detour:.2f} mm (round the gap's hull; no clear path was proven)"
    if f.get("side_nets"):
        a, b = f["side_nets"]
        det += f" ({a} on one side, {b} on the other)"
        det += _bridge_said(f, a, b)
    if f["return_path"] == "other plane":
        det = (
            "the other plane is whole under the track, so the return moves there for the "
            f"crossing ({det} in this plane is not taken)"
        )
    if f["return_path"] == "coplanar":
        det = (
            "plane copper of its own layer runs beside the track over the gap and carries the "
            f"return there ({det} in the plane is not taken)"
        )
    lo, hi = f["added_inductance_range_nH"]
    rng = f" ({lo:.1f}-{hi:.1f})" if hi - lo > 0.05 else ""
    text = (
        f"{f['net']} on {f['layer']} {what} in {f['reference_net']} on {f['reference_layer']} at "
        f"({f['x_mm']:.2f}, {f['y_mm']:.2f}) mm: {det}, {f['interrupted_fraction']:.0%} of return "
        f"current interrupted, about {f['added_inductance_nH']:.2f} nH added{rng}, "
        f"~{f['reflection_fraction']:.0%} reflection at {f['rise_time_ns']:g} ns; gap resonance "
        f"near {f['resonance_GHz']:.2f} GHz"
    )
    split = f.get("return_split")
    if split:
        near, far = split["branch_lengths_mm"]
        text += (
            f"; the return goes round the near end ({near:.1f} mm) and the far end "
            f"({far:.1f} mm): {split['dc_share_near']:.0%} near at DC, "
            f"{split['hf_share_near']:.0%} at high frequency"
        )
    if f.get("merged"):
        text += f" ({f['merged']} more crossing(s) within 0.5 mm folded in)"
    return text + _solve_said(f.get("field_solve")) + _frequency_said(f)


def _frequency_said(f):
    if f.get("s21_loss_at_knee_dB") is None:
        return ""
    dip = f.get("s21_first_dip_GHz")
    return (
        f"; predicted insertion loss at the knee {f['s21_loss_at_knee_dB']:.1f} dB "
        f"({f['s21_loss_at_knee_no_gap_dB']:.1f} dB over a solid plane)"
        + (f", first dip near {dip:.2f} GHz" if dip else ", no dip in range")
    )


def _bridge_said(f, a, b):
    if f.get("bridge_part"):
        return (
            f"; the return crosses through {f['bridge_part']}, "
            f"{f['bridge_distance_mm']:.1f} mm away"
        )
    if "parts_known" not in f:
        return ""
    if f["parts_known"]:
        return f"; no part in the data bridges {a} and {b}"
    return "; the data has no part information to find a bridge"


def _solve_said(fs):
    if not fs:
        return ""
    if fs.get("added_inductance_nH") is None:
        return f"; field solve: {fs.get('note', 'no result')}"
    note = f"; {fs['note']}" if fs.get("note") else ""
    return (
        f"; inductance from a local field solve ({fs['grid_cells']} cells, "
        f"{fs['seconds']:.1f} s; the closed form said {fs['closed_form_nH']:.2f} nH{note})"
    )


def _reference_change(f, s):
    where = (
        f"{f['net']} changes from {f['layer']} to {f['to_layer']} at ({f['x_mm']:.2f}, "
        f"{f['y_mm']:.2f}) mm"
    )
    ra, rb, na, nb = (
        f["reference_layer"],
        f["other_reference_layer"],
        f["reference_net"],
        f["other_reference_net"],
    )
    if f.get("bridge_part"):
        lo, hi = f["added_inductance_range_nH"]
        return (
            f"{where}; its return moves from {na} to {nb} through {f['bridge_part']}, "
            f"{f['distance_mm']:.2f} mm away: about {f['added_inductance_nH']:.2f} nH "
            f"({lo:.2f}-{hi:.2f}), ~{f['reflection_fraction']:.0%} reflection"
        )
    if f["distance_mm"] is not None:
        return (
            f"{where}; nearest {na} stitching via joining {ra} and {rb} is "
            f"{f['distance_mm']:.2f} mm "
            f"away: about {f['added_inductance_nH']:.2f} nH of via-pair loop, "
            f"~{f['reflection_fraction']:.0%} reflection at {s.rise_ns:g} ns"
        )
    if na == nb:
        return (
            f"{where}; its return must move from {ra} to {rb} ({na}) but no stitching via joins "
            "them"
        )
    why = (
        "no two-terminal part bridges them"
        if f["parts_known"]
        else "the data has no part information to tell"
    )
    return f"{where}; its return moves from {na} on {ra} to {nb} on {rb}: {why}"


def _edge_run(f, s):
    off = f["off_plane"]
    signed = f["edge_distance_mm"]
    return (
        f"{f['net']} on {f['layer']} {'runs off' if off else 'runs along'} the edge of the plane "
        f"copper on {f['reference_layer']} for {f['run_length_mm']:.1f} mm, "
        f"{'as far as' if off else 'closest'} {abs(signed):.2f} mm ({f['edge_distance_h']:.1f} h): "
        f"about {f['beyond_edge_fraction']:.0%} of its return current on that plane lies beyond "
        f"the edge; about {f['added_inductance_nH']:.2f} nH added, "
        f"~{f['reflection_fraction']:.0%} reflection at {f['rise_time_ns']:g} ns"
    )


def _floating(f, s):
    return (
        f"unconnected copper island of {f['area_mm2']:.1f} mm2 on {f['layer']} within "
        f"{s.floating_coupling_mm:g} mm of {f['net']}: patch resonance near "
        f"{f['resonance_GHz']:.2f} GHz; stitch it with about {f['stitching_vias_needed']} vias "
        f"(lambda/20 at {s.knee_GHz:g} GHz) or remove it"
    )


def _stitching(f, s):
    return (
        f"{f['net']} copper on {f['layer']}: neighbouring stitching vias "
        f"{f['via_spacing_mm']:.1f} mm "
        f"apart next to signal tracks, more than lambda/{round(1 / s.stitch_fraction)} = "
        f"{f['spacing_limit_mm']:.1f} mm at {s.knee_GHz:g} GHz (eps_eff {f['er_eff']:.2f})"
    )


def _net_conflict(f, s):
    main, other = f["conflicting_nets"]
    if f["joined_by_part"]:
        why = (
            f"joined by copper at part {f['joined_by_part']}, whose own pads carry both labels (a "
            "net tie, a jumper or a bypassed part: check that it is intended)"
        )
    else:
        why = "a short in the released data, or a wrong label"
    return (
        f"copper of net {main} on {f['layer']} also carries the label {other} ({f['labels']} "
        f"object(s)) at ({f['x_mm']:.2f}, {f['y_mm']:.2f}): {why}"
    )


_BY_KIND = {
    "gap-crossing": _gap,
    "reference-change": _reference_change,
    "edge-run": _edge_run,
    "floating-copper": _floating,
    "stitching-spacing": _stitching,
    "net-conflict": _net_conflict,
}
