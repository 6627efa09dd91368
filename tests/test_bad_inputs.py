"""Every file in testdata/bad gets a clear one-line error or a stated recovery; mutated inputs
never crash."""

import os
import random
import re
import shutil
import signal

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from conftest import TESTDATA
from returngap.errors import InputError
from returngap.io import load
from returngap.run.pipeline import run_check
from returngap.synth import SynthBoard, Via, rect

BAD = TESTDATA / "bad"

ERRORS = {
    "absurd-format.gbr": (2, "coordinate format 9.9 / 9.9 is outside"),
    "binary-junk.gbr": (None, "binary data"),
    "coordinate-beyond-format.gbr": (
        None,
        "from the origin; the number format or the data is wrong",
    ),
    "empty.gbr": (None, "empty file"),
    "mixed-units.gbr": (8, "changes units in the middle of the file"),
    "no-header.drl": (None, "drill file has no M48 header"),
    "undefined-macro.gbr": (4, 'Aperture shape "NOSUCH" is unknown'),
    "unknown-aperture.gbr": (4, "undefined aperture 11"),
}
RECOVERIES = {
    "no-m02.gbr": "no M02 end-of-file marker",
    "truncated.gbr": "no M02 end-of-file marker",
    "self-intersecting-region.gbr": "self-intersecting region(s) repaired",
    "unclosed-region.gbr": "never closed (no G37); it is left out",
}


def test_every_bad_file_is_covered():
    assert {p.name for p in BAD.iterdir()} == set(ERRORS) | set(RECOVERIES)


@pytest.mark.parametrize("name", sorted(ERRORS))
def test_bad_file_gives_one_line_error(name):
    line, fragment = ERRORS[name]
    with pytest.raises(InputError) as e:
        load.load_board([BAD / name])
    assert e.value.file.endswith(name) and e.value.line == line
    assert fragment in str(e.value) and "\n" not in str(e.value)


@pytest.mark.parametrize("name", sorted(RECOVERIES))
def test_bad_file_recovery_is_stated(name):
    b = load.load_board([BAD / name])
    assert any(RECOVERIES[name] in a and a.startswith(name) for a in b.assumptions)


def _seed_board(folder):
    b = SynthBoard("f", 20, 12, n_layers=2, dielectrics=[(0.2, 4.3)])
    b.planes.append((2, "GND", rect(0, 0, 20, 12)))
    b.cutouts.append((2, rect(9.8, 2, 10.2, 10)))
    b.tracks.append((1, "CLK", [(2, 6), (18, 6)], 0.2))
    b.vias.append(Via(3, 3, "GND"))
    b.write(folder, job_file=True)
    return {p.name: p.read_bytes() for p in folder.iterdir()}


def mutate(data, rng):
    """Truncation, byte flips, line deletion or duplication, digit rewrites, junk."""
    b = bytearray(data)
    op = rng.randrange(6)
    if op == 0 and b:
        return bytes(b[: rng.randrange(len(b))])
    if op == 1:
        for _ in range(rng.randrange(1, 8)):
            if b:
                b[rng.randrange(len(b))] = rng.randrange(256)
        return bytes(b)
    lines = bytes(b).split(b"\n")
    if op == 2 and lines:
        del lines[rng.randrange(len(lines))]
        return b"\n".join(lines)
    if op == 3 and lines:
        i = rng.randrange(len(lines))
        lines.insert(i, lines[i])
        return b"\n".join(lines)
    if op == 4:
        s = bytes(b).decode("latin-1")
        pos = [m.start() for m in re.finditer(r"\d", s)]
        for _ in range(rng.randrange(1, 5)):
            if pos:
                i = rng.choice(pos)
                s = s[:i] + str(rng.randrange(10)) * rng.randrange(1, 4) + s[i + 1 :]
        return s.encode("latin-1")
    return (
        bytes(rng.randrange(256) for _ in range(rng.randrange(0, 200)))
        if rng.random() < 0.3
        else data + b"%%*G36"
    )


class _Hang(Exception):
    pass


def _run_bounded(folder, seconds=20):
    def alarm(*_):
        raise _Hang()

    old = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(seconds)
    try:
        run_check(folder)
        return "report"
    except InputError:
        return "error"
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def test_mutated_boards_end_in_a_report_or_a_clear_error(tmp_path):
    """Mutation fuzzing of a whole fabrication set: no uncaught exception, no hang (FUZZ_N
    inputs, default 2000)."""
    seed = _seed_board(tmp_path / "seed")
    rng = random.Random(20261202)
    n = int(os.environ.get("FUZZ_N", "2000"))
    outcomes = {"report": 0, "error": 0}
    for _ in range(n):
        folder = tmp_path / "m"
        folder.mkdir()
        target = rng.choice(sorted(seed))
        for name, data in seed.items():
            (folder / name).write_bytes(mutate(data, rng) if name == target else data)
        outcomes[_run_bounded(folder)] += 1
        shutil.rmtree(folder)
    assert sum(outcomes.values()) == n
    assert outcomes["error"] > 0 and outcomes["report"] > 0


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(st.binary(max_size=400), st.sampled_from(["t.gbr", "t.drl", "t.gbrjob", "t.ipc"]))
def test_arbitrary_bytes_next_to_a_good_layer(tmp_path_factory, blob, name):
    folder = tmp_path_factory.mktemp("h")
    _seed_board(folder)
    (folder / name).write_bytes(blob)
    assert _run_bounded(folder) in ("report", "error")


def test_mutated_corpus_copper_file(tmp_path):
    """A real copper layer (KiCad X2 output), mutated: a report or a clear error, every time."""
    from conftest import corpus_board

    src = corpus_board("poe-gpib-adapter") / "PoE_Ethernet_GPIB_Adapter-In1_Cu.gbr"
    data = src.read_bytes()
    rng = random.Random(7)
    for i in range(int(os.environ.get("FUZZ_CORPUS_N", "60"))):
        p = tmp_path / f"m{i}.gbr"
        p.write_bytes(mutate(data, rng))
        try:
            load.load_board([p])
        except InputError:
            pass
        p.unlink()


def test_csv_is_deterministic(tmp_path):
    from click.testing import CliRunner

    from conftest import ROOT
    from returngap.cli import main

    for k in ("a", "b"):
        CliRunner().invoke(
            main,
            [
                "check",
                str(ROOT / "examples" / "demo-board"),
                "--out",
                str(tmp_path / k),
                "--fail-on",
                "never",
                "-q",
            ],
        )
    for name in ("findings.json", "findings.csv", "junit.xml"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name
