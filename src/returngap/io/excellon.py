"""Excellon drill files -> drill holes: gerbonara's parse, number formats inferred from where the
holes land when the header is silent, and plating per tool."""

import re
import warnings

import numpy as np
import shapely
from gerbonara import ExcellonFile
from gerbonara import graphic_objects as go
from gerbonara.cam import FileSettings
from gerbonara.utils import MM, Inch

from returngap.errors import InputError
from returngap.io import compat
from returngap.model.board import DrillFile

__all__ = [
    "EXCELLON_CANDIDATES",
    "first_reading",
    "parse_drill",
    "TA_TOOL_RE",
    "tool_attributes",
    "build_drill",
]

compat.apply()


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
    # box hits first, then one vectorised test of those pairs, from the copper's side (prepared
    # where it was read): the query's own predicate prepares every large pour it meets anew
    p = shapely.points(pts)
    at, on = region.query(p)
    hit = at[shapely.intersects(region.geometries.take(on), p[at])]
    return float(len(np.unique(hit)) / len(pts))


def _attempt(fab, text, settings):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return ExcellonFile.from_string(text, settings=settings, filename=fab.name)


def first_reading(fab, text):
    """(gerbonara's reading of a drill file as its header says, or None; the error it gave, or
    None): needs no copper, so it can be done before the copper is read."""
    try:
        return _attempt(fab, text, None), None
    except Exception as e:
        return None, e


def parse_drill(fab, text, copper_region, notes, first=None):
    """Excellon via gerbonara; when the header is silent or the holes land off the board,
    try the usual number formats and keep the one whose holes fall on the copper. first: the
    file's first_reading, when already made."""
    d, first_error = first if first is not None else first_reading(fab, text)
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
    for unit, nf, zeros in _candidates(text, d, declared_unit):
        try:
            cand = _attempt(fab, text, FileSettings(unit=unit, number_format=nf, zeros=zeros))
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


# a value written as digits only (no decimal point), whose reading depends on the number format
_CODED_VALUE_RE = re.compile(r"[XYIJAC][+-]?\d+(?![\d.])")


def _candidates(text, first, declared_unit):
    """The number formats worth trying: EXCELLON_CANDIDATES of the declared unit (any unit when
    none is). Where every value is written with its decimal point, the number format and the
    zeros omitted change nothing, so one candidate per unit is enough, and none of the unit the
    first reading (`first`, when there is one) already used."""
    cands = [c for c in EXCELLON_CANDIDATES if declared_unit is None or c[0] == declared_unit]
    body = "\n".join(line for line in text.splitlines() if not line.lstrip().startswith(";"))
    if _CODED_VALUE_RE.search(body):
        return cands
    used = getattr(getattr(first, "import_settings", None), "unit", None) if first else None
    units = []
    for c in cands:
        if c[0] not in units and c[0] != used:
            units.append(c[0])
    return [next(c for c in cands if c[0] == u) for u in units]


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
