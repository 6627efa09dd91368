"""PNG pictures for review tickets: a board overview and one zoomed view per finding.

Palette of our own, picked for contrast and for readers with colour-vision deficiency
(blue / orange / bluish-green / vermilion family, distinguishable in deuteranopia).
"""

import math

import matplotlib

matplotlib.use("Agg")
# glyphs drawn as the font's outlines without hinting: the same look at this size, less time
matplotlib.rcParams["text.hinting"] = "none"
import numpy as np  # noqa: E402
import PIL.Image  # noqa: E402
import shapely  # noqa: E402
import shapely.ops  # noqa: E402
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.patches import PathPatch  # noqa: E402
from matplotlib.path import Path as MPath  # noqa: E402

from returngap.analysis.references import nearest_chain  # noqa: E402
from returngap.geometry.shapes import disjoint_union  # noqa: E402

__all__ = [
    "PLANE",
    "PLANE_EDGE",
    "OTHER_NET",
    "TRACK",
    "FOOTPRINT",
    "GAP",
    "DETOUR",
    "MARK",
    "SHAPE",
    "WIDTH_PX",
    "legend_entries",
    "overview_png",
    "finding_png",
    "area_png",
    "gap_group_box",
]

PLANE = "#c9d6e3"  # reference-plane copper
PLANE_EDGE = "#7f93a8"
OTHER_NET = "#e8dcc0"  # copper of another plane net on the same layer
TRACK = "#1f2a44"
FOOTPRINT = "#56b4e980"  # translucent sky blue
GAP = "#d55e00"  # vermilion: the gap the track crosses
DETOUR = "#009e73"  # bluish green: the detour path
MARK = {"error": "#d55e00", "warning": "#e69f00", "info": "#0072b2"}
SHAPE = {"error": "X", "warning": "^", "info": "o"}  # severity by shape too, not colour alone
WIDTH_PX = 1200


def _path(geom):
    verts, codes = [], []
    for poly in shapely.get_parts(geom):
        if poly.geom_type != "Polygon" or poly.is_empty:
            continue
        for ring in [poly.exterior, *poly.interiors]:
            c = np.asarray(ring.coords)
            if len(c) < 3:
                continue
            verts.extend(c.tolist())
            codes.extend([MPath.MOVETO] + [MPath.LINETO] * (len(c) - 2) + [MPath.CLOSEPOLY])
    return MPath(verts, codes) if verts else None


def _fill(ax, geom, face, edge="none", lw=0.0, z=1):
    p = _path(geom)
    if p is not None:  # an artist, not a patch: the limits are set, so no data-limit walk
        ax.add_artist(PathPatch(p, facecolor=face, edgecolor=edge, linewidth=lw, zorder=z))


def _tracks(ax, chains, window=None, lw=0.5, alpha=0.6):
    """The checked tracks as one collection (one artist, not one per track)."""
    from matplotlib.collections import LineCollection

    lines = [
        np.asarray(ch.line.coords) for ch in chains if window is None or ch.line.intersects(window)
    ]
    if lines:
        ax.add_collection(
            LineCollection(lines, colors=TRACK, linewidths=lw, alpha=alpha, zorder=3),
            autolim=False,
        )


def _scale_bar(ax, x0, x1, y0, y1):
    span = x1 - x0
    raw = span / 5
    bar = 10 ** math.floor(math.log10(raw))
    for m in (5, 2, 1):
        if m * bar <= raw:
            bar *= m
            break
    bx, by = x0 + 0.04 * span, y0 + 0.05 * (y1 - y0)
    ax.plot([bx, bx + bar], [by, by], color="black", lw=3, solid_capstyle="butt", zorder=20)
    ax.text(
        bx + bar / 2,
        by + 0.02 * (y1 - y0),
        f"{bar:g} mm",
        ha="center",
        va="bottom",
        fontsize=9,
        zorder=20,
    )


_CANVAS = []  # this process's one figure, emptied between pictures (see _figure)


