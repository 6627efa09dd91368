"""Fabrication files -> board model: layer roles, copper geometry, drills, outline, netlist.

Layer roles, in this order of trust: the Gerber's own X2 attributes (%TF or G04 #@! TF),
the Gerber job file's FilesAttributes, the user's mapping in the stackup file, then
gerbonara's file-name recognition. Disagreements are reported as assumptions.
"""

import functools
import json
import re
import warnings
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import numpy as np
import shapely
from gerbonara import ExcellonFile, GerberFile
from gerbonara import graphic_objects as go
from gerbonara.apertures import CircleAperture
from gerbonara.cam import FileSettings
from gerbonara.layers import _best_match
from gerbonara.utils import MM, Inch

from returngap.errors import InputError
from returngap.geometry import shapes
from returngap.io import compat, drillspans, outline
from returngap.io.inputs import BoardFiles
from returngap.model.board import Board, CopperLayer, DrillFile, NetPoint, Problem
from returngap.model.runner import SERIAL

__all__ = [
    "X2_FUNC_RE",
    "X2_POL_RE",
    "UNESCAPE_RE",
    "unescape_net",
    "Role",
    "role_from_function",
    "role_from_user",
    "role_from_name",
    "read_text",
    "parse_job_file",
    "job_file_roles",
    "NameRoles",
    "identify",
    "number_copper",
    "FS_RE",
    "MAX_EXTENT_MM",
    "lint_gerber",
    "check_extent",
    "truncation",
    "parse_gerber",
    "build_layer",
    "resolve_pieces",
    "EXCELLON_CANDIDATES",
    "parse_drill",
    "TA_TOOL_RE",
    "tool_attributes",
    "build_drill",
    "IPC_UNITS",
    "parse_netlist",
    "BROKEN_REASONS",
    "OUTLINE_NAME_RE",
    "MECHANICAL_NAME_RE",
    "pick_outline",
    "drill_span",
    "load_board",
]

compat.apply()

X2_FUNC_RE = re.compile(r"(?:%TF|G04 #@! TF|; #@! TF)\.FileFunction,([^*%\r\n]*)")
X2_POL_RE = re.compile(r"(?:%TF|G04 #@! TF|; #@! TF)\.FilePolarity,(\w+)")
UNESCAPE_RE = re.compile(r"\\u([0-9A-Fa-f]{4})")


def unescape_net(name):
    """Gerber attribute values escape special characters as \\uXXXX."""
    if "\\u" not in name:
        return name.strip()
    return UNESCAPE_RE.sub(lambda m: chr(int(m.group(1), 16)), name).strip()


@dataclass
class Role:
    kind: str  # copper | profile | drill | other
    number: int | None = None  # copper: 1-based from the top, when the source gives it
    order_key: float | None = None
    side: str | None = None
    polarity: str = "positive"
    type_hint: str | None = None
    plated: bool | None = None
    span: tuple | None = None
    source: str = ""
    label: str = ""


def role_from_function(func, polarity=None, source=""):
    """Role from a .FileFunction value (X2 file attribute or job-file entry)."""
    f = [p.strip() for p in func.split(",")]
    pol = (polarity or "positive").lower()
    head = f[0].lower()
    if head == "copper" and len(f) >= 3 and re.fullmatch(r"L\d+", f[1]):
        side = {"top": "top", "inr": "inner", "bot": "bottom"}.get(f[2].lower(), "inner")
        return Role(
            "copper",
            number=int(f[1][1:]),
            side=side,
            polarity=pol,
            type_hint=f[3] if len(f) > 3 else None,
            source=source,
            label=func,
        )
    if head in ("plated", "nonplated", "mixedplating"):
        span = None
        if len(f) >= 3 and f[1].isdigit() and f[2].isdigit():
            span = (int(f[1]), int(f[2]))
        # MixedPlating: plated and non-plated holes in one file, told apart per tool
        plated = {"plated": True, "nonplated": False}.get(head)
        return Role("drill", plated=plated, span=span, source=source, label=func)
    if head in ("profile", "keepout"):
        return Role("profile", source=source, label=func)
    return Role("other", source=source, label=func)


def role_from_user(value, source="stackup file"):
    v = str(value).strip()
    low = v.lower()
    if re.fullmatch(r"l\d+", low):
        return Role("copper", number=int(low[1:]), source=source, label=v)
    if low in ("profile", "outline"):
        return Role("profile", source=source, label=v)
    if low.startswith("drill"):
        plated = (
            None if low in ("drill", "drill:unknown") else not ("npth" in low or "nonplated" in low)
        )
        m = re.search(r"(\d+)-(\d+)", low)
        return Role(
            "drill",
            plated=plated,
            span=(int(m.group(1)), int(m.group(2))) if m else None,
            source=source,
            label=v,
        )
    if low in ("ignore", "other"):
        return Role("other", source=source, label=v)
    raise InputError(
        source,
        f"unknown layer role {value!r} (use L<n>, profile, drill, drill:npth, drill:<a>-<b>, "
        "ignore)",
    )


def role_from_name(key):
    """Role from gerbonara's file-name recognition key, e.g. 'inner_2 copper'."""
    side, _, use = key.partition(" ")
    if use == "copper":
        if side == "top":
            return Role("copper", order_key=0, side="top", source="file name", label=key)
        if side == "bottom":
            return Role("copper", order_key=1e9, side="bottom", source="file name", label=key)
        m = re.match(r"inner_(\d+)", side)
        return Role(
            "copper",
            order_key=int(m.group(1)) if m else 5e8,
            side="inner",
            source="file name",
            label=key,
        )
    if use == "outline":
        return Role("profile", source="file name", label=key)
    if side == "drill":
        plated = {"plated": True, "nonplated": False}.get(use)
        return Role("drill", plated=plated, source="file name", label=key)
    return Role("other", source="file name", label=key)


