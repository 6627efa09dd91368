"""reference-change: a signal via whose two track layers return in different planes.

Same-net planes: the nearest stitching via joining them and the via-pair loop (mu0*h/pi)*acosh(s/2r)
(REFERENCE 3.6). Different nets: the nearest two-terminal part bridging the two plane nets plus a
mounted-part loop (REFERENCE 8; 1 nH, 0.5-1.5 nH, from memory), or a statement that the data has
no part information. A stripline's two planes each carry their share across by their own way.
"""

import math
from dataclasses import dataclass

import numpy as np

from returngap import physics
from returngap.analysis import severity
from returngap.analysis.connectivity import net_codes
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
    srcs: tuple = ()  # (reference, plane net, share) of every plane of layer la, and of lb
    dsts: tuple = ()

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
        f = _shared(board, nets, ch, table, settings) if _two_sided(ch) else None
        f = _single(board, nets, ch, table, settings) if f is None else f
        if f is not _NONE:
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
        names, code = net_codes(ln.segment_net, lambda n: n and nets.is_signal(n))
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
    srcs, dsts = (_planes_at(nets, refs.get(layer, []), x, y) for layer in (la, lb))
    na = next((n for q, n, _ in srcs if q is ra), None)
    nb = next((n for q, n, _ in dsts if q is rb), None)
    if na is None or nb is None:
        return None
    h = board.stackup.height_mm(ra.layer, rb.layer)
    z0 = line_z0(board, la, wa, ra)
    return _Change(net, x, y, max(r, 0.05), la, lb, ra, rb, na, nb, h, z0, srcs, dsts)


def _planes_at(nets, layer_refs, x, y):
    """(reference, plane net, share) of a layer's reference planes with plane copper at (x, y),
    the shares of those present made to add up to one."""
    found = [(q, plane_net_near(nets.layers[q.layer], nets.plane_nets, x, y)) for q in layer_refs]
    found = [(q, n) for q, n in found if n is not None]
    total = sum(q.share for q, _ in found) or 1.0
    return tuple((q, n, q.share / total) for q, n in found)


def _single(board, nets, ch, table, settings):
    """One plane each side: the return crosses by the way between them (_way); where the data has
    none, the finding says so (no stitching via: an error; no bridging part: an error where parts
    are known, else information)."""
    way = _way(board, nets, ch, table, (ch.ra, ch.na, 1.0), (ch.rb, ch.nb, 1.0))
    if way is None:
        if ch.na == ch.nb:
            return ch.finding("error", distance_mm=None, added_inductance_nH=None)
        _, known = parts_bridging(board, nets, ch.na, ch.nb)
        return ch.finding(
            "error" if known else "info",
            distance_mm=None,
            added_inductance_nH=None,
            parts_known=known,
        )
    ind, detail = way
    if "bridge_part" in detail:  # the part's own loop: 0.5-1.5 nH (from memory)
        spread = ind - DEFAULT_PART_LOOP_NH
        rng, method = [spread + 0.5, spread + 1.5], "via-pair spread + mounted part loop"
        return _reported(ch, settings, ind, rng, method, detail, keep_small=True)
    return _reported(ch, settings, ind, [ind, ind], "via-pair two-wire line", detail)


def _reported(ch, settings, ind, rng, method, detail, keep_small=False):
    """The finding of a layer change of this added inductance; _NONE for a stitching-via change
    reflecting under a quarter of the budget (not worth a line)."""
    refl = physics.series_inductance_reflection(ind, ch.z0, settings.rise_ns_for(ch.net))
    sev = severity.by_reflection(refl, settings.reflection_budget)
    if not keep_small and sev == "info" and refl < settings.reflection_budget / 4:
        return _NONE
    return ch.finding(
        sev,
        **(detail or {}),
        added_inductance_nH=ind,
        added_inductance_range_nH=rng,
        inductance_method=method,
        reflection_fraction=refl,
    )


_NONE = object()  # the change needs no finding (below the reporting floor)


def _two_sided(ch):
    """A stripline on either side: its two planes each carry their share across."""
    return len(ch.srcs) > 1 or len(ch.dsts) > 1


def _way(board, nets, ch, table, src, dst):
    """(inductance, detail) of the way one plane's return takes to another plane at this via:
    none within one plane, the nearest stitching via between two planes of one net, the nearest
    part bridging two nets; None where there is no way in the data."""
    (rs, ns, _), (rd, nd, _) = src, dst
    if rs.layer == rd.layer:
        return 0.0, None
    h = board.stackup.height_mm(rs.layer, rd.layer)
    if ns == nd:
        lo, hi = sorted((int(rs.layer[1:]), int(rd.layer[1:])))
        near = table.nearest(ns, lo, hi, ch.x, ch.y)
        if near is None:
            return None
        s, i = near
        detail = dict(distance_mm=s, return_x_mm=float(table.x[i]), return_y_mm=float(table.y[i]))
        return physics.via_pair_inductance_nH(h, s, ch.rv), detail
    parts, _ = parts_bridging(board, nets, ns, nd)
    if not parts:
        return None
    d, ref_des, px, py = min((math.hypot(px - ch.x, py - ch.y), rd, px, py) for rd, px, py in parts)
    spread = physics.via_pair_inductance_nH(h, max(d, 2.5 * ch.rv), ch.rv)
    detail = dict(distance_mm=d, bridge_part=ref_des, return_x_mm=px, return_y_mm=py)
    return spread + DEFAULT_PART_LOOP_NH, detail


def _least(ways):
    """The least inductive of some ways, None where none exists."""
    ways = [w for w in ways if w is not None]
    return min(ways, key=lambda w: w[0]) if ways else None


def _shared(board, nets, ch, table, settings):
    """A stripline's two planes hold fixed shares of the return where the track is (REFERENCE
    1.3): each share crosses to the other layer's planes by its own least inductive way, and the
    added inductance is that of the shares forced through their ways, sum(share^2 * L) (derived:
    the energy of fixed currents), taken from both sides and the larger kept; the range's bottom
    is the ways in parallel (the current free to move between the planes). None where a share
    has no way in the data (the one-plane estimate then speaks)."""
    way = [[_way(board, nets, ch, table, p, q) for q in ch.dsts] for p in ch.srcs]
    forward = [(p[2], _least(row)) for p, row in zip(ch.srcs, way)]
    backward = [(q[2], _least(col)) for q, col in zip(ch.dsts, zip(*way))]
    if any(w is None for _, w in forward + backward):
        return None
    side = max((forward, backward), key=lambda ws: sum(s * s * w[0] for s, w in ws))
    est = sum(s * s * w[0] for s, w in side)
    worst = max(side, key=lambda sw: sw[0] * sw[0] * sw[1][0])[1]  # its details are reported
    inverse = [1.0 / w[0] for _, w in forward if w[0] > 0]
    low = 0.0 if len(inverse) < len(forward) else 1.0 / sum(inverse)
    method = "stripline: each plane's share by its own way, sum(share^2 L)"
    return _reported(ch, settings, est, [min(low, est), est], method, worst[1])
