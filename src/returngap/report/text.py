"""The reports as terminal text: the findings table, the summary line, the notes block and the
layers listing."""

__all__ = ["findings_table", "summary_line", "notes_block", "layers_text"]


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