def _figure(x0, y0, x1, y1, caption_lines=0):
    """The process's figure, emptied and sized for a view of (x0, y0)-(x1, y1). One figure serves
    every picture: its axes, ticks, fonts and measured texts are built once, which was over half
    of a picture's time when each had a new figure."""
    aspect = (y1 - y0) / max(x1 - x0, 1e-9)
    w_in = WIDTH_PX / 100
    h_in = min(max(w_in * aspect + 0.6 + 0.22 * caption_lines, 3.0), 16.0)
    if not _CANVAS:
        fig = Figure(figsize=(w_in, h_in), dpi=100)
        FigureCanvasAgg(fig)
        ax = fig.add_subplot()
        ax.set_aspect("equal", adjustable="box")
        ax.set_xlabel("x (mm)", fontsize=12)
        ax.set_ylabel("y (mm)", fontsize=12)
        ax.tick_params(labelsize=11)  # readable where the HTML shows the picture 800 px wide
        _CANVAS.append((fig, ax))
    fig, ax = _CANVAS[0]
    _empty(fig, ax)
    fig.set_size_inches(w_in, h_in)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    return fig, ax


def _empty(fig, ax):
    """Everything an earlier picture added to the figure, removed."""
    for extra in fig.axes[1:]:
        extra.set_visible(False)  # the frequency card, kept for the next picture that has one
    for text in list(fig.texts):
        text.remove()
    for art in (*ax.patches, *ax.lines, *ax.collections, *ax.texts, *ax.images, *ax.artists):
        art.remove()
    if ax.get_legend() is not None:
        ax.get_legend().remove()
    ax.set_title("")


def _done(fig):
    """A picture is saved: the figure stays for the next one (tests look at it here)."""


_PLANES = {}  # (result, layer, net) -> (plane, other): a layer's union built once per run


def _layout(fig, caption_in=0.25):
    """Fixed margins in inches (a tight layout measures every text: a third of a picture's time),
    `caption_in` at the bottom for the caption under the axis labels."""
    w, h = fig.get_size_inches()
    fig.subplots_adjust(
        left=0.75 / w, right=1 - 0.2 / w, top=1 - 0.45 / h, bottom=(0.55 + caption_in) / h
    )


def _save(fig, path):
    """PNG of up to 256 colours: the pictures are flat colours and their anti-aliased edges, so a
    palette keeps them as drawn at a third of the size, and encodes in half the time (encoding
    was a fifth of a picture's time)."""
    fig.canvas.draw()
    w, h = fig.canvas.get_width_height()
    image = PIL.Image.frombuffer("RGBA", (w, h), fig.canvas.buffer_rgba(), "raw", "RGBA", 0, 1)
    image.quantize(256, method=PIL.Image.Quantize.FASTOCTREE).save(path, compress_level=3)


def _plane_geoms(result, layer, net=None):
    key = (id(result), layer, net)
    if key not in _PLANES:
        if len(_PLANES) > 16:  # another run's entries
            _PLANES.clear()
        _PLANES[key] = _plane_union(result, layer, net)
    return _PLANES[key]


def _plane_union(result, layer, net=None):
    """(the plane copper of `net`, or of every plane net; the other plane nets' copper) on a
    layer: its islands side by side (islands of one layer never touch, so this is their union,
    with no overlay work)."""
    ln = result.nets.layers[layer]
    ref, other = [], []
    for i, p in ln.islands_of(result.nets.plane_nets):
        n = ln.island_net[i]
        (ref if net is None or n == net else other).append(p)
    return disjoint_union(ref), disjoint_union(other)


