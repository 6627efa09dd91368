"""edge-run: a track whose return footprint runs along the edge of its reference plane's copper,
or off it at a track end (CVEL asks the trace to stay at least 1 h from the edge; REFERENCE 7.2).
A track crossing a gap between plane islands is a gap crossing, not an edge run."""

import dataclasses
import math
from collections import defaultdict

import numpy as np
import shapely

from returngap import physics
from returngap.analysis import severity
from returngap.analysis.gaps import OTHER_PLANE_COVER, coords_along_lines
from returngap.analysis.references import line_z0
from returngap.checks.common import finding
from returngap.geometry.cuts import ring_edges
from returngap.geometry.reach import Reach
from returngap.geometry.samples import kept_samples, sample_counts
from returngap.geometry.shapes import disjoint_union, near_clusters, segment_lines

__all__ = ["edge_runs"]

OFF, NEAR = 2, 1  # sample classes: off the plane, within the limit of its edge (0: neither)


def edge_runs(board, nets, refs, chains, settings, hs, plane_nets_of):
    """Edge runs of every checked track against its nearest reference plane."""
    by_layer = defaultdict(list)  # signal layer -> indices of its chains
    for k, ch in enumerate(chains):
        by_layer[ch.layer].append(k)
    edges = {}  # reference layer -> (plane copper without its holes, tree of its edge segments)
    sampled = {}  # chain index -> (net, ref, limit, s, points, inside, d)
    others = {}  # signal layer -> a stripline's other plane copper (filled), where it has one
    for layer, idx in by_layer.items():
        ref = min(refs.get(layer, []), key=lambda q: q.h_mm, default=None)
        if ref is not None:
            sampled.update(_sample_layer(nets, chains, idx, ref, hs, plane_nets_of, edges))
            other = next((q for q in refs[layer] if q.layer != ref.layer), None)
            if ref.other_h_mm is not None and other is not None:
                others[layer] = _plane_edges(nets, other.layer, edges)[0]
    findings = []
    for ci in sorted(sampled):
        findings += _runs(board, chains[ci], *sampled[ci], hs, others.get(chains[ci].layer))
    return _joined(findings, hs)


JOIN_MM = 0.05  # run ends this close are one run cut at a width change (the chains' joint)


def _joined(findings, settings):
    """Runs of one net, layer and plane, of one class, that meet end to end (a track cut into two
    chains where its width changes) as one run: lengths and inductances added, the worst point
    kept."""
    groups = {}
    for k, f in enumerate(findings):
        groups.setdefault((f["net"], f["layer"], f["reference_layer"], f["off_plane"]), []).append(
            k
        )
    out = []
    for idx in groups.values():
        ends = np.array([findings[k]["run_ends_mm"] for k in idx], dtype=float).reshape(-1, 2)
        labels = near_clusters(ends, JOIN_MM)
        run_of = _join_labels(labels.reshape(-1, 2))
        for members in run_of.values():
            out.append(_merge([findings[idx[m]] for m in members], settings))
    return out


def _join_labels(end_labels):
    """Runs (rows of two end labels) joined where they share an end label: {root: [rows]}."""
    parent = list(range(len(end_labels)))
    first = {}
    for i, (a, b) in enumerate(end_labels.tolist()):
        for e in (a, b):
            j = first.setdefault(e, i)
            ri, rj = _root(parent, i), _root(parent, j)
            parent[max(ri, rj)] = min(ri, rj)
    out = {}
    for i in range(len(end_labels)):
        out.setdefault(_root(parent, i), []).append(i)
    return out


def _root(parent, i):
    while parent[i] != i:
        i = parent[i]
    return i


def _merge(runs, settings):
    if len(runs) == 1:
        return runs[0]
    worst = max(runs, key=lambda f: f["beyond_edge_fraction"])
    added = sum(f["added_inductance_nH"] for f in runs)
    refl = physics.series_inductance_reflection(added, worst["z0_ohm"], worst["rise_time_ns"])
    far = max(
        ((p, q) for f in runs for g in runs for p in f["run_ends_mm"] for q in g["run_ends_mm"]),
        key=lambda pq: math.dist(*pq),
    )
    return dataclasses.replace(
        worst,
        severity=severity.by_effect(refl, settings.reflection_budget),
        run_length_mm=sum(f["run_length_mm"] for f in runs),
        added_inductance_nH=added,
        reflection_fraction=refl,
        run_ends_mm=[list(far[0]), list(far[1])],
    )


