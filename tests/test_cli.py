"""The command line as a user runs it: exit codes, one-line errors, reports that validate."""

import json
import subprocess
import sys

import jsonschema
from click.testing import CliRunner

from conftest import ROOT
from returngap.cli import main
from returngap.report import core as report

DEMO = ROOT / "examples" / "demo-board"


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def test_check_demo_json_validates_and_fails_on_error(tmp_path):
    out = tmp_path / "f.json"
    r = run("check", DEMO, "--stackup", DEMO / "stackup.toml", "--json", out)
    assert r.exit_code == 1  # the demo has deliberate splits (errors)
    rep = json.loads(out.read_text())
    jsonschema.validate(rep, report.schema())
    assert rep["format"] == "returngap-findings" and rep["version"] == 1
    gaps = [f for f in rep["findings"] if f["kind"] == "gap-crossing"]
    kinds = {(f["net"], f["gap_type"]) for f in gaps}
    # the deliberate problems of examples/make_demo_board.py; the SD_CMD graze of a round void
    # bends only the edge of its return (0.00 mm detour): below the noise floor, shown with --all
    assert {
        ("SPI_SCK", "slot"),
        ("RMII_TXD0", "split"),
        ("RMII_TXD1", "split"),
        ("ADC_MCLK", "slot"),
    } <= kinds
    assert "SD_CMD" not in {f["net"] for f in gaps}
    everything = tmp_path / "all.json"
    run("check", DEMO, "--stackup", DEMO / "stackup.toml", "--json", everything, "--all")
    graze = [f for f in json.loads(everything.read_text())["findings"] if f["net"] == "SD_CMD"]
    assert [(f["gap_type"], f["crossing"]) for f in graze] == [("void", "graze")]
    assert graze[0]["added_inductance_nH"] < 0.1
    assert not any(f["net"].startswith("DB") or f["net"].startswith("MODEM") for f in gaps)
    # the bus changes layers through the decoupling capacitors C12 / C13 (reference changes,
    # not gaps)
    assert {f.get("bridge_part") for f in rep["findings"] if f["kind"] == "reference-change"} <= {
        "C12",
        "C13",
    }
    assert "summary" in rep and rep["summary"]["error"] >= 2
    assert "estimate" in rep["disclaimer"].lower() or "estimates" in rep["disclaimer"].lower()


def test_fail_on_never_and_warning(tmp_path):
    assert run("check", DEMO, "--fail-on", "never").exit_code == 0
    assert (
        run("check", DEMO, "--nets", "SD_*", "--fail-on", "warning").exit_code == 0
    )  # an info only
    assert run("check", DEMO, "--nets", "RMII_*", "--fail-on", "warning").exit_code == 1


def test_rise_time_and_max_freq_are_exclusive():
    r = run("check", DEMO, "--rise-time", "1", "--max-freq", "2")
    assert r.exit_code == 2


def test_bad_input_is_one_line_without_traceback(tmp_path):
    bad = tmp_path / "b"
    bad.mkdir()
    (bad / "top.gbr").write_text(
        "%TF.FileFunction,Copper,L1,Top*%\n%FSLAX46Y46*%\n%MOMM*%\nG37*\nM02*\n"
    )
    p = subprocess.run(
        [sys.executable, "-m", "returngap.cli", "check", str(bad)], capture_output=True, text=True
    )
    assert p.returncode == 2
    assert p.stdout == ""
    lines = p.stderr.strip().splitlines()
    assert len(lines) == 1 and "top.gbr:4" in lines[0] and "Traceback" not in p.stderr


def test_missing_board_is_exit_2():
    r = CliRunner().invoke(main, ["check", "/no/such/board"])
    assert r.exit_code == 2


def test_same_input_gives_identical_json(tmp_path):
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    run("check", DEMO, "--json", a, "--fail-on", "never")
    run("check", DEMO, "--json", b, "--fail-on", "never")
    assert a.read_bytes() == b.read_bytes()


def test_layers_json(tmp_path):
    r = run("layers", DEMO, "--json")
    rep = json.loads(r.output)
    assert [c["name"] for c in rep["copper_layers"]] == ["L1", "L2", "L3", "L4"]
    assert [c["side"] for c in rep["copper_layers"]] == ["top", "inner", "inner", "bottom"]
    assert rep["drills"][0]["from_layer"] == "L1" and rep["drills"][0]["to_layer"] == "L4"
    assert [d["thickness_mm"] for d in rep["dielectrics"]] == [0.18, 1.13, 0.18]
    assert rep["copper_layers"][1]["copper_area_mm2"] > 0.9 * 79.4 * 49.4
    assert {"file": "stackup.toml", "reason": "not fabrication data (.toml)"} in rep["ignored"]


def test_demo_board_is_what_the_generator_writes(tmp_path):
    subprocess.run(
        [sys.executable, str(ROOT / "examples" / "make_demo_board.py"), str(tmp_path)],
        check=True,
        capture_output=True,
    )
    made = sorted(p.name for p in tmp_path.iterdir())
    assert made == sorted(p.name for p in DEMO.iterdir())
    for name in made:
        assert (tmp_path / name).read_bytes() == (DEMO / name).read_bytes(), name


def test_out_dir_gets_findings(tmp_path):
    run("check", DEMO, "--out", tmp_path / "o", "--fail-on", "never")
    assert json.loads((tmp_path / "o" / "findings.json").read_text())["findings"]


def test_gaps_first_by_net_and_the_edge_rate(tmp_path):
    # the demo's split in L3 is crossed by both RMII lines: one gap line naming both, before the
    # per-finding table; --by-net adds the per-net table; the HTML has both tables and the rate
    r = run("check", DEMO, "--stackup", DEMO / "stackup.toml", "--by-net", "--out", tmp_path / "o")
    text = r.output
    assert text.index("gaps crossed") < text.index("severity kind")
    split_line = next(line for line in text.splitlines() if " split " in line and "net(s)" in line)
    assert "2 net(s) cross (RMII_TXD0, RMII_TXD1)" in split_line
    assert "worst nH" in text and "0.5 ns edges (1 GHz knee)" in text
    html = (tmp_path / "o" / "report.html").read_text()
    assert "<h2>Gaps crossed</h2>" in html and "<h2>By net</h2>" in html
    assert "Edge rate: 0.5 ns" in html
    rep = json.loads((tmp_path / "o" / "findings.json").read_text())
    [group] = [g for g in rep["gaps"] if g["gap_type"] == "split"]
    assert group["nets"] == ["RMII_TXD0", "RMII_TXD1"]
    ids = {f["gap_id"] for f in rep["findings"] if f["net"].startswith("RMII")}
    assert ids == {group["gap_id"]}
