"""Return-path risks beyond gap crossings: layer changes at vias, plane edges, floating copper,
stitching-via spacing. Each is its own finding kind with the common fields where they apply.
"""

import math
from collections import defaultdict

import numpy as np
import shapely

from returngap import physics
from returngap.analysis.gaps import coords_along_lines, stable_id
from returngap.analysis.references import line_z0
from returngap.geometry.shapes import disjoint_union

__all__ = [
    "DEFAULT_PART_LOOP_NH",
    "reference_changes",
    "edge_runs",
    "floating_copper",
    "stitching_spacing",
    "return_splits",
    "net_conflicts",
    "checks_without_gaps",
]

DEFAULT_PART_LOOP_NH = (
    1.0  # mounted two-terminal capacitor loop, typically 0.5-1.5 nH (from memory)
)


def _finding(kind, severity, net, layer, x, y, message, **extra):
    f = {
        "id": stable_id(kind, layer, extra.get("reference_layer"), net, f"{x:.1f}", f"{y:.1f}"),
        "kind": kind,
        "gap_type": None,
        "severity": severity,
        "net": net,
        "layer": layer,
        "reference_layer": extra.pop("reference_layer", None),
        "reference_net": extra.pop("reference_net", None),
        "x_mm": float(x),
        "y_mm": float(y),
        "message": message,
    }
    f.update(extra)
    return f


def _grade(reflection, budget):
    return "error" if reflection >= budget else ("warning" if reflection >= budget / 2 else "info")


def _plane_net_near(ln, plane_nets, x, y, reach=2.0):
    """Plane net of the nearest plane copper to a point (a via sits in its own antipad)."""
    p = shapely.Point(x, y)
    # boxes from the tree, then the (prepared) plane pieces tested: the tree's own distance test
    # would walk every edge of a large pour
    c = ln.tree.query(shapely.box(x - reach, y - reach, x + reach, y + reach))
    c = np.array([k for k in c if ln.island_net[ln.piece_island[k]] in plane_nets], dtype=int)
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
    return ln.island_net[
        ln.piece_island[near[int(np.argmin(shapely.distance(ln.pieces[near], p)))]]
    ]


def _parts_bridging(board, nets, net_a, net_b):
    """Centres of two-terminal parts with one pad on each net (from .P attributes or the
    netlist)."""
    table = getattr(nets, "_two_pin_parts", None)
    if table is None:
        table = nets._two_pin_parts = _two_pin_parts(board, nets)  # once per board, not per via
    by_nets, known = table
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