def _plane_edges(nets, ref_layer, edges):
    """(plane copper without its holes, tree of its edge's straight pieces, those pieces as an
    (N, 4) array), built once per reference layer."""
    if ref_layer not in edges:
        outer = _filled(nets.layers[ref_layer].union_of(nets.plane_nets))
        shapely.prepare(outer)
        pieces = ring_edges(outer)  # nearest-distance queries by piece go in log time
        edges[ref_layer] = (outer, shapely.STRtree(segment_lines(pieces)), pieces)
    return edges[ref_layer]


# a Reach of an edge costs about this share of a bounded tree search per point to build, per
# piece of the edge (measured on the corpus): it pays where more samples than that are measured
REACH_BUILD_SHARE = 0.7


def _edge_reach(edges, ref_layer, limit, samples):
    """The edge's pieces indexed for distances within `limit` (built once per layer and limit), or
    None where `samples` points are too few to pay for building it (see _measure)."""
    key = (ref_layer, limit)
    if key not in edges:
        pieces = edges[ref_layer][2]
        if samples < REACH_BUILD_SHARE * len(pieces):
            return None
        edges[key] = Reach(pieces, limit)
    return edges[key]


def _sample_layer(nets, chains, idx, ref, hs, plane_nets_of, edges):
    """Samples along the tracks of one signal layer that come near their plane's edge or leave it:
    {chain index: (plane net, ref, limit, distances along, points, on the plane, distance to the
    edge)}."""
    lines = np.array([chains[k].line for k in idx], dtype=object)
    ref_nets = _adopted([chains[k] for k in idx], [plane_nets_of[k][ref.layer] for k in idx])
    keep = np.array([n is not None for n in ref_nets])
    if not keep.any():
        return {}
    outer, edge_tree, _ = _plane_edges(nets, ref.layer, edges)
    limit = hs.edge_distance_h * ref.h_mm
    near_edge = np.zeros(len(idx), dtype=bool)
    # long lines: a bounded nearest search prunes more of the tree than a distance query does
    near_edge[edge_tree.query_nearest(lines, max_distance=limit, all_matches=False)[0]] = True
    keep &= near_edge | ~shapely.contains(outer, lines)  # on the plane, far from its edge: nothing
    todo = np.flatnonzero(keep)
    if not len(todo):
        return {}
    step = max(0.05, min(0.25, ref.h_mm / 2))
    sub = lines[todo]
    dists, look = _samples_to_look_at(sub, step, outer, edge_tree, limit)
    xy = coords_along_lines(sub, dists)
    ends = np.cumsum([0] + [len(x) for x in dists])
    reach = _edge_reach(edges, ref.layer, limit, int(look.sum()))
    inside, d = _measure(xy, look, outer, edge_tree, reach or limit, ends)
    out = {}
    for j, t in enumerate(todo):
        a, b = ends[j], ends[j + 1]
        out[idx[t]] = (ref_nets[t], ref, limit, dists[j], xy[a:b], inside[a:b], d[a:b])
    return out


def _adopted(chs, ref_nets):
    """The plane net of each chain; a chain with no plane copper under it at all takes the net of
    a chain of its track it joins end to end (a width change): its run off the plane continues
    the other's, where alone it would not be looked at."""
    out = list(ref_nets)
    if None not in out:
        return out
    lines = [ch.line for ch in chs]
    ends = np.hstack(
        [shapely.get_coordinates(shapely.get_point(lines, k))[:, :2] for k in (0, -1)]
    ).tolist()  # per chain: x0, y0, x1, y1
    keys = [
        ((ch.net, round(x0, 2), round(y0, 2)), (ch.net, round(x1, 2), round(y1, 2)))
        for ch, (x0, y0, x1, y1) in zip(chs, ends)
    ]
    by_end = {}
    for pair, n in zip(keys, ref_nets):
        if n is not None:
            for key in pair:
                by_end.setdefault(key, n)
    for k, pair in enumerate(keys):
        if out[k] is None:
            for key in pair:
                out[k] = out[k] or by_end.get(key)
    return out


