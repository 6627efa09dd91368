"""PNG pictures for review tickets: a board overview and one zoomed view per finding.

Palette of our own, picked for contrast and for readers with colour-vision deficiency
(blue / orange / bluish-green / vermilion family, distinguishable in deuteranopia).
"""

import math

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import shapely  # noqa: E402
from matplotlib.patches import PathPatch  # noqa: E402
from matplotlib.path import Path as MPath  # noqa: E402

__all__ = [
    "PLANE",
    "PLANE_EDGE",
    "OTHER_NET",
    "TRACK",
    "FOOTPRINT",
    "GAP",
    "DETOUR",
    "MARK",
    "WIDTH_PX",
    "overview_png",
    "finding_png",
]

PLANE = "#c9d6e3"  # reference-plane copper
PLANE_EDGE = "#7f93a8"
OTHER_NET = "#e8dcc0"  # copper of another plane net on the same layer
TRACK = "#1f2a44"
FOOTPRINT = "#56b4e980"  # translucent sky blue
GAP = "#d55e00"  # vermilion: the gap the track crosses
DETOUR = "#009e73"  # bluish green: the detour path
MARK = {"error": "#d55e00", "warning": "#e69f00", "info": "#0072b2"}
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
    if p is not None:
        ax.add_patch(PathPatch(p, facecolor=face, edgecolor=edge, linewidth=lw, zorder=z))


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


def _figure(x0, y0, x1, y1, caption_lines=0):
    aspect = (y1 - y0) / max(x1 - x0, 1e-9)
    w_in = WIDTH_PX / 100
    h_in = min(max(w_in * aspect + 0.6 + 0.22 * caption_lines, 3.0), 16.0)
    fig, ax = plt.subplots(figsize=(w_in, h_in), dpi=100)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("x (mm)")
    ax.set_ylabel("y (mm)")
    ax.tick_params(labelsize=8)
    return fig, ax


def _plane_geoms(result, layer, net=None):
    ln = result.nets.layers[layer]
    ref, other = [], []
    for i, p in ln.islands_of(result.nets.plane_nets):
        n = ln.island_net[i]
        (ref if net is None or n == net else other).append(p)
    return shapely.union_all(ref) if ref else shapely.Polygon(), shapely.union_all(
        other
    ) if other else shapely.Polygon()