def read_text(fab):
    try:
        return fab.path.read_bytes().decode("latin-1")
    except OSError as e:
        raise InputError(fab.name, f"cannot read ({e.strerror})") from None


def parse_job_file(fab, text):
    """FilesAttributes and MaterialStackup of a JSON job file (legacy %TJ job files carry
    neither)."""
    if text.lstrip("\ufeff \t\r\n").startswith("{"):
        try:
            data = json.loads(text.lstrip("\ufeff"))
        except json.JSONDecodeError as e:
            raise InputError(fab.name, f"job file is not valid JSON ({e.msg})", e.lineno) from None
        if not isinstance(data, dict):
            raise InputError(fab.name, "job file is not a JSON object")
        return data
    return {}


def job_file_roles(job):
    """{file base name: Role} from a job file's FilesAttributes."""
    out = {}
    for entry in (job.get("FilesAttributes") or []) if isinstance(job, dict) else []:
        if isinstance(entry, dict) and entry.get("Path") and entry.get("FileFunction"):
            out[PurePosixPath(str(entry["Path"]).replace("\\", "/")).name] = role_from_function(
                str(entry["FileFunction"]), entry.get("FilePolarity"), "job file"
            )
    return out


class NameRoles:
    """Roles from file names, matched over all files together, only when something asks (the
    matching rules are many regular expressions)."""

    def __init__(self, files):
        self._files = files
        self._roles = None

    def get(self, name):
        if self._roles is None:
            self._roles = {}
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                try:
                    _gen, guessed = _best_match([p for _, p in self._files])
                except Exception:
                    guessed = {}
            by_path = {p: n for n, p in self._files}
            for key, paths in guessed.items():
                for p in paths:
                    if p in by_path:
                        self._roles[by_path[p]] = role_from_name(key)
        return self._roles.get(name)


def _disagrees(a, b):
    """Two statements about one file that cannot both hold (unstated numbers or spans agree)."""
    if a.kind != b.kind:
        return True
    return any(
        x is not None and y is not None and x != y
        for x, y in ((a.number, b.number), (a.span, b.span))
    )


def _own_role(f, text):
    x2 = X2_FUNC_RE.search(text)
    if not x2:
        return None
    pol = X2_POL_RE.search(text)
    return role_from_function(x2.group(1), pol.group(1) if pol else None, "X2 attribute")


def identify(board_files, texts, job, user_layers, names=None):
    """Role of every Gerber and Excellon file; returns ({name: Role}, [assumption, ...]).
    Trust: the user's [layers] mapping (an explicit statement about this board), then the file's
    own X2 attribute, the job file's FilesAttributes, the file name. A user mapping that leaves a
    drill's span or plating unsaid takes them from the file's own attribute."""
    notes = []
    roles = {}
    job_roles = job_file_roles(job)
    candidates = [f for f in board_files.fab if f.kind in ("gerber", "excellon")]
    names = names or NameRoles([(f.name, f.path) for f in candidates])
    user_roles = {k: role_from_user(v) for k, v in (user_layers or {}).items()}
    for f in candidates:
        base = PurePosixPath(f.name).name
        own = _own_role(f, texts[f.name])
        ranked = [
            r
            for r in (user_roles.get(f.name) or user_roles.get(base), own, job_roles.get(base))
            if r is not None
        ]
        chosen = ranked[0] if ranked else None
        for other in ranked[1:]:
            if _disagrees(other, chosen):
                notes.append(
                    f"{f.name}: {other.source} says '{other.label}', the {chosen.source} says "
                    f"'{chosen.label}'; using the {chosen.source}"
                )
        if (
            chosen is not None
            and chosen.kind == "drill"
            and own is not None
            and own.kind == "drill"
        ):
            chosen.span = chosen.span or own.span
            chosen.plated = (
                own.plated if chosen.plated is None and chosen is not own else chosen.plated
            )
        if chosen is None:
            chosen = names.get(f.name)
        if chosen is None and f.kind == "excellon":
            chosen = Role("drill", source="content")
        if chosen is None:
            chosen = Role("other", source="unrecognised", label="unrecognised")
        if chosen.kind == "drill" and f.kind != "excellon":
            chosen = Role("other", source=chosen.source, label=chosen.label)
        if chosen.kind in ("copper", "profile") and f.kind != "gerber":
            chosen = Role("other", source=chosen.source, label=chosen.label)
        if (
            f.kind == "gerber"
            and chosen.kind == "copper"
            and re.search(r"%IPNEG\*%", texts[f.name])
        ):
            chosen.polarity = "negative"
        roles[f.name] = chosen
    return roles, notes


def _name_number(role, last_inner):
    """Layer number from a file-name role: top 1, inner_k k + 1, bottom after the last inner."""
    if role.side == "top":
        return 1
    if role.side == "bottom":
        return last_inner + 2
    return int(role.order_key) + 1