def overview_png(result, report, path, layer=None):
    """The whole board: a reference plane's copper (`layer`, else the one with most findings),
    every checked track, and the findings over that plane (all of them without `layer`), numbered
    as in the table; only errors and warnings get a number, the rest a small mark."""
    board = result.board
    x0, y0, x1, y1 = board.outline.bounds
    pad = 0.03 * max(x1 - x0, y1 - y0)
    x0, y0, x1, y1 = x0 - pad, y0 - pad, x1 + pad, y1 + pad
    numbered = list(enumerate(report["findings"], 1))
    layers = [f["reference_layer"] for _, f in numbered if f.get("reference_layer")]
    base = layer or (
        max(set(layers), key=layers.count)
        if layers
        else next((n for n, is_plane in result.planes.items() if is_plane), board.copper[0].name)
    )
    if layer:
        numbered = [(i, f) for i, f in numbered if f.get("reference_layer") == layer]
    fig, ax = _figure(x0, y0, x1, y1)
    _fill(ax, board.outline, "white", edge="#444444", lw=0.8, z=0)
    plane, _ = _plane_geoms(result, base)
    _fill(ax, plane, PLANE, PLANE_EDGE, 0.3, z=1)
    _tracks(ax, result.chains)
    counts = {s: sum(1 for _, f in numbered if f["severity"] == s) for s in MARK}
    ax.set_title(
        f"{report['board']['name']}: plane copper of {base}, {len(numbered)} finding(s) over it "
        f"({counts['error']} error, {counts['warning']} warning, {counts['info']} info)",
        fontsize=13,
    )
    _finish_map(fig, ax, base, numbered, path)


_OFFSETS = [  # label places round a mark, in points: three rings of eight, nearest first
    (round(r * math.cos(a)), round(r * math.sin(a)))
    for r in (14, 28, 42, 56)
    for a in [k * math.pi / 4 + math.pi / 8 for k in range(8)]
]


def _finish_map(fig, ax, layer, numbered, path):
    """A plane map's legend, scale, footer and numbered marks (placed after the layout, in final
    pixels), saved."""
    unlabelled = sum(1 for _, f in numbered if f["severity"] == "info")
    _overview_legend(ax, layer, unlabelled)
    (x0, x1), (y0, y1) = ax.get_xlim(), ax.get_ylim()
    _scale_bar(ax, x0, x1, y0, y1)
    fig.text(0.01, 0.005, "Estimates for review; see the report's assumptions.", fontsize=9)
    _layout(fig)
    _mark_findings(ax, numbered)
    _save(fig, path)
    _done(fig)


def _mark_findings(ax, numbered):
    """Each finding's mark by severity shape (one artist per severity); numbers for errors and
    warnings, each put at the nearest place clear of the marks and numbers already there (in
    pixels), with a leader line."""
    for sev in ("info", "warning", "error"):
        xy = np.array([(f["x_mm"], f["y_mm"]) for _, f in numbered if f["severity"] == sev])
        if len(xy):
            big = sev != "info"
            ax.plot(
                xy[:, 0],
                xy[:, 1],
                ls="none",
                marker=SHAPE[sev],
                ms=10 if big else 5,
                mfc="none",
                mec=MARK[sev],
                mew=2.0 if big else 1.0,
                zorder=10,
            )
    to_px = ax.transData.transform
    scale = ax.figure.dpi / 72.0  # offsets are in points
    placed = [tuple(to_px((f["x_mm"], f["y_mm"]))) for _, f in numbered]  # the marks themselves
    leaders, colours = [], []
    for i, f in sorted(numbered, key=lambda t: ORDER_RANK[t[1]["severity"]]):
        if f["severity"] == "info":
            continue
        px = to_px((f["x_mm"], f["y_mm"]))
        best = _free_place(px, placed, scale)
        at = (px[0] + scale * best[0], px[1] + scale * best[1])
        placed.append(at)
        colour = MARK[f["severity"]]
        ax.text(*at, str(i), transform=None, fontsize=10, color=colour, fontweight="bold",
                ha="center", va="center", zorder=11)  # fmt: skip
        stop = 1 - LABEL_RADIUS_PX / max(math.dist(px, at), LABEL_RADIUS_PX)  # short of the number
        leaders.append([px, (px[0] + stop * (at[0] - px[0]), px[1] + stop * (at[1] - px[1]))])
        colours.append(colour)
    if leaders:  # one artist for every leader line, in pixels
        from matplotlib.collections import LineCollection

        ax.add_collection(
            LineCollection(leaders, colors=colours, linewidths=0.6, transform=None, zorder=11),
            autolim=False,
        )


