"""Command line: `returngap layers BOARD` and `returngap check BOARD`.

Exit status: 0 clean, 1 findings at or above --fail-on, 2 bad input or usage.
"""

import logging
import os
import shutil
import sys
import traceback
import warnings
from pathlib import Path

import click

from returngap import __version__, report
from returngap.errors import IncompleteError, InputError
from returngap.model.settings import Settings
from returngap.run import outputs


def _run(ctx, fn):
    """Bad input -> one line on stderr and exit 2; a traceback only with --debug."""
    debug = ctx.obj.get("debug") if ctx.obj else False
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return fn()
    except IncompleteError as e:  # the completeness gate: one line per problem
        for p in e.problems:
            click.echo(f"returngap: incomplete: {p}", err=True)
        click.echo(
            "returngap: board refused: its data is incomplete (--allow-incomplete gives a partial "
            "answer with these stated as assumptions)",
            err=True,
        )
        sys.exit(2)
    except InputError as e:
        click.echo(f"returngap: error: {e}", err=True)
        if debug:
            traceback.print_exc()
        sys.exit(2)
    except BrokenPipeError:  # `| head` closed the pipe: stop quietly, as other tools do
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        sys.exit(0)
    except (KeyboardInterrupt, SystemExit):
        raise
    except MemoryError:
        click.echo("returngap: error: out of memory while processing the board", err=True)
        sys.exit(2)
    except (
        Exception
    ) as e:  # a defect of ours or an input we do not understand; never a bare traceback
        click.echo(
            f"returngap: error: could not process the board ({type(e).__name__}: {str(e)[:200]})"
            " (run with --debug for details)",
            err=True,
        )
        if debug:
            traceback.print_exc()
        sys.exit(2)


_DEFAULTS = Settings()  # the default edge rate, said in --help


def _debug_option(command):
    """--debug after the subcommand too (`check X --debug`), as before it."""

    def flag(ctx, _param, value):
        if value:
            ctx.ensure_object(dict)["debug"] = True
            logging.basicConfig(level=logging.DEBUG, format="returngap: debug: %(message)s")

    return click.option(
        "--debug",
        is_flag=True,
        expose_value=False,
        callback=flag,
        help="Show a traceback on errors.",
    )(command)


def _edge_rate(command):
    """The signal's edge: --rise-time or --max-freq (check and audit alike)."""
    command = click.option(
        "--max-freq",
        "max_ghz",
        type=click.FloatRange(min=1e-4, max=1e3),
        help="Highest frequency of interest, GHz (instead of --rise-time).",
    )(command)
    return click.option(
        "--rise-time",
        "rise_ns",
        type=click.FloatRange(min=1e-4, max=1e3),
        help=f"10-90 % rise time, ns (default {_DEFAULTS.rise_ns:g} ns: a "
        f"{_DEFAULTS.knee_GHz:g} GHz knee).",
    )(command)


_fail_on = click.option(  # check and audit alike
    "--fail-on",
    type=click.Choice(["error", "warning", "never"]),
    default="error",
    show_default=True,
)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="returngap")
@click.option("--debug", is_flag=True, help="Show a traceback on errors.")
@click.pass_context
def main(ctx, debug):
    """Return-current path checks on released PCB fabrication data (estimates for review)."""
    ctx.obj = {"debug": debug}
    if debug:  # what the runner does behind the scenes (work redone after a child died, ...)
        logging.basicConfig(level=logging.DEBUG, format="returngap: debug: %(message)s")


@main.command()
@click.argument("board", nargs=-1, required=True, type=click.Path())
@click.option(
    "--stackup", "stackup_file", type=click.Path(), help="Stackup / layer-mapping TOML file."
)
@click.option("--json", "as_json", is_flag=True, help="Print the layer report as JSON.")
@_debug_option
@click.pass_context
def layers(ctx, board, stackup_file, as_json):
    """Show the recognised layers, drills, stackup, ignored files and assumptions."""
    from returngap.run import pipeline

    def go():
        rep = pipeline.layers_report(list(board), stackup_file)
        click.echo(report.to_json(rep) if as_json else report.layers_text(rep), nl=not as_json)

    _run(ctx, go)


