"""stitching-spacing: on ground copper that signal tracks run on or return in, the longest edge of
the minimum spanning tree of its stitching vias near a track, against lambda/10 at the frequency of
interest (REFERENCE 6.3, common practice; eps_eff (er+1)/2 on outer layers)."""

import numpy as np
import shapely

from returngap import physics
from returngap.checks.common import finding

__all__ = ["stitching_spacing"]


def stitching_spacing(board, nets, refs, chains, settings, hs):
    holes = nets.plated_holes(board)
    n_layers = len(board.copper)
    findings = []
    for layer in board.copper:
        users = [c for c in chains if c.layer == layer.name or layer.name in c.footprints]
        if not users:
            continue
        utree = shapely.STRtree(np.array([c.line for c in users], dtype=object))
        i = int(layer.name[1:])
        er = board.stackup.er_between(layer.name, f"L{i + 1}" if i < n_layers else f"L{i - 1}")
        eeff = (er + 1) / 2 if layer.side in ("top", "bottom") else er
        limit = hs.stitch_fraction * physics.wavelength_mm(settings.knee_GHz, eeff)
        ln = nets.layers[layer.name]
        for k, net in enumerate(ln.island_net):
            if nets.net_class.get(net) != "ground":
                continue
            f = _island_spacing(
                layer, net, ln.island(k), holes, i, utree, limit, eeff, settings, hs
            )
            if f is not None:
                findings.append(f)
    return findings


def _island_spacing(layer, net, isl, holes, i, utree, limit, eeff, settings, hs):
    if isl.area < hs.stitch_min_pour_mm2:
        return None
    pts = np.array([(x, y) for x, y, r, n, a, b in holes if n == net and a <= i <= b]).reshape(
        -1, 2
    )
    if len(pts):
        pts = pts[shapely.dwithin(isl, shapely.points(pts), 0.05)]
    if len(pts) < 2:
        return None
    edges = [(g, a, b) for g, a, b in _mst_edges(pts) if g > limit]
    if edges:  # only gaps that tracks run past: the middle within a few mm of a track
        mids = shapely.points(np.array([(pts[a] + pts[b]) / 2 for _, a, b in edges]))
        (_, _), dist = utree.query_nearest(mids, return_distance=True, all_matches=False)
        edges = [e for e, d in zip(edges, dist) if d <= max(3.0, e[0] / 4)]
    if not edges:
        return None
    gap, a, b = max(edges)
    mx, my = (pts[a] + pts[b]) / 2
    sev = "warning" if gap <= 2 * limit else "error"
    return finding(
        "stitching-spacing",
        sev,
        net,
        layer.name,
        mx,
        my,
        via_spacing_mm=gap,
        spacing_limit_mm=limit,
        er_eff=eeff,
        via_count=int(len(pts)),
        from_via_mm=[float(pts[a][0]), float(pts[a][1])],
        to_via_mm=[float(pts[b][0]), float(pts[b][1])],
    )


def _mst_edges(pts):
    """Edges (length, i, j) of the Euclidean minimum spanning tree (Prim, vectorised rows)."""
    n = len(pts)
    p = pts.astype(np.float64)
    in_tree = np.zeros(n, dtype=bool)
    in_tree[0] = True
    best = np.hypot(p[:, 0] - p[0, 0], p[:, 1] - p[0, 1])
    parent = np.zeros(n, dtype=int)
    out = []
    for _ in range(n - 1):
        masked = np.where(in_tree, np.inf, best)
        j = int(np.argmin(masked))
        out.append((float(masked[j]), int(parent[j]), j))
        in_tree[j] = True
        dj = np.hypot(p[:, 0] - p[j, 0], p[:, 1] - p[j, 1])
        closer = dj < best
        parent[closer] = j
        best = np.minimum(best, dj)
    return out
