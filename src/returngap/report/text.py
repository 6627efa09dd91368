"""The reports as terminal text: the findings table, the summary line, the notes block and the
layers listing."""

__all__ = [
    "findings_table",
    "gaps_block",
    "by_net_table",
    "summary_line",
    "notes_block",
    "layers_text",
    "solve_text",
]


def _fmt(v, spec):
    return "-" if v is None else format(v, spec)


def _percent(share):
    return None if share is None else 100 * share


def _unestimated(f):
    """A reference change between two nets' planes the data cannot estimate (no part data)."""
    return f["kind"] == "reference-change" and f.get("parts_known") is False


def _cut(text, width):
    """Text in at most `width` characters; a longer one keeps its start and its end round an
    ellipsis, so two long names that differ at the end (CLK_P / CLK_N) never look the same."""
    text = str(text)
    if len(text) <= width:
        return text
    tail = (width - 1) // 2
    return text[: width - 1 - tail] + "\u2026" + text[len(text) - tail :]


def _status(f):
    """Waived, or the baseline's word (new / unchanged), for the table's last column."""
    if f.get("waiver"):
        return "waived"
    return f.get("status") or ""


def _columns(net_w):
    """The table's columns: (header, width, right-aligned, value of a finding, drop order: 0 never,
    else the larger the sooner on a narrow terminal)."""
    pct = _percent
    return [
        ("#", 3, True, None, 0),
        ("severity", 8, False, _marked, 0),
        ("kind", 17, False, lambda f: f["kind"], 0),
        ("gap", 6, False, lambda f: f.get("gap_type") or "-", 4),
        ("net", net_w, False, lambda f: _cut(f["net"], net_w), 0),
        ("layer", 5, False, lambda f: f["layer"], 0),
        ("reference", 12, False, _reference, 0),
        ("x mm", 8, True, lambda f: f"{f['x_mm']:.2f}", 1),
        ("y mm", 8, True, lambda f: f"{f['y_mm']:.2f}", 1),
        ("detour mm", 9, True, lambda f: _fmt(f.get("detour_mm"), ".2f"), 5),
        ("return cut %", 12, True, lambda f: _fmt(pct(f.get("interrupted_fraction")), ".0f"), 3),
        ("added nH", 8, True, lambda f: _fmt(f.get("added_inductance_nH"), ".2f"), 0),
        ("resonance GHz", 13, True, lambda f: _fmt(f.get("resonance_GHz"), ".2f"), 2),
        ("status", 9, False, _status, 6),
    ]


def _reference(f):
    return _cut(f"{f.get('reference_layer') or '-'} {f.get('reference_net') or ''}".strip(), 12)


def _fit(columns, rows, width):
    """Drop the optional columns, the highest drop order first, until the table fits `width`;
    the status column goes when no row has a status."""
    if not any(_status(f) for f in rows):
        columns = [c for c in columns if c[0] != "status"]
    while sum(c[1] + 1 for c in columns) > width and any(c[4] for c in columns):
        worst = max(c[4] for c in columns)
        columns = [c for c in columns if c[4] != worst]
    return columns


def findings_table(report, limit=None, width=None, json_written=True):
    """The findings, worst first; reference changes the data cannot estimate (no part data) are
    one line at the end, not a row each. The table fits `width` (the terminal's): the net column
    takes 16-40 characters, and the least needed columns go on a narrow terminal."""
    shown = [f for f in report["findings"] if not _unestimated(f)]
    rows = shown[:limit] if limit else shown
    width = width or 140
    fixed = sum(c[1] + 1 for c in _columns(0) if c[0] != "net")
    columns = _fit(_columns(max(16, min(40, width - fixed - 1))), rows, width)

    def line(cells):
        return " ".join(
            f"{v:>{w}}" if right else f"{v:{w}}" for v, (_, w, right, _, _) in zip(cells, columns)
        ).rstrip()

    head = line([c[0] for c in columns])
    lines = [head, "-" * len(head)]
    for i, f in enumerate(rows, 1):
        lines.append(line([str(i) if get is None else get(f) for _, _, _, get, _ in columns]))
    if limit and len(shown) > limit:
        where = "in the JSON report" if json_written else "(--json FILE or --limit for all)"
        lines.append(f"... {len(shown) - limit} more {where}")
    quiet = [f for f in report["findings"] if _unestimated(f)]
    if quiet:
        pairs = sorted({f"{f['reference_net']}/{f['other_reference_net']}" for f in quiet})
        lines.append(
            f"{len(quiet)} layer change(s) move the return between planes of different nets "
            f"({', '.join(pairs[:4])}{', ...' if len(pairs) > 4 else ''}): the data has no part "
            "information (an IPC-D-356 netlist gives it), so their loops are not estimated"
        )
    return "\n".join(lines)