@main.command()
@click.argument("board", nargs=-1, required=True, type=click.Path())
@click.option(
    "--stackup", "stackup_file", type=click.Path(), help="Stackup / layer-mapping TOML file."
)
@_edge_rate
@click.option(
    "--nets", "net_globs", multiple=True, help="Only nets matching this glob (repeatable)."
)
@click.option(
    "--json",
    "json_file",
    type=click.Path(allow_dash=True),
    help="Write the findings report (JSON) here; - for standard output.",
)
@click.option(
    "--out", "out_dir", type=click.Path(), help="Write all reports and pictures into this folder."
)
@click.option("--waivers", "waiver_file", type=click.Path(), help="TOML file of accepted findings.")
@click.option(
    "--baseline", "baseline_file", type=click.Path(), help="findings.json of an earlier revision."
)
@click.option(
    "--baseline-tolerance",
    type=click.FloatRange(min=0),
    default=2.0,
    show_default=True,
    help="How far (mm) a finding may move and still match the baseline.",
)
@_fail_on
@click.option(
    "--new-only", is_flag=True, help="With --baseline: only new findings count for --fail-on."
)
@click.option(
    "--limit",
    type=click.IntRange(min=1),
    default=40,
    show_default=True,
    help="Rows in the printed table.",
)
@click.option("--quiet", "-q", is_flag=True, help="Print only the summary line.")
@click.option(
    "--allow-incomplete",
    is_flag=True,
    help="Go on when the board data is incomplete, stating each problem (the run's status says "
    "so).",
)
@click.option(
    "--all",
    "show_all",
    is_flag=True,
    help="Also report effects below the noise floor (under 0.1 nH added, grazes without a detour).",
)
@click.option("--by-net", is_flag=True, help="Print a per-net summary after the findings.")
@click.option(
    "--pictures",
    type=click.Choice(outputs.PICTURE_LEVELS),
    default="warning",
    show_default=True,
    help="With --out: pictures for findings at or above this severity (the HTML lists the rest).",
)
@click.option(
    "--frequency-view",
    "frequency_view",
    type=click.Choice(outputs.PICTURE_LEVELS),
    help="Predicted insertion loss for findings at or above this severity (default warning).",
)
@click.option(
    "--solve",
    "field_solves",
    type=click.IntRange(min=0),
    default=0,
    show_default=True,
    help="Field-solve the N gap crossings nearest the reflection budget (a few seconds each).",
)
@_debug_option
@click.pass_context
def check(
    ctx,
    board,
    stackup_file,
    rise_ns,
    max_ghz,
    net_globs,
    json_file,
    out_dir,
    waiver_file,
    baseline_file,
    baseline_tolerance,
    fail_on,
    new_only,
    limit,
    quiet,
    allow_incomplete,
    show_all,
    by_net,
    pictures,
    frequency_view,
    field_solves,
):
    """Find where return current must detour around slots, splits and voids."""
    from returngap.report import review
    from returngap.run import pipeline

    if rise_ns and max_ghz:
        raise click.UsageError("give --rise-time or --max-freq, not both")
    if new_only and not baseline_file:
        raise click.UsageError("--new-only needs --baseline")
    settings = Settings(
        nets=tuple(net_globs),
        allow_incomplete=allow_incomplete,
        show_all=show_all,
        field_solves=field_solves,
    )
    if frequency_view:
        settings.frequency_view = frequency_view
    if rise_ns:
        settings.rise_time_ns = rise_ns
    if max_ghz:
        settings.max_freq_GHz = max_ghz

    if out_dir and Path(out_dir).exists() and not Path(out_dir).is_dir():
        raise click.UsageError(f"--out {out_dir}: a file of that name exists (give a folder)")

    def go():
        waivers = review.load_waivers(waiver_file) if waiver_file else []
        baseline = review.load_baseline(baseline_file) if baseline_file else None
        stage = _stage_line(quiet)
        result = pipeline.run_check(list(board), stackup_file, settings, stage=stage)
        stage("")
        rep = report.findings_report(result)
        if waiver_file:
            review.apply_waivers(rep, waivers)
        if baseline is not None:
            review.refuse_other_board(rep, baseline, baseline_file)
            review.compare(rep, baseline, baseline_tolerance)
        to_stdout = json_file == "-"  # the JSON alone on standard output, the rest on stderr
        if to_stdout:
            click.echo(report.to_json(rep), nl=False)
        elif json_file:
            outputs.write_text(json_file, report.to_json(rep))
        if out_dir:
            outputs.write_outputs(result, rep, out_dir, fail_on, pictures=pictures)
        _print_text(rep, quiet, limit, by_net, bool(json_file or out_dir), to_stdout)
        bad = report.FAIL_LEVELS[fail_on]
        counted = [
            f
            for f in rep["findings"]
            if f["severity"] in bad
            and not f.get("waiver")
            and (not new_only or f.get("status") == "new")
        ]
        return 1 if counted else 0

    sys.exit(_run(ctx, go))


