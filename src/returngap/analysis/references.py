"""Signal tracks and the reference planes their return current flows in.

For each signal layer: the nearest plane-carrying copper layer above and below, the
dielectric height to each, microstrip or stripline, and each plane's share of the
return. Tracks are merged into centre-line chains per net and width; each chain's
return footprint is its width plus the half-width holding the chosen share of the
return current (REFERENCE: 1/(1+(x/h)^2) for microstrip, the two-plate law for stripline)."""

import fnmatch
import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import shapely

from returngap import physics
from returngap.analysis.connectivity import net_codes
from returngap.model.settings import Settings  # noqa: F401  (the settings the functions here take)

__all__ = [
    "NON_TRACK_FUNCTIONS",
    "Reference",
    "footprint_polygon",
    "Footprints",
    "Chain",
    "plane_layers",
    "solid_planes",
    "find_references",
    "line_z0",
    "footprint_halfwidth",
    "wanted",
    "nearest_chain",
    "only_wanted",
    "unmatched_globs",
    "chains",
]

NON_TRACK_FUNCTIONS = {
    "NonConductor",
    "Profile",
    "Material",
    "NonMaterial",
    "Other",
    "Drawing",
    "Border",
    "CopperBalancing",
    "EtchedComponent",
}


@dataclass
class Reference:
    layer: str
    h_mm: float  # dielectric height from the signal layer to this plane
    other_h_mm: float | None  # stripline: height to the other plane
    share: float  # share of the return current on this plane
    er: float  # dielectric between signal and plane
    plane_is_outer: bool
    plane_er: float  # the dielectric round the plane (its slots' resonance)
    plane_substrate_mm: float | None  # an outer plane's board to the next copper; None buried
    # the next plane layer beyond this one, away from the track, and its distance from it
    beyond_layer: str | None = None
    beyond_mm: float | None = None

    @property
    def kind(self):
        return "stripline" if self.other_h_mm is not None else "microstrip"


def footprint_polygon(line, halfwidth):
    """The strip of plane under a track that holds the chosen share of its return current: the
    centre
    line buffered by the half-width, flat at the track's ends."""
    return shapely.buffer(line, halfwidth, quad_segs=4, cap_style="flat", join_style="round")


class Footprints(Mapping):
    """Reference layer -> (footprint polygon, half-width) of one chain. A polygon is buffered
    only when
    first asked for: most tracks meet no gap, and the half-width alone answers 'is a gap near?'."""

    def __init__(self, line, outline):
        self._line, self._outline = line, outline
        self._hw, self._poly = {}, {}

    def add(self, ref_layer, halfwidth):
        self._hw[ref_layer] = halfwidth

    def halfwidth(self, ref_layer):
        return self._hw[ref_layer]

    def __getitem__(self, ref_layer):
        hw = self._hw[ref_layer]
        if ref_layer not in self._poly:
            self._poly[ref_layer] = footprint_polygon(self._line, hw).intersection(self._outline)
        return self._poly[ref_layer], hw

    def __contains__(self, ref_layer):
        return ref_layer in self._hw  # without buffering

    def __iter__(self):
        return iter(self._hw)

    def __len__(self):
        return len(self._hw)


@dataclass
class Chain:
    net: str
    layer: str
    width_mm: float
    line: object  # shapely LineString
    footprints: Footprints = None  # reference layer -> (polygon, half-width)


def plane_layers(board, nets, settings):
    """Layers whose plane-net copper covers enough of the board to carry return current."""
    area = board.outline.area or 1.0
    out = {}
    for layer in board.copper:
        ln = nets.layers[layer.name]
        plane = np.array([n in nets.plane_nets for n in ln.island_net], dtype=bool)
        upper, lower = ln.piece_area_bounds()
        if lower[plane].sum() / area >= settings.plane_min_fraction:
            out[layer.name] = True  # its largest pieces alone cover enough: no union needed
        elif upper[plane].sum() / area < settings.plane_min_fraction:
            out[layer.name] = False
        else:
            cover = sum(ln.island_area(int(i)) for i in np.flatnonzero(plane))
            out[layer.name] = cover / area >= settings.plane_min_fraction
    return out


def _er_around(stackup, layer_name, n_layers):
    i = int(layer_name[1:])
    ers = [d.er for d in stackup.dielectrics if int(d.between[0][1:]) in (i - 1, i)]
    return sum(ers) / len(ers) if ers else 4.3


