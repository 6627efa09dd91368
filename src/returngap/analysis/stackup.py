"""Layer order and dielectrics: the user's stackup file, the job file's MaterialStackup, or a
stated default."""

import math

from returngap.model.board import Dielectric, Stackup

__all__ = [
    "DEFAULT_ER",
    "DEFAULT_BOARD_MM",
    "DEFAULT_COPPER_MM",
    "DEFAULT_OUTER_PREPREG_MM",
    "series_er",
    "from_job",
    "from_user",
    "default",
    "build_stackup",
]

DEFAULT_ER = 4.3  # FR-4 near 1 GHz (from memory)
DEFAULT_BOARD_MM = 1.6  # the usual finished thickness (common practice, no source)
DEFAULT_COPPER_MM = 0.035  # 1 oz copper
DEFAULT_OUTER_PREPREG_MM = (
    0.2  # outer dielectric of a typical multilayer build (common practice, no source)
)


def _num(value):
    """Job files write numbers as numbers, as strings, or as "NaN"."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def series_er(parts):
    """Permittivity of stacked dielectric sheets for a field normal to them (series capacitors)."""
    t = sum(th for th, _ in parts)
    return t / sum(th / er for th, er in parts) if t > 0 else None


def from_job(job, n_layers, notes):
    items = job.get("MaterialStackup") if isinstance(job, dict) else None
    if not isinstance(items, list) or not items:
        return None
    coppers, diels, pending = [], [], []
    copper_t = {}
    for it in items:
        if not isinstance(it, dict):
            continue
        typ = str(it.get("Type", "")).lower()
        if typ == "copper":
            if coppers and pending:
                diels.append(pending)
            pending = []
            coppers.append(it)
            t = _num(it.get("Thickness"))
            if t and 0.0 < t < 1.0:
                copper_t[f"L{len(coppers)}"] = t
        elif typ == "dielectric" and coppers:
            t = _num(it.get("Thickness"))
            er = _num(it.get("DielectricConstant"))
            if er is not None and not 1.0 <= er <= 50.0:
                er = None
            if t is None or not 0.0 < t <= 20.0:
                notes.append(
                    f"job file: dielectric {it.get('Name', '?')} has no thickness; stackup from "
                    "the job file not used"
                )
                return None
            if er is None:
                er = DEFAULT_ER
                notes.append(
                    f"job file: dielectric {it.get('Name', '?')} has no permittivity; assumed "
                    f"er = {DEFAULT_ER}"
                )
            pending.append((t, er))
    if len(coppers) != n_layers or len(diels) != n_layers - 1:
        notes.append(
            f"job file: MaterialStackup lists {len(coppers)} copper layers, the Gerbers "
            f"{n_layers}; not used"
        )
        return None
    if any(not parts for parts in diels):
        notes.append(
            "job file: a copper layer pair has no dielectric between them; stackup from the job "
            "file not used"
        )
        return None
    dielectrics = []
    for i, parts in enumerate(diels):
        dielectrics.append(
            Dielectric(
                (f"L{i + 1}", f"L{i + 2}"), sum(t for t, _ in parts), series_er(parts), "job file"
            )
        )
    for i in range(n_layers):
        if f"L{i + 1}" not in copper_t:
            copper_t[f"L{i + 1}"] = DEFAULT_COPPER_MM
    total = sum(d.thickness_mm for d in dielectrics) + sum(copper_t.values())
    return Stackup(dielectrics, copper_t, total, "job file")


def from_user(cfg, n_layers, notes):
    given = {tuple(d["between"]): d for d in cfg.get("dielectric", [])}
    if not given:
        return None
    cu = cfg.get("copper_thickness_mm", DEFAULT_COPPER_MM)
    dielectrics = []
    for i in range(n_layers - 1):
        key = (f"L{i + 1}", f"L{i + 2}")
        d = given.get(key)
        if d is None:
            return _fail(
                notes,
                f"stackup file: no dielectric between {key[0]} and {key[1]}; it must list every "
                "one",
            )
        dielectrics.append(Dielectric(key, d["thickness_mm"], d["er"], "stackup file"))
    extra = set(given) - {(f"L{i + 1}", f"L{i + 2}") for i in range(n_layers - 1)}
    if extra:
        notes.append(
            f"stackup file: dielectric(s) between {sorted(extra)} do not match the {n_layers} "
            "copper layers; ignored"
        )
    copper_t = {f"L{i + 1}": cu for i in range(n_layers)}
    total = sum(d.thickness_mm for d in dielectrics) + sum(copper_t.values())
    return Stackup(dielectrics, copper_t, total, "stackup file")


def _fail(notes, text):
    notes.append(text)
    return None


def default(n_layers, board_mm, er, cu, notes):
    """Outer dielectrics 0.2 mm on boards of four or more layers, the rest shared equally."""
    copper_t = {f"L{i + 1}": cu for i in range(n_layers)}
    core = board_mm - cu * n_layers
    if n_layers == 1:
        return Stackup([], copper_t, board_mm, "default")
    inner = (core - 2 * DEFAULT_OUTER_PREPREG_MM) / (n_layers - 3) if n_layers >= 4 else 0.0
    if n_layers >= 4 and inner >= 0.05:
        th = [DEFAULT_OUTER_PREPREG_MM] + [inner] * (n_layers - 3) + [DEFAULT_OUTER_PREPREG_MM]
    else:
        th = [max(core, 0.05 * (n_layers - 1)) / (n_layers - 1)] * (n_layers - 1)
    dielectrics = [
        Dielectric((f"L{i + 1}", f"L{i + 2}"), t, er, "default") for i, t in enumerate(th)
    ]
    notes.append(
        f"no stackup given: assumed {board_mm} mm board, {n_layers} layers, "
        f"dielectrics {', '.join(f'{t:.3f}' for t in th)} mm top to bottom, er = {er}, copper "
        f"{cu * 1000:.0f} um"
    )
    return Stackup(dielectrics, copper_t, board_mm, "default")


def build_stackup(board, cfg=None):
    """The stackup for a board: user file first (explicit), then job file, then the stated
    default."""
    cfg = cfg or {}
    notes = []
    n = len(board.copper)
    st = from_user(cfg, n, notes) or from_job(getattr(board, "job", {}), n, notes)
    if st is None:
        board_mm = cfg.get("board_thickness_mm")
        if board_mm is None:
            gs = (
                board.job.get("GeneralSpecs", {})
                if isinstance(getattr(board, "job", None), dict)
                else {}
            )
            board_mm = _num(gs.get("BoardThickness")) if isinstance(gs, dict) else None
            if board_mm is not None and not 0.1 <= board_mm <= 20.0:
                board_mm = None
        st = default(
            n,
            board_mm or DEFAULT_BOARD_MM,
            cfg.get("er", DEFAULT_ER),
            cfg.get("copper_thickness_mm", DEFAULT_COPPER_MM),
            notes,
        )
    for note in notes:
        board.assume(note)
    board.stackup = st
    return st