def _stage_line(quiet):
    """A one-line progress display on a terminal (stderr) once a board takes over a second; never
    in pipes, CI or with --quiet. Called with "" to clear it."""
    import time

    start = time.monotonic()
    after = float(os.environ.get("RETURNGAP_PROGRESS_AFTER_S", "1"))
    live = not quiet and sys.stderr.isatty() and not os.environ.get("CI")
    shown = [False]

    def stage(name):
        if not live:
            return
        if not name:
            if shown[0]:
                sys.stderr.write("\r\033[K")
            return
        if time.monotonic() - start >= after:
            sys.stderr.write(f"\r\033[Kreturngap: {name}...")
            sys.stderr.flush()
            shown[0] = True

    return stage


def _print_text(rep, quiet, limit, by_net, json_written, to_stderr):
    """The terminal's part of `check`: gaps, the table, the notes and the summary line."""

    def say(text):
        click.echo(text, err=to_stderr)

    if not quiet:
        gaps = report.gaps_block(rep, limit)
        if gaps:
            say(gaps + "\n")
        width = shutil.get_terminal_size((140, 40)).columns
        say(report.findings_table(rep, limit, width=width, json_written=json_written))
        if by_net:
            say("\n" + report.by_net_table(rep, limit))
    for w in (rep.get("waivers") or {}).get("stale", []):  # with --quiet too
        click.echo(f"stale waiver #{w['waiver']} ({w.get('by')}): matches no finding", err=True)
    block = report.notes_block(rep, quiet)
    if block:
        say(block)
    say(report.summary_line(rep))


@main.command()
@click.argument("report_file", type=click.Path(exists=True, dir_okay=False))
@click.option("--id", "finding_id", required=True, help="The finding's id in the report.")
@click.option(
    "--board",
    "board_files",
    multiple=True,
    type=click.Path(),
    help="The board, where it has moved since the report was written (repeatable).",
)
@click.option("--json", "as_json", is_flag=True, help="Print the solved finding as JSON.")
@_debug_option
@click.pass_context
def solve(ctx, report_file, finding_id, board_files, as_json):
    """Field-solve one gap crossing of a saved findings report (re-reads its board)."""
    from returngap.run import solveone

    def go():
        finding = solveone.solve_from_report(report_file, finding_id, list(board_files))
        click.echo(report.to_json(finding) if as_json else report.solve_text(finding))

    _run(ctx, go)


@main.command()
@click.argument("report_file", type=click.Path(exists=True, dir_okay=False))
@click.option("--id", "finding_id", help="Draw this finding of the report.")
@click.option("--area", help="Draw this box of the board instead: x1,y1,x2,y2 (mm).")
@click.option("--layer", help="With --area: the plane layer to draw (e.g. L2).")
@click.option("--board", "board_files", multiple=True, type=click.Path(), help="See solve.")
@click.option("--png", "png_file", type=click.Path(), required=True, help="Write the picture here.")
@_debug_option
@click.pass_context
def show(ctx, report_file, finding_id, area, layer, board_files, png_file):
    """Draw one picture from a saved report and its board: a finding, or an area of a plane."""
    from returngap.run import solveone

    if bool(finding_id) == bool(area):
        raise click.UsageError("give --id ID or --area x1,y1,x2,y2 (with --layer)")
    if area and not layer:
        raise click.UsageError("--area needs --layer")

    def go():
        box = _parse_area(area) if area else None
        solveone.draw_from_report(report_file, png_file, finding_id, box, layer, list(board_files))
        click.echo(f"returngap: wrote {png_file}")

    _run(ctx, go)


