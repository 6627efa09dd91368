"""Copper Gerber files -> copper layers: gerbonara's parse with every failure as one line naming
the file and line, checks gerbonara does not make, and the copper geometry in mm."""

import functools
import re
import warnings

import numpy as np
import shapely
from gerbonara import GerberFile
from gerbonara import graphic_objects as go
from gerbonara.apertures import CircleAperture
from gerbonara.utils import Inch

from returngap.errors import InputError
from returngap.geometry import shapes
from returngap.io import compat
from returngap.model.board import CopperLayer

__all__ = [
    "arc_points_mm",
    "UNESCAPE_RE",
    "unescape_net",
    "FS_RE",
    "MAX_EXTENT_MM",
    "lint_gerber",
    "check_extent",
    "truncation",
    "parse_gerber",
    "build_layer",
    "resolve_pieces",
]

compat.apply()


UNESCAPE_RE = re.compile(r"\\u([0-9A-Fa-f]{4})")


def unescape_net(name):
    """Gerber attribute values escape special characters as \\uXXXX."""
    if "\\u" not in name:
        return name.strip()
    return UNESCAPE_RE.sub(lambda m: chr(int(m.group(1), 16)), name).strip()


FS_RE = re.compile(r"%FS[LTD]?[AI]?X(\d)(\d)Y(\d)(\d)")


MAX_EXTENT_MM = 5000.0  # nothing on a board lies 5 m from the origin


def _line_of(text, pos):
    return text.count("\n", 0, pos) + 1


def lint_gerber(fab, text, notes):
    """Checks gerbonara does not make: format, unit switches, unclosed regions. Errors or stated
    recoveries."""
    m = FS_RE.search(text)
    if m:
        xi, xd, yi, yd = map(int, m.groups())
        if not (1 <= xi <= 7 and 1 <= xd <= 7 and 1 <= yi <= 7 and 1 <= yd <= 7):
            raise InputError(
                fab.name,
                f"coordinate format {xi}.{xd} / {yi}.{yd} is outside what the Gerber format "
                "allows (at most 7 integer and 7 decimal digits)",
                _line_of(text, m.start()),
            )
    units = [(u.group(1), u.start()) for u in re.finditer(r"%MO(MM|IN)\*%", text)]
    if len({u for u, _ in units}) > 1:
        raise InputError(
            fab.name,
            "changes units in the middle of the file (%MO given twice with different units)",
            _line_of(text, units[1][1]),
        )
    opens = [g.start() for g in re.finditer(r"G36\*", text)]
    closes = len(re.findall(r"G37\*", text))
    if len(opens) > closes:
        notes.append(
            f"{fab.name}: a region opened at line {_line_of(text, opens[-1])} is never closed "
            "(no G37); "
            "it is left out"
        )
    if m:
        digits = max(xi + xd, yi + yd)
        long = re.search(rf"[XY][+-]?(\d{{{digits + 1},}})", text)
        if long:
            notes.append(
                f"{fab.name}: coordinates carry more digits than %FS declares (line "
                f"{_line_of(text, long.start())}); read with the declared decimals"
            )


def check_extent(fab, layer):
    if layer.bounds is None:
        return
    x0, y0, x1, y1 = layer.bounds
    if max(abs(x0), abs(y0), abs(x1), abs(y1)) > MAX_EXTENT_MM:
        raise InputError(
            fab.name,
            f"coordinates reach {max(abs(x0), abs(y0), abs(x1), abs(y1)) / 1000:.0f} m from "
            "the origin; the number format or the data is wrong",
        )


def truncation(text):
    """(message, line) when a Gerber file is cut off: no M02 and an open region or a last command
    without its closing '*'; None otherwise (no M02 alone is a stated recovery)."""
    if re.search(r"M0?2\*", text):
        return None
    body = text.rstrip()
    if not body:
        return None
    last = _line_of(text, len(body) - 1)
    if body[-1] not in "*%":
        return (
            "truncated: no M02 end-of-file marker and the last command is cut off "
            f"({body[-20:]!r})",
            last,
        )
    if len(re.findall(r"G36\*", text)) > len(re.findall(r"G37\*", text)):
        return "truncated: no M02 end-of-file marker and a region is never closed", last
    return None


