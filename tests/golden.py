"""Frozen findings of known boards (testdata/golden/), so that a change that moves a number fails
loudly. Regenerate on purpose only: `make golden` (this file run as a script)."""

import json
import math
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
GOLDEN = ROOT / "testdata" / "golden"
CORPUS = ROOT.parent / "shared" / "corpus"
sys.path.insert(0, str(HERE))

REL, ABS = 1e-6, 1e-6  # float tolerance: any real change of a number is far larger
VOLATILE = {
    "source",
    "tool_version",
    "inputs",
}  # paths and versions differ between machines and releases


def _synthetic(build):
    def make():
        from returngap.report import core as report
        from returngap.run import pipeline

        with tempfile.TemporaryDirectory() as tmp:
            folder = build(Path(tmp) / "board")
            return report.findings_report(pipeline.run_check(folder, Path(folder) / "stackup.toml"))

    return make


def _folder(path, stackup=None):
    def make():
        from returngap.report import core as report
        from returngap.run import pipeline

        return report.findings_report(pipeline.run_check(path, stackup))

    return make


def cases():
    """name -> (needs the corpus, function returning the findings report)."""
    from boards import hazard_board, slot_board, stripline_board

    demo = ROOT / "examples" / "demo-board"
    return {
        "demo-board": (False, _folder(demo, demo / "stackup.toml")),
        "slot-centred": (False, _synthetic(lambda f: slot_board(f))),
        "slot-offset": (False, _synthetic(lambda f: slot_board(f, D=16, offset=3.0))),
        "split": (False, _synthetic(lambda f: slot_board(f, split=True))),
        "graze": (False, _synthetic(lambda f: slot_board(f, graze=0.3))),
        "stripline": (False, _synthetic(lambda f: stripline_board(f))),
        "hazards": (False, _synthetic(lambda f: hazard_board(f, stitch_pitch=8.0))),
        "poe-gpib-adapter": (True, _folder(CORPUS / "poe-gpib-adapter")),
        "vesc-4.12": (True, _folder(CORPUS / "vesc-4.12")),
    }


def frozen(report):
    """The parts of a report that must not change without a reason."""
    out = {k: v for k, v in report.items() if k not in VOLATILE}
    out["board"] = {k: v for k, v in report["board"].items() if k not in VOLATILE}
    return json.loads(json.dumps(out))


def differences(want, got, where="", limit=20):
    """Field-by-field differences, floats within REL / ABS."""
    out = []
    if isinstance(want, dict) and isinstance(got, dict):
        for k in sorted(set(want) | set(got)):
            if k not in got or k not in want:
                out.append(f"{where}.{k}: {'missing' if k not in got else 'new'}")
            else:
                out += differences(want[k], got[k], f"{where}.{k}", limit)
    elif isinstance(want, list) and isinstance(got, list):
        if len(want) != len(got):
            out.append(f"{where}: {len(want)} items, now {len(got)}")
        for i, (a, b) in enumerate(zip(want, got)):
            out += differences(a, b, f"{where}[{i}]", limit)
    elif isinstance(want, float) or isinstance(got, float):
        if not (
            isinstance(want, (int, float))
            and isinstance(got, (int, float))
            and math.isclose(want, got, rel_tol=REL, abs_tol=ABS)
        ):
            out.append(f"{where}: {want!r} -> {got!r}")
    elif want != got:
        out.append(f"{where}: {want!r} -> {got!r}")
    return out[:limit]


def write_all(names=None):
    GOLDEN.mkdir(parents=True, exist_ok=True)
    for name, (needs_corpus, make) in cases().items():
        if names and name not in names:
            continue
        if needs_corpus and not CORPUS.exists():
            print(f"golden: {name} skipped (no corpus)")
            continue
        (GOLDEN / f"{name}.json").write_text(
            json.dumps(frozen(make()), indent=1, ensure_ascii=False) + "\n"
        )
        print(f"golden: wrote {name}.json")


if __name__ == "__main__":
    import warnings

    warnings.simplefilter("ignore")
    write_all(sys.argv[1:])