def reference_changes(board, nets, refs, settings):
    """Signal vias whose two track layers return in different planes."""
    findings = []
    holes = nets.plated_holes(board)
    if not holes:
        return findings
    hx = np.array([h[0] for h in holes])
    hy = np.array([h[1] for h in holes])
    # track ends per (layer, net)
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
            # (x, y, width) of both ends, segment by segment
            ends[(layer.name, n)] = np.stack(
                [rows[:, [0, 1, 4]], rows[:, [2, 3, 4]]], axis=1
            ).reshape(-1, 3)
    h_net = np.array([h[3] for h in holes], dtype=object)
    h_from = np.array([h[4] for h in holes])
    h_to = np.array([h[5] for h in holes])
    layer_names = [c.name for c in board.copper]
    for x, y, r, net, a, b in holes:
        if not nets.is_signal(net):
            continue
        used = []
        for ln_name in layer_names[a - 1 : b]:
            e = ends.get((ln_name, net))
            if (
                e is not None
                and len(e)
                and np.min(np.hypot(e[:, 0] - x, e[:, 1] - y) - e[:, 2] / 2) <= r + 0.3
            ):
                width = float(e[np.argmin(np.hypot(e[:, 0] - x, e[:, 1] - y)), 2])
                used.append((ln_name, width))
        if len(used) < 2:
            continue
        (la, wa), (lb, _) = used[0], used[-1]
        ra = min(refs.get(la, []), key=lambda q: q.h_mm, default=None)
        rb = min(refs.get(lb, []), key=lambda q: q.h_mm, default=None)
        if ra is None or rb is None or ra.layer == rb.layer:
            continue
        na = _plane_net_near(nets.layers[ra.layer], nets.plane_nets, x, y)
        nb = _plane_net_near(nets.layers[rb.layer], nets.plane_nets, x, y)
        if na is None or nb is None:
            continue
        h = board.stackup.height_mm(ra.layer, rb.layer)
        z0 = line_z0(board, la, wa, ra)
        rv = max(r, 0.05)
        common = dict(
            reference_layer=ra.layer,
            reference_net=na,
            other_reference_layer=rb.layer,
            other_reference_net=nb,
            to_layer=lb,
            plane_spacing_mm=h,
            z0_ohm=z0,
        )
        if na == nb:
            ok = np.flatnonzero(
                (h_net == na)
                & (h_from <= min(int(ra.layer[1:]), int(rb.layer[1:])))
                & (h_to >= max(int(ra.layer[1:]), int(rb.layer[1:])))
            )
            cand = list(zip(np.hypot(hx[ok] - x, hy[ok] - y).tolist(), ok.tolist()))
            if not cand:
                findings.append(
                    _finding(
                        "reference-change",
                        "error",
                        net,
                        la,
                        x,
                        y,
                        f"{net} changes from {la} to {lb} at ({x:.2f}, {y:.2f}) mm; its return "
                        "must move "
                        f"from {ra.layer} to {rb.layer} ({na}) but no stitching via joins them",
                        distance_mm=None,
                        added_inductance_nH=None,
                        **common,
                    )
                )
                continue
            s, i = min(cand)
            ind = physics.via_pair_inductance_nH(h, s, rv)
            refl = physics.series_inductance_reflection(ind, z0, settings.rise_ns)
            sev = _grade(refl, settings.reflection_budget)
            if sev == "info" and refl < settings.reflection_budget / 4:
                continue
            findings.append(
                _finding(
                    "reference-change",
                    sev,
                    net,
                    la,
                    x,
                    y,
                    f"{net} changes from {la} to {lb} at ({x:.2f}, {y:.2f}) mm; nearest {na} "
                    "stitching via joining "
                    f"{ra.layer} and {rb.layer} is {s:.2f} mm away: about {ind:.2f} nH of "
                    "via-pair loop, "
                    f"~{refl:.0%} reflection at {settings.rise_ns:g} ns",
                    distance_mm=s,
                    return_x_mm=float(hx[i]),
                    return_y_mm=float(hy[i]),
                    added_inductance_nH=ind,
                    added_inductance_range_nH=[ind, ind],
                    inductance_method="via-pair two-wire line",
                    reflection_fraction=refl,
                    **common,
                )
            )
        else:
            parts, known = _parts_bridging(board, nets, na, nb)
            if not parts:
                why = (
                    "no two-terminal part bridges them"
                    if known
                    else "the data has no part information to tell"
                )
                findings.append(
                    _finding(
                        "reference-change",
                        "error" if known else "warning",
                        net,
                        la,
                        x,
                        y,
                        f"{net} changes from {la} to {lb} at ({x:.2f}, {y:.2f}) mm; its return "
                        f"moves from {na} on "
                        f"{ra.layer} to {nb} on {rb.layer}: {why}",
                        distance_mm=None,
                        added_inductance_nH=None,
                        **common,
                    )
                )
                continue
            d, ref_des, px, py = min(
                (math.hypot(px - x, py - y), rd, px, py) for rd, px, py in parts
            )
            spread = physics.via_pair_inductance_nH(h, max(d, 2.5 * rv), rv)
            lo, hi = spread + 0.5, spread + 1.5
            ind = spread + DEFAULT_PART_LOOP_NH
            refl = physics.series_inductance_reflection(ind, z0, settings.rise_ns)
            sev = _grade(refl, settings.reflection_budget)
            findings.append(
                _finding(
                    "reference-change",
                    sev,
                    net,
                    la,
                    x,
                    y,
                    f"{net} changes from {la} to {lb} at ({x:.2f}, {y:.2f}) mm; its return "
                    f"moves from {na} to {nb} "
                    f"through {ref_des}, {d:.2f} mm away: about {ind:.2f} nH "
                    f"({lo:.2f}-{hi:.2f}), ~{refl:.0%} reflection",
                    distance_mm=d,
                    bridge_part=ref_des,
                    return_x_mm=px,
                    return_y_mm=py,
                    added_inductance_nH=ind,
                    added_inductance_range_nH=[lo, hi],
                    inductance_method="via-pair spread + mounted part loop",
                    reflection_fraction=refl,
                    **common,
                )
            )
    return findings


