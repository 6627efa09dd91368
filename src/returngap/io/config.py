"""The user's stackup file (TOML, our own schema; see README) -> a checked dict."""

import dataclasses
import re
import tomllib

from returngap.errors import InputError
from returngap.model.settings import Settings

__all__ = ["KNOWN_TOP", "read_toml", "load_stackup_file"]

KNOWN_TOP = {
    "board_thickness_mm",
    "copper_thickness_mm",
    "er",
    "layers",
    "dielectric",
    "plane_nets",
    "ground_nets",
    "power_nets",
    "thresholds",
    "net_class",
}
NET_CLASS_KEYS = {"name", "nets", "rise_time_ns", "max_freq_GHz", "check"}


def _number(path, where, value, low, high):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(path, f"{where} must be a number, not {value!r}") from None
    if not (low <= v <= high):
        raise InputError(path, f"{where} = {v} is outside {low}..{high}")
    return v


def read_toml(path):
    """A TOML file as a dict; unreadable or invalid files raise InputError with the line."""
    try:
        with open(path, "rb") as f:
            return tomllib.load(f)
    except OSError as e:
        raise InputError(path, f"cannot read ({e.strerror})") from None
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"at line (\d+)", str(e))
        line = getattr(e, "lineno", None) or (int(m.group(1)) if m else None)
        raise InputError(path, f"not valid TOML ({str(e).split(' (at')[0]})", line) from None


def _thresholds(path, table):
    """[thresholds]: any field of model/settings.Settings by name, checked against its type."""
    if not isinstance(table, dict):
        raise InputError(path, "[thresholds] must be a table of setting = value")
    fields = {f.name: f for f in dataclasses.fields(Settings)}
    out = {}
    for key, value in table.items():
        if key not in fields or key == "net_classes":
            raise InputError(path, f"[thresholds]: unknown setting {key!r}")
        default = fields[key].default
        if isinstance(default, bool):
            if not isinstance(value, bool):
                raise InputError(path, f"[thresholds] {key} must be true or false")
            out[key] = value
        elif isinstance(default, tuple):
            if not isinstance(value, list) or not all(isinstance(x, str) for x in value):
                raise InputError(path, f"[thresholds] {key} must be a list of strings")
            out[key] = tuple(value)
        else:
            out[key] = _number(path, f"[thresholds] {key}", value, 0.0, 1e6)
    return out


def _net_classes(path, tables):
    """[[net_class]]: nets (globs, any case), an edge rate (rise_time_ns or max_freq_GHz) and
    check = false for nets not worth checking; the first class a net matches is its class."""
    if not isinstance(tables, list):
        raise InputError(path, "net_class must be an array of tables ([[net_class]])")
    out = []
    for i, t in enumerate(tables):
        where = f"net_class #{i + 1}"
        if not isinstance(t, dict):
            raise InputError(path, f"{where} must be a table")
        unknown = set(t) - NET_CLASS_KEYS
        if unknown:
            raise InputError(path, f"{where}: unknown key(s) {', '.join(sorted(unknown))}")
        nets = t.get("nets")
        if not isinstance(nets, list) or not nets or not all(isinstance(x, str) for x in nets):
            raise InputError(path, f'{where} needs nets = ["glob", ...]')
        if "rise_time_ns" in t and "max_freq_GHz" in t:
            raise InputError(path, f"{where}: give rise_time_ns or max_freq_GHz, not both")
        c = {"name": str(t.get("name", f"class {i + 1}")), "nets": list(nets)}
        if "rise_time_ns" in t:
            c["rise_time_ns"] = _number(path, f"{where} rise_time_ns", t["rise_time_ns"], 1e-4, 1e3)
        if "max_freq_GHz" in t:
            c["max_freq_GHz"] = _number(path, f"{where} max_freq_GHz", t["max_freq_GHz"], 1e-4, 1e3)
        if "check" in t:
            if not isinstance(t["check"], bool):
                raise InputError(path, f"{where} check must be true or false")
            c["check"] = t["check"]
        out.append(c)
    return tuple(out)


def load_stackup_file(path):
    if path is None:
        return {}
    data = read_toml(path)
    unknown = set(data) - KNOWN_TOP
    if unknown:
        raise InputError(path, f"unknown key(s): {', '.join(sorted(unknown))}")
    out = {
        "path": str(path),
        "layers": {},
        "dielectric": [],
        "thresholds": _thresholds(path, data.get("thresholds", {})),
    }
    if "net_class" in data:
        out["thresholds"]["net_classes"] = _net_classes(path, data["net_class"])
    for key, lo, hi in (
        ("board_thickness_mm", 0.05, 20),
        ("copper_thickness_mm", 0.001, 0.5),
        ("er", 1.0, 20),
    ):
        if key in data:
            out[key] = _number(path, key, data[key], lo, hi)
    layers = data.get("layers", {})
    if not isinstance(layers, dict):
        raise InputError(path, "[layers] must be a table of file name = role")
    out["layers"] = {str(k): str(v) for k, v in layers.items()}
    diel = data.get("dielectric", [])
    if not isinstance(diel, list):
        raise InputError(path, "dielectric must be an array of tables ([[dielectric]])")
    for i, d in enumerate(diel):
        where = f"dielectric #{i + 1}"
        if not isinstance(d, dict) or "between" not in d or "thickness_mm" not in d:
            raise InputError(path, f'{where} needs between = ["Lx", "Ly"] and thickness_mm')
        between = d["between"]
        if (
            not isinstance(between, list)
            or len(between) != 2
            or not all(isinstance(b, str) and b[:1] == "L" and b[1:].isdigit() for b in between)
        ):
            raise InputError(path, f'{where}: between must be two layer names like ["L1", "L2"]')
        out["dielectric"].append(
            {
                "between": (between[0], between[1]),
                "thickness_mm": _number(
                    path, f"{where} thickness_mm", d["thickness_mm"], 0.005, 10
                ),
                "er": _number(path, f"{where} er", d.get("er", data.get("er", 4.3)), 1.0, 20),
            }
        )
    for key in ("ground_nets", "power_nets"):
        if key in data:
            if not isinstance(data[key], list) or not all(isinstance(x, str) for x in data[key]):
                raise InputError(path, f"{key} must be a list of net names or glob patterns")
            out[key] = list(data[key])
    return out
