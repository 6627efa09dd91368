"""Everything `check --out` writes: JSON, CSV, JUnit, the pictures and report.html. The pictures are
independent, so a large report's are drawn in two forked processes (here, in run/)."""

import os
import sys
from pathlib import Path

from returngap import report
from returngap.analysis import frequency
from returngap.report import htmlpage, render
from returngap.run import parallel

__all__ = ["write_text", "write_outputs", "curve_of", "PICTURE_LEVELS"]


def write_text(path, text):
    """Write through a temporary file and a rename: a reader never sees half a report."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def _progress(items, label, quiet):
    """A bar on a terminal; silent when piped, in CI or with --quiet."""
    if quiet or not sys.stderr.isatty() or os.environ.get("CI"):
        return items
    from tqdm import tqdm

    return tqdm(items, desc=label, unit="", leave=False, file=sys.stderr)


PICTURE_LEVELS = ("error", "warning", "info", "none")


def _pictured(findings, level):
    """The findings that get a picture: at or above `level` (error, warning, info; none: none)."""
    if level == "none":
        return []
    keep = PICTURE_LEVELS[: PICTURE_LEVELS.index(level) + 1]
    return [f for f in findings if f["severity"] in keep]


def write_outputs(result, rep, out_dir, fail_on, quiet=True, workers=0, pictures="warning"):
    """pictures: the least severity that gets a picture (the HTML lists the rest without one)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    for pattern in ("finding-*.png", "overview*.png", "finding-*.s2p", "finding-*-s_params.csv"):
        for old in out.glob(pattern):  # files of an earlier run would mislead
            old.unlink()
    write_text(out / "findings.json", report.to_json(rep))
    curves = _frequency_views(result, rep, out)
    write_text(out / "findings.csv", report.to_csv(rep))
    write_text(out / "junit.xml", report.to_junit(rep, fail_on))
    write_text(out / "findings.sarif", report.to_json(report.to_sarif(rep)))
    chosen = {f["id"] for f in _pictured(rep["findings"], pictures)}
    images = {f["id"]: out / f"finding-{f['id']}.png" for f in rep["findings"] if f["id"] in chosen}
    planes = sorted({f["reference_layer"] for f in rep["findings"] if f.get("reference_layer")})
    overviews = [out / f"overview-{layer}.png" for layer in planes]
    todo = [(out / "overview.png", None, None)] + [
        (p, None, lay) for p, lay in zip(overviews, planes)
    ]
    todo += [(images[f["id"]], f, i) for i, f in enumerate(rep["findings"], 1) if f["id"] in chosen]
    n = parallel.Parallel(workers).processes("pictures", len(todo))

    def draw(k):  # every n-th picture
        for path, f, i in _progress(todo[k::n], "pictures", quiet or k > 0):
            if f is None:
                render.overview_png(result, rep, path, layer=i)
            else:
                render.finding_png(result, f, i, path, curves.get(f["id"]))

    parallel.fork_map(draw, n, n)
    page = htmlpage.page(rep, images, out / "overview.png", overviews)
    write_text(out / "report.html", page)


def _frequency_views(result, rep, out):
    """Each finding with a frequency view: its curves (for its picture), a Touchstone file and a
    CSV of them. {id: (f GHz, S21 dB with the gap, S21 dB without)}."""
    curves = {}
    for f in rep["findings"]:
        if f.get("s21_loss_at_knee_dB") is None:
            continue
        with_gap, without, _ = frequency.crossing_curves(
            result.board, result.refs, result.chains, f, result.settings
        )
        with_gap.write_touchstone(f"finding-{f['id']}", dir=str(out))
        write_text(out / f"finding-{f['id']}-s_params.csv", report.s_params_csv(with_gap, without))
        curves[f["id"]] = _curve(with_gap, without)
    return curves


def _curve(with_gap, without):
    return with_gap.frequency.f / 1e9, with_gap.s_db[:, 1, 0], without.s_db[:, 1, 0]


def curve_of(result, f):
    """A finding's frequency-view curve for its picture, or None where it has no view."""
    if f.get("s21_loss_at_knee_dB") is None:
        return None
    nets = frequency.crossing_curves(result.board, result.refs, result.chains, f, result.settings)
    return _curve(nets[0], nets[1])
