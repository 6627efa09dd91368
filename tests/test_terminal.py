"""The terminal and CI side of `check` as a user meets it: standard output, pipes, the table's
width, --nets, waivers, baselines, messages for slips, SARIF."""

import json
import os
import subprocess
import sys

import jsonschema
import pytest
from click.testing import CliRunner

from conftest import ROOT, TESTDATA, corpus_board
from returngap.cli import main
from returngap.report import core as report
from returngap.report import text

DEMO = ROOT / "examples" / "demo-board"
STACKUP = DEMO / "stackup.toml"


def run(*args, env=None):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False, env=env)


def check_demo(*args, env=None):
    """`returngap check` of the demo board with its stackup, and the given options."""
    return run("check", DEMO, "--stackup", STACKUP, *args, env=env)


def _returngap(*args, **kw):
    return subprocess.run(
        [sys.executable, "-m", "returngap.cli", *map(str, args)],
        capture_output=True,
        text=True,
        **kw,
    )


def test_json_to_standard_output_alone():
    p = _returngap("check", DEMO, "--stackup", STACKUP, "--json", "-", "--fail-on", "never")
    assert p.returncode == 0
    rep = json.loads(p.stdout)  # nothing but the report on stdout
    assert rep["format"] == "returngap-findings"
    assert "finding(s)" in p.stderr  # the summary line went to stderr


def test_a_closed_pipe_ends_quietly():
    board = corpus_board("vesc-4.12")  # a report larger than a pipe's buffer
    cmd = f"'{sys.executable}' -m returngap.cli check '{board}' --json - --fail-on never"
    p = subprocess.run(
        cmd + " | head -c 50",
        shell=True,
        capture_output=True,
        text=True,
    )
    assert p.stdout.startswith("{")
    assert "Error" not in p.stderr and "Traceback" not in p.stderr


@pytest.mark.parametrize("width", [80, 120, 200])
def test_the_table_fits_the_terminal(width):
    r = check_demo("--fail-on", "never", env={"COLUMNS": str(width)})
    table = [ln for ln in r.output.splitlines() if ln.startswith(("  #", "---", "  1 "))]
    assert table and all(len(ln) <= width for ln in table)
    assert "kind" in table[0] and "stitching-sp " not in r.output


def test_long_net_names_stay_apart():
    a = text._cut("DDR3_DATA_STROBE_BYTE_LANE_3_P", 16)
    b = text._cut("DDR3_DATA_STROBE_BYTE_LANE_3_N", 16)
    assert len(a) == len(b) == 16 and a != b and "\u2026" in a


def test_nets_apply_to_every_kind_in_any_case_and_warn_when_unmatched(tmp_path):
    out = tmp_path / "f.json"
    r = check_demo("--nets", "db1*", "--nets", "NOPE_*", "--json", out, "--fail-on", "never")
    rep = json.loads(out.read_text())
    nets = {f["net"] for f in rep["findings"]}
    assert nets and all(n.upper().startswith("DB1") for n in nets)  # reference changes too
    assert "--nets NOPE_*: matches no routed signal net" in r.output


def _waivers(tmp_path, body):
    p = tmp_path / "w.toml"
    p.write_text(body)
    return p


def test_waivers_unknown_table_kind_only_and_stale_when_quiet(tmp_path):
    bad = _waivers(tmp_path, '[waivers]\nid = "x"\n')
    r = check_demo("--waivers", bad)
    assert r.exit_code == 2 and "unknown table(s) waivers" in r.output
    kind_only = _waivers(
        tmp_path,
        '[[waiver]]\nkind = "reference-change"\nby = "A. Reviewer"\nreason = "slow bus"\n'
        '[[waiver]]\nid = "000000000000"\nby = "A. Reviewer"\nreason = "gone"\n',
    )
    out = tmp_path / "f.json"
    r = check_demo("--waivers", kind_only, "--json", out, "-q", "--fail-on", "never")
    rep = json.loads(out.read_text())
    waived = [f for f in rep["findings"] if f.get("waiver")]
    assert waived and all(f["kind"] == "reference-change" for f in waived)
    assert "stale waiver #2" in r.output  # listed with --quiet too
    assert f"{len(waived)} waived" in r.output


def test_baseline_of_another_board_is_refused(tmp_path):
    other = tmp_path / "other.json"
    rep = json.loads((TESTDATA / "golden" / "slot-centred.json").read_text())
    other.write_text(json.dumps(rep))
    r = check_demo("--baseline", other)
    assert r.exit_code == 2 and "baseline is of another board" in r.output
    same = tmp_path / "same.json"
    check_demo("--json", same, "--fail-on", "never")
    r = check_demo("--baseline", same, "--fail-on", "never")
    assert "0 new," in r.output and "resolved" in r.output


def test_messages_for_slips(tmp_path):
    twice = run("check", DEMO, DEMO)
    assert twice.exit_code == 2 and "given twice" in twice.output
    pdf_only = tmp_path / "pdf"
    pdf_only.mkdir()
    (pdf_only / "fab-notes.pdf").write_text("%PDF-1.4\n")
    r = run("check", pdf_only)
    assert r.exit_code == 2
    assert "no fabrication data found" in r.output and "ignored: fab-notes.pdf" in r.output
    a_file = tmp_path / "report"
    a_file.write_text("")
    r = run("check", DEMO, "--out", a_file)
    assert r.exit_code == 2 and "a file of that name exists" in r.output
    r = run("check", tmp_path / "missing", "--debug")  # a global option after the subcommand
    assert r.exit_code == 2 and "No such option" not in r.output
    assert "default 0.5 ns" in run("check", "--help").output


def test_sarif_validates_against_the_published_schema(tmp_path):
    # SARIF 2.1.0's own JSON schema (OASIS), shipped in testdata/sarif/
    schema = json.loads((TESTDATA / "sarif" / "sarif-2.1.0-rtm.5.json").read_text())
    out = tmp_path / "out"
    r = check_demo("--out", out, "--fail-on", "never", "-q")
    assert r.exit_code == 0
    log = json.loads((out / "findings.sarif").read_text())
    jsonschema.validate(log, schema, cls=jsonschema.Draft4Validator)
    rep = json.loads((out / "findings.json").read_text())
    results = log["runs"][0]["results"]
    assert len(results) == len(rep["findings"])
    first = results[0]
    assert first["locations"][0]["logicalLocations"][0]["name"] == rep["findings"][0]["net"]
    assert first["locations"][0]["physicalLocation"]["artifactLocation"]["uri"].endswith(".gbr")
    assert {r["level"] for r in results} <= {"error", "warning", "note"}
    jsonschema.validate(rep, report.schema())
    assert os.path.exists(out / "junit.xml")


def test_progress_line_on_a_terminal_only():
    # a pseudo-terminal for stderr: the stage line shows there, and never in a pipe
    import pty

    env = {k: v for k, v in os.environ.items() if k != "CI"}
    env["RETURNGAP_PROGRESS_AFTER_S"] = "0"
    args = [sys.executable, "-m", "returngap.cli", "check", str(DEMO), "--fail-on", "never"]
    main_fd, child_fd = pty.openpty()
    p = subprocess.run(args, stdout=subprocess.PIPE, stderr=child_fd, env=env, timeout=120)
    os.close(child_fd)
    seen = b""
    try:
        while chunk := os.read(main_fd, 65536):
            seen += chunk
    except OSError:
        pass
    os.close(main_fd)
    assert p.returncode == 0 and b"returngap: gap scan and checks..." in seen
    piped = subprocess.run(args, capture_output=True, text=True, env=env, timeout=120)
    assert "gap scan and checks" not in piped.stderr
