"""`returngap solve REPORT --id ID`: one finding of a saved report, field-solved later. The board
is read and checked again with the report's own settings (the finding is found by its id, so the
geometry solved is the board's, not the report's rounded numbers)."""

import dataclasses
import json
from pathlib import Path

from returngap.analysis import fieldsolve, frequency
from returngap.errors import InputError
from returngap.model.settings import Settings
from returngap.report import core as report
from returngap.run import pipeline

__all__ = ["solve_from_report", "draw_from_report"]


def _read(report_file):
    try:
        data = json.loads(Path(report_file).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as e:
        raise InputError(report_file, f"not a readable findings report ({e})") from None
    if not isinstance(data, dict) or data.get("format") != "returngap-findings":
        raise InputError(report_file, "not a returngap findings report")
    return data


def _recheck(report_file, board=None):
    """(the report's data, the board checked again with the report's own settings)."""
    data = _read(report_file)
    inputs = data.get("inputs") or {}
    sources = board or inputs.get("sources")
    if not sources:
        raise InputError(report_file, "the report names no board; give it with --board")
    settings = Settings.from_json(json.dumps(data.get("settings") or {}))
    settings = dataclasses.replace(settings, field_solves=0, show_all=True)
    return data, pipeline.run_check(sources, inputs.get("stackup_file"), settings)


def _finding(data, result, report_file, finding_id):
    if not any(f.get("id") == finding_id for f in data.get("findings", [])):
        raise InputError(report_file, f"no finding with id {finding_id}")
    found = [f for f in result.findings if f["id"] == finding_id]
    if not found:
        raise InputError(report_file, f"finding {finding_id} is not on the board as read now")
    return found[0]


def solve_from_report(report_file, finding_id, board=None):
    """The finding `finding_id` of the report, solved, as the report's mapping of it."""
    data, result = _recheck(report_file, board)
    f = _finding(data, result, report_file, finding_id)
    if f["kind"] != "gap-crossing" or f["return_path"] not in fieldsolve.SOLVABLE_PATHS:
        raise InputError(
            report_file, f"{finding_id}: only a gap crossing whose return goes round is solved"
        )
    solved = fieldsolve.solve_one(
        result.board, result.nets, result.chains, f, result.settings, result.refs
    )
    solved = frequency.refreshed(result.board, result.refs, result.chains, solved, result.settings)
    return report.clean(report.said(solved, result.settings))


def draw_from_report(report_file, png_file, finding_id=None, box=None, layer=None, board=None):
    """One picture for a ticket: a finding of the report (numbered as in it), or a box of one
    plane layer with the report's findings over it."""
    from returngap.report import render
    from returngap.run.outputs import curve_of

    data, result = _recheck(report_file, board)
    Path(png_file).parent.mkdir(parents=True, exist_ok=True)
    if finding_id:
        f = report.clean(
            report.said(_finding(data, result, report_file, finding_id), result.settings)
        )
        number = next(i for i, g in enumerate(data["findings"], 1) if g["id"] == finding_id)
        render.finding_png(result, f, number, png_file, curve_of(result, f))
        return
    names = [c.name for c in result.board.copper]
    if layer not in names:
        raise InputError(report_file, f"--layer {layer}: the board's layers are {', '.join(names)}")
    render.area_png(result, data, box, layer, png_file)