def _marked(f):
    """The severity in words, upper case for an error (seen without colour, in a log)."""
    return f["severity"].upper() if f["severity"] == "error" else f["severity"]


def gaps_block(report, limit=None):
    """One line per gap, worst first: its size, place, the nets that cross it and the worst."""
    gaps = report.get("gaps") or []
    if not gaps:
        return ""
    lines = [f"gaps crossed ({len(gaps)}):"]
    for g in gaps[:limit] if limit else gaps:
        size = f"{g['gap_length_mm']:.1f}"
        if g["gap_width_mm"]:
            size += f" x {g['gap_width_mm']:.2f}"
        n = len(g["nets"])
        names = ", ".join(g["nets"][:3]) + (", ..." if n > 3 else "")
        lines.append(
            f"  {g['severity']:7} {g['gap_type']} {size} mm on {g['reference_layer']} "
            f"({g['reference_net']}) at ({g['x_mm']:.1f}, {g['y_mm']:.1f}): {n} net(s) cross "
            f"({names}), worst {g['worst_added_inductance_nH']:.2f} nH"
        )
    if limit and len(gaps) > limit:
        lines.append(f"  ... {len(gaps) - limit} more gaps in the JSON report")
    return "\n".join(lines)


def by_net_table(report, limit=None):
    """Per net: its findings by severity, their kinds and the worst added inductance."""
    rows = list((report.get("by_net") or {}).items())
    head = f"{'net':24} {'error':>5} {'warn':>5} {'info':>5} {'worst nH':>8}  kinds"
    lines = [head, "-" * len(head)]
    for net, n in rows[:limit] if limit else rows:
        name = net if len(net) <= 24 else net[:23] + "\u2026"
        lines.append(
            f"{name:24} {n['error']:5} {n['warning']:5} {n['info']:5} "
            f"{_fmt(n['worst_nH'], '8.2f'):>8}  {', '.join(n['kinds'])}"
        )
    if limit and len(rows) > limit:
        lines.append(f"... {len(rows) - limit} more nets in the JSON report")
    return "\n".join(lines)


def summary_line(report):
    s = report["summary"]
    status = "INCOMPLETE board data (partial answer): " if s.get("status") == "incomplete" else ""
    return (
        f"returngap: {report['board']['name']}: {status}{s['findings']} finding(s) "
        f"({s['error']} error, {s['warning']} warning, {s['info']} info{_apart(report)}) on "
        f"{s['tracks_checked']} track(s) at {_edge_rate(report)}; "
        f"estimates only, see disclaimer"
    )


def _apart(report):
    """Waived findings and the baseline's word, counted apart in the summary line."""
    found = report["findings"]
    out = ""
    waived = sum(1 for f in found if f.get("waiver"))
    if waived:
        out += f"; {waived} waived"
    if any(f.get("status") for f in found) or report.get("resolved") is not None:
        new = sum(1 for f in found if f.get("status") == "new")
        same = sum(1 for f in found if f.get("status") == "unchanged")
        out += f"; {new} new, {same} unchanged, {len(report.get('resolved') or [])} resolved"
    return out


def _edge_rate(report):
    st = report.get("settings") or {}
    rate = f"{st.get('rise_time_ns', 0):g} ns edges ({st.get('knee_frequency_GHz', 0):g} GHz knee)"
    if st.get("net_classes"):
        rate += f", {len(st['net_classes'])} net class(es) of their own"
    return rate


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


def solve_text(f):
    """`returngap solve`: the solved finding in a few lines."""
    fs = f.get("field_solve") or {}
    lines = [f"{f['id']}  {f['severity']}  {f['net']} {f['layer']} over {f['reference_layer']}"]
    if fs.get("added_inductance_nH") is None:
        lines.append(f"not solved: {fs.get('note', '')}")
    else:
        lines.append(
            f"added inductance {fs['added_inductance_nH']:.2f} nH by field solve "
            f"(closed form {fs['closed_form_nH']:.2f} nH); reflection "
            f"{100 * f['reflection_fraction']:.1f} % at {f['rise_time_ns']:g} ns"
        )
        lines.append(
            f"grid {fs['grid_cells']} cells, {fs['unknowns']} unknowns, "
            f"window {fs['window_mm'][0]:.1f} x {fs['window_mm'][1]:.1f} mm, {fs['seconds']:.1f} s"
        )
    lines.append(f["message"])
    return "\n".join(lines)