def overview_png(result, report, path):
    """The whole board: the reference plane with most findings, every checked track, findings
    numbered."""
    board = result.board
    x0, y0, x1, y1 = board.outline.bounds
    pad = 0.03 * max(x1 - x0, y1 - y0)
    x0, y0, x1, y1 = x0 - pad, y0 - pad, x1 + pad, y1 + pad
    findings = report["findings"]
    layers = [f["reference_layer"] for f in findings if f.get("reference_layer")]
    base = (
        max(set(layers), key=layers.count)
        if layers
        else next(
            (name for name, is_plane in result.planes.items() if is_plane), board.copper[0].name
        )
    )
    fig, ax = _figure(x0, y0, x1, y1)
    _fill(ax, board.outline, "white", edge="#444444", lw=0.8, z=0)
    plane, other = _plane_geoms(result, base)
    _fill(ax, plane, PLANE, PLANE_EDGE, 0.3, z=1)
    for ch in result.chains:
        c = np.asarray(ch.line.coords)
        ax.plot(c[:, 0], c[:, 1], color=TRACK, lw=0.5, alpha=0.6, zorder=3)
    for i, f in enumerate(findings, 1):
        col = MARK[f["severity"]]
        ax.plot(f["x_mm"], f["y_mm"], "o", ms=9, mfc="none", mec=col, mew=2.0, zorder=10)
        ax.annotate(
            str(i),
            (f["x_mm"], f["y_mm"]),
            xytext=(6, 6),
            textcoords="offset points",
            fontsize=8,
            color=col,
            fontweight="bold",
            zorder=11,
        )
    s = report["summary"]
    ax.set_title(
        f"{report['board']['name']}: plane copper of {base}, {s['tracks_checked']} checked tracks, "
        f"{s['findings']} findings ({s['error']} error, {s['warning']} warning, {s['info']} info)",
        fontsize=10,
    )
    _scale_bar(ax, x0, x1, y0, y1)
    fig.text(
        0.01,
        0.005,
        "Estimates for review only; see the report's disclaimer.",
        fontsize=7,
        color="#555555",
    )
    fig.tight_layout()
    fig.savefig(path, dpi=100)
    plt.close(fig)


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
    pts = np.asarray(path_pts + [[x, y]], dtype=float)
    r = 3.0 if path_pts else max(3.0, min(0.6 * (finding.get("gap_length_mm") or 0), 15.0))
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
    plane, other = plane.intersection(window), other.intersection(window)
    _fill(ax, other, OTHER_NET, PLANE_EDGE, 0.3, z=1)
    _fill(ax, plane, PLANE, PLANE_EDGE, 0.3, z=1)
    gaps = window.intersection(result.board.outline).difference(plane.union(other))
    for g in shapely.get_parts(gaps):
        if g.distance(shapely.Point(x, y)) < 1e-3 + 0.5 * half:
            _fill(ax, g, GAP + "55", GAP, 1.2, z=2)
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
    if path_pts:
        p = np.asarray(path_pts)
        ax.plot(p[:, 0], p[:, 1], color=DETOUR, lw=2.2, ls="--", zorder=6, label="return path")
    ax.plot(x, y, "o", ms=14, mfc="none", mec=MARK[finding["severity"]], mew=2.5, zorder=7)
    ax.plot(x, y, "o", ms=5, mfc=MARK[finding["severity"]], mec="none", zorder=8)
    what = (
        f"{finding['gap_type']} ({finding['kind']})" if finding.get("gap_type") else finding["kind"]
    )
    over = (
        f" over {finding['reference_net']} on {ref_layer}" if finding.get("reference_net") else ""
    )
    ax.set_title(
        f"#{number} {finding['severity'].upper()}  {finding['net']} on "
        f"{finding['layer']}{over}: {what}",
        fontsize=10,
    )
    _scale_bar(ax, x0, x1, y0, y1)
    fig.text(0.01, 0.01, caption, fontsize=9, family="monospace", va="bottom")
    fig.tight_layout(rect=(0, 0.07, 1, 1))
    if curve is not None:
        _loss_inset(fig, finding, curve)
    ax.apply_aspect()  # the box the drawing will use: the finding's pixel without drawing twice
    px, py = ax.transData.transform((x, y))
    height = fig.get_size_inches()[1] * fig.dpi
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return float(px), float(
        height - py
    )  # where the finding sits in the picture, pixels from top-left


def _loss_inset(fig, finding, curve):
    """The track's S21 over frequency with and without the gap, top right, on a white card."""
    f, s21, s21_clear = curve
    ins = fig.add_axes((0.64, 0.60, 0.33, 0.25))
    ins.set_facecolor("white")
    ins.plot(f, s21_clear, color="#7a7a7a", lw=1.2, ls="--", label="solid plane")
    ins.plot(f, s21, color=DETOUR, lw=1.6, label="with this gap")
    dip = finding.get("s21_first_dip_GHz")
    if dip:
        ins.axvline(dip, color=MARK[finding["severity"]], lw=0.8, ls=":")
    ins.set_xlabel("GHz", fontsize=7, labelpad=1)
    ins.set_ylabel("S21 dB (estimate)", fontsize=7, labelpad=1)
    ins.tick_params(labelsize=7, pad=1)
    ins.set_ylim(max(-40.0, float(min(s21.min(), s21_clear.min())) - 1.0), 0.5)
    ins.legend(fontsize=6, loc="lower left", frameon=True)
    ins.grid(True, lw=0.3, alpha=0.5)


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
        return "\n".join(lines[:2]) + f"   id {f['id']}   estimates, not measurements"
    det = "none in plane (split)" if f.get("detour_mm") is None else f"{f['detour_mm']:.2f} mm"
    lo, hi = f.get("added_inductance_range_nH") or (0, 0)
    res = f.get("resonance_GHz")
    return (
        f"detour {det}   added {f['added_inductance_nH']:.2f} nH ({lo:.2f}-{hi:.2f})   "
        f"resonance {res:.2f} GHz   return interrupted {100 * f['interrupted_fraction']:.0f} %\n"
        f"gap {f['gap_length_mm']:.2f} x {f['gap_width_mm']:.2f} mm at ({f['x_mm']:.2f}, "
        f"{f['y_mm']:.2f}) mm   "
        f"id {f['id']}   estimates, not measurements"
    )
