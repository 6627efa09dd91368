"""One board through every stage: import -> stackup -> nets -> projection -> findings."""

from dataclasses import dataclass

from . import config, connectivity, detector, hazards, importer, projector, stackup


@dataclass
class CheckResult:
    board: object
    nets: object
    refs: dict
    planes: dict
    chains: list
    findings: list
    settings: object


def load(sources, stackup_file=None, scratch=None, workers=0):
    cfg = config.load_stackup_file(stackup_file)
    board = importer.load_board(sources, user_layers=cfg.get("layers"), scratch=scratch, workers=workers)
    stackup.build_stackup(board, cfg)
    return board, cfg


def run_check(sources, stackup_file=None, settings=None, scratch=None):
    settings = settings or projector.Settings()
    board, cfg = load(sources, stackup_file, scratch, settings.workers)
    nets = connectivity.build_nets(board, cfg)
    refs, planes = projector.references(board, nets, settings)
    chains = projector.chains(board, nets, refs, settings)
    findings = detector.detect_gap_crossings(board, nets, refs, chains, settings)
    findings += hazards.detect_all(board, nets, refs, chains, settings, gap_findings=findings)
    return CheckResult(board, nets, refs, planes, chains, findings, settings)