ORDER_RANK = {"error": 0, "warning": 1, "info": 2}
LABEL_GAP_PX = 24  # a number this near another is taken as overlapping it
LABEL_RADIUS_PX = 8  # a leader line stops this far from its number's centre


def _free_place(px, placed, scale=1.0):
    """The nearest offset (points; `scale` pixels per point) whose label keeps LABEL_GAP_PX from
    every mark and label placed; else the one farthest from them."""
    offsets = np.asarray(_OFFSETS, dtype=float)
    if not placed:
        return _OFFSETS[0]
    at = np.asarray(px, dtype=float) + scale * offsets  # each candidate's place, in pixels
    others = np.asarray(placed, dtype=float)
    room = np.sqrt(((at[:, None, :] - others[None, :, :]) ** 2).sum(axis=2)).min(axis=1)
    clear = np.flatnonzero(room >= LABEL_GAP_PX)
    return _OFFSETS[int(clear[0]) if len(clear) else int(np.argmax(room))]


def _overview_legend(ax, base, unlabelled):
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = [
        Patch(facecolor=PLANE, edgecolor=PLANE_EDGE, label=f"plane copper on {base}"),
        Line2D([], [], color=TRACK, lw=1, label="checked tracks"),
    ]
    for sev in ("error", "warning", "info"):
        note = (
            " (numbered as in the table)"
            if sev != "info"
            else (f" ({unlabelled} unnumbered; see the table)" if unlabelled else "")
        )
        handles.append(
            Line2D(
                [],
                [],
                color=MARK[sev],
                ls="none",
                marker=SHAPE[sev],
                ms=9,
                mfc="none",
                mew=2,
                label=f"{sev}{note}",
            )
        )
    ax.legend(handles=handles, loc="upper right", fontsize=10, framealpha=0.92)