def _segment_tree(lines):
    """STRtree of the two-point pieces of a (multi)line: nearest-distance queries in log time,
    where the
    distance to one large boundary costs a pass over all its vertices."""
    parts = shapely.get_parts(lines)
    xy, idx = shapely.get_coordinates(parts, return_index=True)
    same = idx[1:] == idx[:-1]
    segs = shapely.linestrings(np.stack([xy[:-1][same], xy[1:][same]], axis=1))
    return shapely.STRtree(segs)


def _filled(copper):
    """Plane copper with its holes filled in. The islands are disjoint, so their filled outlines are
    disjoint or nested: the outermost ones, side by side, are the union, with no overlay work."""
    filled = shapely.polygons(shapely.get_exterior_ring(shapely.get_parts(copper)))
    inner, outer = shapely.STRtree(filled).query(filled)
    b = shapely.bounds(filled)
    maybe = (
        (inner != outer)
        & (b[outer, :2] <= b[inner, :2]).all(axis=1)
        & (b[outer, 2:] >= b[inner, 2:]).all(axis=1)
    )
    inner, outer = inner[maybe], outer[maybe]
    nested = np.unique(inner[shapely.within(filled[inner], filled[outer])])
    return disjoint_union(np.delete(filled, nested))


def edge_runs(board, nets, refs, chains, settings, hs, plane_nets_of):
    """Tracks whose return footprint runs along the edge of their reference plane's copper, or off
    it
    at a track end. (A track crossing a gap between plane islands is a gap crossing, not an edge
    run.)"""
    findings = []
    by_layer = defaultdict(list)  # signal layer -> indices of its chains
    for k, ch in enumerate(chains):
        by_layer[ch.layer].append(k)
    edges = {}  # reference layer -> (plane copper without its holes, tree of its edge segments)
    sampled = {}  # chain index -> (net, ref, limit, s, points, inside, d)
    for layer, idx in by_layer.items():
        ref = min(refs.get(layer, []), key=lambda q: q.h_mm, default=None)
        if ref is None:
            continue
        ln = nets.layers[ref.layer]
        lines = np.array([chains[k].line for k in idx], dtype=object)
        ref_nets = [plane_nets_of[k][ref.layer] for k in idx]
        keep = np.array([n is not None for n in ref_nets])
        if not keep.any():
            continue
        if ref.layer not in edges:
            copper = ln.union_of(nets.plane_nets)
            outer = _filled(copper)
            shapely.prepare(outer)
            edges[ref.layer] = (outer, _segment_tree(outer.boundary))
        outer, edge_tree = edges[ref.layer]
        limit = hs.edge_distance_h * ref.h_mm
        near_edge = np.zeros(len(idx), dtype=bool)
        # long lines: a bounded nearest search prunes more of the tree than a distance query does
        near_edge[edge_tree.query_nearest(lines, max_distance=limit, all_matches=False)[0]] = True
        # on the plane and nowhere near its edge: nothing to sample
        keep &= near_edge | ~shapely.contains(outer, lines)
        todo = np.flatnonzero(keep)
        if not len(todo):
            continue
        step = max(0.05, min(0.25, ref.h_mm / 2))
        sub = lines[todo]
        dists = [np.linspace(0, L, max(2, int(L / step) + 1)) for L in shapely.length(sub)]
        xy = coords_along_lines(sub, dists)
        # only samples on pieces of line that come within reach of the edge, or lie off
        # the plane, are
        # looked at: the rest are on the plane and farther than the limit from its edge
        at = np.flatnonzero(_samples_to_look_at(sub, dists, outer, edge_tree, limit))
        inside = np.ones(len(xy), dtype=bool)
        d = np.full(len(xy), np.inf)
        if len(at):
            pts = shapely.points(xy[at])
            inside[at] = shapely.intersects(outer, pts)
            # distances within the limit from a bounded nearest search; off the plane, all of them
            (k, _), dist = edge_tree.query_nearest(
                pts, max_distance=limit, return_distance=True, all_matches=False
            )
            d[at[k]] = dist
            off = np.flatnonzero(~inside[at] & np.isinf(d[at]))
            if len(off):
                (k, _), dist = edge_tree.query_nearest(
                    pts[off], return_distance=True, all_matches=False
                )
                d[at[off[k]]] = dist
        ends = np.cumsum([0] + [len(x) for x in dists])
        for j, t in enumerate(todo):
            a, b = ends[j], ends[j + 1]
            sampled[idx[t]] = (ref_nets[t], ref, limit, dists[j], xy[a:b], inside[a:b], d[a:b])
    for ci in sorted(sampled):
        ch = chains[ci]
        net, ref, limit, s, pts, inside, d = sampled[ci]
        n = len(s)
        cls = np.where(~inside, 2, np.where(d < limit, 1, 0))
        change = np.flatnonzero(np.diff(cls)) + 1
        for a, b in zip(np.concatenate([[0], change]), np.concatenate([change, [n]])):
            c = cls[a]
            if c == 0:
                continue
            if c == 2 and a != 0 and b != n:
                continue  # off the plane between two stretches on it: a gap crossing
            length = float(s[b - 1] - s[a])
            if length < hs.edge_min_run_mm:
                continue
            k = a + int(np.argmin(d[a:b])) if c == 1 else (b - 1 if a == 0 else a)
            signed = float(d[k]) if c == 1 else -float(np.max(d[a:b]))
            share = (
                physics.microstrip_fraction_beyond_edge(signed, ref.h_mm)
                if ref.other_h_mm is None
                else physics.stripline_fraction_between(
                    signed, 1e3 * ref.h_mm, ref.h_mm, ref.other_h_mm
                )
                / ref.share
            )
            sev = "error" if c == 2 else ("warning" if signed < ref.h_mm else "info")
            px, py = pts[k]
            where = "runs off" if c == 2 else "runs along"
            findings.append(
                _finding(
                    "edge-run",
                    sev,
                    ch.net,
                    ch.layer,
                    px,
                    py,
                    f"{ch.net} on {ch.layer} {where} the edge of the plane copper on "
                    f"{ref.layer} for {length:.1f} mm, "
                    f"{'as far as' if c == 2 else 'closest'} {abs(signed):.2f} mm "
                    f"({signed / ref.h_mm:.1f} h): about "
                    f"{share:.0%} of its return current on that plane lies beyond the edge",
                    reference_layer=ref.layer,
                    reference_net=net,
                    run_length_mm=length,
                    edge_distance_mm=signed,
                    edge_distance_h=signed / ref.h_mm,
                    beyond_edge_fraction=float(min(1.0, share)),
                    height_mm=ref.h_mm,
                )
            )
    return findings


