"""report.html: one self-contained page (pictures embedded), readable offline."""

import base64
import html
from pathlib import Path

__all__ = ["STYLE", "SCRIPT", "SEV_RANK", "page"]

STYLE = """
body{font:14px/1.45 system-ui,sans-serif;margin:24px;color:#1f2a44;max-width:1280px}
h1{font-size:22px;margin:0 0 4px}
h2{font-size:17px;margin:28px 0 8px;border-bottom:1px solid #c9d6e3}
.note{background:#fff6e0;border-left:4px solid #e69f00;padding:8px 12px;margin:12px 0}
.incomplete{background:#fde8e8;border-left:6px solid #b2182b;padding:8px 12px;margin:12px 0}
table{border-collapse:collapse;width:100%;font-size:13px}
th,td{padding:4px 8px;border-bottom:1px solid #e3e8ef;text-align:left}
th{background:#eef2f7;cursor:pointer;user-select:none;position:sticky;top:0}
th:after{content:" \\2195";color:#9aa8b8}
td.n{text-align:right;font-variant-numeric:tabular-nums}
.sev-error{color:#b24400;font-weight:600}.sev-warning{color:#a66f00;font-weight:600}
.sev-info{color:#0061a0}
.waived{opacity:.55}
.pill{display:inline-block;border-radius:8px;padding:0 6px;background:#eef2f7;font-size:12px}
figure{margin:16px 0} figure img{max-width:100%;border:1px solid #c9d6e3}
figcaption{font-size:12px;color:#555}
ul{margin:4px 0 4px 20px;padding:0}
.legend{margin:10px 0;font-size:13px}
.key{display:inline-block;margin:3px 14px 3px 0;white-space:nowrap}
.swatch{display:inline-block;width:28px;height:14px;margin-right:6px;vertical-align:middle;
border:1px solid #7f93a8}
"""

SCRIPT = """
document.querySelectorAll('table.sortable th').forEach(function(th, col){
  th.addEventListener('click', function(){
    var tb = th.closest('table').tBodies[0], rows = Array.from(tb.rows);
    var asc = th.dataset.dir !== 'asc'; th.dataset.dir = asc ? 'asc' : 'desc';
    rows.sort(function(a, b){
      var x = a.cells[col].dataset.v || a.cells[col].textContent;
      var y = b.cells[col].dataset.v || b.cells[col].textContent;
      var nx = parseFloat(x), ny = parseFloat(y);
      var r = (!isNaN(nx) && !isNaN(ny)) ? nx - ny : x.localeCompare(y);
      return asc ? r : -r;
    });
    rows.forEach(function(r){ tb.appendChild(r); });
  });
});
"""

SEV_RANK = {"error": 0, "warning": 1, "info": 2}


def _img(path):
    data = Path(path).read_bytes()
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def _pct(v):
    return None if v is None else 100 * v


def _num(v, fmt):
    return "" if v is None else format(v, fmt)


def _legend_block():
    """The pictures' colours, explained once at the top of the page (each picture has its own
    legend too)."""
    from returngap.report import render

    items = [
        (render.PLANE, "reference plane copper"),
        (render.OTHER_NET, "another plane net's copper"),
        (render.GAP, "the gap"),
        (render.FOOTPRINT[:7], "return footprint (90 % of the return)"),
        (render.TRACK, "the track"),
        (render.DETOUR, "the return's way / S21 with the gap"),
        (render.SECOND, "a layer change's second plane"),
        (render.RUN, "edge run / floating island"),
        (render.MARK["error"], "error (cross)"),
        (render.MARK["warning"], "warning (triangle)"),
        (render.MARK["info"], "info (circle)"),
    ]
    cells = "".join(
        f"<span class='key'><span class='swatch' style='background:{c}'></span>{html.escape(t)}"
        "</span>"
        for c, t in items
    )
    return f"<div class='legend' id='legend'><b>Colours in the pictures:</b> {cells}</div>"


def _knee_loss(f):
    """'with (without)' the gap, dB, where the finding has a frequency view."""
    if f.get("s21_loss_at_knee_dB") is None:
        return "-"
    return f"{f['s21_loss_at_knee_dB']:.1f} ({f['s21_loss_at_knee_no_gap_dB']:.1f})"