def number_copper(roles, name_inners=None):
    """Copper files in order, top to bottom, as [(file name, Role)], each Role numbered. Numbers the
    files state (X2, job file, user) are kept, gaps and all, so that a missing layer shows as one;
    file-name roles are numbered from their inner index when the names of all files, unreadable
    ones included (name_inners), give inner indices 1..k with none left out; else in order."""
    copper = [(n, r) for n, r in roles.items() if r.kind == "copper"]
    if not copper:
        return []
    if all(r.number is not None for _, r in copper):
        copper.sort(key=lambda nr: nr[1].number)
        nums = [r.number for _, r in copper]
        if len(set(nums)) != len(nums):
            dup = sorted({x for x in nums if nums.count(x) > 1})
            raise InputError(copper[0][0], f"two copper files claim layer L{dup[0]}")
        return copper
    inners = sorted(name_inners or ())
    by_name = (
        name_inners is not None
        and inners == list(range(1, len(inners) + 1))
        and all(
            r.source == "file name" and (r.side != "inner" or float(r.order_key).is_integer())
            for _, r in copper
        )
    )
    if by_name:
        for _, r in copper:
            r.number = _name_number(r, len(inners))
        copper.sort(key=lambda nr: nr[1].number)
        if len({r.number for _, r in copper}) == len(copper):
            return copper
    copper.sort(key=lambda nr: nr[1].number * 1e6 if nr[1].number is not None else nr[1].order_key)
    for i, (_, r) in enumerate(copper):
        r.number = i + 1
    return copper


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
    aps = shapes.ApertureShapes(tol)
    segs, seg_net, seg_fn = [], [], []
    flashes, fl_net, fl_fn, fl_part = [], [], [], []
    runs = []  # [(dark, [pieces])]
    round_lines = []  # pending (coords, radius) of the current run, buffered together

    flash_at = []  # pending (shape, x, y) of the current run, placed together
    ap_info = {}  # id(aperture) -> (width, round, function); apertures outlive the loop
    quad_segs_of = functools.cache(lambda r: shapes.quad_segs_for(float(r), tol))

    def flush_round():
        if flash_at:
            runs[-1][1].extend(
                shapes.place_all([b for b, _, _ in flash_at], [(x, y) for _, x, y in flash_at])
            )
            flash_at.clear()
        if round_lines:
            lines = (
                shapely.linestrings([c for c, _ in round_lines])
                if len({len(c) for c, _ in round_lines}) == 1
                else np.array([shapely.LineString(c) for c, _ in round_lines], dtype=object)
            )
            radii = np.array([r for _, r in round_lines])
            # each stroke as finely as its own radius needs: a thin one batched with a
            # wide one would
            # otherwise get the wide one's many segments at every bend
            qs = np.array([quad_segs_of(r) for r in radii])
            out = np.empty(len(radii), dtype=object)
            for q in np.unique(qs):
                at = np.flatnonzero(qs == q)
                out[at] = shapely.buffer(lines[at], radii[at], quad_segs=int(q))
            runs[-1][1].extend(out)
            round_lines.clear()

    Line, Arc, Flash, Region = go.Line, go.Arc, go.Flash, go.Region
    unit_k = {}  # id(unit) -> mm per unit (gerbonara's unit comparison is slow)
    net_of = {}  # .N value -> net name
    seg_add, net_add, fn_add = segs.append, seg_net.append, seg_fn.append
    for obj in g.objects:
        kind = type(obj)
        if kind is not Line and kind is not Flash and kind is not Arc and kind is not Region:
            kind = next((c for c in (Line, Arc, Flash, Region) if isinstance(obj, c)), kind)
        if kind is not Region and getattr(obj, "aperture", None) is None:
            layer.skipped_objects += 1  # drawn before any aperture was selected
            continue
        dark = bool(obj.polarity_dark)
        if not runs or runs[-1][0] != dark:
            if runs:
                flush_round()
            runs.append((dark, []))
        k = unit_k.get(id(obj.unit))
        if k is None:
            k = unit_k[id(obj.unit)] = 25.4 if obj.unit == Inch else 1.0
        attrs = getattr(obj, "attrs", None)
        v = attrs.get(".N") if isinstance(attrs, dict) else None
        if v:
            net = net_of.get(v)
            if net is None:
                net = net_of[v] = _attr_net(attrs) or ""
            net = net or None
        else:
            net = None
        if kind is Line or kind is Arc:
            if kind is Line:
                pts = [(obj.x1 * k, obj.y1 * k), (obj.x2 * k, obj.y2 * k)]
            else:
                c = obj.center
                pts = shapes.arc_points(
                    obj.x1 * k,
                    obj.y1 * k,
                    obj.x2 * k,
                    obj.y2 * k,
                    c[0] * k,
                    c[1] * k,
                    obj.clockwise,
                    tol,
                )
            info = ap_info.get(id(obj.aperture))
            if info is None:  # once per aperture, not per stroke
                info = ap_info[id(obj.aperture)] = (
                    shapes.aperture_width_mm(obj.aperture),
                    isinstance(obj.aperture, CircleAperture),
                    _aper_function(obj),
                )
            w, round_ap, fn = info
            if round_ap and w > 0:
                if pts[0] == pts[-1] and len(pts) == 2:
                    runs[-1][1].append(
                        shapely.Point(pts[0]).buffer(
                            w / 2, quad_segs=shapes.quad_segs_for(w / 2, tol)
                        )
                    )
                elif (
                    round_lines and round_lines[-1][1] == w / 2 and round_lines[-1][0][-1] == pts[0]
                ):
                    round_lines[-1][0].extend(
                        pts[1:]
                    )  # a continuing stroke: one polyline, one buffer
                else:
                    round_lines.append((list(pts), w / 2))
            else:
                runs[-1][1].append(shapes.stroke_shape(pts, obj.aperture, aps, tol))
            if dark:
                if len(pts) == 2:
                    (xa, ya), (xb, yb) = pts
                    seg_add((xa, ya, xb, yb, w))
                    net_add(net)
                    fn_add(fn)
                else:
                    for (xa, ya), (xb, yb) in zip(pts[:-1], pts[1:]):
                        seg_add((xa, ya, xb, yb, w))
                        net_add(net)
                        fn_add(fn)
        elif kind is Flash:
            base = aps.shape(obj.aperture)
            x, y = obj.x * k, obj.y * k
            flash_at.append((base, x, y))
            if dark:
                b = base.bounds
                flashes.append((x, y, max(b[2] - b[0], b[3] - b[1]) if not base.is_empty else 0.0))
                fl_net.append(net)
                fl_fn.append(_aper_function(obj))
                p = attrs.get(".P") if isinstance(attrs, dict) else None
                fl_part.append((p[0], p[1] if len(p) > 1 else "") if p else None)
        elif kind is Region:
            ring = shapes.ring_points(obj.outline, obj.arc_centers or [], tol, k)
            raw = shapes.ring_polygon(ring) if len(ring) >= 3 else None
            poly = shapes.polygon_from_points(ring, raw)
            if len(ring) > 3 and poly is not raw and not _only_touches(raw):
                layer.repaired_regions += 1
            runs[-1][1].append(poly)
            if dark and not poly.is_empty:
                layer.regions.append((poly, net, None))
    if runs:
        flush_round()
    layer.pieces = resolve_pieces(runs, outline if role.polarity == "negative" else None)
    layer.segments = np.array(segs, dtype=float).reshape(-1, 5)
    layer.segment_net, layer.segment_function = seg_net, seg_fn
    layer.flashes = np.array(flashes, dtype=float).reshape(-1, 3)
    layer.flash_net, layer.flash_function, layer.flash_part = fl_net, fl_fn, fl_part
    return layer