def finding_png(result, finding, number, path, curve=None):
    """Zoomed view of one finding: plane, gap, track, return footprint, detour path and the
    numbers; with a frequency view (curve: f GHz, S21 dB with and without the gap), its insertion
    loss in a small plot in a corner."""
    ref_layer = finding.get("reference_layer") or finding["layer"]
    x, y = finding["x_mm"], finding["y_mm"]
    path_pts = finding.get("detour_path_mm") or []
    for a, b in (("return_x_mm", "return_y_mm"),):
        if finding.get(a) is not None:
            path_pts = [[x, y], [finding[a], finding[b]]]
    if finding.get("from_via_mm"):
        path_pts = [finding["from_via_mm"], finding["to_via_mm"]]
    island = _island(result, finding)
    extra = list(finding.get("run_ends_mm") or [])
    if island is not None:
        ix0, iy0, ix1, iy1 = island.bounds
        extra += [[ix0, iy0], [ix1, iy1]]
    pts = np.asarray(path_pts + extra + [[x, y]], dtype=float)
    r = 3.0 if path_pts or extra else max(3.0, min(0.6 * (finding.get("gap_length_mm") or 0), 15.0))
    x0, y0 = pts.min(axis=0) - r
    x1, y1 = pts.max(axis=0) + r
    if (y1 - y0) < 0.5 * (x1 - x0):  # keep the view from becoming a thin strip
        cy, hh = (y0 + y1) / 2, 0.25 * (x1 - x0)
        y0, y1 = cy - hh, cy + hh
    if (x1 - x0) < 0.8 * (y1 - y0):
        cx, hw = (x0 + x1) / 2, 0.4 * (y1 - y0)
        x0, x1 = cx - hw, cx + hw
    half = (x1 - x0) / 2
    caption = _caption(finding)
    fig, ax = _figure(x0, y0, x1, y1, caption_lines=2)
    window = shapely.box(x0, y0, x1, y1)
    _fill(ax, window.intersection(result.board.outline), "white", edge="#444444", lw=0.8, z=0)
    plane, other = _plane_geoms(result, ref_layer, finding.get("reference_net"))
    # clipped to the view first (a box clip is cheap), so the rest works on the view's copper only
    plane, other = (
        shapely.clip_by_rect(plane, x0, y0, x1, y1),
        shapely.clip_by_rect(other, x0, y0, x1, y1),
    )
    _fill(ax, other, OTHER_NET, PLANE_EDGE, 0.3, z=1)
    _fill(ax, plane, PLANE, PLANE_EDGE, 0.3, z=1)
    gaps = window.intersection(result.board.outline).difference(plane.union(other))
    for g in shapely.get_parts(gaps) if finding["kind"] in GAP_KINDS else []:
        if g.distance(shapely.Point(x, y)) < 1e-3 + 0.5 * half:
            _fill(ax, g, GAP + "55", GAP, 1.6, z=5)  # above the footprint: the crossing shows
    for ch in result.chains:
        if ch.net != finding["net"] or ch.layer != finding["layer"]:
            continue
        if not ch.line.intersects(window):
            continue
        fp = ch.footprints.get(ref_layer)
        if fp is not None:
            _fill(ax, fp[0].intersection(window), FOOTPRINT, "none", 0, z=3)
        c = np.asarray(ch.line.coords)
        ax.plot(
            c[:, 0],
            c[:, 1],
            color=TRACK,
            lw=max(1.5, ch.width_mm * 72 * 10 / (2 * half)),
            zorder=4,
            solid_capstyle="round",
        )
    _kind_extras(ax, result, finding, island, window)
    if path_pts:
        p = np.asarray(path_pts)
        ax.plot(p[:, 0], p[:, 1], color=DETOUR, lw=2.2, ls="--", zorder=6, label="return path")
    sev = finding["severity"]
    ax.plot(x, y, SHAPE[sev], ms=16, mfc="none", mec=MARK[sev], mew=2.5, zorder=7)
    ax.plot(x, y, "o", ms=4, mfc=MARK[sev], mec="none", zorder=8)
    _legend(ax, finding, bool(path_pts))
    what = (
        f"{finding['gap_type']} ({finding['kind']})" if finding.get("gap_type") else finding["kind"]
    )
    over = (
        f" over {finding['reference_net']} on {ref_layer}" if finding.get("reference_net") else ""
    )
    bottom = finding["layer"] == result.board.copper[-1].name and len(result.board.copper) > 1
    ax.set_title(
        f"#{number} {finding['severity'].upper()}  {finding['net']} on "
        f"{finding['layer']}{over}: {what}" + ("  (bottom layer, seen from top)" if bottom else ""),
        fontsize=13,
    )
    _scale_bar(ax, x0, x1, y0, y1)
    _explain(ax, finding, path_pts)
    fig.text(0.01, 0.01, caption, fontsize=11, family="monospace", va="bottom")
    _layout(fig, caption_in=0.75)
    if curve is not None:
        _loss_inset(fig, finding, curve)
    ax.apply_aspect()  # the box the drawing will use: the finding's pixel without drawing twice
    px, py = ax.transData.transform((x, y))
    height = fig.get_size_inches()[1] * fig.dpi
    _save(fig, path)
    _done(fig)
    return float(px), float(
        height - py
    )  # where the finding sits in the picture, pixels from top-left


RUN = "#e69f00"  # amber: an edge run's stretch of track, a floating island's outline
SECOND = "#cc79a7"  # reddish purple: the outline of a layer change's second plane


def _island(result, finding):
    """The floating island of a floating-copper finding (the copper round its point), or None."""
    if finding["kind"] != "floating-copper":
        return None
    ln = result.nets.layers[finding["layer"]]
    p = shapely.Point(finding["x_mm"], finding["y_mm"])
    hits = [int(ln.piece_island[k]) for k in ln.tree.query(p, predicate="intersects")]
    if not hits:
        return None
    return shapely.union_all(ln.island_polygons([hits[0]]))


