"""Reports: the layers summary and the findings report (JSON, text table).

Floats are rounded to fixed decimals so that the same input gives byte-identical output."""

import json
import math
from importlib import resources

from returngap import __version__
from returngap.model.findings import Finding

__all__ = [
    "DISCLAIMER",
    "SEVERITY_ORDER",
    "FAIL_LEVELS",
    "DECIMALS",
    "clean",
    "board_summary",
    "layers_report",
    "sort_findings",
    "findings_report",
    "to_json",
    "schema",
    "findings_table",
    "summary_line",
    "notes_block",
    "layers_text",
    "CSV_FIELDS",
    "to_csv",
    "to_junit",
]

DISCLAIMER = (
    "Estimates for engineering review, from closed-form models; they do not replace field "
    "solving, the board's own EMC test results or the applicable standards."
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
    if isinstance(value, float):
        if not math.isfinite(value):
            return None
        v = round(value, DECIMALS)
        return 0.0 if v == 0 else v
    if isinstance(value, Finding):
        value = value.as_dict()
    if isinstance(value, dict):
        return {k: clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    return value


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


def findings_report(result):
    board = result.board
    findings = sort_findings([clean(f) for f in result.findings])
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
        "findings": findings,
    }


def to_json(data):
    return json.dumps(data, indent=1, sort_keys=False, ensure_ascii=False) + "\n"


def schema():
    return json.loads(
        resources.files("returngap").joinpath("report/schemas/findings.schema.json").read_text()
    )


def _fmt(v, spec):
    return "-" if v is None else format(v, spec)


def _percent(share):
    return None if share is None else 100 * share


def findings_table(report, limit=None):
    rows = report["findings"][:limit] if limit else report["findings"]
    head = (
        f"{'#':>3} {'severity':8} {'kind':12} {'gap':6} {'net':18} {'layer':5} {'ref':5} "
        f"{'x mm':>8} {'y mm':>8} {'detour mm':>9} {'cut %':>5} {'added nH':>8} {'res GHz':>7}"
    )
    lines = [head, "-" * len(head)]
    for i, f in enumerate(rows, 1):
        lines.append(
            f"{i:>3} {f['severity']:8} {f['kind'][:12]:12} {(f.get('gap_type') or '-')[:6]:6} "
            f"{f['net'][:18]:18} {f['layer']:5} {f.get('reference_layer') or '-':5} "
            f"{f['x_mm']:8.2f} {f['y_mm']:8.2f} {_fmt(f.get('detour_mm'), '9.2f'):>9} "
            f"{_fmt(_percent(f.get('interrupted_fraction')), '5.0f'):>5} "
            f"{_fmt(f.get('added_inductance_nH'), '8.2f'):>8} "
            f"{_fmt(f.get('resonance_GHz'), '7.2f'):>7}"
        )
    if limit and len(report["findings"]) > limit:
        lines.append(f"... {len(report['findings']) - limit} more in the JSON report")
    return "\n".join(lines)


def summary_line(report):
    s = report["summary"]
    status = "INCOMPLETE board data (partial answer): " if s.get("status") == "incomplete" else ""
    return (
        f"returngap: {report['board']['name']}: {status}{s['findings']} finding(s) "
        f"({s['error']} error, {s['warning']} warning, {s['info']} info) on "
        f"{s['tracks_checked']} track(s); "
        f"estimates only, see disclaimer"
    )


def notes_block(report, quiet=False):
    """What the JSON knows beyond the findings: ignored files, defaults, repairs, the gate's
    problems. Always shown; one line when quiet."""
    notes, ignored = (
        report.get("assumptions") or [],
        (report.get("board") or {}).get("ignored") or [],
    )
    if quiet:
        if not notes and not ignored:
            return ""
        return f"{len(notes)} assumption(s), {len(ignored)} ignored file(s); see the report"
    lines = []
    if notes:
        lines.append(f"assumptions and warnings ({len(notes)}):")
        lines += [f"  - {a}" for a in notes]
    if ignored:
        lines.append(f"ignored files ({len(ignored)}):")
        lines += [f"  - {i['file']}: {i['reason']}" for i in ignored]
    return "\n".join(lines)


def layers_text(rep):
    out = [
        f"board {rep['name']} ({rep['source']}), outline {rep['outline_area_mm2']:.1f} mm2, "
        f"{rep['board_thickness_mm']:.3f} mm thick, stackup from {rep['stackup_source']}",
        f"outline from {rep.get('outline_file') or 'the copper'}: {rep.get('outline_why')}",
        "",
        "copper layers (top to bottom):",
    ]
    for c in rep["copper_layers"]:
        out.append(
            f"  {c['name']:4} {c['side']:6} {c['polarity']:8} {c['copper_area_mm2']:10.1f} mm2  "
            f"{c['net_count']:4} nets  {c['file']}  [{c['identified_by']}]"
        )
    out.append("dielectrics:")
    for d in rep["dielectrics"]:
        out.append(
            f"  {d['between'][0]}-{d['between'][1]}: {d['thickness_mm']:.4f} mm, er "
            f"{d['er']:.2f} [{d['source']}]"
        )
    out.append("drills:")
    for d in rep["drills"]:
        out.append(
            f"  {d['file']}: {d['plating']} {d['from_layer']}-{d['to_layer']}, "
            f"{d['hole_count']} holes "
            f"(span: {d['span_source']}; plating: {d['plating_source']})"
        )
    if rep["ignored"]:
        out.append("ignored files:")
        out += [f"  {i['file']}: {i['reason']}" for i in rep["ignored"]]
    if rep["assumptions"]:
        out.append("assumptions:")
        out += [f"  - {a}" for a in rep["assumptions"]]
    if rep.get("problems"):
        out.append("incomplete board data (check refuses it without --allow-incomplete):")
        out += [f"  - {p}" for p in rep["problems"]]
    return "\n".join(out)


CSV_FIELDS = [
    "id",
    "kind",
    "gap_type",
    "severity",
    "status",
    "waived",
    "net",
    "layer",
    "reference_layer",
    "reference_net",
    "x_mm",
    "y_mm",
    "gap_length_mm",
    "gap_width_mm",
    "detour_mm",
    "detour_method",
    "interrupted_fraction",
    "added_inductance_nH",
    "added_inductance_low_nH",
    "added_inductance_high_nH",
    "inductance_method",
    "resonance_GHz",
    "message",
]


def to_csv(report):
    """One row per finding; numbers as in the JSON, empty cells for null."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=CSV_FIELDS, lineterminator="\n", extrasaction="ignore")
    w.writeheader()
    for f in report["findings"]:
        row = dict(f)
        lo, hi = f.get("added_inductance_range_nH") or (None, None)
        row["added_inductance_low_nH"], row["added_inductance_high_nH"] = lo, hi
        row["waived"] = "yes" if f.get("waiver") else ""
        row["status"] = f.get("status", "")
        w.writerow({k: ("" if row.get(k) is None else row.get(k)) for k in CSV_FIELDS})
    return buf.getvalue()


def to_junit(report, fail_on="error"):
    """JUnit XML: one test case per check kind and net; failures carry the finding messages."""
    from xml.sax.saxutils import escape, quoteattr

    bad = FAIL_LEVELS[fail_on]
    cases = {}
    for f in report["findings"]:
        cases.setdefault((f["kind"], f["net"]), []).append(f)
    nets_checked = report.get("nets_checked") or sorted({k[1] for k in cases})
    for net in nets_checked:
        cases.setdefault(("gap-crossing", net), [])
    failures = 0
    body = []
    for (kind, net), fs in sorted(cases.items()):
        failing = [f for f in fs if f["severity"] in bad and not f.get("waiver")]
        name = quoteattr(f"{kind} {net}")
        cls = quoteattr(f"returngap.{report['board']['name']}.{kind}")
        if failing:
            failures += 1
            msg = quoteattr(
                f"{len(failing)} finding(s): " + "; ".join(f["message"] for f in failing)[:2000]
            )
            text = escape("\n".join(f"[{f['severity']}] {f['id']} {f['message']}" for f in fs))
            body.append(
                f"  <testcase name={name} classname={cls}>"
                f'<failure message={msg} type="{kind}">{text}</failure></testcase>'
            )
        else:
            out = escape("\n".join(f"[{f['severity']}] {f['id']} {f['message']}" for f in fs))
            body.append(
                f"  <testcase name={name} classname={cls}>"
                + (f"<system-out>{out}</system-out>" if fs else "")
                + "</testcase>"
            )
    status = report["summary"].get("status", "complete")
    skipped = 0
    if (
        status == "incomplete"
    ):  # a partial answer: visible in every CI view, but not a failure by itself
        skipped = 1
        why = quoteattr("incomplete board data: " + "; ".join(report.get("problems") or [])[:2000])
        body.insert(
            0,
            f'  <testcase name="board data complete" classname='
            f"{quoteattr('returngap.' + report['board']['name'] + '.completeness')}>"
            f"<skipped message={why}/></testcase>",
        )
    head = (
        f'<?xml version="1.0" encoding="UTF-8"?>\n<testsuites name="returngap">\n'
        f' <testsuite name={quoteattr("returngap " + report["board"]["name"])} tests="{len(body)}" '
        f'failures="{failures}" errors="0" skipped="{skipped}">\n'
        f'  <properties><property name="status" value="{status}"/></properties>'
    )
    return "\n".join([head] + [" " + b for b in body] + [" </testsuite>", "</testsuites>", ""])