def resolve_pieces(runs, negative_in=None):
    """Copper pieces from polarity runs in file order: runs up to the last clear one are resolved
    (union, difference) because clears cut what came before; later dark objects stay as drawn.
    A negative layer is the profile minus everything drawn, so all of it is resolved."""
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
    for _, pieces in runs[last_clear + 1 :]:
        # buffers, placed aperture shapes and repaired regions: valid as built
        arr = np.array([p for p in pieces if p is not None], dtype=object)
        for p in arr:  # flashes of macro apertures can be multi-part
            if p.geom_type == "Polygon":
                if p.area > 0:
                    out.append(p)
            else:
                out.extend(
                    q for q in shapely.get_parts(p) if q.geom_type == "Polygon" and q.area > 0
                )
    return np.array(out, dtype=object)


def _only_touches(raw):
    """A cut-in region touches itself along a seam ("Ring Self-intersection" in GEOS terms); that is
    allowed and not worth a note. Edges that cross ("Self-intersection") are. raw: the region's
    polygon as drawn."""
    reason = shapely.is_valid_reason(raw)
    return not reason.startswith("Self-intersection")


EXCELLON_CANDIDATES = [
    (u, nf, z)
    for u in (MM, Inch)
    for nf in ((2, 4), (3, 3), (2, 5), (3, 5), (4, 4), (3, 4), (4, 3))
    for z in ("leading", "trailing")
]


def _drill_points(d):
    pts = []
    for o in d.objects:
        k = 25.4 if o.unit == Inch else 1.0
        if isinstance(o, go.Flash):
            pts.append((o.x * k, o.y * k))
        elif isinstance(o, go.Line):
            pts.append((o.x1 * k, o.y1 * k))
    return np.array(pts, dtype=float).reshape(-1, 2)


def _inside_fraction(pts, region):
    """Share of points on copper; region is an STRtree of copper pieces."""
    if len(pts) == 0 or region is None or not len(region.geometries):
        return 0.0
    # box hits first, then one vectorised test of those pairs: the query's own predicate prepares
    # every large pour it meets, at several times the cost
    p = shapely.points(pts)
    at, on = region.query(p)
    hit = at[shapely.intersects(p[at], region.geometries.take(on))]
    return float(len(np.unique(hit)) / len(pts))


def parse_drill(fab, text, copper_region, notes):
    """Excellon via gerbonara; when the header is silent or the holes land off the board,
    try the usual number formats and keep the one whose holes fall on the copper."""

    def attempt(settings):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return ExcellonFile.from_string(text, settings=settings, filename=fab.name)

    first_error = None
    d = None
    try:
        d = attempt(None)
    except Exception as e:
        first_error = e
    if d is not None:
        score = _inside_fraction(_drill_points(d), copper_region)
        if score >= 0.9 or len(d.objects) == 0 or copper_region is None:
            s = d.import_settings
            return d, f"{s.unit} {s.number_format} zeros={s.zeros}" if s else ""
    else:
        score = -1.0
    declared_unit = (
        MM
        if re.search(r"^\s*METRIC", text, re.M)
        else (Inch if re.search(r"^\s*INCH", text, re.M) else None)
    )
    best, best_score, best_desc = d, score, None
    for unit, nf, zeros in EXCELLON_CANDIDATES:
        if declared_unit is not None and unit != declared_unit:
            continue
        try:
            cand = attempt(FileSettings(unit=unit, number_format=nf, zeros=zeros))
        except Exception:
            continue
        sc = _inside_fraction(_drill_points(cand), copper_region)
        if sc > best_score + 1e-9:
            best, best_score = cand, sc
            best_desc = f"{unit} {nf[0]}.{nf[1]} with {zeros} zeros omitted"
    if best is None:
        msg = str(first_error) if first_error else "no holes found"
        m = re.match(r".*?:(\d+) \"(.*?)\": (.*)", msg, re.S)
        line = int(m.group(1)) if m else None
        reason = m.group(3) if m else msg
        raise InputError(fab.name, f"cannot read as Excellon ({reason.split('.')[0][:150]})", line)
    if best_desc:
        notes.append(
            f"{fab.name}: drill number format not stated or inconsistent; inferred {best_desc} "
            f"({best_score:.0%} of holes land on outer-layer copper)"
        )
    return best, best_desc or ""


TA_TOOL_RE = re.compile(r"#@! TA\.AperFunction,([^\r\n]*)\r?\n\s*T(\d+)C([\d.]+)")


