"""floating-copper: copper tied to nothing (no hole, no pad in it) within coupling distance of a
signal track: its area, its patch-like resonance (Hammerstad's fringing after Balanis, REFERENCE
5.2) and the vias that would stitch it at lambda/20 (common practice, no source)."""

import math

import numpy as np
import shapely

from returngap import physics
from returngap.checks.common import finding

__all__ = ["floating_copper"]


def floating_copper(board, nets, refs, chains, settings, hs):
    hole_xy = np.array([(h[0], h[1]) for d in board.drills for h in d.holes]).reshape(-1, 2)
    hole_tree = shapely.STRtree(shapely.points(hole_xy))
    names = [c.name for c in board.copper]
    findings = []
    for li, layer in enumerate(board.copper):
        tracks = [c for c in chains if abs(names.index(c.layer) - li) <= 1]
        if tracks:
            findings += _layer_islands(layer, nets, refs, chains, tracks, hole_tree, settings, hs)
    return findings


def _layer_islands(layer, nets, refs, chains, tracks, hole_tree, settings, hs):
    """The floating islands of one layer near the tracks on it or next to it."""
    ln = nets.layers[layer.name]
    pad_tree = shapely.STRtree(shapely.points(layer.flashes[:, :2].reshape(-1, 2)))
    ttree = shapely.STRtree(np.array([c.line for c in tracks], dtype=object))
    track_nets = {c.net for c in chains if c.layer == layer.name}
    cand = [
        i for i, net in enumerate(ln.island_net) if not ln.island_tied[i] and net not in track_nets
    ]
    out = []
    for i, isl in zip(cand, ln.island_polygons(cand)):
        if isl.area < hs.floating_min_area_mm2:
            continue
        if len(hole_tree.query(isl, predicate="intersects")) or len(
            pad_tree.query(isl, predicate="intersects")
        ):
            continue
        near = ttree.query(isl, predicate="dwithin", distance=hs.floating_coupling_mm)
        if len(near):
            track = tracks[int(min(near, key=lambda k: tracks[k].line.distance(isl)))]
            out.append(_island_finding(layer, ln.island_net[i], isl, track, refs, settings, hs))
    return out


def _island_finding(layer, net, isl, track, refs, settings, hs):
    rref = refs.get(layer.name) or refs.get(track.layer)
    ref = min(rref, key=lambda q: q.h_mm) if rref else None
    h = ref.h_mm if ref else 0.2
    er = ref.er if ref else 4.3
    c = np.asarray(isl.minimum_rotated_rectangle.exterior.coords)[:4]
    a, b = float(np.hypot(*(c[1] - c[0]))), float(np.hypot(*(c[2] - c[1])))
    length, width = max(a, b), max(min(a, b), 0.05)
    f_res = physics.patch_resonance_GHz(length, width, h, er)
    lam = physics.wavelength_mm(settings.knee_GHz, er)
    rim = shapely.length(shapely.get_exterior_ring(shapely.get_parts(isl))).sum()
    vias = max(2, math.ceil(rim / (lam / 20)))
    sev = "warning" if f_res <= 3 * settings.knee_GHz else "info"
    p = isl.representative_point()
    return finding(
        "floating-copper",
        sev,
        track.net,
        layer.name,
        p.x,
        p.y,
        island_net=net,
        area_mm2=float(isl.area),
        island_length_mm=length,
        island_width_mm=width,
        resonance_GHz=f_res,
        stitching_vias_needed=vias,
        height_mm=h,
    )
