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
from returngap.analysis.references import line_z0, nearest_chain
from returngap.model.runner import SERIAL
from returngap.physics import sparams

__all__ = ["crossing_curves", "with_frequency_fields", "refreshed", "VIEW_KINDS"]

VIEW_KINDS = ("gap-crossing", "floating-copper")
# a floating island couples to the track along its length at about half the distance within
# which the check reports islands (our assumption: the finding keeps no exact gap)
ISLAND_GAP_SHARE = 0.5


def _track(chains, finding):
    """The finding's track: its net's chain nearest the point, on the finding's layer first (an
    island on a plane layer couples to a track on a neighbouring one); None when none is found."""
    x, y = finding["x_mm"], finding["y_mm"]
    return nearest_chain(chains, finding["net"], x, y, finding["layer"]) or nearest_chain(
        chains, finding["net"], x, y
    )


def _reference(refs, layer, finding):
    """The reference of the track's layer: the one the finding names, else the nearest."""
    mine = refs.get(layer) or []
    named = [r for r in mine if r.layer == finding.get("reference_layer")]
    return named[0] if named else min(mine, key=lambda r: r.h_mm, default=None)


def _sections(ch, finding):
    """(before, after, width): routed length (mm) of the track either side of the finding's
    point, and the track's width."""
    width = finding.get("trace_width_mm")
    if ch is None:
        return 25.0, 25.0, width or 0.2  # no track found: 50 mm of line (our choice)
    s = ch.line.project(shapely.Point(finding["x_mm"], finding["y_mm"]))
    return max(1.0, s), max(1.0, ch.line.length - s), width or ch.width_mm


def _gap_element(finding, f_Hz):
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


def crossing_curves(board, refs, chains, finding, settings, near_GHz=None):
    """(with the gap, without it, the gap's or island's own element): scikit-rf networks of the
    finding's track, ports at its impedance; None where the track has no reference plane. With
    near_GHz, the two cascades only at the two points of the curve either side of it (all that a
    value read off the curve there needs); the element always over the whole range."""
    ch = _track(chains, finding)
    layer = ch.layer if ch is not None else finding["layer"]
    ref = _reference(refs, layer, finding)
    if ref is None:
        return None  # no reference plane under the track: no line to model
    freq = sparams.frequencies(settings.knee_GHz_for(finding["net"]))
    t = board.stackup.copper_thickness_mm.get(layer, 0.035)
    before, after, width = _sections(ch, finding)
    z0 = line_z0(board, layer, width, ref)  # ports matched to the track
    near = slice(None) if near_GHz is None else sparams.bracket(freq, near_GHz)
    media = sparams.line_media(freq[near], width, ref.h_mm, ref.er, t, ref.other_h_mm, z0)
    if finding["kind"] == "floating-copper":
        y = sparams.island_admittance(
            freq.f,
            finding["resonance_GHz"],
            finding["area_mm2"],
            ref.h_mm,
            ref.er,
            finding["island_length_mm"],
            ISLAND_GAP_SHARE * settings.floating_coupling_mm,
        )
        element = sparams.shunt_network(freq, y, z0)
    else:
        element = sparams.series_network(freq, _gap_element(finding, freq.f), z0)
    return (*sparams.crossing_networks(media, before, after, element[near]), element)


def _fields(board, refs, chains, finding, settings):
    knee = settings.knee_GHz_for(finding["net"])
    curves = crossing_curves(board, refs, chains, finding, settings, near_GHz=knee)
    if curves is None:
        return {}
    with_gap, without, element = curves
    return dict(
        s21_first_dip_GHz=sparams.first_dip_GHz(element),
        s21_loss_at_knee_dB=sparams.loss_at_dB(with_gap, knee),
        s21_loss_at_knee_no_gap_dB=sparams.loss_at_dB(without, knee),
    )


def with_frequency_fields(board, refs, chains, findings, settings, runner=SERIAL):
    """The findings, each gap crossing at or above settings.frequency_view with its curve's
    numbers (none below it, or with frequency_view "none"); the curves are the runner's tasks."""
    todo = [
        k
        for k, f in enumerate(findings)
        if f["kind"] in VIEW_KINDS and severity.at_or_above(f["severity"], settings.frequency_view)
    ]
    fields = runner.tasks(
        lambda j: _fields(board, refs, chains, findings[todo[j]], settings),
        len(todo),
        "frequency-view",
        len(todo),
    )
    out = list(findings)
    for k, found in zip(todo, fields):
        out[k] = dataclasses.replace(findings[k], **found)
    return out


def refreshed(board, refs, chains, finding, settings):
    """The finding with its frequency view computed again (after its inductance changed, as by a
    later field solve); unchanged when it has none."""
    if finding.get("s21_loss_at_knee_dB") is None:
        return finding
    return dataclasses.replace(finding, **_fields(board, refs, chains, finding, settings))