def tool_attributes(text):
    """{tool diameter as written: (plated or None, via or None)} from per-tool X2 comments
    (`; #@! TA.AperFunction,Plated,PTH,ViaDrill` before `T1C0.300`). Two tools of one diameter
    that disagree on plating leave that diameter's plating unknown."""
    out = {}
    for m in TA_TOOL_RE.finditer(text):
        f = [p.strip().lower() for p in m.group(1).split(",")]
        plated = {"plated": True, "nonplated": False}.get(f[0])
        key = round(float(m.group(3)), 4)
        if key in out and out[key][0] != plated:
            plated = None
        out[key] = (plated, "viadrill" in f)
    return out


def _hole_plating(tool, tools_x2, role):
    """Plating of one tool's holes: the tool's own statement (an Altium ;TYPE= section as gerbonara
    reads it, or an X2 tool comment), else the file's."""
    native = round(tool.diameter, 4)
    for p in (getattr(tool, "plated", None), tools_x2.get(native, (None, None))[0], role.plated):
        if p is not None:
            return p
    return None


def build_drill(fab, d, role, n_layers, text, fmt, span, span_source):
    holes, slots, via_flags, hole_pl, slot_pl = [], [], [], [], []
    tools_x2 = tool_attributes(text)
    skipped = 0
    for o in d.objects:
        k = 25.4 if o.unit == Inch else 1.0
        if getattr(o, "aperture", None) is None or getattr(o.aperture, "diameter", None) is None:
            skipped += 1
            continue
        dia = o.aperture.unit.convert_to(MM, o.aperture.diameter)
        plated = _hole_plating(o.aperture, tools_x2, role)
        if isinstance(o, go.Flash):
            holes.append((o.x * k, o.y * k, dia))
            via_flags.append(tools_x2.get(round(o.aperture.diameter, 4), (None, None))[1])
            hole_pl.append(plated)
        elif isinstance(o, go.Line):
            slots.append((o.x1 * k, o.y1 * k, o.x2 * k, o.y2 * k, dia))
            slot_pl.append(plated)
    unknown = any(p is None for p in hole_pl + slot_pl)
    per_tool = bool(tools_x2) or any(
        getattr(getattr(o, "aperture", None), "plated", None) is not None for o in d.objects
    )
    fill = True if role.plated is None else role.plated  # holes nobody speaks for: plated (stated)
    every = [fill if p is None else p for p in hole_pl + slot_pl]
    summary = True if all(every) else (False if not any(every) else None)
    source = (
        "tool sections" if per_tool else (role.source if role.plated is not None else "assumed")
    )
    drill = DrillFile(
        file=fab.name,
        plated=summary,
        from_layer=span[0],
        to_layer=min(span[1], n_layers),
        holes=np.array(holes, dtype=float).reshape(-1, 3),
        slots=np.array(slots, dtype=float).reshape(-1, 5),
        hole_is_via=via_flags,
        hole_plated=np.array([fill if p is None else p for p in hole_pl], dtype=bool),
        slot_plated=np.array([fill if p is None else p for p in slot_pl], dtype=bool),
        identified_by=role.source,
        span_source=span_source,
        plating_source=source,
        number_format=fmt,
        skipped=skipped,
    )
    return drill, unknown


IPC_UNITS = {"CUST 0": 0.0001 * 25.4, "CUST 1": 0.001, "CUST 2": 0.0001 * 25.4, "SI": 0.001}


def parse_netlist(fab):
    """IPC-D-356(A) test records (op codes 3xx) -> NetPoints in mm; fixed columns as KiCad and
    Allegro write them: net 4-17, refdes 21-26, '-' 27, pin 28-31, 'M' 32 (mid-point / via)."""
    try:
        text = fab.path.read_bytes().decode("latin-1")
    except OSError as e:
        raise InputError(fab.name, f"cannot read ({e.strerror})") from None
    scale = IPC_UNITS["CUST 0"]
    pts = []
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.rstrip("\r")
        if line.startswith("P  UNITS"):
            unit = " ".join(line[8:].split())
            scale = next((v for k, v in IPC_UNITS.items() if unit.startswith(k)), None)
            if scale is None:
                raise InputError(fab.name, f"unknown IPC-D-356 units {unit!r}", lineno)
            continue
        if not re.match(r"3[0-9]{2}", line[:3]):
            continue
        net = line[3:17].strip()
        m = re.search(r"X([+-]?\d+)Y([+-]?\d+)", line[40:])
        if not net or net == "N/C" or not m:
            continue
        refdes = line[20:26].strip() or None
        pin = line[27:31].strip() if len(line) > 27 and line[26:27] == "-" else None
        is_via = refdes == "VIA" or line[31:32] == "M"
        # access side, columns 39-41: A00 both sides, A01 the top, A<n> layer n (the bottom)
        acc = re.match(r"A(\d\d)", line[38:41])
        side = int(acc.group(1)) if acc and int(acc.group(1)) > 0 else None
        pts.append(
            NetPoint(
                net=unescape_net(net),
                x=int(m.group(1)) * scale,
                y=int(m.group(2)) * scale,
                refdes=refdes,
                pin=pin or None,
                is_via=is_via,
                layers=(side, side) if side else None,
            )
        )
    return pts


def _guarded(name, fn, *args):
    """Geometry building on data gerbonara accepted: an unexpected failure still names the file."""
    try:
        return fn(*args)
    except InputError:
        raise
    except (
        ValueError,
        TypeError,
        AttributeError,
        IndexError,
        KeyError,
        ZeroDivisionError,
        OverflowError,
        shapely.errors.GEOSException,
    ) as e:
        raise InputError(
            name, f"cannot build its geometry ({type(e).__name__}: {str(e)[:120]})"
        ) from None