def _parse_area(text):
    try:
        x1, y1, x2, y2 = (float(v) for v in text.split(","))
    except ValueError:
        raise click.UsageError(f"--area {text}: give four numbers, x1,y1,x2,y2 (mm)") from None
    return min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2)


@main.command()
@click.argument("sources", nargs=-1, required=True, type=click.Path())
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(),
    help="Output folder (nothing is written elsewhere).",
)
@click.option(
    "--jobs",
    type=click.IntRange(min=1, max=64),
    default=2,
    show_default=True,
    help="Boards at a time.",
)
@click.option(
    "--stackup-dir",
    type=click.Path(file_okay=False),
    help="Folder of <board name>.toml stackup files.",
)
@_edge_rate
@_fail_on
@click.option(
    "--time-limit",
    "time_limit_s",
    type=click.FloatRange(min=0.1),
    default=900,
    show_default=True,
    help="Seconds per board.",
)
@click.option(
    "--memory-limit",
    "memory_limit_mb",
    type=click.IntRange(min=256),
    default=4096,
    show_default=True,
    help="MB of address space per board worker.",
)
@click.option("--force", is_flag=True, help="Redo boards whose input and settings are unchanged.")
@click.option(
    "--scheduler", help="Address of a Dask distributed scheduler (optional extra 'dask')."
)
@click.option("--quiet", "-q", is_flag=True, help="Print only the summary line.")
@_debug_option
@click.pass_context
def audit(
    ctx,
    sources,
    out_dir,
    jobs,
    stackup_dir,
    rise_ns,
    max_ghz,
    fail_on,
    time_limit_s,
    memory_limit_mb,
    force,
    scheduler,
    quiet,
):
    """Audit many board archives or folders: one report folder per board and a batch summary."""
    from returngap.batch import audit as batch

    if rise_ns and max_ghz:
        raise click.UsageError("give --rise-time or --max-freq, not both")
    settings = Settings(max_freq_GHz=max_ghz)
    if rise_ns:
        settings.rise_time_ns = rise_ns

    def go():
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        tasks = batch.make_tasks(
            sources, out, settings, stackup_dir, fail_on, force, time_limit_s, memory_limit_mb
        )
        if not tasks:
            raise InputError(", ".join(sources), "no board archives or fabrication folders found")
        bar = None
        if not quiet and sys.stderr.isatty() and not os.environ.get("CI"):
            from tqdm import tqdm

            bar = tqdm(total=len(tasks), desc="boards", file=sys.stderr, leave=False)
        rows = batch.run_tasks(
            tasks, jobs, scheduler, progress=(lambda r: bar.update(1)) if bar else None
        )
        if bar:
            bar.close()
        data = batch.write_summary(out, rows)
        shutil.rmtree(out / ".work", ignore_errors=True)
        if not quiet:
            for r in rows:
                extra = r.get("reason") or r.get("worst") or ""
                click.echo(
                    f"{r['status']:8} {r['board']:40} E{r['error']} W{r['warning']} I{r['info']} "
                    f"{'(unchanged) ' if r.get('skipped') else ''}{extra[:90]}"
                )
        t = data["totals"]
        done = sum(1 for r in rows if not r.get("skipped"))
        click.echo(
            f"returngap audit: {len(rows)} board(s): {t['ok']} ok, {t['findings']} with findings, "
            f"{t['failed']} failed; {done} run, {len(rows) - done} unchanged; summary in "
            f"{out / 'summary.html'}"
        )
        return 1 if t["findings"] or t["failed"] else 0

    sys.exit(_run(ctx, go))


if __name__ == "__main__":
    main()
