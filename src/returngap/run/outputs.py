"""Everything `check --out` writes: JSON, CSV, JUnit, the pictures and report.html. The pictures are
independent, so a large report's are drawn in two forked processes (here, in run/)."""

import os
from pathlib import Path

from returngap import report
from returngap.analysis import frequency, severity
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


# the levels --pictures and --frequency-view take (severity.at_or_above reads them)
PICTURE_LEVELS = ("error", "warning", "info", "none")


def _pictured(findings, level):
    """The findings that get a picture: at or above `level` (error, warning, info; none: none)."""
    return [f for f in findings if severity.at_or_above(f["severity"], level)]


def write_outputs(result, rep, out_dir, fail_on, workers=0, pictures="warning"):
    """pictures: the least severity that gets a picture (the HTML lists the rest without one).
    Every file is a task of its own, the pictures first (the heaviest): both processes take
    them from one queue, so the text reports are written while pictures are drawn."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    olds = (
        "finding-*.png",
        "overview*.png",
        "gap-*.png",
        "finding-*.s2p",
        "finding-*-s_params.csv",
    )
    for pattern in olds:
        for old in out.glob(pattern):  # files of an earlier run would mislead
            old.unlink()
    chosen = {f["id"] for f in _pictured(rep["findings"], pictures)}
    images = {f["id"]: out / f"finding-{f['id']}.png" for f in rep["findings"] if f["id"] in chosen}
    planes = sorted({f["reference_layer"] for f in rep["findings"] if f.get("reference_layer")})
    overviews = [out / f"overview-{layer}.png" for layer in planes]
    jobs = [lambda: render.overview_png(result, rep, out / "overview.png")]
    jobs += [
        lambda p=p, lay=lay: render.overview_png(result, rep, p, layer=lay)
        for p, lay in zip(overviews, planes)
    ]
    jobs += [
        lambda f=f, i=i: _finding_files(result, f, i, out, images.get(f["id"]))
        for i, f in enumerate(rep["findings"], 1)
        if f["id"] in chosen or _viewed(f)
    ]
    groups = _bus_gaps(rep)
    by_id = {f["id"]: f for f in rep["findings"]}
    gap_pictures = [out / f"gap-{g['gap_id']}.png" for g in groups]
    jobs += [
        lambda g=g, p=p: render.area_png(
            result,
            rep,
            render.gap_group_box(g, by_id),
            g["reference_layer"],
            p,
            _gap_title(g),
            {c["id"] for c in g["crossings"]},
        )
        for g, p in zip(groups, gap_pictures)
    ]
    jobs += _text_jobs(result, rep, out, fail_on)
    n = parallel.Parallel(workers).processes("pictures", len(jobs))
    parallel.fork_map(lambda k: jobs[k]() and None, len(jobs), n)
    page = htmlpage.page(rep, images, out / "overview.png", overviews + gap_pictures)
    write_text(out / "report.html", page)


MAX_GAP_PICTURES = 20  # the worst buses; the gaps table lists every gap


def _bus_gaps(rep):
    """The gaps that two or more nets cross, at warning or error: one picture each."""
    return [g for g in rep.get("gaps") or [] if len(g["nets"]) >= 2 and g["severity"] != "info"][
        :MAX_GAP_PICTURES
    ]


def _gap_title(g):
    return (
        f"{g['gap_type']} {g['gap_length_mm']:.1f} mm on {g['reference_layer']} "
        f"({g['reference_net']}): {len(g['nets'])} nets cross, worst "
        f"{g['worst_added_inductance_nH']:.2f} nH"
    )


def _text_jobs(result, rep, out, fail_on):
    """The reports as text."""
    return [
        lambda: write_text(out / "findings.json", report.to_json(rep)),
        lambda: write_text(out / "findings.csv", report.to_csv(rep)),
        lambda: write_text(out / "junit.xml", report.to_junit(rep, fail_on)),
        lambda: write_text(out / "findings.sarif", report.to_json(report.to_sarif(rep))),
    ]


def _viewed(f):
    return f.get("s21_loss_at_knee_dB") is not None


def _curves(result, f):
    """(with the gap, without it, element) of a finding with a frequency view, else None."""
    if not _viewed(f):
        return None
    return frequency.crossing_curves(result.board, result.refs, result.chains, f, result.settings)


def _finding_files(result, f, number, out, picture):
    """One finding's files: its frequency view as a Touchstone file and a CSV (its curves
    computed once, for them and the picture), and its picture where it gets one."""
    curves = _curves(result, f)
    if curves is not None:
        with_gap, without, _ = curves
        with_gap.write_touchstone(f"finding-{f['id']}", dir=str(out))
        write_text(out / f"finding-{f['id']}-s_params.csv", report.s_params_csv(with_gap, without))
    if picture is not None:
        render.finding_png(result, f, number, picture, _curve(curves))


def _curve(curves):
    """The picture's plot of a finding's curves: (f GHz, S21 dB with, without), or None."""
    if curves is None:
        return None
    with_gap, without, _ = curves
    return with_gap.frequency.f / 1e9, with_gap.s_db[:, 1, 0], without.s_db[:, 1, 0]


def curve_of(result, f):
    """A finding's frequency-view curve for its picture, or None where it has no view."""
    return _curve(_curves(result, f))