def _end_runs_off(inside, ends):
    """Per sample, whether it lies in a stretch off the plane at either end of its track (samples
    ends[j]:ends[j + 1] are track j's): only there does a run off the plane count (see _runs), so
    only there is a sample's full distance to the edge needed."""
    out = np.zeros(len(inside), dtype=bool)
    for a, b in zip(ends[:-1].tolist(), ends[1:].tolist()):
        on = np.flatnonzero(inside[a:b])
        if not len(on):
            out[a:b] = True
            continue
        out[a : a + on[0]] = True
        out[a + on[-1] + 1 : b] = True
    return out


def _measure(xy, look, outer, edge_tree, reach, ends=None):
    """Per sample: on the plane, and the distance to its edge: exact within the reach (a Reach of
    the edge's pieces, or a distance for a bounded search of the edge's tree), and for every
    sample off the plane (with `ends`, the tracks' sample ranges: for those in a stretch off the
    plane at a track's end only, see _end_runs_off); infinite elsewhere. Only the samples `look`
    marks are measured."""
    at = np.flatnonzero(look)
    inside = np.ones(len(xy), dtype=bool)
    d = np.full(len(xy), np.inf)
    if not len(at):
        return inside, d
    pts = shapely.points(xy[at])
    inside[at] = shapely.intersects(outer, pts)
    if isinstance(reach, Reach):
        d[at] = reach.distances(xy[at], pts)
    else:  # a bounded search of the edge's tree, the same distances
        (k, _), dist = edge_tree.query_nearest(
            pts, max_distance=reach, return_distance=True, all_matches=False
        )
        d[at[k]] = dist
    want = _end_runs_off(inside, ends)[at] if ends is not None else True
    off = np.flatnonzero(~inside[at] & np.isinf(d[at]) & want)
    if len(off):
        (k, _), dist = edge_tree.query_nearest(pts[off], return_distance=True, all_matches=False)
        d[at[off[k]]] = dist
    return inside, d


def _runs(board, ch, net, ref, limit, s, pts, inside, d, hs, other=None):
    """The edge-run findings of one track from its samples; other: a stripline's other plane
    copper, which carries the return off this plane where it lies under the run."""
    n = len(s)
    cls = np.where(~inside, OFF, np.where(d < limit, NEAR, 0))
    change = np.flatnonzero(np.diff(cls)) + 1
    out = []
    for a, b in zip(np.concatenate([[0], change]), np.concatenate([change, [n]])):
        c = cls[a]
        if c == 0 or (c == OFF and a != 0 and b != n):
            continue  # off the plane between two stretches on it: a gap crossing
        length = float(s[b - 1] - s[a])
        if length < hs.edge_min_run_mm:
            continue
        k = a + int(np.argmin(d[a:b])) if c == NEAR else (b - 1 if a == 0 else a)
        signed = float(d[k]) if c == NEAR else -float(np.max(d[a:b]))
        cover = _cover(other, pts[a:b]) if c == OFF else 0.0
        f = _run_finding(board, ch, net, ref, c, length, signed, pts[k], hs, cover)
        out.append(dataclasses.replace(f, run_ends_mm=[pts[a].tolist(), pts[b - 1].tolist()]))
    return out


def _cover(other, pts):
    """The share of the samples that the other plane's copper lies under (0 without one)."""
    if other is None or not len(pts):
        return 0.0
    return float(shapely.intersects(other, shapely.points(pts)).mean())


