"""One board through every stage: import -> stackup -> nets -> projection -> findings."""

from dataclasses import dataclass

from . import (
    completeness,
    config,
    connectivity,
    detector,
    forking,
    hazards,
    importer,
    projector,
    stackup,
)


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


def load(sources, stackup_file=None, scratch=None, workers=0):
    cfg = config.load_stackup_file(stackup_file)
    # each layer's copper islands are found as it is read, on whichever core read it
    board = importer.load_board(
        sources,
        user_layers=cfg.get("layers"),
        scratch=scratch,
        workers=workers,
        per_layer=connectivity.layer_islands,
    )
    stackup.build_stackup(board, cfg)
    return board, cfg


def run_check(sources, stackup_file=None, settings=None, scratch=None):
    settings = settings or projector.Settings()
    board, cfg = load(sources, stackup_file, scratch, settings.workers)
    if not settings.allow_incomplete:  # refuse before the expensive stages
        completeness.enforce(board, board.problems, False)
    nets = connectivity.build_nets(board, cfg)
    refs, planes = projector.references(board, nets, settings)
    chains = projector.chains(board, nets, refs, settings)
    problems = board.problems + completeness.analysis_problems(board, planes, chains, settings)
    status = completeness.enforce(board, problems, settings.allow_incomplete)
    # the gap scan's slices and the checks that do not need its findings share the processes
    plane_nets_of = detector.chain_plane_nets(nets, chains)
    tasks, combine, workers = detector.gap_scan_tasks(
        board, nets, refs, chains, settings, plane_nets_of
    )
    hs = hazards.HazardSettings()
    checks = hazards.checks_without_gaps(board, nets, refs, chains, settings, hs, plane_nets_of)
    # and the copper area of each layer, for the report (every island unioned)
    areas = [lambda layer=layer: layer.copper_area_mm2 for layer in board.copper]
    jobs = checks + areas + tasks
    done = forking.fork_map(lambda k: jobs[k](), len(jobs), workers)
    for layer, area in zip(board.copper, done[len(checks) : len(checks) + len(areas)]):
        layer._area = area
    findings = combine(done[len(checks) + len(areas) :])
    findings += sum(done[: len(checks)], []) + hazards.return_splits(board, findings, settings, hs)
    findings += hazards.net_conflicts(nets)
    return CheckResult(board, nets, refs, planes, chains, findings, settings, status, problems)
