"""Copper islands per layer, joined through plated holes into nets.

Net names come from the Gerbers' .N attributes, else from an IPC-D-356 netlist, else
stable generated names. Ground and power follow from names (or the user's lists);
when no net is named like a ground, the net with the most copper is taken as ground.
"""

import fnmatch
import re
from collections import Counter, defaultdict
from dataclasses import dataclass, field

import networkx as nx
import numpy as np
import shapely

GROUND_RE = re.compile(r"^(?:[ADPSCH]?GND\w*|GND\w*|VSS\w*|0V|EARTH|CHASSIS|GROUND\w*|\w*_GND|\w*GND)$", re.I)
POWER_RE = re.compile(r"^(?:\+|-)?(?:V(?:CC|DD|EE|BUS|BAT|IN|IO|REF|CORE|SYS|PP|DDQ|TT)\w*|PWR\w*|POWER\w*|"
                      r"P?\d+V\d*\w*|\d+V|V\d+\w*|\d+\.\d+V\w*)$", re.I)
PLANE_AREA_FRACTION = 0.20  # an island this share of the board acts as a plane (common practice, no source)


def leaf(name):
    """Hierarchical names (/sheet/VDD33, Board_0-GND) are classed by their last part."""
    return re.split(r"[/\\]", name)[-1].split("-")[-1].strip()


@dataclass
class LayerNets:
    name: str
    islands: np.ndarray               # shapely Polygons
    island_net: list                  # net name per island
    tree: shapely.STRtree
    segment_net: list                 # net name per track segment
    flash_net: list
    segment_fill: np.ndarray = None   # True where a segment belongs to a stroke-filled pour

    def net_copper(self, net):
        parts = [p for p, n in zip(self.islands, self.island_net) if n == net]
        return shapely.union_all(parts) if parts else shapely.Polygon()


@dataclass
class Nets:
    layers: dict                      # layer name -> LayerNets
    net_class: dict                   # net -> ground | power | signal
    plane_nets: set
    hole_net: dict                    # (drill file, hole index) -> net
    notes: list = field(default_factory=list)

    def is_signal(self, net):
        return self.net_class.get(net, "signal") == "signal"

    def plated_holes(self, board):
        """(x, y, radius, net, from, to) of every plated round hole whose net is known."""
        out = []
        for d in board.drills:
            if not d.plated:
                continue
            for k, h in enumerate(d.holes):
                net = self.hole_net.get((d.file, k))
                if net:
                    out.append((h[0], h[1], h[2] / 2, net, d.from_layer, d.to_layer))
        return out


def _island_index(layer_islands, tree, xy):
    """Island containing each point; nearest island for points that fall on no copper."""
    if len(xy) == 0:
        return np.zeros(0, dtype=int)
    pts = shapely.points(xy)
    out = np.full(len(xy), -1, dtype=int)
    cand = tree.query(pts)  # bounding boxes, then exact tests on the prepared islands
    if cand.shape[1]:
        ok = shapely.intersects(layer_islands[cand[1]], pts[cand[0]])
        out[cand[0][ok]] = cand[1][ok]
    miss = np.nonzero(out < 0)[0]
    if len(miss):
        near = tree.query_nearest(pts[miss], all_matches=False)
        out[miss[near[0]]] = near[1]
    return out


FILL_OVERLAP = 1.6  # strokes covering an island this many times over are a pour, not tracks


def _fill_segments(layer, islands, seg_isl):
    """Segments of islands drawn as overlapping strokes (Eagle-style pours): their stroke area adds
    up to far more than the island's own area, which single tracks never do."""
    s = layer.segments
    if not len(s) or not len(islands):
        return np.zeros(len(s), dtype=bool)
    stroke = np.hypot(s[:, 2] - s[:, 0], s[:, 3] - s[:, 1]) * s[:, 4]
    per_island = np.bincount(seg_isl, weights=stroke, minlength=len(islands))
    area = shapely.area(islands)
    fill_island = (per_island > FILL_OVERLAP * area) & (area > 2.0)
    return fill_island[seg_isl]


def classify(names, user_cfg):
    cls = {}
    g_globs = user_cfg.get("ground_nets", []) if user_cfg else []
    p_globs = user_cfg.get("power_nets", []) if user_cfg else []
    for n in names:
        if any(fnmatch.fnmatchcase(n, g) for g in g_globs):
            cls[n] = "ground"
        elif any(fnmatch.fnmatchcase(n, g) for g in p_globs):
            cls[n] = "power"
        elif GROUND_RE.match(leaf(n)):
            cls[n] = "ground"
        elif POWER_RE.match(leaf(n)):
            cls[n] = "power"
        else:
            cls[n] = "signal"
    return cls


