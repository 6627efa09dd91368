"""The reports as data: the layers summary and the findings report, JSON and its schema.

Floats are rounded to fixed decimals so that the same input gives byte-identical output."""

import json
from importlib import resources

from returngap import __version__
from returngap.report import messages

__all__ = [
    "DISCLAIMER",
    "SEVERITY_ORDER",
    "FAIL_LEVELS",
    "DECIMALS",
    "clean",
    "board_summary",
    "layers_report",
    "sort_findings",
    "said",
    "gap_groups",
    "net_summary",
    "findings_report",
    "to_json",
    "schema",
]

DISCLAIMER = (
    "Estimates for engineering review, from closed-form models and, where asked, a local field "
    "solve; they do not replace a full field solver, measurement, the board's own EMC test "
    "results or the applicable standards."
)
SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}
FAIL_LEVELS = {
    "error": {"error"},
    "warning": {"error", "warning"},
    "never": set(),
}  # --fail-on -> severities
DECIMALS = 4


def clean(value):
    """Round floats (recursively) so reports are deterministic; non-finite values become null."""
    # a container's own floats rounded right here, without a recursive call each (a detour
    # path's many points)
    if isinstance(value, float):
        return _rounded(value)
    if isinstance(value, dict):
        return {k: _rounded(v) if type(v) is float else clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_rounded(v) if type(v) is float else clean(v) for v in value]
    return value


def _rounded(value):
    """A float to DECIMALS places (no negative zero); None where it is not finite."""
    if value - value != 0:  # inf - inf and nan - nan are nan
        return None
    return round(value, DECIMALS) or 0.0


def board_summary(board, nets=None):
    st = board.stackup
    heights = []
    names = [c.name for c in board.copper]
    for i, name in enumerate(names):
        h = {"layer": name}
        if i > 0:
            h["above_mm"] = st.height_mm(names[i - 1], name)
        if i < len(names) - 1:
            h["below_mm"] = st.height_mm(name, names[i + 1])
        heights.append(h)
    layers = []
    for c in board.copper:
        entry = {
            "name": c.name,
            "file": c.file,
            "side": c.side,
            "polarity": c.polarity,
            "type_hint": c.type_hint,
            "identified_by": c.identified_by,
            "copper_area_mm2": c.copper_area_mm2,
            "copper_thickness_mm": st.copper_thickness_mm.get(c.name),
        }
        if nets is not None:
            entry["net_count"] = len(set(nets.layers[c.name].island_net))
        else:
            entry["net_count"] = len(c.object_nets())
        layers.append(entry)
    return clean(
        {
            "name": board.name,
            "source": board.source,
            "outline_area_mm2": board.outline.area,
            "board_thickness_mm": st.board_thickness_mm,
            "stackup_source": st.source,
            "copper_layers": layers,
            "outline_file": board.outline_file,
            "outline_why": board.outline_why,
            "drills": [
                {
                    "file": d.file,
                    "plated": d.plated,
                    "plating": d.plating,
                    "from_layer": f"L{d.from_layer}",
                    "to_layer": f"L{d.to_layer}",
                    "hole_count": d.hole_count,
                    "plated_holes": int(d.hole_plated.sum() + d.slot_plated.sum()),
                    "number_format": d.number_format,
                    "identified_by": d.identified_by,
                    "span_source": d.span_source,
                    "plating_source": d.plating_source,
                }
                for d in board.drills
            ],
            "dielectrics": [
                {
                    "between": list(d.between),
                    "thickness_mm": d.thickness_mm,
                    "er": d.er,
                    "source": d.source,
                }
                for d in st.dielectrics
            ],
            "layer_heights": heights,
            "other_files": board.other_files,
            "ignored": board.ignored,
        }
    )


def layers_report(board, nets=None):
    out = board_summary(board, nets)
    out = {
        "format": "returngap-layers",
        "version": 1,
        **out,
        "assumptions": list(board.assumptions),
    }
    return out