def solid_planes(board, nets, planes, settings):
    """Plane layers with next to no signal tracks of their own: solid planes. The others are pours
    on signal layers, whose openings are their own layer's tracks."""
    limit = settings.solid_plane_track_factor * np.sqrt(board.outline.area or 1.0)
    out = set()
    for layer in board.copper:
        if not planes[layer.name]:
            continue
        ln, seg = nets.layers[layer.name], layer.segments
        if len(seg):
            fill = ln.segment_fill if ln.segment_fill is not None else np.zeros(len(seg), bool)
            sig = np.fromiter((nets.is_signal(n) for n in ln.segment_net), bool, len(seg))
            length = np.hypot(*(seg[:, 2:4] - seg[:, 0:2]).T)[sig & ~fill].sum()
        else:
            length = 0.0
        if length <= limit:
            out.add(layer.name)
    return out


def _nearest_planes(names, i, planes, solid, st):
    """The plane layers a layer's tracks return in: the nearest plane each way, but a pour only
    where it is nearer than every solid plane round the layer (a solid plane nearer carries the
    return; the pour's openings round its own tracks are no gaps to the track)."""
    name = names[i]
    ways = (range(i - 1, -1, -1), range(i + 1, len(names)))
    nearest = [next((names[j] for j in way if planes[names[j]]), None) for way in ways]
    solid_h = [st.height_mm(name, names[j]) for way in ways for j in way if names[j] in solid]
    closest_solid = min(solid_h, default=math.inf)
    return [
        r
        for r in nearest
        if r is not None and (r in solid or st.height_mm(name, r) < closest_solid)
    ]


def _beyond(names, i, ref, planes, st):
    """(layer, distance) of the nearest plane layer past `ref`, seen from layer i; (None, None)."""
    k = names.index(ref)
    step = 1 if k > i else -1
    for j in range(k + step, len(names) if step > 0 else -1, step):
        if planes[names[j]]:
            return names[j], st.height_mm(ref, names[j])
    return None, None


def _substrate_mm(names, plane, st):
    """Dielectric from an outer plane to the next copper layer: the slotline's substrate."""
    k = names.index(plane)
    nxt = names[1] if k == 0 else names[-2]
    return st.height_mm(plane, nxt) if nxt != plane else None


def find_references(board, nets, settings):
    """For each copper layer: the plane(s) its tracks return in, and which layers carry a plane."""
    planes = plane_layers(board, nets, settings)
    solid = solid_planes(board, nets, planes, settings)
    names = [c.name for c in board.copper]
    st = board.stackup
    out = {}
    for i, name in enumerate(names):
        found = _nearest_planes(names, i, planes, solid, st)
        refs = []
        for r in found:
            h = st.height_mm(name, r)
            other = [o for o in found if o != r]
            oh = st.height_mm(name, other[0]) if other else None
            share = physics.stripline_plane_share(h, oh) if oh is not None else 1.0
            outer = r in (names[0], names[-1])
            er_plane = _er_around(st, r, len(names))
            refs.append(
                Reference(
                    r,
                    h,
                    oh,
                    share,
                    st.er_between(name, r),
                    outer,
                    er_plane,
                    _substrate_mm(names, r, st) if outer else None,
                    *_beyond(names, i, r, planes, st),
                )
            )
        out[name] = refs
    return out, planes


def line_z0(board, layer, width_mm, ref):
    """Impedance of a track over its reference: Hammerstad-Jensen microstrip or the offset
    stripline (physics.offset_stripline_z0; Cohn's exact value when centred)."""
    t = board.stackup.copper_thickness_mm.get(layer, 0.035)
    if ref.other_h_mm is None:
        return physics.microstrip_z0_eeff(width_mm, ref.h_mm, ref.er, t)[0]
    return physics.offset_stripline_z0(width_mm, ref.h_mm, ref.other_h_mm, ref.er)


def footprint_halfwidth(width_mm, ref, fraction):
    if ref.other_h_mm is None:
        return width_mm / 2 + physics.microstrip_k_for_fraction(fraction) * ref.h_mm
    return width_mm / 2 + physics.stripline_halfwidth_for_fraction(
        fraction, ref.h_mm, ref.other_h_mm
    )


def wanted(net, settings):
    """A net the run checks: its class does not say check = false, and it matches --nets (any
    case) when that is given."""
    if not settings.checks_net(net):
        return False
    low = net.lower()
    return not settings.nets or any(fnmatch.fnmatchcase(low, g.lower()) for g in settings.nets)