def _run_finding(board, ch, net, ref, c, length, signed, at, settings, cover=0.0):
    if ref.other_h_mm is None:
        share = physics.microstrip_fraction_beyond_edge(signed, ref.h_mm)
    else:
        share = (
            physics.stripline_fraction_between(signed, 1e3 * ref.h_mm, ref.h_mm, ref.other_h_mm)
            / ref.share
        )
    z0 = line_z0(board, ch.layer, ch.width_mm, ref)
    added = _added_inductance_nH(board, ch, ref, c, length, signed)
    method = (
        "off the plane: edge rise plus the return receding to the edge (image estimate)"
        if c == OFF
        else "L' rise near a plane edge (2-D solve, reference sheet section 12)"
    )
    via_other = _over_other_plane(board, ch, ref, length, cover, added)
    if via_other is not None and via_other < added:  # the return takes the way that adds less
        added = via_other
        method = (
            "one plane missing: stripline to microstrip over the other plane, under "
            f"{100 * cover:.0f} % of the run"
        )
    rise = settings.rise_ns_for(ch.net)
    refl = physics.series_inductance_reflection(added, z0, rise)
    return finding(
        "edge-run",
        severity.by_effect(refl, settings.reflection_budget),
        ch.net,
        ch.layer,
        at[0],
        at[1],
        reference_layer=ref.layer,
        reference_net=net,
        run_length_mm=length,
        edge_distance_mm=signed,
        edge_distance_h=signed / ref.h_mm,
        beyond_edge_fraction=float(min(1.0, share)),
        height_mm=ref.h_mm,
        off_plane=bool(c == OFF),
        added_inductance_nH=added,
        inductance_method=method,
        reflection_fraction=refl,
        z0_ohm=z0,
        rise_time_ns=rise,
    )


def _added_inductance_nH(board, ch, ref, c, length, signed):
    """The run's added series inductance: the rise of the line's L' near (or beyond) the plane's
    edge over the run's length; a stripline's other plane carries its own share unchanged."""
    alone = ref if ref.other_h_mm is None else dataclasses.replace(ref, other_h_mm=None)
    t = board.stackup.copper_thickness_mm.get(ch.layer, 0.035)
    l_line = physics.track_inductance_nH_per_mm(ch.width_mm, ref.h_mm, None, t)
    if c == OFF:
        per_mm = physics.off_plane_inductance_nH_per_mm(alone.h_mm, -signed, l_line)
    else:
        per_mm = physics.plane_edge_inductance_rise(signed / ref.h_mm) * l_line
    return per_mm * length * ref.share


def _over_other_plane(board, ch, ref, length, cover, own_nH):
    """Off the plane, a stripline whose other plane lies under at least half of the run returns
    there: the one-plane-missing rise over the length it covers (as for a gap crossing,
    analysis/gaps.py), the rest of the run keeping its share of the run's own estimate own_nH;
    None otherwise."""
    if ref.other_h_mm is None or cover < OTHER_PLANE_COVER:
        return None
    t = board.stackup.copper_thickness_mm.get(ch.layer, 0.035)
    rise = physics.one_plane_missing_inductance_nH(
        ch.width_mm, ref.h_mm, ref.other_h_mm, t, length * cover
    )
    return rise + own_nH * (1.0 - cover)


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


def _samples_to_look_at(lines, step, outer, edge_tree, limit):
    """The samples along lines, about `step` apart, that can belong to a run (see kept_samples):
    (per line, their distances along it; per sample, whether it is looked at: the straight piece
    of line it lies on comes within `limit` of the plane's edge or lies off the plane (`outer`)).
    A piece farther than that from the edge does not cross it, so one point tells whether all of
    it is on the plane; the first sample of a stretch of such pieces stands for the stretch (on
    the plane, far from its edge: it ends a run, see _runs, and is on the plane for
    _end_runs_off)."""
    xy, idx = shapely.get_coordinates(lines, return_index=True)
    same = idx[1:] == idx[:-1]
    a, b, of_line = xy[:-1][same], xy[1:][same], idx[:-1][same]
    flag = np.zeros(len(a), dtype=bool)
    # a bounded nearest search prunes more of the tree than a distance query (long pieces, boxes)
    pieces = shapely.linestrings(np.stack([a, b], axis=1))
    flag[edge_tree.query_nearest(pieces, max_distance=limit, all_matches=False)[0]] = True
    far = np.flatnonzero(~flag)
    mid = (a[far] + b[far]) / 2
    flag[far] = ~shapely.intersects_xy(outer, mid[:, 0], mid[:, 1])
    # the pieces of all lines laid end to end on one distance axis
    run = np.concatenate([[0.0], np.cumsum(np.hypot(*(b - a).T))])
    lengths = shapely.length(lines)
    return kept_samples(lengths, sample_counts(lengths, step), run, of_line, flag)
