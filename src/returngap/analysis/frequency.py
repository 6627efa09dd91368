"""The frequency view of a gap crossing: the track's predicted insertion loss with and without the
gap (physics/sparams.py), from the board's own stackup and the track's routed length.

The track's two sections are its routed lengths before and after the crossing (its chain on the
layer; at least 1 mm each). The gap element: a slot's two stubs (slot_ends_mm; a notch's far
end open), a void as a slot of its length crossed at its middle, a split as the lumped
inductance the finding reports (no bridging part is modelled). Computed for the crossings at or
above settings.frequency_view (the ones a reviewer looks at; each costs a few milliseconds).
"""

import dataclasses

import shapely

from returngap.analysis import severity

__all__ = ["crossing_curves", "with_frequency_fields", "VIEW_KINDS"]

VIEW_KINDS = ("gap-crossing",)


def _reference(refs, finding):
    return next(r for r in refs[finding["layer"]] if r.layer == finding["reference_layer"])


def _sections(chains, finding):
    """(before, after) routed length (mm) of the finding's track either side of the crossing."""
    p = shapely.Point(finding["x_mm"], finding["y_mm"])
    cands = [c for c in chains if c.net == finding["net"] and c.layer == finding["layer"]]
    if not cands:
        return 25.0, 25.0  # no track found: 50 mm of line (our choice)
    ch = min(cands, key=lambda c: c.line.distance(p))
    s = ch.line.project(p)
    return max(1.0, s), max(1.0, ch.line.length - s)


def _gap_element(finding, f_Hz):
    from returngap.physics import sparams  # scikit-rf is loaded only when a curve is drawn

    added = finding["added_inductance_nH"] or 0.0
    er = finding["resonance_er_eff"]
    ends = finding.get("slot_ends_mm")
    if finding["gap_type"] == "split":
        return 2j * 3.141592653589793 * f_Hz * added * 1e-9
    if finding["gap_type"] == "slot" and ends:
        open_end = not finding["gap_enclosed"]
        return sparams.gap_impedance(f_Hz, added, ends[0], ends[1], er, open_end)
    half = finding["gap_length_mm"] / 2
    return sparams.gap_impedance(f_Hz, added, half, half, er, not finding["gap_enclosed"])


def crossing_curves(board, refs, chains, finding, settings):
    """(with the gap, without it, the gap element's impedance): scikit-rf networks of the
    crossing's track."""
    from returngap.physics import sparams

    ref = _reference(refs, finding)
    freq = sparams.frequencies(settings.knee_GHz_for(finding["net"]))
    t = board.stackup.copper_thickness_mm.get(finding["layer"], 0.035)
    media = sparams.line_media(freq, finding["trace_width_mm"], ref.h_mm, ref.er, t, ref.other_h_mm)
    before, after = _sections(chains, finding)
    z_gap = _gap_element(finding, freq.f)
    return (*sparams.crossing_networks(freq, media, before, after, z_gap), z_gap)


def _fields(board, refs, chains, finding, settings):
    from returngap.physics import sparams

    with_gap, without, z_gap = crossing_curves(board, refs, chains, finding, settings)
    knee = settings.knee_GHz_for(finding["net"])
    return dict(
        s21_first_dip_GHz=sparams.first_dip_GHz(with_gap.frequency.f, z_gap, finding["z0_ohm"]),
        s21_loss_at_knee_dB=sparams.loss_at_dB(with_gap, knee),
        s21_loss_at_knee_no_gap_dB=sparams.loss_at_dB(without, knee),
    )


def with_frequency_fields(board, refs, chains, findings, settings):
    """The findings, each gap crossing at or above settings.frequency_view with its curve's
    numbers (none below it, or with frequency_view "none")."""
    if settings.frequency_view == "none":
        return findings
    floor = severity.ORDER.index(settings.frequency_view)
    out = []
    for f in findings:
        if f["kind"] in VIEW_KINDS and severity.ORDER.index(f["severity"]) >= floor:
            f = dataclasses.replace(f, **_fields(board, refs, chains, f, settings))
        out.append(f)
    return out
