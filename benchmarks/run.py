"""make bench: gerbonara's parse of the same files (the floor) against the full check, side by side.

Each measurement runs in its own process; reported per case: both times, their ratio, peak memory
of the check, and the fitted scaling exponent of the check time against segment count. The two
sides run in turns, a parse then a check, at least five pairs and up to nine (fewer of the long
cases); the ratio is the median of the pairs' own ratios and each time the median of its side. On a
shared machine a run's speed drifts by a third within seconds: a pair, run back to back, shares
the drift, where the best of each side may come from different moments. Each case starts with one
pair that is not counted (the files' first reading from disk is no part of either side's cost).
"""

import json
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
CORPUS = ROOT.parent / "shared" / "corpus"
CORPUS_CASES = {
    "poe-gpib-adapter": None,
    "vesc-4.12": None,
    "ulx3s-v3.1.1": None,
    "mch2022-badge": None,
}

PARSE = """
import sys, warnings, time
warnings.simplefilter("ignore")
from pathlib import Path
from gerbonara import GerberFile, ExcellonFile
from returngap.io.inputs import BoardFiles
t = time.perf_counter()
with BoardFiles(sys.argv[1]) as bf:
    for f in bf.fab:
        text = f.path.read_text(encoding="latin-1")
        if f.kind == "gerber":
            GerberFile.from_string(text, filename=f.name)
        elif f.kind == "excellon":
            try:
                ExcellonFile.from_string(text, filename=f.name)
            except Exception:
                pass
print(time.perf_counter() - t)
"""

# What `returngap check` does without --out: every stage and the findings report. Both timers start
# after the imports, so the two sides are measured alike. Peak memory: this process and its workers.
CHECK = """
import resource, sys, time, warnings
warnings.simplefilter("ignore")
from returngap.run.pipeline import run_check
from returngap.report import core as report
t = time.perf_counter()
r = run_check(sys.argv[1], sys.argv[2] if len(sys.argv) > 2 and sys.argv[2] else None)
report.findings_report(r)
dt = time.perf_counter() - t
segs = sum(len(l.segments) for l in r.board.copper)
peak = max(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
print(dt, segs, len(r.findings), peak / 1024)
"""


# The field solve's target (a 24 x 1 mm slot at h = 0.2 mm in <= 20 s, <= 2 GiB on this
# 2-core machine), beside a fixed dense reference workload of the same run (a 3000 x 3000
# Cholesky) so the time reads as a ratio too.
SOLVE = """
import resource, time, numpy as np, scipy.linalg
from returngap.physics import peec
a = np.random.default_rng(1).standard_normal((3000, 3000)); a = a @ a.T + 3000 * np.eye(3000)
t = time.perf_counter(); scipy.linalg.cho_factor(a); ref = time.perf_counter() - t
t = time.perf_counter()
dl, cells, _ = peec.rect_slot_added_inductance(24.0, 1.0, 0.2, 0.38)
dt = time.perf_counter() - t
print(dt, ref, cells, dl, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


# `check --out` against `check` on one board, side by side: the reports and pictures (default
# level, warning) on top of the analysis. Target: --out at most 2x check.
OUT = """
import sys, tempfile, time, warnings
warnings.simplefilter("ignore")
from returngap.run.pipeline import run_check
from returngap.report import core as report
from returngap.run import outputs
t = time.perf_counter()
r = run_check(sys.argv[1], sys.argv[2] if len(sys.argv) > 2 and sys.argv[2] else None)
rep = report.findings_report(r)
check = time.perf_counter() - t
with tempfile.TemporaryDirectory() as out:
    outputs.write_outputs(r, rep, out, "never")
