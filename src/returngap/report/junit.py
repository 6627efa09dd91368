"""The findings report as JUnit XML: one test case per check kind and net."""

from returngap.report.core import FAIL_LEVELS

__all__ = ["to_junit"]


def _line(f):
    """One finding in a test case's text; a waived one says so and who waived it."""
    waived = f" (waived by {f['waiver'].get('by')})" if f.get("waiver") else ""
    return f"[{f['severity']}{waived}] {f['id']} {f['message']}"


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
            text = escape("\n".join(_line(f) for f in fs))
            body.append(
                f"  <testcase name={name} classname={cls}>"
                f'<failure message={msg} type="{kind}">{text}</failure></testcase>'
            )
        else:
            out = escape("\n".join(_line(f) for f in fs))
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