def _samples_to_look_at(lines, dists, outer, edge_tree, limit):
    """For samples at distances dists[i] along lines[i] (laid end to end, as coords_along_lines lays
    them): True where the straight piece of line a sample lies on comes within `limit` of the
    plane's
    edge or lies off the plane (`outer`). A piece farther than that from the edge does not cross it,
    so one point tells whether all of it is on the plane."""
    xy, idx = shapely.get_coordinates(lines, return_index=True)
    same = idx[1:] == idx[:-1]
    a, b, of_line = xy[:-1][same], xy[1:][same], idx[:-1][same]
    flag = np.zeros(len(a), dtype=bool)
    # a bounded nearest search prunes more of the tree than a distance query (long pieces,
    # large boxes)
    flag[
        edge_tree.query_nearest(
            shapely.linestrings(np.stack([a, b], axis=1)), max_distance=limit, all_matches=False
        )[0]
    ] = True
    far = np.flatnonzero(~flag)
    mid = (a[far] + b[far]) / 2
    flag[far] = ~shapely.intersects_xy(outer, mid[:, 0], mid[:, 1])
    # the piece under each sample, by its distance along the pieces of all lines laid end to end
    run = np.concatenate([[0.0], np.cumsum(np.hypot(*(b - a).T))])
    first = np.searchsorted(of_line, np.arange(len(dists)))
    last = np.searchsorted(of_line, np.arange(len(dists)), side="right") - 1
    count = [len(x) for x in dists]
    pos = np.concatenate([x + run[f] for x, f in zip(dists, first)] or [np.zeros(0)])
    piece = np.searchsorted(run, pos, side="right") - 1
    piece = np.clip(piece, np.repeat(first, count), np.repeat(last, count))
    return flag[piece]