def _kind_extras(ax, result, f, island, window):
    """What a kind needs drawn beyond the plane and the track: a layer change's second plane (its
    copper's outline, dashed), an edge run's whole stretch, a floating island's outline and the
    other tracks near it."""
    other_layer = f.get("other_reference_layer")
    if f["kind"] == "reference-change" and other_layer:
        second, _ = _plane_geoms(result, other_layer, f.get("other_reference_net"))
        x0, y0, x1, y1 = window.bounds
        near = shapely.clip_by_rect(second, x0 - 1, y0 - 1, x1 + 1, y1 + 1)  # cut a little wider
        edge = shapely.clip_by_rect(shapely.boundary(near), x0, y0, x1, y1)  # so no cut shows
        for part in shapely.get_parts(edge):
            c = np.asarray(part.coords)
            if len(c) > 1:
                ax.plot(c[:, 0], c[:, 1], color=SECOND, lw=1.4, ls=(0, (4, 2)), zorder=5)
    if island is not None:
        _fill(ax, island, RUN + "40", RUN, 2.0, z=6)
        others = [c for c in result.chains if c.net != f["net"] and c.layer == f["layer"]]
        _tracks(ax, others, window, lw=1.0, alpha=0.8)
    ends = f.get("run_ends_mm")
    if ends:
        ch = nearest_chain(result.chains, f["net"], *ends[0], f["layer"])
        if ch is not None:
            line = ch.line
            a, b = sorted(line.project(shapely.Point(q)) for q in ends)
            run = np.asarray(shapely.ops.substring(line, a, b).coords)
            ax.plot(
                run[:, 0],
                run[:, 1],
                color=RUN,
                lw=14,
                alpha=0.55,
                zorder=3.5,
                solid_capstyle="butt",
            )


def _explain(ax, f, path_pts):
    """Words on the drawing where a kind needs them: where a layer change's return crosses (the
    bridging part or stitching via, and how far), the share of a slot's return round its near
    end, the two vias of a stitching gap."""
    box = {"boxstyle": "round,pad=0.3", "fc": "white", "ec": DETOUR, "alpha": 0.9}
    if f["kind"] == "reference-change" and path_pts and f.get("distance_mm") is not None:
        (xa, ya), (xb, yb) = path_pts[0], path_pts[-1]
        what = f.get("bridge_part") or f"{f.get('reference_net')} stitching via"
        ax.annotate(
            f"return crosses at {what}",
            (xb, yb),
            xytext=(10, -18),
            textcoords="offset points",
            fontsize=10,
            bbox=box,
            zorder=12,
        )
        ax.text(
            (xa + xb) / 2,
            (ya + yb) / 2,
            f"{f['distance_mm']:.1f} mm",
            fontsize=10,
            ha="center",
            va="bottom",
            color=DETOUR,
            fontweight="bold",
            zorder=12,
        )
    split = f.get("return_split")
    if split and path_pts:
        far = max(path_pts, key=lambda q: math.dist(q, (f["x_mm"], f["y_mm"])))
        way = split["branch_lengths_mm"]
        ax.annotate(
            f"near end: {split['hf_share_near']:.0%} of the return (high frequency)\n"
            f"far end ({way[1]:.1f} mm way): {1 - split['hf_share_near']:.0%}",
            far,
            xytext=(12, 12),
            textcoords="offset points",
            fontsize=10,
            bbox=box,
            zorder=12,
        )
    if f["kind"] == "stitching-spacing" and path_pts:
        for q in (path_pts[0], path_pts[-1]):
            ax.plot(*q, "o", ms=12, mfc="none", mec=DETOUR, mew=2.0, zorder=12)