def sort_findings(findings):
    return sorted(
        findings,
        key=lambda f: (
            SEVERITY_ORDER[f["severity"]],
            -(f.get("added_inductance_nH") or 0),
            f["kind"],
            f["net"],
            f["layer"],
            f["x_mm"],
            f["y_mm"],
            f["id"],
        ),
    )


def said(finding, settings):
    """A finding's fields with its sentence last (composed before any rounding)."""
    fields = dict(finding.as_dict())
    fields["message"] = messages.message(fields, settings)
    return fields


def findings_report(result):
    board = result.board
    findings = sort_findings([clean(said(f, result.settings)) for f in result.findings])
    counts = {
        s: sum(1 for f in findings if f["severity"] == s) for s in ("error", "warning", "info")
    }
    refs = {
        layer: [
            clean(
                {
                    "layer": r.layer,
                    "h_mm": r.h_mm,
                    "other_h_mm": r.other_h_mm,
                    "share": r.share,
                    "line_type": r.kind,
                }
            )
            for r in rs
        ]
        for layer, rs in result.refs.items()
    }
    return {
        "format": "returngap-findings",
        "version": 1,
        "tool_version": __version__,
        "disclaimer": DISCLAIMER,
        "board": board_summary(board, result.nets),
        "settings": clean(result.settings.as_dict()),
        "inputs": result.inputs or {},
        "references": refs,
        "assumptions": list(board.assumptions),
        "problems": [str(p) for p in result.problems],
        "summary": {
            "status": result.status,
            "findings": len(findings),
            **counts,
            "tracks_checked": len(result.chains),
        },
        "nets_checked": sorted({c.net for c in result.chains}),
        "gaps": gap_groups(findings),
        "by_net": net_summary(findings),
        "findings": findings,
    }


def gap_groups(findings):
    """One record per gap (its crossings share a gap_id): where, how large, which nets cross it
    and each one's numbers, worst first."""
    groups = {}
    for f in findings:
        if f["kind"] == "gap-crossing":
            groups.setdefault(f["gap_id"], []).append(f)
    out = []
    for gid, fs in groups.items():
        worst = max(fs, key=lambda f: (-SEVERITY_ORDER[f["severity"]], f["added_inductance_nH"]))
        out.append(
            {
                "gap_id": gid,
                "gap_type": worst["gap_type"],
                "severity": worst["severity"],
                "reference_layer": worst["reference_layer"],
                "reference_net": worst["reference_net"],
                "x_mm": worst["x_mm"],
                "y_mm": worst["y_mm"],
                "gap_length_mm": worst["gap_length_mm"],
                "gap_width_mm": worst["gap_width_mm"],
                "worst_added_inductance_nH": worst["added_inductance_nH"],
                "nets": sorted({f["net"] for f in fs}),
                "crossings": [
                    {
                        k: f[k]
                        for k in (
                            "id",
                            "net",
                            "layer",
                            "severity",
                            "added_inductance_nH",
                            "reflection_fraction",
                            "return_path",
                        )
                    }
                    for f in fs
                ],
            }
        )
    out.sort(key=lambda g: (SEVERITY_ORDER[g["severity"]], -g["worst_added_inductance_nH"]))
    return out


def net_summary(findings):
    """Per net: how many findings of each severity, the kinds, the worst added inductance."""
    out = {}
    for f in findings:
        n = out.setdefault(
            f["net"],
            {"findings": 0, "error": 0, "warning": 0, "info": 0, "kinds": [], "worst_nH": None},
        )
        n["findings"] += 1
        n[f["severity"]] += 1
        if f["kind"] not in n["kinds"]:
            n["kinds"].append(f["kind"])
        added = f.get("added_inductance_nH")
        if added is not None and (n["worst_nH"] is None or added > n["worst_nH"]):
            n["worst_nH"] = added
    return dict(sorted(out.items(), key=lambda kv: (-kv[1]["error"], -kv[1]["warning"], kv[0])))


def to_json(data):
    return json.dumps(data, indent=1, sort_keys=False, ensure_ascii=False) + "\n"


def schema():
    return json.loads(
        resources.files("returngap").joinpath("report/schemas/findings.schema.json").read_text()
    )