def _copper_layer(fab, text, role, provisional, tol):
    """Parse and build one copper layer, with the notes and problems it gives (a task for a forked
    worker)."""
    notes, problems = [], []
    cut = truncation(text)
    if cut is not None:
        problems.append(Problem(fab.name, cut[0], cut[1]))
    layer = _guarded(
        fab.name,
        build_layer,
        fab,
        parse_gerber(fab, text, notes),
        role,
        provisional if provisional is not None else shapely.Polygon(),
        tol,
    )
    check_extent(fab, layer)
    if layer.skipped_objects:
        notes.append(
            f"{fab.name}: {layer.skipped_objects} object(s) drawn before any aperture was "
            "selected were left out"
        )
    if layer.repaired_regions:
        notes.append(
            f"{fab.name}: {layer.repaired_regions} self-intersecting region(s) repaired "
            "(split into valid parts)"
        )
    if role.polarity == "negative" and (provisional is None or provisional.is_empty):
        raise InputError(fab.name, "negative-polarity copper needs a board profile file")
    return layer, notes, problems


def _copper_layers(by_name, texts, copper_roles, provisional, tol, runner, per_layer=None):
    """Every copper layer, top to bottom, each passed to per_layer (when given) as soon as it is
    built. The layers are independent, so a large board's are read on both cores, largest file
    first so the two processes finish together. (Only shapely geometry and plain arrays come back
    from the other process: gerbonara's objects compare units by identity, which pickling
    breaks.)"""
    size = sum(len(texts[name]) for name, _ in copper_roles)
    order = sorted(range(len(copper_roles)), key=lambda k: -len(texts[copper_roles[k][0]]))

    def task(j):
        name, role = copper_roles[order[j]]
        layer, notes, problems = _copper_layer(by_name[name], texts[name], role, provisional, tol)
        if per_layer is not None:
            per_layer(layer)
        return layer, notes, problems

    done = runner.tasks(task, len(order), "copper-layers", size, _packed, _unpacked)
    out = [None] * len(order)
    for j, k in enumerate(order):
        out[k] = done[j]
    return out


# geometry crosses between processes as WKB: pickling shapely objects one by one costs five times
# more
def _wkb_packed(layer):
    layer.piece_tree = None  # rebuilt where it is needed
    layer.pieces = shapely.to_wkb(layer.pieces)
    layer.regions = (
        shapely.to_wkb(np.array([r[0] for r in layer.regions], dtype=object)),
        [r[1:] for r in layer.regions],
    )
    return layer


def _wkb_unpacked(layer):
    layer.pieces = shapely.from_wkb(layer.pieces)
    polys, rest = layer.regions
    layer.regions = [(p, *r) for p, r in zip(shapely.from_wkb(polys), rest)]
    return layer


def _packed(result):
    layer, notes, problems = result
    return _wkb_packed(layer), notes, problems


def _unpacked(result):
    layer, notes, problems = result
    return _wkb_unpacked(layer), notes, problems


BROKEN_REASONS = ("empty file", "binary data", "not Gerber", "cannot read")


def _broken_files(bf):
    """Ignored files whose content failed (empty, junk): (name, reason). Files ignored by their kind
    (documents, metadata) are not among them."""
    return [(i["file"], i["reason"]) for i in bf.ignored if i["reason"].startswith(BROKEN_REASONS)]


def _stated_role(name, user_roles, job_roles, names):
    """What the user, the job file or the file name says a file is (for files that could not be
    read)."""
    base = PurePosixPath(name).name
    guess = names.get(name)
    if guess is not None and guess.kind == "drill":
        guess = (
            None  # the name rules take any .txt for a drill file: too loose for a file that failed
        )
    for r in (user_roles.get(name) or user_roles.get(base), job_roles.get(base), guess):
        if r is not None:
            return r
    return None


def _expected_copper(job, copper_roles, stated):
    """{layer number: why it should be there} for every copper layer the job file, the numbers the
    files give or the names of unreadable files speak of."""
    want = {}
    gs = job.get("GeneralSpecs") if isinstance(job, dict) else None
    n_job = gs.get("LayerNumber") if isinstance(gs, dict) else None
    n_entries = sum(1 for r in job_file_roles(job).values() if r.kind == "copper")
    for n, why in (
        (n_job, "the job file's LayerNumber"),
        (n_entries or None, "the job file's FilesAttributes"),
    ):
        if isinstance(n, (int, float)) and 0 < int(n) <= 256:
            for k in range(1, int(n) + 1):
                want.setdefault(k, f"{why} gives {int(n)} copper layers")
    top = max((r.number for _, r in copper_roles), default=0)
    for k in range(1, top + 1):
        want.setdefault(k, f"the copper files are numbered up to L{top}")
    last = max(copper_roles, key=lambda nr: nr[1].number)[1] if copper_roles else None
    if last is not None and last.source == "X2 attribute" and last.label.split(",")[2:3] == ["Inr"]:
        want.setdefault(top + 1, f"the last copper file, L{top}, says it is an inner layer")
    for name, role in stated.items():
        if role.kind == "copper" and role.number:
            want[role.number] = f"{name} should be copper L{role.number}"
    return want


def _layer_problems(bf, stated, copper_numbers, want, problems):
    """Problems for broken files that should be fabrication data, and for missing copper layers."""
    reasons = dict(_broken_files(bf))
    for name, role in stated.items():
        if role.kind in ("copper", "drill", "profile"):
            what = f"copper L{role.number}" if role.kind == "copper" and role.number else role.kind
            problems.append(
                Problem(name, f"{reasons[name]}, but the {role.source} says it is {what}")
            )
    told = {r.number for r in stated.values() if r.kind == "copper"}
    for k in sorted(set(want) - set(copper_numbers) - told):
        problems.append(Problem(f"L{k}", f"no readable copper file for layer L{k} ({want[k]})"))


