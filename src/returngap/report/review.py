"""Review state of findings: waivers (accepted findings) and comparison with an earlier report."""

import datetime
import fnmatch
import json
import math

from returngap.errors import InputError
from returngap.io.config import read_toml

__all__ = [
    "WAIVER_KEYS",
    "load_waivers",
    "apply_waivers",
    "load_baseline",
    "refuse_other_board",
    "compare",
]

WAIVER_KEYS = {
    "id",
    "kind",
    "net",
    "layer",
    "reference_layer",
    "gap_type",
    "near_mm",
    "radius_mm",
    "by",
    "reason",
    "date",
}


def load_waivers(path):
    """[[waiver]] tables: an id, or a match on kind / net (glob) / layers / location; who, why
    and when."""
    data = read_toml(path)
    extra = sorted(set(data) - {"waiver"})
    if extra:
        raise InputError(path, f"unknown table(s) {', '.join(extra)} (only [[waiver]] is read)")
    items = data.get("waiver", [])
    if not isinstance(items, list):
        raise InputError(path, "waivers must be [[waiver]] tables")
    out = []
    for i, w in enumerate(items, 1):
        if not isinstance(w, dict):
            raise InputError(path, f"waiver #{i} is not a table")
        unknown = set(w) - WAIVER_KEYS
        if unknown:
            raise InputError(path, f"waiver #{i}: unknown key(s) {', '.join(sorted(unknown))}")
        for key in ("by", "reason"):
            if not str(w.get(key, "")).strip():
                raise InputError(
                    path, f"waiver #{i}: '{key}' is required (who accepted it, and why)"
                )
        if not any(k in w for k in ("id", "kind", "net", "near_mm")):
            raise InputError(
                path, f"waiver #{i}: give an id, or a kind, net and/or near_mm to match on"
            )
        if "near_mm" in w and (not isinstance(w["near_mm"], list) or len(w["near_mm"]) != 2):
            raise InputError(path, f"waiver #{i}: near_mm must be [x, y]")
        w = dict(w)
        if isinstance(w.get("date"), (datetime.date, datetime.datetime)):
            w["date"] = w["date"].isoformat()
        w["index"] = i
        out.append(w)
    return out


def _matches(w, f):
    if "id" in w and w["id"] != f["id"]:
        return False
    for key in ("kind", "layer", "reference_layer", "gap_type"):
        if key in w and w[key] != f.get(key):
            return False
    if "net" in w and not fnmatch.fnmatchcase(f["net"], w["net"]):
        return False
    if "near_mm" in w:
        r = float(w.get("radius_mm", 1.0))
        if math.dist(w["near_mm"], (f["x_mm"], f["y_mm"])) > r:
            return False
    return True


def apply_waivers(report, waivers):
    used = set()
    for f in report["findings"]:
        for w in waivers:
            if _matches(w, f):
                f["waiver"] = {
                    "by": str(w["by"]),
                    "reason": str(w["reason"]),
                    "date": w.get("date"),
                    "waiver": w["index"],
                }
                used.add(w["index"])
                break
    report["waivers"] = {
        "applied": sorted(used),
        "stale": [
            {k: v for k, v in w.items() if k != "index"} | {"waiver": w["index"]}
            for w in waivers
            if w["index"] not in used
        ],
    }
    return report


def load_baseline(path):
    try:
        data = json.loads(open(path, encoding="utf-8").read())
    except OSError as e:
        raise InputError(path, f"cannot read ({e.strerror})") from None
    except json.JSONDecodeError as e:
        raise InputError(path, f"not valid JSON ({e.msg})", e.lineno) from None
    if not isinstance(data, dict) or data.get("format") != "returngap-findings":
        raise InputError(path, "not a returngap findings report")
    return data


OUTLINE_CHANGE_LIMIT = 0.10  # a revision moves its outline less than this share (our choice)


def refuse_other_board(report, baseline, path):
    """A baseline from another board (other copper layers, or an outline of another size) would
    mark everything new or resolved: refused, with what differs."""
    now, then = report["board"], baseline.get("board") or {}
    layers_now = [c["name"] for c in now.get("copper_layers", [])]
    layers_then = [c["name"] for c in then.get("copper_layers", [])]
    if layers_then and layers_now != layers_then:
        raise InputError(
            path,
            f"baseline is of another board: copper layers {', '.join(layers_then)} there, "
            f"{', '.join(layers_now)} here",
        )
    a, b = now.get("outline_area_mm2") or 0.0, then.get("outline_area_mm2") or 0.0
    if a and b and abs(a - b) > OUTLINE_CHANGE_LIMIT * max(a, b):
        raise InputError(
            path, f"baseline is of another board: outline {b:.0f} mm2 there, {a:.0f} mm2 here"
        )


def compare(report, baseline, tolerance_mm=2.0):
    """Mark each finding new or unchanged against an earlier report; list the resolved ones.

    Matching survives small coordinate shifts: same kind, net, layer pair and gap type, and the
    nearest unmatched old finding within tolerance_mm (the id first, when it still exists)."""
    old = list(baseline.get("findings", []))
    taken = set()
    by_id = {f["id"]: i for i, f in enumerate(old)}
    for f in report["findings"]:
        i = by_id.get(f["id"])
        if i is None or i in taken:
            best = None
            for j, o in enumerate(old):
                if j in taken:
                    continue
                if (
                    o.get("kind"),
                    o.get("net"),
                    o.get("layer"),
                    o.get("reference_layer"),
                    o.get("gap_type"),
                ) != (f["kind"], f["net"], f["layer"], f.get("reference_layer"), f.get("gap_type")):
                    continue
                d = math.dist((o["x_mm"], o["y_mm"]), (f["x_mm"], f["y_mm"]))
                if d <= tolerance_mm and (best is None or d < best[0]):
                    best = (d, j)
            i = best[1] if best else None
        if i is None:
            f["status"] = "new"
        else:
            taken.add(i)
            f["status"] = "unchanged"
            f["baseline_id"] = old[i]["id"]
    report["resolved"] = [
        {
            k: o.get(k)
            for k in (
                "id",
                "kind",
                "gap_type",
                "severity",
                "net",
                "layer",
                "reference_layer",
                "x_mm",
                "y_mm",
                "message",
            )
        }
        for j, o in enumerate(old)
        if j not in taken
    ]
    report["baseline"] = {
        "board": baseline.get("board", {}).get("name"),
        "findings": len(old),
        "tolerance_mm": tolerance_mm,
    }
    return report