def direction_at(chain, x, y):
    """Unit direction (dx, dy) of a chain's track at its point nearest (x, y)."""
    s = chain.line.project(shapely.Point(x, y))
    a = chain.line.interpolate(max(0.0, s - 0.05))
    b = chain.line.interpolate(min(chain.line.length, s + 0.05))
    dx, dy = b.x - a.x, b.y - a.y
    n = math.hypot(dx, dy) or 1.0
    return dx / n, dy / n


def nearest_chain(chains, net, x, y, layer=None):
    """The net's track chain nearest (x, y), on `layer` (any layer when None), or None."""
    p = shapely.Point(x, y)
    return min(
        (c for c in chains if c.net == net and (layer is None or c.layer == layer)),
        key=lambda c: c.line.distance(p),
        default=None,
    )


def only_wanted(findings, settings):
    """With --nets, every kind's findings of the nets asked for (any case): a stitching-spacing
    finding, which is of a plane, stays (it was found next to the wanted tracks); a net conflict
    stays when either of its two labels is wanted."""
    if not settings.nets:
        return findings

    def keep(f):
        if f["kind"] == "stitching-spacing":
            return True
        names = f.get("conflicting_nets") or [f["net"]]
        return any(wanted(n, settings) for n in names)

    return [f for f in findings if keep(f)]


def unmatched_globs(nets, settings):
    """The --nets globs that match no routed signal net (said, as a likely typing slip)."""
    routed = {
        n.lower()
        for ln in nets.layers.values()
        for n in set(ln.segment_net)
        if n and nets.is_signal(n)
    }
    return [g for g in settings.nets if not any(fnmatch.fnmatchcase(n, g.lower()) for n in routed)]


def _net_width_groups(segment_net, idx, widths):
    """The segments idx grouped by (net, width rounded to 0.1 um): (the groups' keys in sorted
    order, the segments group after group, each in the order given, and each group's size)."""
    uniq, net_code = net_codes([segment_net[k] for k in idx.tolist()])
    w, w_code = np.unique(np.round(widths, 4), return_inverse=True)
    key = net_code * len(w) + w_code
    order = np.argsort(key, kind="stable")
    found, counts = np.unique(key[order], return_counts=True)
    keys = [(uniq[k // len(w)], float(w[k % len(w)])) for k in found.tolist()]
    return keys, idx[order], counts


def chains(board, nets, refs, settings):
    """Signal-track centre lines merged per (layer, net, width), with a footprint per reference."""
    out = []
    for layer in board.copper:
        if not refs.get(layer.name):
            continue
        ln = nets.layers[layer.name]
        seg = layer.segments
        if not len(seg):
            continue
        fill = ln.segment_fill if ln.segment_fill is not None else np.zeros(len(seg), dtype=bool)
        net_ok = {n: nets.is_signal(n) and wanted(n, settings) for n in set(ln.segment_net)}
        ok = np.fromiter(map(net_ok.__getitem__, ln.segment_net), bool, len(seg))
        fn_ok = {fn: fn not in NON_TRACK_FUNCTIONS for fn in set(layer.segment_function)}
        ok &= np.fromiter(map(fn_ok.__getitem__, layer.segment_function), bool, len(seg))
        # ends snapped to a 10 nm grid so that strokes drawn end to end meet exactly; strokes that
        # shrink to a point there are dropped
        xy = np.round(seg[:, :4], 5)
        ok &= (
            ~np.asarray(fill, dtype=bool)
            & (seg[:, 4] > 0)
            & ((xy[:, 0] != xy[:, 2]) | (xy[:, 1] != xy[:, 3]))
        )
        keys, rows, counts = _net_width_groups(ln.segment_net, np.flatnonzero(ok), seg[ok, 4])
        if not keys:
            continue
        # every (net, width) group, its segments as the parts of one MultiLineString built
        # straight from their coordinates, merged into its longest runs in one vectorised pass
        merged = shapely.line_merge(
            shapely.from_ragged_array(
                shapely.GeometryType.MULTILINESTRING,
                xy[rows].reshape(-1, 2),
                (np.arange(0, 2 * len(rows) + 1, 2), np.r_[0, np.cumsum(counts)]),
            )
        )
        parts, of_group = shapely.get_parts(merged, return_index=True)
        for line, g in zip(parts, of_group.tolist()):
            net, w = keys[g]
            if line.length <= 0:
                continue
            ch = Chain(net, layer.name, w, line, Footprints(line, board.outline))
            for ref in refs[layer.name]:
                ch.footprints.add(ref.layer, footprint_halfwidth(w, ref, settings.current_fraction))
            out.append(ch)
    return out