def _sides(layers):
    n = len(layers)
    for i, layer in enumerate(layers):
        layer.side = "top" if i == 0 else ("bottom" if i == n - 1 and n > 1 else "inner")


def _profile_candidates(roles, bf, texts, notes, parsed_cache):
    """Outline candidates, most trusted first: (file, rank, parsed Gerber)."""
    ranked = []
    for name, role in roles.items():
        if role.kind == "profile":
            rank = {"stackup file": 0, "X2 attribute": 1, "job file": 2}.get(role.source, 3)
            if rank == 3 and not OUTLINE_NAME_RE.search(PurePosixPath(name).name):
                rank = 5  # the name rules call every mechanical layer an outline
            ranked.append((rank, name))
        elif role.kind == "other" and MECHANICAL_NAME_RE.search(PurePosixPath(name).name):
            # a layer named as the outline before a drawing layer that may also show it
            ranked.append((4 if OUTLINE_NAME_RE.search(PurePosixPath(name).name) else 5, name))
    by_name = {f.name: f for f in bf.fab}
    out = []
    for rank, name in sorted(ranked):
        if name not in parsed_cache:
            try:
                parsed_cache[name] = parse_gerber(by_name[name], texts[name], notes)
            except InputError as e:
                if rank < 4:
                    raise
                notes.append(f"{name}: not usable as an outline ({e.message})")
                parsed_cache[name] = None
        if parsed_cache[name] is not None:
            out.append((name, rank, parsed_cache[name]))
    return out


OUTLINE_NAME_RE = re.compile(
    r"(\.gko|\.gml|edge[_.-]?cuts|outline|profile|dimension|contour)", re.I
)
MECHANICAL_NAME_RE = re.compile(
    r"(\.gm\d+|\.gko|\.gml|edge[_.-]?cuts|outline|profile|dimension|mech)", re.I
)


def pick_outline(roles, bf, texts, layers, tol, notes, problems):
    """The board outline (see outline.py) and where it came from. A profile the user names is used
    as named; when nothing fits, the copper's own extent stands in, stated."""
    sample = outline.copper_sample(layers)
    cache = {}
    cands = _profile_candidates(roles, bf, texts, notes, cache)
    user = [c for c in cands if c[1] == 0]
    looked = []
    for name, rank, g in user or cands:
        loops = outline.loops_of(g, tol)
        if loops is not None:
            looked.append((name, loops, rank, len(g.objects)))
    if looked and not len(sample.xy):  # only negative copper: nothing to test a loop against yet
        name, loops = looked[0][0], looked[0][1]
        return (
            max(loops.figures, key=lambda p: p.area),
            name,
            "the most trusted profile file, as drawn (no positive copper to test it against)",
        )
    if user and looked:
        name, loops = looked[0][0], looked[0][1]
        shell = max(loops.figures, key=lambda p: p.area)
        share, ratio = outline.fit(sample, shell)
        if share < outline.MIN_CONTAINED or ratio > outline.MAX_AREA_RATIO:
            problems.append(
                Problem(
                    name,
                    f"the outline the stackup file names holds {share:.0%} of the copper "
                    f"and is {ratio:.1f} times the copper's extent",
                )
            )
        return shell, name, "named as the profile in the stackup file"
    choice = outline.choose(looked, sample)
    if choice is not None:
        return choice.polygon, choice.file, choice.why
    pts = np.vstack(
        [shapely.get_coordinates(shapely.convex_hull(c.pieces)) for c in layers if len(c.pieces)]
        or [np.zeros((0, 2))]
    )
    hull = shapely.MultiPoint(pts).convex_hull if len(pts) >= 3 else shapely.Polygon()
    tried = ", ".join(n for n, _, _ in cands) or "none"
    notes.append(
        f"no closed outline holds the copper (files tried: {tried}); board outline taken as the "
        "convex hull of all copper"
    )
    return hull, None, "the convex hull of all copper (no outline file fits)"


def drill_span(name, role, n_layers, side_files):
    """(from, to) and where it came from: the user or the file's own attribute, the layer-pair file,
    the drill report, the file name; else a through hole, stated."""
    if role.span:
        return role.span, role.source
    key = PurePosixPath(name).name.lower()
    tokens = side_files["layer pairs"].get(key)
    if tokens:
        span = drillspans.span_from_tokens(tokens, side_files["suffix"])
        if span:
            return span, f"layer-pair file {side_files['layer pairs file']}"
    pair = side_files["report"].get(key)
    if pair:
        span = drillspans.span_from_names(pair, n_layers)
        if span:
            return span, f"drill report {side_files['report file']}"
    m = re.search(r"[-_]L?(\d+)[-_]L?(\d+)\.\w+$", PurePosixPath(name).name, re.I)
    if m and 1 <= int(m.group(1)) < int(m.group(2)) <= n_layers:
        return (int(m.group(1)), int(m.group(2))), "file name"
    return (1, n_layers), "assumed (through hole)"


def _side_files(bf, texts, layers):
    out = {
        "layer pairs": {},
        "report": {},
        "layer pairs file": None,
        "report file": None,
        "suffix": {
            PurePosixPath(c.file).suffix.lower(): int(c.name[1:]) for c in layers if not c.missing
        },
    }
    for f in bf.fab:
        if f.kind == "layerpairs":
            out["layer pairs"].update(drillspans.read_layer_pairs(texts[f.name]))
            out["layer pairs file"] = f.name
        elif f.kind == "drillreport":
            out["report"].update(drillspans.read_drill_report(texts[f.name]))
            out["report file"] = f.name
    return out