def _gap_section(report, e):
    """Gaps first: one row per gap, the nets that cross it and the worst of them."""
    gaps = report.get("gaps") or []
    if not gaps:
        return []
    rows = [
        "<h2>Gaps crossed</h2><table class='sortable' id='gaps'><thead><tr><th>severity</th>"
        "<th>gap</th><th>size mm</th><th>plane</th><th>x mm</th><th>y mm</th><th>nets</th>"
        "<th>worst nH</th></tr></thead><tbody>"
    ]
    for g in gaps:
        size = f"{g['gap_length_mm']:.1f}" + (
            f" &times; {g['gap_width_mm']:.2f}" if g["gap_width_mm"] else ""
        )
        nets = ", ".join(
            f"<a href='#row-{e(c['id'])}'>{e(c['net'])}</a> ({c['added_inductance_nH']:.2f} nH)"
            for c in g["crossings"]
        )
        rows.append(
            f"<tr><td class='sev-{g['severity']}' data-v='{SEV_RANK[g['severity']]}'>"
            f"{g['severity']}</td><td>{e(g['gap_type'])}</td><td>{size}</td>"
            f"<td>{e(g['reference_layer'])} ({e(g['reference_net'] or '')})</td>"
            f"<td class='n'>{g['x_mm']:.1f}</td><td class='n'>{g['y_mm']:.1f}</td>"
            f"<td>{nets}</td><td class='n'>{g['worst_added_inductance_nH']:.2f}</td></tr>"
        )
    return rows + ["</tbody></table>"]


def _net_section(report, e):
    """Per net: its findings by severity and the worst added inductance."""
    nets = report.get("by_net") or {}
    if not nets:
        return []
    rows = [
        "<h2>By net</h2><table class='sortable' id='by-net'><thead><tr><th>net</th>"
        "<th>error</th><th>warning</th><th>info</th><th>worst nH</th><th>kinds</th></tr>"
        "</thead><tbody>"
    ]
    for net, n in nets.items():
        rows.append(
            f"<tr><td>{e(net)}</td><td class='n'>{n['error']}</td><td class='n'>{n['warning']}"
            f"</td><td class='n'>{n['info']}</td><td class='n'>{_num(n['worst_nH'], '.2f')}</td>"
            f"<td>{e(', '.join(n['kinds']))}</td></tr>"
        )
    return rows + ["</tbody></table>"]