def area_png(result, report, box, layer, path, title=None, only=None):
    """A box of one plane layer for a ticket: its plane copper (every plane net), the checked
    tracks, and the report's findings over that plane in the box (only those of `only`, a set of
    ids, where given: a gap's crossings), numbered as in the report."""
    x0, y0, x1, y1 = box
    fig, ax = _figure(x0, y0, x1, y1)
    window = shapely.box(x0, y0, x1, y1)
    _fill(ax, window.intersection(result.board.outline), "white", edge="#444444", lw=0.8, z=0)
    plane, _ = _plane_geoms(result, layer)
    _fill(ax, plane.intersection(window), PLANE, PLANE_EDGE, 0.3, z=1)
    _tracks(ax, result.chains, window, lw=1.0, alpha=1.0)
    numbered = [
        (i, f)
        for i, f in enumerate(report["findings"], 1)
        if f.get("reference_layer") == layer
        and x0 <= f["x_mm"] <= x1
        and y0 <= f["y_mm"] <= y1
        and (only is None or f["id"] in only)
    ]
    ax.set_title(
        title
        or (
            f"{report['board']['name']}: {layer} in ({x0:g}, {y0:g})-({x1:g}, {y1:g}) mm, "
            f"{len(numbered)} finding(s) over it"
        ),
        fontsize=13,
    )
    _finish_map(fig, ax, layer, numbered, path)


def gap_group_box(gap, findings_by_id):
    """The view of a gap a bus crosses: its crossings' points, with room round them."""
    pts = np.array(
        [
            (findings_by_id[c["id"]]["x_mm"], findings_by_id[c["id"]]["y_mm"])
            for c in gap["crossings"]
        ]
    )
    pad = max(3.0, 0.3 * (gap.get("gap_length_mm") or 0.0))
    (x0, y0), (x1, y1) = pts.min(axis=0) - pad, pts.max(axis=0) + pad
    return float(x0), float(y0), float(x1), float(y1)


def legend_entries(finding, has_path):
    """(label, style) of what a finding's picture shows, its severity by shape and word; style is
    ("patch", face, edge) or ("line", colour, line style, marker)."""
    ref = finding.get("reference_net") or "plane"
    out = [
        (
            f"{ref} copper on {finding.get('reference_layer') or finding['layer']}",
            ("patch", PLANE, PLANE_EDGE),
        ),
        (_other_label(finding), ("patch", OTHER_NET, PLANE_EDGE)),
        ("gap (no copper)", ("patch", GAP + "55", GAP)),
        ("no copper: clearances, holes, off the board", ("patch", "white", "#444444")),
    ]
    if finding["kind"] not in GAP_KINDS:
        out = [e for e in out if not e[0].startswith("gap ")]
    if finding["kind"] == "floating-copper":  # no plane on the island's own layer to show
        out = [e for e in out if e[1][1] == "white"]
    footprint = (
        []
        if finding["kind"] == "floating-copper"
        else [("return footprint (where 90 % of the return flows)", ("patch", FOOTPRINT, "none"))]
    )
    out += footprint + [
        (f"track {finding['net']} on {finding['layer']}", ("line", TRACK, "-", "")),
    ]
    if has_path:
        out.append((_path_label(finding), ("line", DETOUR, "--", "")))
    if finding["kind"] == "reference-change" and finding.get("other_reference_layer"):
        second = f"{finding.get('other_reference_net')} on {finding['other_reference_layer']}"
        out.append((f"edge of the second plane, {second}", ("line", SECOND, "--", "")))
    if finding["kind"] == "floating-copper":
        out.append(("the floating island (no connection)", ("patch", RUN + "40", RUN)))
        out.append(("other tracks near it", ("line", TRACK, "-", "")))
    if finding.get("run_ends_mm"):
        out.append(("the run along or off the plane's edge", ("line", RUN, "-", "")))
    sev = finding["severity"]
    out.append((f"{sev}: this finding", ("line", MARK[sev], "none", SHAPE[sev])))
    return out


GAP_KINDS = ("gap-crossing", "edge-run")  # the kinds whose gap is the point of the picture


