"""What the finding kinds share: the finding record, the plane net at a point, two-pin parts."""

import numpy as np
import shapely

from returngap.analysis.gaps import stable_id
from returngap.model.findings import KINDS

__all__ = ["DEFAULT_PART_LOOP_NH", "finding", "plane_net_near", "parts_bridging"]

DEFAULT_PART_LOOP_NH = (
    1.0  # mounted two-terminal capacitor loop, typically 0.5-1.5 nH (from memory)
)


def finding(kind, severity, net, layer, x, y, **extra):
    """A finding of the given kind (model/findings.py): the shared fields, then the kind's own."""
    ref = extra.get("reference_layer")
    return KINDS[kind](
        id=stable_id(kind, layer, ref, net, f"{x:.1f}", f"{y:.1f}"),
        severity=severity,
        net=net,
        layer=layer,
        x_mm=float(x),
        y_mm=float(y),
        **extra,
    )


def plane_net_near(ln, plane_nets, x, y, reach=2.0):
    """Plane net of the nearest plane copper to a point (a via sits in its own antipad)."""
    p = shapely.Point(x, y)
    # boxes from the tree, then the (prepared) plane pieces tested: the tree's own distance test
    # would walk every edge of a large pour
    c = ln.tree.query(shapely.box(x - reach, y - reach, x + reach, y + reach))
    c = c[ln.piece_mask(plane_nets)[c]]
    # the nearest piece lies within the smallest radius that holds any: when those are all of one
    # net, that is the answer, with no exact distance to a large pour's many edges
    for r in (0.5, 1.0, reach):
        near = c[shapely.dwithin(ln.pieces[c], p, r)]
        if len(near):
            break
    else:
        return None
    if len({ln.island_net[ln.piece_island[k]] for k in near}) == 1:
        return ln.island_net[ln.piece_island[near[0]]]
    nearest = near[int(np.argmin(shapely.distance(ln.pieces[near], p)))]
    return ln.island_net[ln.piece_island[nearest]]


def parts_bridging(board, nets, net_a, net_b):
    """Centres of two-terminal parts with one pad on each net (from .P attributes or the netlist),
    and whether the data tells parts at all."""
    if nets.two_pin_parts is None:  # once per board, not per via
        nets.two_pin_parts = _two_pin_parts(board, nets)
    by_nets, known = nets.two_pin_parts
    return list(by_nets.get(frozenset((net_a, net_b)), [])), known


def _two_pin_parts(board, nets):
    """Two-terminal parts by the set of their two nets, and whether the data tells parts at all."""
    pads = {}
    for layer in board.copper:
        ln = nets.layers[layer.name]
        for (x, y, _), part, net in zip(layer.flashes, layer.flash_part, ln.flash_net):
            if part:
                pads.setdefault(part[0], {})[part[1]] = (x, y, net)
    for p in board.netlist:
        if p.refdes and p.pin and not p.is_via:
            pads.setdefault(p.refdes, {})[p.pin] = (p.x, p.y, p.net)
    by_nets = {}
    for ref, pins in pads.items():
        if len(pins) != 2:
            continue
        (xa, ya, na), (xb, yb, nb) = pins.values()
        by_nets.setdefault(frozenset((na, nb)), []).append((ref, (xa + xb) / 2, (ya + yb) / 2))
    return by_nets, bool(pads)