def parse_gerber(fab, text, notes):
    """gerbonara parse with every failure turned into one line naming file and line."""
    lint_gerber(fab, text, notes)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            g = GerberFile.from_string(text, filename=fab.name)
        except RecursionError:
            raise InputError(fab.name, "nesting too deep to read") from None
        except Exception as e:
            msg = str(e)
            m = re.match(r".*?:(\d+) \"(.*?)\": (.*)", msg, re.S)
            if m:
                raise InputError(
                    fab.name, f"{m.group(3)} (at {m.group(2)[:40]!r})", int(m.group(1))
                ) from None
            raise InputError(
                fab.name, f"cannot read as Gerber ({type(e).__name__}: {msg[:120]})"
            ) from None
    for w in caught:
        if "missing mandatory M02" in str(w.message):
            notes.append(
                f"{fab.name}: no M02 end-of-file marker, the file may be truncated; read what "
                "is there"
            )
            break
    unknown = sum(1 for w in caught if "Unknown statement" in str(w.message))
    if unknown:
        notes.append(f"{fab.name}: {unknown} unrecognised statement(s) skipped")
    return g


def _attr_net(attrs):
    if not isinstance(attrs, dict):
        return None
    v = attrs.get(".N")
    if not v:
        return None
    name = unescape_net(v[0])
    return name or None


def _aper_function(obj):
    a = getattr(obj, "aperture", None)
    for k, v in getattr(a, "attrs", None) or ():
        if k == ".AperFunction":
            return v[0] if v else None
    return None


def build_layer(fab, g, role, outline, tol):
    """Copper geometry and drawn objects of one copper layer, in mm."""
    layer = CopperLayer(
        name=f"L{role.number}",
        file=fab.name,
        side=role.side,
        polarity=role.polarity,
        type_hint=role.type_hint,
        identified_by=role.source,
    )
    b = _LayerBuilder(layer, tol)
    Line, Arc, Flash, Region = go.Line, go.Arc, go.Flash, go.Region
    net_of = {}  # .N value -> net name
    dark_now, unit_now, k = None, None, 1.0  # what the object before had (most objects repeat it)
    for obj in g.objects:
        kind = type(obj)
        if kind is not Line and kind is not Flash and kind is not Arc and kind is not Region:
            kind = next((c for c in (Line, Arc, Flash, Region) if isinstance(obj, c)), kind)
        if kind is not Region and getattr(obj, "aperture", None) is None:
            layer.skipped_objects += 1  # drawn before any aperture was selected
            continue
        dark = bool(obj.polarity_dark)
        if dark is not dark_now:
            b.polarity(dark)
            dark_now = dark
        if obj.unit is not unit_now:  # gerbonara's unit comparison is slow: once per change
            unit_now = obj.unit
            k = 25.4 if unit_now == Inch else 1.0
        attrs = getattr(obj, "attrs", None)
        net = _net(attrs, net_of)
        if kind is Line:
            b.line(obj, k, net, dark)
        elif kind is Arc:
            b.stroke(obj, True, k, net, dark)
        elif kind is Flash:
            b.flash(obj, k, net, dark, attrs)
        elif kind is Region:
            b.region(obj, k, net, dark)
    b.finish(outline if role.polarity == "negative" else None)
    return layer


def arc_points_mm(arc, k, tol):
    """Points along a gerbonara Arc in mm (k: mm per file unit), within the chord tolerance."""
    c = arc.center
    x1, y1, x2, y2 = arc.x1 * k, arc.y1 * k, arc.x2 * k, arc.y2 * k
    return shapes.arc_points(x1, y1, x2, y2, c[0] * k, c[1] * k, arc.clockwise, tol)


def _net(attrs, net_of):
    """The net name an object's .N attribute gives (cached per attribute value), or None."""
    v = attrs.get(".N") if isinstance(attrs, dict) else None
    if not v:
        return None
    net = net_of.get(v)
    if net is None:
        net = net_of[v] = _attr_net(attrs) or ""
    return net or None