def _path_label(finding):
    if finding["kind"] == "reference-change":
        where = finding.get("bridge_part") or "the stitching via"
        return f"the return's way to {where}, where it changes plane"
    if finding["kind"] == "stitching-spacing":
        return "the widest gap between neighbouring stitching vias"
    return "return path round the gap"


def _other_label(finding):
    """The other side of a split by name; else any other plane net's copper."""
    sides = finding.get("side_nets") or []
    ref = finding.get("reference_net")
    others = [n for n in sides if n != ref]
    return f"{others[0]} copper (the split's other side)" if others else "other plane net's copper"


def _legend(ax, finding, has_path):
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = []
    for label, style in legend_entries(finding, has_path):
        if style[0] == "patch":
            handles.append(Patch(facecolor=style[1], edgecolor=style[2], label=label))
        else:
            handles.append(
                Line2D(
                    [],
                    [],
                    color=style[1],
                    ls=style[2],
                    marker=style[3] or None,
                    ms=9,
                    mfc="none",
                    mew=2,
                    lw=2,
                    label=label,
                )
            )
    ax.legend(handles=handles, loc="upper left", fontsize=10, framealpha=0.92)


def _loss_inset(fig, finding, curve):
    """The track's S21 over frequency with and without the gap, top right, on a white card. The
    card is made once per figure and its lines given new data (a new one each time was a tenth
    of a picture's time)."""
    f, s21, s21_clear = curve
    ins = _inset(fig)
    clear, with_gap, dip_line = ins.lines
    clear.set_data(f, s21_clear)
    with_gap.set_data(f, s21)
    dip = finding.get("s21_first_dip_GHz")
    dip_line.set_visible(bool(dip))
    if dip:
        dip_line.set_xdata([dip, dip])
        dip_line.set_color(MARK[finding["severity"]])
    ins.set_xlim(float(f.min()), float(f.max()))
    ins.set_ylim(max(-40.0, float(min(s21.min(), s21_clear.min())) - 1.0), 0.5)
    ins.set_visible(True)


def _inset(fig):
    if len(fig.axes) > 1:
        return fig.axes[1]
    ins = fig.add_axes((0.64, 0.60, 0.33, 0.25))
    ins.set_facecolor("white")
    ins.plot([], [], color="#7a7a7a", lw=1.2, ls="--", label="solid plane")
    ins.plot([], [], color=DETOUR, lw=1.6, label="with this gap")
    ins.axvline(0.0, color=MARK["info"], lw=0.8, ls=":")
    ins.set_xlabel("GHz", fontsize=7, labelpad=1)
    ins.set_ylabel("S21 dB (estimate)", fontsize=7, labelpad=1)
    ins.tick_params(labelsize=7, pad=1)
    ins.legend(handles=ins.lines[:2], fontsize=6, loc="lower left", frameon=True)
    ins.grid(True, lw=0.3, alpha=0.5)
    return ins


def _caption(f):
    if f["kind"] != "gap-crossing":
        words = f["message"].split()
        lines, cur = [], ""
        for w in words:
            if len(cur) + len(w) > 120:
                lines.append(cur)
                cur = ""
            cur += (" " if cur else "") + w
        lines.append(cur)
        tail = f"id {f['id']}   estimate, see the report's assumptions"
        return "\n".join(lines[:2] + [tail])
    det = "none in plane (split)" if f.get("detour_mm") is None else f"{f['detour_mm']:.2f} mm"
    lo, hi = f.get("added_inductance_range_nH") or (0, 0)
    res = f.get("resonance_GHz")
    return (
        f"detour {det}   added {f['added_inductance_nH']:.2f} nH ({lo:.2f}-{hi:.2f})   "
        f"resonance {res:.2f} GHz   return interrupted {100 * f['interrupted_fraction']:.0f} %\n"
        f"gap {f['gap_length_mm']:.2f} x {f['gap_width_mm']:.2f} mm at ({f['x_mm']:.2f}, "
        f"{f['y_mm']:.2f}) mm   "
        f"id {f['id']}   estimate, see the report's assumptions"
    )
