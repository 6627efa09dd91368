"""One board through every stage: import -> stackup -> nets -> projection -> findings."""

import dataclasses
from dataclasses import dataclass

from returngap import report
from returngap.analysis import (
    completeness,
    connectivity,
    fieldsolve,
    frequency,
    gaps,
    grouping,
    references,
    stackup,
)
from returngap.checks import (
    edge_run,
    floating,
    net_conflict,
    reference_change,
    return_split,
    split_bridge,
    stitching,
)
from returngap.io import config, load
from returngap.model.settings import Settings
from returngap.run import parallel
from returngap.run.twin import Twin

__all__ = ["CheckResult", "read_board", "layers_report", "with_file_thresholds", "run_check"]


@dataclass
class CheckResult:
    board: object
    nets: object
    refs: dict
    planes: dict
    chains: list
    findings: list
    settings: object
    status: str = completeness.COMPLETE
    problems: list = ()
    inputs: dict = None  # what was read: {"sources": [...], "stackup_file": ...}


def read_board(sources, stackup_file=None, scratch=None, workers=0, runner=None):
    """The board model and the stackup file's settings (runner: a Parallel of `workers`, unless
    given)."""
    cfg = config.load_stackup_file(stackup_file)
    # each layer's copper islands are found as it is read, on whichever core read it
    board = load.load_board(
        sources,
        user_layers=cfg.get("layers"),
        scratch=scratch,
        runner=runner or parallel.Parallel(workers),
        per_layer=connectivity.layer_islands,
    )
    stackup.build_stackup(board, cfg)
    return board, cfg


def layers_report(sources, stackup_file=None):
    """What `returngap layers` shows: the board model, its nets and its completeness problems."""
    board, cfg = read_board(sources, stackup_file)
    runner = parallel.Parallel()
    nets = connectivity.build_nets(board, cfg, runner)
    _copper_areas(board, nets, runner)
    rep = report.layers_report(board, nets)
    rep["problems"] = [str(p) for p in board.problems]
    return rep


def _copper_areas(board, nets, runner):
    """Each layer's copper area (every island unioned), in the runner's threads."""
    with runner.threads(board.track_segments) as pool:
        areas = list(pool.map(lambda layer: _area(nets, layer), board.copper))
    for layer, area in zip(board.copper, areas):
        layer.area_mm2 = area


def _area(nets, layer):
    return float(nets.layers[layer.name].island_areas().sum())


def with_file_thresholds(settings, thresholds):
    """The stackup file's [thresholds] on top of the defaults; a value the caller (the command
    line) already changed from its default wins over the file."""
    defaults = Settings()
    given = {k: v for k, v in thresholds.items() if getattr(settings, k) == getattr(defaults, k)}
    return dataclasses.replace(settings, **given) if given else settings


def run_check(sources, stackup_file=None, settings=None, scratch=None, workers=0, stage=None):
    """One board through every stage. workers: processes (0: both cores where the work pays,
    1: this process only); stage: told the name of each stage as it starts (a progress line)."""
    runner = Twin(workers)  # a small board's stages share one forked twin (run/twin.py)
    with parallel.fewer_collections():
        try:
            return _run_check(sources, stackup_file, settings, scratch, runner, stage)
        finally:
            runner.finish()  # the twin, if any, ends here: it never returns from the check


def _run_check(sources, stackup_file, settings, scratch, runner, stage):
    settings = settings or Settings()
    stage = runner.hook(stage or (lambda name: None))
    stage("reading layers")
    board, cfg = read_board(sources, stackup_file, scratch, runner=runner)
    settings = with_file_thresholds(settings, cfg.get("thresholds", {}))
    if not settings.allow_incomplete:  # refuse before the expensive stages
        completeness.enforce(board, board.problems, False)
    stage("nets and references")
    nets = connectivity.build_nets(board, cfg, runner)
    refs, planes = references.find_references(board, nets, settings)
    chains = references.chains(board, nets, refs, settings)
    problems = board.problems + completeness.analysis_problems(board, planes, chains, settings)
    status = completeness.enforce(board, problems, settings.allow_incomplete)
    stage("gap scan and checks")
    findings = _findings(board, nets, refs, chains, settings, runner)
    findings = references.only_wanted(findings, settings)  # before the costly steps below
    stage("field solves and frequency views")
    if settings.field_solves:
        findings = fieldsolve.solve_nearest(board, nets, chains, findings, settings, refs)
    findings = frequency.with_frequency_fields(board, refs, chains, findings, settings, runner)
    for glob in references.unmatched_globs(nets, settings):
        board.assume(f"--nets {glob}: matches no routed signal net")
    given = sources if isinstance(sources, (list, tuple)) else [sources]
    inputs = {
        "sources": [str(s) for s in given],
        "stackup_file": None if stackup_file is None else str(stackup_file),
    }
    return CheckResult(
        board, nets, refs, planes, chains, findings, settings, status, problems, inputs
    )


def _findings(board, nets, refs, chains, settings, runner):
    """Every check; the gap scan's slices, the checks that do not need its findings and the copper
    areas for the report share the processes."""
    workers = runner.processes("gap-scan", len(chains))
    scan, plane_nets_of = gaps.prepared_scan(board, nets, refs, chains, settings, workers, runner)
    tasks, combine = gaps.gap_scan_tasks(scan, chains, plane_nets_of, workers)
    hs = settings  # the other checks' thresholds are settings too
    # the checks that do not need the gap crossings, as tasks beside the gap scan
    checks = [
        lambda: reference_change.reference_changes(board, nets, refs, settings),
        lambda: edge_run.edge_runs(board, nets, refs, chains, settings, hs, plane_nets_of),
        lambda: floating.floating_copper(board, nets, refs, chains, settings, hs),
        lambda: stitching.stitching_spacing(board, nets, refs, chains, settings, hs),
    ]
    areas = [lambda layer=layer: _area(nets, layer) for layer in board.copper]
    jobs = checks + areas + tasks
    done = runner.tasks(lambda k: jobs[k](), len(jobs), "gap-scan", len(chains))
    for layer, area in zip(board.copper, done[len(checks) : len(checks) + len(areas)]):
        layer.area_mm2 = area
    findings = combine(done[len(checks) + len(areas) :])
    findings += sum(done[: len(checks)], [])
    findings = return_split.with_return_splits(board, findings, settings)
    findings = split_bridge.with_split_bridges(board, nets, refs, findings, settings)
    findings = grouping.refine(findings, settings)
    findings += net_conflict.net_conflicts(nets)
    return findings