class _LayerBuilder:
    """One layer's drawn objects in file order: the copper pieces of each polarity run (round
    strokes and flashes batched per run), and the dark strokes, flashes and regions that later
    stages need."""

    def __init__(self, layer, tol):
        self.layer, self.tol = layer, tol
        self.aps = shapes.ApertureShapes(tol)
        self.segs, self.seg_net, self.seg_fn = [], [], []
        self.flashes, self.fl_net, self.fl_fn, self.fl_part = [], [], [], []
        self.runs = []  # [(dark, [pieces])]
        self.round_lines = []  # pending (coords, radius) of the current run, buffered together
        self.round_where = []  # [run, position] of each pending round line's piece, set at flush
        self.seg_where = []  # per dark segment, the [run, position] of the piece its stroke drew
        self.flash_at = []  # pending (shape, x, y) of the current run, placed together
        self.ap_info = {}  # id(aperture) -> (width, round, function); apertures outlive the loop
        self.quad_segs_of = functools.cache(lambda r: shapes.quad_segs_for(float(r), tol))

    def polarity(self, dark):
        if not self.runs or self.runs[-1][0] != dark:
            if self.runs:
                self.flush()
            self.runs.append((dark, []))

    def flush(self):
        pieces = self.runs[-1][1]
        if self.flash_at:
            at = self.flash_at
            pieces.extend(shapes.place_all([b for b, _, _ in at], [(x, y) for _, x, y in at]))
            at.clear()
        for j, where in enumerate(self.round_where):  # the round lines go in after the flashes
            where[1] = len(pieces) + j
        self.round_where.clear()
        if self.round_lines:
            rl = self.round_lines
            counts = [len(c) for c, _ in rl]
            lines = shapely.linestrings(
                [p for c, _ in rl for p in c], indices=np.repeat(np.arange(len(rl)), counts)
            )
            radii = np.array([r for _, r in rl])
            # each stroke as finely as its own radius needs: a thin one batched with a wide one
            # would otherwise get the wide one's many segments at every bend
            qs = np.array([self.quad_segs_of(r) for r in radii])
            out = np.empty(len(radii), dtype=object)
            for q in np.unique(qs):
                at = np.flatnonzero(qs == q)
                out[at] = shapely.buffer(lines[at], radii[at], quad_segs=int(q))
            pieces.extend(out)
            rl.clear()

    def _aperture(self, obj):
        info = self.ap_info.get(id(obj.aperture))
        if info is None:  # once per aperture, not per stroke
            ap = obj.aperture
            info = self.ap_info[id(ap)] = (
                shapes.aperture_width_mm(ap),
                isinstance(ap, CircleAperture),
                _aper_function(obj),
            )
        return info

    def line(self, obj, k, net, dark):
        """A straight stroke (nearly all strokes): stroke() without its list of points, where its
        aperture is round and it has length."""
        w, round_ap, fn = self._aperture(obj)
        xa, ya, xb, yb = obj.x1 * k, obj.y1 * k, obj.x2 * k, obj.y2 * k
        if not (round_ap and w > 0) or (xa == xb and ya == yb):
            return self.stroke(obj, False, k, net, dark)
        where = self._round_polyline(((xa, ya), (xb, yb)), w / 2)
        if dark:
            self._dark_segment(xa, ya, xb, yb, w, net, fn, where)

    def stroke(self, obj, arc, k, net, dark):
        if arc:
            pts = arc_points_mm(obj, k, self.tol)
        else:
            pts = [(obj.x1 * k, obj.y1 * k), (obj.x2 * k, obj.y2 * k)]
        w, round_ap, fn = self._aperture(obj)
        pieces = self.runs[-1][1]
        if round_ap and w > 0 and not (pts[0] == pts[-1] and len(pts) == 2):
            where = self._round_polyline(pts, w / 2)
        else:
            where = [len(self.runs) - 1, len(pieces)]
            if round_ap and w > 0:  # a dot
                r = w / 2
                pieces.append(
                    shapely.Point(pts[0]).buffer(r, quad_segs=shapes.quad_segs_for(r, self.tol))
                )
            else:
                pieces.append(shapes.stroke_shape(pts, obj.aperture, self.aps, self.tol))
        if dark:
            for (xa, ya), (xb, yb) in zip(pts[:-1], pts[1:]):
                self._dark_segment(xa, ya, xb, yb, w, net, fn, where)

    def _round_polyline(self, pts, r):
        """Where a round stroke through pts went: onto the polyline it continues (one polyline,
        one buffer), else into a new one, placed when the run is flushed."""
        rl = self.round_lines
        if rl and rl[-1][1] == r and rl[-1][0][-1] == pts[0]:
            rl[-1][0].extend(pts[1:])
            return self.round_where[-1]
        rl.append((list(pts), r))
        where = [len(self.runs) - 1, None]
        self.round_where.append(where)
        return where

    def _dark_segment(self, xa, ya, xb, yb, w, net, fn, where):
        self.segs.append((xa, ya, xb, yb, w))
        self.seg_net.append(net)
        self.seg_fn.append(fn)
        self.seg_where.append(where)

    def flash(self, obj, k, net, dark, attrs):
        base = self.aps.shape(obj.aperture)
        x, y = obj.x * k, obj.y * k
        self.flash_at.append((base, x, y))
        if dark:
            b = base.bounds
            self.flashes.append((x, y, max(b[2] - b[0], b[3] - b[1]) if not base.is_empty else 0.0))
            self.fl_net.append(net)
            self.fl_fn.append(_aper_function(obj))
            p = attrs.get(".P") if isinstance(attrs, dict) else None
            self.fl_part.append((p[0], p[1] if len(p) > 1 else "") if p else None)

    def region(self, obj, k, net, dark):
        ring = shapes.ring_points(obj.outline, obj.arc_centers or [], self.tol, k)
        raw = shapes.ring_polygon(ring) if len(ring) >= 3 else None
        poly = shapes.polygon_from_points(ring, raw)
        if len(ring) > 3 and poly is not raw and not _only_touches(raw):
            self.layer.repaired_regions += 1
        self.runs[-1][1].append(poly)
        if dark and not poly.is_empty:
            self.layer.regions.append((poly, net, None))

    def finish(self, negative_in):
        if self.runs:
            self.flush()
        layer = self.layer
        layer.pieces, kept_at = resolve_pieces(self.runs, negative_in)
        where = np.array(self.seg_where, dtype=int).reshape(-1, 2)
        start = np.cumsum([0] + [len(p) for _, p in self.runs])  # each run's first position
        layer.segment_piece = (
            kept_at[start[where[:, 0]] + where[:, 1]] if len(where) else where[:, 0]
        )
        layer.segments = np.array(self.segs, dtype=float).reshape(-1, 5)
        layer.segment_net, layer.segment_function = self.seg_net, self.seg_fn
        layer.flashes = np.array(self.flashes, dtype=float).reshape(-1, 3)
        layer.flash_net, layer.flash_function, layer.flash_part = (
            self.fl_net,
            self.fl_fn,
            self.fl_part,
        )