def floating_copper(board, nets, refs, chains, settings, hs):
    """Copper islands tied to nothing (no hole, no pad in them) within coupling distance of a
    signal track."""
    findings = []
    all_holes = [(h[0], h[1]) for d in board.drills for h in d.holes]
    hole_tree = shapely.STRtree(shapely.points(np.array(all_holes).reshape(-1, 2)))
    names = [c.name for c in board.copper]
    for li, layer in enumerate(board.copper):
        ln = nets.layers[layer.name]
        pad_tree = shapely.STRtree(shapely.points(layer.flashes[:, :2].reshape(-1, 2)))
        tracks = [c for c in chains if abs(names.index(c.layer) - li) <= 1]
        if not tracks:
            continue
        ttree = shapely.STRtree(np.array([c.line for c in tracks], dtype=object))
        track_nets = {c.net for c in chains if c.layer == layer.name}
        cand = [
            i
            for i, net in enumerate(ln.island_net)
            if not ln.island_tied[i] and net not in track_nets
        ]
        for i, isl in zip(cand, ln.island_polygons(cand)):
            net = ln.island_net[i]
            if isl.area < hs.floating_min_area_mm2:
                continue
            if len(hole_tree.query(isl, predicate="intersects")) or len(
                pad_tree.query(isl, predicate="intersects")
            ):
                continue
            near = ttree.query(isl, predicate="dwithin", distance=hs.floating_coupling_mm)
            if not len(near):
                continue
            track = tracks[int(min(near, key=lambda i: tracks[i].line.distance(isl)))]
            rref = refs.get(layer.name) or refs.get(track.layer)
            ref = min(rref, key=lambda q: q.h_mm) if rref else None
            h = ref.h_mm if ref else 0.2
            er = ref.er if ref else 4.3
            c = np.asarray(isl.minimum_rotated_rectangle.exterior.coords)[:4]
            a, b = float(np.hypot(*(c[1] - c[0]))), float(np.hypot(*(c[2] - c[1])))
            length, width = max(a, b), max(min(a, b), 0.05)
            f_res = physics.patch_resonance_GHz(length, width, h, er)
            lam = physics.wavelength_mm(settings.knee_GHz, er)
            vias = max(
                2,
                math.ceil(
                    shapely.length(shapely.get_exterior_ring(shapely.get_parts(isl))).sum()
                    / (lam / 20)
                ),
            )
            sev = "warning" if f_res <= 3 * settings.knee_GHz else "info"
            p = isl.representative_point()
            findings.append(
                _finding(
                    "floating-copper",
                    sev,
                    track.net,
                    layer.name,
                    p.x,
                    p.y,
                    f"unconnected copper island of {isl.area:.1f} mm2 on {layer.name} within "
                    f"{hs.floating_coupling_mm:g} mm of {track.net}: patch resonance near "
                    f"{f_res:.2f} GHz; "
                    f"stitch it with about {vias} vias (lambda/20 at {settings.knee_GHz:g} GHz) "
                    "or remove it",
                    island_net=net,
                    area_mm2=float(isl.area),
                    island_length_mm=length,
                    island_width_mm=width,
                    resonance_GHz=f_res,
                    stitching_vias_needed=vias,
                    height_mm=h,
                )
            )
    return findings