total = time.perf_counter() - t
print(check, total, len(rep["findings"]))
"""


def out_lines(cases):
    """check --out against check on the largest corpus board and a board of many findings."""
    rows = []
    for name, path, stack in cases:
        runs = [[float(v) for v in run(OUT, path, stack or "")] for _ in range(3)]
        ratio = statistics.median(r[1] / r[0] for r in runs)
        check = statistics.median(r[0] for r in runs)
        total = statistics.median(r[1] for r in runs)
        ok = "met" if ratio <= 2.0 else "MISSED"
        print(
            f"{'check --out: ' + name:26} {int(runs[0][2]):>9} {check:>8.2f} {total:>8.2f} "
            f"{ratio:>6.2f}   findings; --out / check, target <= 2: {ok}"
        )
        rows.append({"case": name, "check_s": check, "out_s": total, "ratio": ratio})
    return rows


def solver_line():
    runs = [[float(v) for v in run(SOLVE)] for _ in range(3)]
    dt = statistics.median(r[0] for r in runs)
    ratio = statistics.median(r[0] / r[1] for r in runs)
    mem = max(r[4] for r in runs)
    ok = dt <= 20.0 and mem <= 2048
    print(
        f"{'field solve 24x1 mm slot':26} {int(runs[0][2]):>9} {'-':>8} {dt:>8.2f} {'-':>6} "
        f"{mem:>9.0f} {'-':>8} {len(runs):>5}   dL {runs[0][3]:.2f} nH, "
        f"{ratio:.0f}x a 3000^2 Cholesky, target <= 20 s and 2 GiB: {'met' if ok else 'MISSED'}"
    )
    return {"case": "field solve", "seconds": dt, "ratio_to_cholesky": ratio, "peak_MiB": mem}


def run(code, *args):
    p = subprocess.run(
        [sys.executable, "-c", code, *map(str, args)], capture_output=True, text=True
    )
    if p.returncode != 0:
        raise RuntimeError(p.stderr[-500:])
    return p.stdout.split()


def main():
    sizes = [int(x) for x in os.environ.get("BENCH_SIZES", "2500,10000,40000,160000").split(",")]
    tmp = Path(tempfile.mkdtemp(prefix="returngap-bench-"))  # removed at the end
    subprocess.run(
        [sys.executable, str(HERE / "make_boards.py"), str(tmp), *map(str, sizes)],
        check=True,
        capture_output=True,
    )
    # the generated files on disk first: their write-back would otherwise run during the first
    # cases
    os.sync()
    cases = [(f"synthetic {n}", tmp / f"seg{n}", None, n) for n in sizes]
    for slug, stack in CORPUS_CASES.items():
        if (CORPUS / slug).exists():
            cases.append((slug, CORPUS / slug, stack, None))
    rows = []
    print(
        f"{'case':26} {'segments':>9} {'parse s':>8} {'check s':>8} {'ratio':>6} "
        f"{'check MiB':>9} {'findings':>8} {'pairs':>5}"
    )
    for name, path, stack, _ in cases:
        pairs, mem, spent = [], 0.0, 0.0
        run(
            PARSE, path
        )  # a pair unmeasured first: files into the page cache, both sides warmed alike
        run(CHECK, path, stack or "")
        while len(pairs) < 5 or (len(pairs) < 9 and spent < 60.0):
            tp = float(run(PARSE, path)[0])
            t, segs, nf, m = run(CHECK, path, stack or "")
            pairs.append((tp, float(t)))
            mem, spent = max(mem, float(m)), spent + tp + float(t)
        tp = statistics.median(p for p, _ in pairs)
        tc = statistics.median(c for _, c in pairs)
        ratio = statistics.median(c / p for p, c in pairs)
        rows.append(
            {
                "case": name,
                "segments": int(segs),
                "parse_s": tp,
                "check_s": tc,
                "ratio": ratio,
                "pairs": len(pairs),
                "check_peak_MiB": mem,
                "findings": int(nf),
            }
        )
        r = rows[-1]
        print(
            f"{name:26} {r['segments']:>9} {tp:>8.2f} {tc:>8.2f} {ratio:>6.2f} {mem:>9.0f} "
            f"{r['findings']:>8} {len(pairs):>5}"
        )
    solver = solver_line()
    out_cases = [("many findings (generated)", tmp / "many", None)]
    if (CORPUS / "ulx3s-v3.1.1").exists():
        out_cases.insert(0, ("ulx3s-v3.1.1", CORPUS / "ulx3s-v3.1.1", None))
    out_rows = out_lines(out_cases)
    synth = [r for r in rows if r["case"].startswith("synthetic")]
    if len(synth) >= 2:
        xs = [math.log(r["segments"]) for r in synth]
        ys = [math.log(r["check_s"]) for r in synth]
        mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
        exponent = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
    else:
        exponent = float("nan")
    ratios = sorted(r["ratio"] for r in rows)
    median = (
        ratios[len(ratios) // 2]
        if len(ratios) % 2
        else (ratios[len(ratios) // 2 - 1] + ratios[len(ratios) // 2]) / 2
    )
    (ROOT / "out").mkdir(exist_ok=True)
    (ROOT / "out" / "bench.json").write_text(
        json.dumps(
            {"rows": rows, "exponent": exponent, "solver": solver, "out": out_rows}, indent=1
        )
    )
    shutil.rmtree(tmp, ignore_errors=True)
    print(f"bench: ratio_check_to_parse={median:.2f} exponent={exponent:.2f}")


if __name__ == "__main__":
    main()