def resolve_pieces(runs, negative_in=None):
    """Copper pieces from polarity runs in file order: runs up to the last clear one are resolved
    (union, difference) because clears cut what came before; later dark objects stay as drawn.
    A negative layer is the profile minus everything drawn, so all of it is resolved. Returns
    (pieces, the piece that each object of the runs, counted through all runs in order, became:
    -1 where it was resolved into others, dropped or split)."""
    last_clear = max((k for k, (dark, _) in enumerate(runs) if not dark), default=-1)
    if negative_in is not None:
        last_clear = len(runs) - 1
    acc = shapely.Polygon()
    for dark, pieces in runs[: last_clear + 1]:
        run = shapes.merge_pieces(pieces)
        if run.is_empty:
            continue
        acc = acc.union(run) if dark else acc.difference(run)
    if negative_in is not None:
        acc = negative_in.difference(acc)
    if not acc.is_valid:
        acc = shapely.make_valid(acc)
    out = [p for p in shapely.get_parts(acc) if p.geom_type == "Polygon" and p.area > 0]
    kept_at = [-1] * sum(len(p) for _, p in runs[: last_clear + 1])
    for _, pieces in runs[last_clear + 1 :]:
        # buffers, placed aperture shapes and repaired regions: valid as built
        for p in pieces:  # flashes of macro apertures can be multi-part
            if p is None:
                kept_at.append(-1)
            elif p.geom_type == "Polygon":
                kept_at.append(len(out) if p.area > 0 else -1)
                if p.area > 0:
                    out.append(p)
            else:
                kept_at.append(-1)
                out.extend(
                    q for q in shapely.get_parts(p) if q.geom_type == "Polygon" and q.area > 0
                )
    return np.array(out, dtype=object), np.array(kept_at, dtype=int)


def _only_touches(raw):
    """A cut-in region touches itself along a seam ("Ring Self-intersection" in GEOS terms); that is
    allowed and not worth a note. Edges that cross ("Self-intersection") are. raw: the region's
    polygon as drawn."""
    reason = shapely.is_valid_reason(raw)
    return not reason.startswith("Self-intersection")
