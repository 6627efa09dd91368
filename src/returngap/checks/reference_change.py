"""reference-change: a signal via whose two track layers return in different planes.

Same-net planes: the nearest stitching via joining them and the via-pair loop (mu0*h/pi)*acosh(s/2r)
(REFERENCE 3.6). Different nets: the nearest two-terminal part bridging the two plane nets plus a
mounted-part loop (REFERENCE 8; 1 nH, 0.5-1.5 nH, from memory), or a statement that the data has
no part information.
"""

import math
from dataclasses import dataclass

import numpy as np

from returngap import physics
from returngap.analysis import severity
from returngap.analysis.references import line_z0
from returngap.checks.common import DEFAULT_PART_LOOP_NH, finding, parts_bridging, plane_net_near

__all__ = ["reference_changes"]

KIND = "reference-change"


@dataclass
class _Change:
    """A signal via from layer la (reference plane ra, net na) to lb (rb, nb)."""

    net: str
    x: float
    y: float
    rv: float
    la: str
    lb: str
    ra: object
    rb: object
    na: str
    nb: str
    h: float
    z0: float

    def common(self):
        return dict(
            reference_layer=self.ra.layer,
            reference_net=self.na,
            other_reference_layer=self.rb.layer,
            other_reference_net=self.nb,
            to_layer=self.lb,
            plane_spacing_mm=self.h,
            z0_ohm=self.z0,
        )

    def finding(self, sev, **extra):
        return finding(KIND, sev, self.net, self.la, self.x, self.y, **extra, **self.common())


def reference_changes(board, nets, refs, settings):
    """Signal vias whose two track layers return in different planes."""
    holes = nets.plated_holes(board)
    if not holes:
        return []
    ends = _track_ends(board, nets)
    table = _HoleTable(holes)
    out = []
    for x, y, r, net, a, b in holes:
        if not nets.is_signal(net):
            continue
        ch = _change_at(board, nets, refs, ends, x, y, r, net, a, b)
        if ch is None:
            continue
        f = (
            _same_net(ch, table, settings)
            if ch.na == ch.nb
            else _other_nets(board, nets, ch, settings)
        )
        if f is not None:
            out.append(f)
    return out


class _HoleTable:
    """The plated holes as arrays, for the nearest stitching via of a net and span."""

    def __init__(self, holes):
        self.x = np.array([h[0] for h in holes])
        self.y = np.array([h[1] for h in holes])
        self.net = np.array([h[3] for h in holes], dtype=object)
        self.lo = np.array([h[4] for h in holes])
        self.hi = np.array([h[5] for h in holes])

    def nearest(self, net, a, b, x, y):
        """(distance, index) of the nearest hole of `net` spanning layers a..b, or None."""
        ok = np.flatnonzero((self.net == net) & (self.lo <= a) & (self.hi >= b))
        cand = list(zip(np.hypot(self.x[ok] - x, self.y[ok] - y).tolist(), ok.tolist()))
        return min(cand) if cand else None


def _track_ends(board, nets):
    """(x, y, width) of both ends of every signal segment, per (layer, net)."""
    ends = {}
    for layer in board.copper:
        ln = nets.layers[layer.name]
        seg = layer.segments
        names = sorted({n for n in ln.segment_net if n and nets.is_signal(n)})
        ids = {n: k for k, n in enumerate(names)}
        code = np.fromiter((ids.get(n, -1) for n in ln.segment_net), int, len(seg))
        keep = np.flatnonzero(code >= 0)
        order = keep[np.argsort(code[keep], kind="stable")]
        start = np.searchsorted(code[order], np.arange(len(names) + 1))
        for k, n in enumerate(names):
            rows = seg[order[start[k] : start[k + 1]]]
            ends[(layer.name, n)] = np.stack(
                [rows[:, [0, 1, 4]], rows[:, [2, 3, 4]]], axis=1
            ).reshape(-1, 3)
    return ends


def _change_at(board, nets, refs, ends, x, y, r, net, a, b):
    """The layer change at one via of a signal net, or None when its tracks stay over one plane."""
    used = []
    for ln_name in [c.name for c in board.copper][a - 1 : b]:
        e = ends.get((ln_name, net))
        if e is None or not len(e):
            continue
        reach = np.hypot(e[:, 0] - x, e[:, 1] - y)
        if np.min(reach - e[:, 2] / 2) <= r + 0.3:
            used.append((ln_name, float(e[np.argmin(reach), 2])))
    if len(used) < 2:
        return None
    (la, wa), (lb, _) = used[0], used[-1]
    ra = min(refs.get(la, []), key=lambda q: q.h_mm, default=None)
    rb = min(refs.get(lb, []), key=lambda q: q.h_mm, default=None)
    if ra is None or rb is None or ra.layer == rb.layer:
        return None
    na = plane_net_near(nets.layers[ra.layer], nets.plane_nets, x, y)
    nb = plane_net_near(nets.layers[rb.layer], nets.plane_nets, x, y)
    if na is None or nb is None:
        return None
    h = board.stackup.height_mm(ra.layer, rb.layer)
    return _Change(net, x, y, max(r, 0.05), la, lb, ra, rb, na, nb, h, line_z0(board, la, wa, ra))


def _same_net(ch, table, settings):
    """Both planes one net: the nearest stitching via that joins them makes the loop."""
    lo, hi = sorted((int(ch.ra.layer[1:]), int(ch.rb.layer[1:])))
    near = table.nearest(ch.na, lo, hi, ch.x, ch.y)
    if near is None:
        return ch.finding(
            "error",
            distance_mm=None,
            added_inductance_nH=None,
        )
    s, i = near
    ind = physics.via_pair_inductance_nH(ch.h, s, ch.rv)
    refl = physics.series_inductance_reflection(ind, ch.z0, settings.rise_ns_for(ch.net))
    sev = severity.by_reflection(refl, settings.reflection_budget)
    if sev == "info" and refl < settings.reflection_budget / 4:
        return None
    return ch.finding(
        sev,
        distance_mm=s,
        return_x_mm=float(table.x[i]),
        return_y_mm=float(table.y[i]),
        added_inductance_nH=ind,
        added_inductance_range_nH=[ind, ind],
        inductance_method="via-pair two-wire line",
        reflection_fraction=refl,
    )


def _other_nets(board, nets, ch, settings):
    """Planes of two nets: the return crosses through the nearest part bridging them."""
    parts, known = parts_bridging(board, nets, ch.na, ch.nb)
    if not parts:
        # no part in the data bridges the two nets: with parts known that is a missing bridge (an
        # error); without part data there is nothing to estimate, said once in the report
        return ch.finding(
            "error" if known else "info",
            distance_mm=None,
            added_inductance_nH=None,
            parts_known=known,
        )
    d, ref_des, px, py = min((math.hypot(px - ch.x, py - ch.y), rd, px, py) for rd, px, py in parts)
    spread = physics.via_pair_inductance_nH(ch.h, max(d, 2.5 * ch.rv), ch.rv)
    lo, hi = spread + 0.5, spread + 1.5
    ind = spread + DEFAULT_PART_LOOP_NH
    refl = physics.series_inductance_reflection(ind, ch.z0, settings.rise_ns_for(ch.net))
    sev = severity.by_reflection(refl, settings.reflection_budget)
    return ch.finding(
        sev,
        distance_mm=d,
        bridge_part=ref_des,
        return_x_mm=px,
        return_y_mm=py,
        added_inductance_nH=ind,
        added_inductance_range_nH=[lo, hi],
        inductance_method="via-pair spread + mounted part loop",
        reflection_fraction=refl,
    )