def build_nets(board, user_cfg=None):
    g = nx.Graph()
    per_layer = {}
    votes = defaultdict(Counter)
    for li, layer in enumerate(board.copper):
        islands = np.array([p for p in shapely.get_parts(layer.geometry) if p.geom_type == "Polygon" and p.area > 0],
                           dtype=object)
        shapely.prepare(islands)  # point-in-island tests below and in later stages
        tree = shapely.STRtree(islands)
        seg_isl = np.zeros(0, dtype=int)
        fl_isl = np.zeros(0, dtype=int)
        if len(islands):
            s = layer.segments
            seg_isl = _island_index(islands, tree, np.column_stack([(s[:, 0] + s[:, 2]) / 2, (s[:, 1] + s[:, 3]) / 2]))
            fl_isl = _island_index(islands, tree, layer.flashes[:, :2])
            reg_xy = np.array([r[0].representative_point().coords[0] for r in layer.regions]).reshape(-1, 2)
            reg_isl = _island_index(islands, tree, reg_xy)
            for isl, net in zip(seg_isl, layer.segment_net):
                if net:
                    votes[(li, isl)][net] += 1
            for isl, net in zip(fl_isl, layer.flash_net):
                if net:
                    votes[(li, isl)][net] += 1
            for isl, (poly, net, _) in zip(reg_isl, layer.regions):
                if net:
                    votes[(li, isl)][net] += 5  # a named pour speaks for its island
        g.add_nodes_from((li, i) for i in range(len(islands)))
        per_layer[layer.name] = (islands, tree, seg_isl, fl_isl)

    hole_nodes = {}
    layer_pos = {l.name: i for i, l in enumerate(board.copper)}
    for drill in board.drills:
        if not drill.plated:
            continue
        geoms = list(shapely.buffer(shapely.points(drill.holes[:, :2]), np.maximum(drill.holes[:, 2] / 2, 0.01)))
        geoms += list(shapely.buffer(shapely.linestrings(
            [[(s[0], s[1]), (s[2], s[3])] for s in drill.slots]) if len(drill.slots) else [], drill.slots[:, 4] / 2
            if len(drill.slots) else 0))
        geoms = np.array(geoms, dtype=object)
        if not len(geoms):
            continue
        hits = defaultdict(list)
        for ln in range(drill.from_layer, drill.to_layer + 1):
            li = layer_pos.get(f"L{ln}")
            if li is None:
                continue
            islands, tree, _, _ = per_layer[f"L{ln}"]
            if not len(islands):
                continue
            q = tree.query(geoms, predicate="intersects")
            for h, isl in zip(q[0], q[1]):
                hits[h].append((li, int(isl)))
        for h, nodes in hits.items():
            hole_nodes[(drill.file, int(h))] = nodes[0]
            for a, b in zip(nodes[:-1], nodes[1:]):
                g.add_edge(a, b)

    for p in board.netlist:
        for li in (0, len(board.copper) - 1):
            islands, tree, _, _ = per_layer[board.copper[li].name]
            if not len(islands):
                continue
            q = tree.query(shapely.Point(p.x, p.y), predicate="intersects")
            for isl in q:
                votes[(li, int(isl))][p.net] += 3

    comps = sorted((sorted(c) for c in nx.connected_components(g)), key=lambda c: c[0])
    node_net = {}
    unnamed = []
    for comp in comps:
        tally = Counter()
        for node in comp:
            tally.update(votes.get(node, {}))
        if tally:
            name = min(tally.items(), key=lambda kv: (-kv[1], kv[0]))[0]
            for node in comp:
                node_net[node] = name
        else:
            unnamed.append(comp)
    # stable generated names: order by the first island's layer and position
    def key(comp):
        li, i = comp[0]
        c = per_layer[board.copper[li].name][0][i].centroid
        return (li, round(c.x, 3), round(c.y, 3))
    for k, comp in enumerate(sorted(unnamed, key=key)):
        for node in comp:
            node_net[node] = f"UNNAMED_{k + 1:04d}"

    layers = {}
    area_by_net = Counter()
    big = set()
    board_area = board.outline.area or 1.0
    for li, layer in enumerate(board.copper):
        islands, tree, seg_isl, fl_isl = per_layer[layer.name]
        inet = [node_net[(li, i)] for i in range(len(islands))]
        for p, n in zip(islands, inet):
            area_by_net[n] += p.area
            if p.area >= PLANE_AREA_FRACTION * board_area:
                big.add(n)
        layers[layer.name] = LayerNets(layer.name, islands, inet, tree,
                                       [inet[i] for i in seg_isl], [inet[i] for i in fl_isl],
                                       _fill_segments(layer, islands, seg_isl))
    net_class = classify(sorted(set(node_net.values())), user_cfg)
    notes = []
    if not any(c == "ground" for c in net_class.values()) and area_by_net:
        gnd = max(area_by_net.items(), key=lambda kv: (kv[1], kv[0]))[0]
        net_class[gnd] = "ground"
        notes.append(f"no net is named like a ground: {gnd}, the net with the most copper "
                     f"({area_by_net[gnd]:.0f} mm2), is taken as ground")
    for n in sorted(big):
        if net_class[n] == "signal":
            net_class[n] = "power"
            notes.append(f"net {n} has a plane-sized island (>= {PLANE_AREA_FRACTION:.0%} of the board) "
                         "and is treated as a power plane")
    plane_nets = {n for n, c in net_class.items() if c in ("ground", "power")}
    hole_net = {k: node_net[v] for k, v in hole_nodes.items()}
    for note in notes:
        board.assume(note)
    return Nets(layers, net_class, plane_nets, hole_net, notes)