def _drill_problems(name, text, drill, notes, problems):
    if not re.search(r"^\s*M(30|00)\b", text, re.M):
        problems.append(Problem(name, "truncated: no M30 end-of-program marker"))
    if drill.skipped:
        notes.append(
            f"{name}: {drill.skipped} hole(s) given before any tool was selected were left out"
        )
    if not drill.hole_count:
        notes.append(f"{name}: drill file has no holes")


def load_board(
    sources,
    user_layers=None,
    chord_tol_mm=shapes.DEFAULT_CHORD_TOL_MM,
    scratch=None,
    runner=SERIAL,
    per_layer=None,
):
    """Read a board (folder, zip or file list) into the board model; the copper layers are tasks of
    the runner (model/runner.py), each passed to per_layer (when given) in the process that built
    it, for work of later stages that needs one layer only. What makes the model incomplete is
    listed in board.problems (the completeness gate decides what to do with it)."""
    with BoardFiles(sources, scratch) as bf:
        texts = {f.name: read_text(f) for f in bf.fab if f.kind != "ipc356"}
        notes, problems = [], []
        job, job_name = {}, None
        for f in bf.fab:
            if f.kind == "job":
                job = parse_job_file(f, texts[f.name]) or job
                job_name = f.name
        broken = _broken_files(bf)
        names = NameRoles(
            [(f.name, f.path) for f in bf.fab if f.kind in ("gerber", "excellon")]
            + [(n, Path(n)) for n, _ in broken]
        )
        roles, id_notes = identify(bf, texts, job, user_layers, names)
        notes.extend(id_notes)
        user_roles = {k: role_from_user(v) for k, v in (user_layers or {}).items()}
        stated = {
            n: r
            for n, _ in broken
            if (r := _stated_role(n, user_roles, job_file_roles(job), names))
        }
        inners = {
            int(r.order_key)
            for r in list(roles.values()) + list(stated.values())
            if r.kind == "copper"
            and r.source == "file name"
            and r.side == "inner"
            and r.order_key is not None
            and float(r.order_key).is_integer()
        }
        copper_roles = number_copper(roles, inners)
        if not copper_roles:
            raise InputError(
                bf.source,
                "no copper layer could be identified (give a [layers] mapping in a stackup file)",
            )
        by_name = {f.name: f for f in bf.fab}
        positive = [(n, r) for n, r in copper_roles if r.polarity != "negative"]
        negative = [(n, r) for n, r in copper_roles if r.polarity == "negative"]
        built = _copper_layers(by_name, texts, positive, None, chord_tol_mm, runner, per_layer)
        layers = []
        for layer, layer_notes, layer_problems in built:
            layers.append(layer)
            notes.extend(layer_notes)
            problems.extend(layer_problems)
        board_outline, outline_file, why = pick_outline(
            roles, bf, texts, layers, chord_tol_mm, notes, problems
        )
        if negative:
            for layer, layer_notes, layer_problems in _copper_layers(
                by_name, texts, negative, board_outline, chord_tol_mm, runner, per_layer
            ):
                layers.append(layer)
                notes.extend(layer_notes)
                problems.extend(layer_problems)
        want = _expected_copper(job, copper_roles, stated)
        present = {int(c.name[1:]) for c in layers}
        _layer_problems(bf, stated, present, want, problems)
        for k in sorted(set(range(1, max(want | {0: 0}) + 1)) - present):
            layers.append(
                CopperLayer(
                    name=f"L{k}",
                    file=f"(missing L{k})",
                    side="inner",
                    missing=True,
                    identified_by="placeholder",
                )
            )
        layers.sort(key=lambda c: int(c.name[1:]))
        _sides(layers)
        board = Board(
            name=bf.name,
            source=bf.source,
            copper=layers,
            drills=[],
            outline=board_outline,
            ignored=list(bf.ignored),
            job=job,
            job_file=job_name,
            outline_file=outline_file,
            outline_why=why,
        )
        n = len(layers)
        real = [c for c in layers if not c.missing]
        # holes of a correctly read drill file land on the pads of the outer layers
        region = shapely.STRtree(np.concatenate([real[0].pieces, real[-1].pieces]))
        side = _side_files(bf, texts, layers)
        for name, role in roles.items():
            if role.kind == "drill":
                f = by_name[name]
                d, fmt = parse_drill(f, texts[name], region, notes)
                span, span_source = drill_span(name, role, n, side)
                drill, unknown = _guarded(
                    name, build_drill, f, d, role, n, texts[name], fmt, span, span_source
                )
                _drill_problems(name, texts[name], drill, notes, problems)
                if unknown and drill.hole_count:
                    notes.append(f"{name}: plating not stated; holes assumed plated")
                if (
                    span_source.startswith("assumed")
                    and len([r for r in roles.values() if r.kind == "drill"]) > 1
                ):
                    notes.append(f"{name}: no layer span stated; taken as a through hole L1-L{n}")
                board.drills.append(drill)
            elif role.kind == "other":
                board.other_files.append(
                    {"file": name, "role": role.label, "identified_by": role.source}
                )
        for f in bf.fab:
            if f.kind == "ipc356":
                board.netlist.extend(parse_netlist(f))
                board.netlist_file = f.name
        for c in real:
            if not len(c.pieces):
                problems.append(Problem(c.file, f"copper layer {c.name} draws no copper"))
        if not any(d.hole_count for d in board.drills):
            if n >= 3:
                problems.append(
                    Problem(
                        bf.source,
                        f"no drill holes on a board of {n} copper layers: vias and "
                        "plated holes would all be missing",
                    )
                )
            elif n == 2:
                notes.append("no drill holes: the two copper layers are taken as joined nowhere")
        for note in notes:
            board.assume(note)
        for c in real:
            if c.identified_by == "file name":
                board.assume(
                    f"{c.file}: identified as copper {c.name} ({c.side}) from its file name only"
                )
        board.problems = problems
        return board