def page(report, images, overview=None, overviews=()):
    """images: {finding id: png path} (the findings without one are listed in the table only);
    overview: png path; overviews: one png per reference plane with findings, then one per gap
    a bus crosses."""
    e = html.escape
    b = report["board"]
    s = report["summary"]
    parts = [
        "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>returngap: "
        f"{e(b['name'])}</title>"
        f"<style>{STYLE}</style></head><body>",
        f"<h1>Return-path review: {e(b['name'])}</h1>",
        f"<div>{s['findings']} findings: <span class='sev-error'>{s['error']} error</span>, "
        f"<span class='sev-warning'>{s['warning']} warning</span>, <span "
        f"class='sev-info'>{s['info']} info</span> "
        f"on {s['tracks_checked']} checked tracks. Source: <code>{e(b['source'])}</code></div>",
        f"<div class='note'>{e(report['disclaimer'])}</div>",
        _legend_block(),
    ]
    if s.get("status") == "incomplete":
        parts.append(
            "<div class='incomplete'><b>Incomplete board data</b> (run with --allow-incomplete): "
            "this is a partial answer.<ul>"
            + "".join(f"<li>{e(p)}</li>" for p in report.get("problems", []))
            + "</ul></div>"
        )
    st = report.get("settings") or {}
    classes = st.get("net_classes") or []
    parts.append(
        f"<p class='rate'>Edge rate: {st.get('rise_time_ns', 0):g} ns "
        f"(knee {st.get('knee_frequency_GHz', 0):g} GHz) for every net"
        + (
            " but those of the net classes " + ", ".join(e(c.get("name", "")) for c in classes)
            if classes
            else ""
        )
        + f"; effects under {st.get('min_added_nH', 0):g} nH are "
        + ("shown (--all)" if st.get("show_all") else "not reported")
        + ".</p>"
    )
    parts.append(
        "<h2>Board and stackup</h2><table><thead><tr><th>layer</th><th>side</th><th>file</th>"
        "<th>copper mm&sup2;</th><th>nets</th><th>identified by</th></tr></thead><tbody>"
    )
    for c in b["copper_layers"]:
        parts.append(
            f"<tr><td>{e(c['name'])}</td><td>{e(c['side'])}</td><td>{e(c['file'])}</td>"
            f"<td class='n'>{c['copper_area_mm2']:.1f}</td><td class='n'>{c['net_count']}</td>"
            f"<td>{e(c['identified_by'])}</td></tr>"
        )
    parts.append(
        "</tbody></table><p>Outline: "
        + e(b.get("outline_file") or "from the copper")
        + " ("
        + e(b.get("outline_why") or "")
        + ")</p><p>Dielectrics ("
        + e(b["stackup_source"])
        + "): "
        + ", ".join(
            f"{e(d['between'][0])}&ndash;{e(d['between'][1])} {d['thickness_mm']:.3f} mm, er "
            f"{d['er']:.2f}"
            for d in b["dielectrics"]
        )
        + "</p>"
    )
    if report.get("assumptions"):
        parts.append(
            "<h2>Assumptions</h2><ul>"
            + "".join(f"<li>{e(a)}</li>" for a in report["assumptions"])
            + "</ul>"
        )
    parts += _gap_section(report, e)
    parts += _net_section(report, e)
    parts.append(
        "<h2>Findings</h2><table class='sortable' "
        "id='findings'><thead><tr><th>#</th><th>severity</th>"
        "<th>kind</th><th>gap</th><th>net</th><th>layer</th><th>ref</th><th>x mm</th><th>y mm</th>"
        "<th>detour mm</th><th>cut %</th><th>added nH</th><th>res "
        "GHz</th><th>S21 dip GHz</th><th>loss at knee dB</th><th>status</th></tr></thead><tbody>"
    )
    for i, f in enumerate(report["findings"], 1):
        status = "waived" if f.get("waiver") else f.get("status", "")
        cls = " class='waived'" if f.get("waiver") else ""
        parts.append(
            f"<tr{cls} id='row-{e(f['id'])}'><td class='n'><a href='#f-{e(f['id'])}'>{i}</a></td>"
            f"<td class='sev-{f['severity']}' "
            f"data-v='{SEV_RANK[f['severity']]}'>{f['severity']}</td>"
            f"<td>{e(f['kind'])}</td><td>{e(f.get('gap_type') or '')}</td><td>{e(f['net'])}</td>"
            f"<td>{e(f['layer'])}</td><td>{e(f.get('reference_layer') or '')}</td>"
            f"<td class='n'>{f['x_mm']:.2f}</td><td class='n'>{f['y_mm']:.2f}</td>"
            f"<td class='n'>{_num(f.get('detour_mm'), '.2f')}</td>"
            f"<td class='n'>{_num(_pct(f.get('interrupted_fraction')), '.0f')}</td>"
            f"<td class='n'>{_num(f.get('added_inductance_nH'), '.2f')}</td>"
            f"<td class='n'>{_num(f.get('resonance_GHz'), '.2f')}</td>"
            f"<td class='n'>{_num(f.get('s21_first_dip_GHz'), '.2f')}</td>"
            f"<td class='n'>{_knee_loss(f)}</td><td>{e(status)}</td></tr>"
        )
    parts.append("</tbody></table>")
    if report.get("resolved"):
        parts.append(
            "<h2>Resolved since the baseline</h2><ul>"
            + "".join(
                f"<li>{e(r['id'])}: {e(r.get('message') or '')}</li>" for r in report["resolved"]
            )
            + "</ul>"
        )
    stale = (report.get("waivers") or {}).get("stale") or []
    if stale:
        parts.append(
            "<h2>Stale waivers (match nothing now)</h2><ul>"
            + "".join(
                f"<li>waiver #{w['waiver']} by {e(str(w.get('by')))}: "
                f"{e(str(w.get('reason')))}</li>"
                for w in stale
            )
            + "</ul>"
        )
    parts.append("<h2>Pictures</h2>")
    if overview:
        parts.append(
            f"<figure><img alt='board overview' src='{_img(overview)}'><figcaption>Board "
            "overview, findings "
            "numbered as in the table.</figcaption></figure>"
        )
    for p in overviews:
        parts.append(
            f"<figure><img alt='{e(p.stem)}' src='{_img(p)}'><figcaption>{e(p.stem)}: "
            + (
                "the crossings of this gap"
                if p.stem.startswith("gap-")
                else "the findings over this plane only"
            )
            + ".</figcaption></figure>"
        )
    unpictured = [f for f in report["findings"] if f["id"] not in images]
    if unpictured:
        parts.append(
            f"<p>{len(unpictured)} finding(s) below the picture level have no picture; the "
            "table lists them (returngap show REPORT --id ID draws one).</p>"
        )
    for i, f in enumerate(report["findings"], 1):
        if f["id"] in images:
            parts.append(
                f"<figure id='f-{e(f['id'])}'><img alt='finding {i}' src='{_img(images[f['id']])}'>"
                f"<figcaption>#{i} {e(f['message'])}"
                + (
                    f" <span class='pill'>waived by {e(f['waiver']['by'])}: "
                    f"{e(f['waiver']['reason'])}</span>"
                    if f.get("waiver")
                    else ""
                )
                + "</figcaption></figure>"
            )
    parts.append(f"<script>{SCRIPT}</script></body></html>\n")
    return "\n".join(parts)