def stitching_spacing(board, nets, refs, chains, settings, hs):
    """Largest gap between neighbouring ground vias of a pour or plane, next to signal tracks,
    against lambda/10."""
    findings = []
    holes = nets.plated_holes(board)
    n_layers = len(board.copper)
    for layer in board.copper:
        ln = nets.layers[layer.name]
        users = [c for c in chains if c.layer == layer.name or layer.name in c.footprints]
        if not users:
            continue
        utree = shapely.STRtree(np.array([c.line for c in users], dtype=object))
        i = int(layer.name[1:])
        er = board.stackup.er_between(layer.name, f"L{i + 1}" if i < n_layers else f"L{i - 1}")
        eeff = (er + 1) / 2 if layer.side in ("top", "bottom") else er
        limit = hs.stitch_fraction * physics.wavelength_mm(settings.knee_GHz, eeff)
        for k, net in enumerate(ln.island_net):
            if nets.net_class.get(net) != "ground":
                continue
            isl = ln.island(k)
            if isl.area < hs.stitch_min_pour_mm2:
                continue
            pts = np.array(
                [(x, y) for x, y, r, n, a, b in holes if n == net and a <= i <= b]
            ).reshape(-1, 2)
            if len(pts):
                pts = pts[shapely.dwithin(isl, shapely.points(pts), 0.05)]
            if len(pts) < 2:
                continue
            edges = [(g, a, b) for g, a, b in _mst_edges(pts) if g > limit]
            # only gaps that tracks run past: the gap's middle within a few mm of a
            # track using this copper
            if (
                edges
            ):  # nearest-track distances of all the gaps' middles in one bounded-nearest query
                mids = shapely.points(np.array([(pts[a] + pts[b]) / 2 for _, a, b in edges]))
                (_, _), dist = utree.query_nearest(mids, return_distance=True, all_matches=False)
                edges = [e for e, d in zip(edges, dist) if d <= max(3.0, e[0] / 4)]
            if not edges:
                continue
            gap, a, b = max(edges)
            mx, my = (pts[a] + pts[b]) / 2
            sev = "warning" if gap <= 2 * limit else "error"
            findings.append(
                _finding(
                    "stitching-spacing",
                    sev,
                    net,
                    layer.name,
                    mx,
                    my,
                    f"{net} copper on {layer.name}: neighbouring stitching vias {gap:.1f} mm "
                    "apart next to signal "
                    f"tracks, more than lambda/{round(1 / hs.stitch_fraction)} = {limit:.1f} mm at "
                    f"{settings.knee_GHz:g} GHz (eps_eff {eeff:.2f})",
                    via_spacing_mm=gap,
                    spacing_limit_mm=limit,
                    er_eff=eeff,
                    via_count=int(len(pts)),
                    from_via_mm=[float(pts[a][0]), float(pts[a][1])],
                    to_via_mm=[float(pts[b][0]), float(pts[b][1])],
                )
            )
    return findings


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


def return_splits(board, gap_findings, settings, hs):
    """Where a closed slot leaves the return two ways round (its two ends), the share each way
    takes:
    at DC by resistance (copper strips of the footprint's width), at high frequency by inductance
    (two legs out and back, Rosa's partial inductance). A simple two-branch model."""
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
            _finding(
                "return-split",
                "info",
                f["net"],
                f["layer"],
                f["x_mm"],
                f["y_mm"],
                f"{f['net']} over the slot in {f['reference_net']} on {f['reference_layer']}: "
                "its return goes round "
                f"the near end ({l_near:.1f} mm) and the far end ({l_far:.1f} mm): {dc:.0%} "
                "near at DC, "
                f"{hf:.0%} near at high frequency",
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


def net_conflicts(nets):
    """Copper that carries two nets' labels: a short in the released data (error), or a part whose
    own pads join them, such as a net tie or a solder jumper (info: as designed, most likely)."""
    out = []
    for c in nets.conflicts:
        if c.part:
            sev, why = (
                "info",
                (
                    f"joined by copper at part {c.part}, whose own pads carry both labels (a "
                    "net tie, "
                    f"a jumper or a bypassed part: check that it is intended)"
                ),
            )
        else:
            sev, why = "error", "a short in the released data, or a wrong label"
        out.append(
            _finding(
                "net-conflict",
                sev,
                c.other,
                c.layer,
                c.x,
                c.y,
                f"copper of net {c.net} on {c.layer} also carries the label {c.other} "
                f"({c.labels} object(s)) at ({c.x:.2f}, {c.y:.2f}): {why}",
                conflicting_nets=[c.net, c.other],
                joined_by_part=c.part,
            )
        )
    return out


def checks_without_gaps(board, nets, refs, chains, settings, hs, plane_nets_of):
    """The checks that do not need the gap crossings, as separate tasks (they run beside the gap
    scan;
    return_splits follows it): their findings, concatenated in this order, are the whole of them.
    plane_nets_of: gaps.chain_plane_nets(nets, chains)."""
    return [
        lambda: reference_changes(board, nets, refs, settings),
        lambda: edge_runs(board, nets, refs, chains, settings, hs, plane_nets_of),
        lambda: floating_copper(board, nets, refs, chains, settings, hs),
        lambda: stitching_spacing(board, nets, refs, chains, settings, hs),
    ]
