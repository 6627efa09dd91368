"""Fabrication files -> board model: layer roles, copper geometry, drills, outline, netlist.

Layer roles, in this order of trust: the Gerber's own X2 attributes (%TF or G04 #@! TF),
the Gerber job file's FilesAttributes, the user's mapping in the stackup file, then
gerbonara's file-name recognition. Disagreements are reported as assumptions.
"""

import copy
import re
from pathlib import Path, PurePosixPath

import numpy as np
import shapely

from returngap.errors import InputError
from returngap.geometry import shapes
from returngap.io import drillspans, outline
from returngap.io.excellon import build_drill, first_reading, parse_drill
from returngap.io.gerber import build_layer, check_extent, parse_gerber, truncation
from returngap.io.inputs import BoardFiles
from returngap.io.ipc356 import parse_netlist
from returngap.io.jobfile import parse_job_file, read_text
from returngap.io.roles import NameRoles, identify, job_file_roles, number_copper, role_from_user
from returngap.model.board import Board, CopperLayer, Problem
from returngap.model.runner import SERIAL

__all__ = ["BROKEN_REASONS", "load_board"]


def _guarded(name, fn, *args):
    """Geometry building on data gerbonara accepted: an unexpected failure still names the file."""
    try:
        return fn(*args)
    except InputError:
        raise
    except (
        ValueError,
        TypeError,
        AttributeError,
        IndexError,
        KeyError,
        ZeroDivisionError,
        OverflowError,
        shapely.errors.GEOSException,
    ) as e:
        raise InputError(
            name, f"cannot build its geometry ({type(e).__name__}: {str(e)[:120]})"
        ) from None


def _copper_layer(fab, text, role, provisional, tol):
    """Parse and build one copper layer, with the notes and problems it gives (a task for a
    forked worker)."""
    notes, problems = [], []
    cut = truncation(text)
    if cut is not None:
        problems.append(Problem(fab.name, cut[0], cut[1]))
    layer = _guarded(
        fab.name,
        build_layer,
        fab,
        parse_gerber(fab, text, notes),
        role,
        provisional if provisional is not None else shapely.Polygon(),
        tol,
    )
    check_extent(fab, layer)
    if layer.skipped_objects:
        notes.append(
            f"{fab.name}: {layer.skipped_objects} object(s) drawn before any aperture was "
            "selected were left out"
        )
    if layer.repaired_regions:
        notes.append(
            f"{fab.name}: {layer.repaired_regions} self-intersecting region(s) repaired "
            "(split into valid parts)"
        )
    if role.polarity == "negative" and (provisional is None or provisional.is_empty):
        raise InputError(fab.name, "negative-polarity copper needs a board profile file")
    return layer, notes, problems


def _copper_layers(
    by_name, texts, copper_roles, provisional, tol, runner, per_layer=None, first=None
):
    """Every copper layer, top to bottom, each passed to per_layer (when given) as soon as it is
    built. The layers are independent, so a large board's are read on both cores, largest file
    first so the two processes finish together. (Only shapely geometry and plain arrays come back
    from the other process: gerbonara's objects compare units by identity, which pickling
    breaks.) first: work of this process alone, done while the other starts on the layers."""
    size = sum(len(texts[name]) for name, _ in copper_roles)
    order = sorted(range(len(copper_roles)), key=lambda k: -len(texts[copper_roles[k][0]]))

    def task(j):
        name, role = copper_roles[order[j]]
        layer, notes, problems = _copper_layer(by_name[name], texts[name], role, provisional, tol)
        if per_layer is not None:
            per_layer(layer)
        return layer, notes, problems

    done = runner.tasks(task, len(order), "copper-layers", size, _packed, _unpacked, first)
    out = [None] * len(order)
    for j, k in enumerate(order):
        out[k] = done[j]
    return out


# geometry crosses between processes as WKB: pickling shapely objects one by one costs five times
# more
def _wkb_packed(layer):
    layer.piece_tree = None  # rebuilt where it is needed
    layer.pieces = shapely.to_wkb(layer.pieces)
    layer.regions = (
        shapely.to_wkb(np.array([r[0] for r in layer.regions], dtype=object)),
        [r[1:] for r in layer.regions],
    )
    return layer


def _wkb_unpacked(layer):
    layer.pieces = shapely.from_wkb(layer.pieces)
    shapely.prepare(layer.pieces)  # as where it was read: the drill formats' test uses them
    polys, rest = layer.regions
    layer.regions = [(p, *r) for p, r in zip(shapely.from_wkb(polys), rest)]
    return layer


def _packed(result):
    layer, notes, problems = result
    return _wkb_packed(copy.copy(layer)), notes, problems  # the layer itself stays as it is


def _unpacked(result):
    layer, notes, problems = result
    return _wkb_unpacked(layer), notes, problems


BROKEN_REASONS = ("empty file", "binary data", "not Gerber", "cannot read")


def _broken_files(bf):
    """Ignored files whose content failed (empty, junk): (name, reason). Files ignored by their kind
    (documents, metadata) are not among them."""
    return [(i["file"], i["reason"]) for i in bf.ignored if i["reason"].startswith(BROKEN_REASONS)]


def _stated_role(name, user_roles, job_roles, names):
    """What the user, the job file or the file name says a file is (for files that could not be
    read)."""
    base = PurePosixPath(name).name
    guess = names.get(name)
    if guess is not None and guess.kind == "drill":
        guess = (
            None  # the name rules take any .txt for a drill file: too loose for a file that failed
        )
    for r in (user_roles.get(name) or user_roles.get(base), job_roles.get(base), guess):
        if r is not None:
            return r
    return None


def _expected_copper(job, copper_roles, stated):
    """{layer number: why it should be there} for every copper layer the job file, the numbers the
    files give or the names of unreadable files speak of."""
    want = {}
    gs = job.get("GeneralSpecs") if isinstance(job, dict) else None
    n_job = gs.get("LayerNumber") if isinstance(gs, dict) else None
    n_entries = sum(1 for r in job_file_roles(job).values() if r.kind == "copper")
    for n, why in (
        (n_job, "the job file's LayerNumber"),
        (n_entries or None, "the job file's FilesAttributes"),
    ):
        if isinstance(n, (int, float)) and 0 < int(n) <= 256:
            for k in range(1, int(n) + 1):
                want.setdefault(k, f"{why} gives {int(n)} copper layers")
    top = max((r.number for _, r in copper_roles), default=0)
    for k in range(1, top + 1):
        want.setdefault(k, f"the copper files are numbered up to L{top}")
    last = max(copper_roles, key=lambda nr: nr[1].number)[1] if copper_roles else None
    if last is not None and last.source == "X2 attribute" and last.label.split(",")[2:3] == ["Inr"]:
        want.setdefault(top + 1, f"the last copper file, L{top}, says it is an inner layer")
    for name, role in stated.items():
        if role.kind == "copper" and role.number:
            want[role.number] = f"{name} should be copper L{role.number}"
    return want


def _layer_problems(bf, stated, copper_numbers, want, problems):
    """Problems for broken files that should be fabrication data, and for missing copper layers."""
    reasons = dict(_broken_files(bf))
    for name, role in stated.items():
        if role.kind in ("copper", "drill", "profile"):
            what = f"copper L{role.number}" if role.kind == "copper" and role.number else role.kind
            problems.append(
                Problem(name, f"{reasons[name]}, but the {role.source} says it is {what}")
            )
    told = {r.number for r in stated.values() if r.kind == "copper"}
    for k in sorted(set(want) - set(copper_numbers) - told):
        problems.append(Problem(f"L{k}", f"no readable copper file for layer L{k} ({want[k]})"))


def _sides(layers):
    n = len(layers)
    for i, layer in enumerate(layers):
        layer.side = "top" if i == 0 else ("bottom" if i == n - 1 and n > 1 else "inner")


def _drill_problems(name, text, drill, notes, problems):
    if not re.search(r"^\s*M(30|00)\b", text, re.M):
        problems.append(Problem(name, "truncated: no M30 end-of-program marker"))
    if drill.skipped:
        notes.append(
            f"{name}: {drill.skipped} hole(s) given before any tool was selected were left out"
        )
    if not drill.hole_count:
        notes.append(f"{name}: drill file has no holes")


def load_board(
    sources,
    user_layers=None,
    chord_tol_mm=shapes.DEFAULT_CHORD_TOL_MM,
    scratch=None,
    runner=SERIAL,
    per_layer=None,
):
    """Read a board (folder, zip or file list) into the board model; the copper layers are tasks of
    the runner (model/runner.py), each passed to per_layer (when given) in the process that built
    it, for work of later stages that needs one layer only. What makes the model incomplete is
    listed in board.problems (the completeness gate decides what to do with it)."""
    with BoardFiles(sources, scratch) as bf:
        texts = {f.name: read_text(f) for f in bf.fab if f.kind != "ipc356"}
        notes, problems = [], []
        job, job_name = _job(bf, texts)
        roles, stated, copper_roles = _roles(bf, texts, job, user_layers, notes)
        ahead = _ReadAhead(roles, bf, texts, chord_tol_mm)
        build = (bf, texts, chord_tol_mm, runner, per_layer, notes, problems)
        layers, board_outline, outline_file, why = _copper_and_outline(
            roles, copper_roles, ahead, *build
        )
        _complete_stack(layers, bf, job, copper_roles, stated, problems)
        board = Board(
            name=bf.name,
            source=bf.source,
            copper=layers,
            drills=[],
            outline=board_outline,
            ignored=list(bf.ignored),
            job=job,
            job_file=job_name,
            outline_file=outline_file,
            outline_why=why,
        )
        _drills(board, roles, bf, texts, notes, problems, ahead.drills)
        for f in bf.fab:
            if f.kind == "ipc356":
                board.netlist.extend(parse_netlist(f))
                board.netlist_file = f.name
        _last_checks(board, bf, notes, problems)
        return board


def _job(bf, texts):
    job, job_name = {}, None
    for f in bf.fab:
        if f.kind == "job":
            job = parse_job_file(f, texts[f.name]) or job
            job_name = f.name
    return job, job_name


def _roles(bf, texts, job, user_layers, notes):
    """Every file's role; what the user, the job file or the name says of the unreadable ones; and
    the copper files, numbered."""
    broken = _broken_files(bf)
    names = NameRoles(
        [(f.name, f.path) for f in bf.fab if f.kind in ("gerber", "excellon")]
        + [(n, Path(n)) for n, _ in broken]
    )
    roles, id_notes = identify(bf, texts, job, user_layers, names)
    notes.extend(id_notes)
    user_roles = {k: role_from_user(v) for k, v in (user_layers or {}).items()}
    job_roles = job_file_roles(job)
    stated = {n: r for n, _ in broken if (r := _stated_role(n, user_roles, job_roles, names))}
    inners = {
        int(r.order_key)
        for r in list(roles.values()) + list(stated.values())
        if r.kind == "copper"
        and r.source == "file name"
        and r.side == "inner"
        and r.order_key is not None
        and float(r.order_key).is_integer()
    }
    copper_roles = number_copper(roles, inners)
    if not copper_roles:
        raise InputError(
            bf.source,
            "no copper layer could be identified (give a [layers] mapping in a stackup file)",
        )
    return roles, stated, copper_roles


class _ReadAhead:
    """What of the reading needs no copper: the outline candidates' parse and loops and each drill
    file's first reading, made by this process while the other starts on the copper layers."""

    def __init__(self, roles, bf, texts, tol):
        self.roles, self.bf, self.texts, self.tol = roles, bf, texts, tol
        self.outline, self.drills = None, {}

    def __call__(self):
        by_name = {f.name: f for f in self.bf.fab}
        self.outline = outline.read_candidates(self.roles, self.bf, self.texts, self.tol)
        for name, role in self.roles.items():
            if role.kind == "drill":
                self.drills[name] = first_reading(by_name[name], self.texts[name])


def _copper_and_outline(
    roles, copper_roles, ahead, bf, texts, tol, runner, per_layer, notes, problems
):
    """The copper layers and the board outline: positive layers first (the outline is chosen by the
    copper it holds), then negative ones (profile minus what they draw). ahead: the reading that
    needs no copper, done beside the positive layers."""
    by_name = {f.name: f for f in bf.fab}
    positive = [(n, r) for n, r in copper_roles if r.polarity != "negative"]
    negative = [(n, r) for n, r in copper_roles if r.polarity == "negative"]
    layers = []

    def add(built):
        for layer, layer_notes, layer_problems in built:
            layers.append(layer)
            notes.extend(layer_notes)
            problems.extend(layer_problems)

    add(_copper_layers(by_name, texts, positive, None, tol, runner, per_layer, ahead))
    board_outline, outline_file, why = outline.pick_outline(ahead.outline, layers, notes, problems)
    if negative:
        add(_copper_layers(by_name, texts, negative, board_outline, tol, runner, per_layer))
    return layers, board_outline, outline_file, why


def _complete_stack(layers, bf, job, copper_roles, stated, problems):
    """Problems for missing copper layers, and an empty placeholder in each missing layer's place
    (so that no layer is renumbered and the stackup stays right); sides by position."""
    want = _expected_copper(job, copper_roles, stated)
    present = {int(c.name[1:]) for c in layers}
    _layer_problems(bf, stated, present, want, problems)
    for k in sorted(set(range(1, max(want | {0: 0}) + 1)) - present):
        placeholder = CopperLayer(
            name=f"L{k}",
            file=f"(missing L{k})",
            side="inner",
            missing=True,
            identified_by="placeholder",
        )
        layers.append(placeholder)
    layers.sort(key=lambda c: int(c.name[1:]))
    _sides(layers)


def _drills(board, roles, bf, texts, notes, problems, firsts):
    """Every drill file with its span and plating; the other files listed as recognised."""
    n = len(board.copper)
    real = [c for c in board.copper if not c.missing]
    # holes of a correctly read drill file land on the pads of the outer layers
    region = shapely.STRtree(np.concatenate([real[0].pieces, real[-1].pieces]))
    side = drillspans.side_files(bf, texts, board.copper)
    by_name = {f.name: f for f in bf.fab}
    several = len([r for r in roles.values() if r.kind == "drill"]) > 1
    pads = [
        shapely.STRtree(shapely.points(c.flashes[:, :2])) if len(c.flashes) else None
        for c in board.copper
    ]
    for name, role in roles.items():
        if role.kind == "other":
            board.other_files.append(
                {"file": name, "role": role.label, "identified_by": role.source}
            )
        if role.kind != "drill":
            continue
        f = by_name[name]
        d, fmt = parse_drill(f, texts[name], region, notes, firsts.get(name))
        span, span_source = drillspans.drill_span(name, role, n, side)
        drill, unknown = _guarded(
            name, build_drill, f, d, role, n, texts[name], fmt, span, span_source
        )
        _drill_problems(name, texts[name], drill, notes, problems)
        _check_span_against_pads(board, drill, pads, notes)
        if unknown and drill.hole_count:
            notes.append(f"{name}: plating not stated; holes assumed plated")
        if drill.span_source.startswith("assumed") and several:
            notes.append(f"{name}: no layer span stated; taken as a through hole L1-L{n}")
        board.drills.append(drill)


PAD_SHARE = 0.5  # a layer where this share of a file's holes has a pad is in its span (our own)


def _padded_span(pads, drill):
    """(first, last) layer on which at least PAD_SHARE of the holes have a flashed pad centred on
    them; None when no layer has (non-plated holes, a file without pads)."""
    if not len(drill.holes):
        return None
    pts = shapely.points(drill.holes[:, :2])
    padded = []
    for k, tree in enumerate(pads):
        if tree is not None:
            hit = np.unique(tree.query(pts, predicate="dwithin", distance=0.005)[0])
            if len(hit) >= PAD_SHARE * len(pts):
                padded.append(k + 1)
    return (padded[0], padded[-1]) if padded else None


def _check_span_against_pads(board, drill, pads, notes):
    """Where a plated file's holes have their pads tells its span: taken from there when nothing
    states one (a blind-via file without its layer-pair file is no through hole), and a stated
    span the pads contradict is said."""
    if not drill.hole_plated.any():
        return
    seen = _padded_span(pads, drill)
    if seen is None or seen == (drill.from_layer, drill.to_layer):
        return
    a, b = seen
    if drill.span_source.startswith("assumed"):
        drill.from_layer, drill.to_layer = a, b
        drill.span_source = "where its holes have pads"
        notes.append(
            f"{drill.file}: no layer span stated; its holes have pads on L{a}-L{b} only, so "
            f"it is taken as spanning L{a}-L{b}"
        )
    elif drill.from_layer < a or drill.to_layer > b:
        notes.append(
            f"{drill.file}: the {drill.span_source} gives L{drill.from_layer}-"
            f"L{drill.to_layer}, but its holes have pads on L{a}-L{b} only"
        )


def _last_checks(board, bf, notes, problems):
    """Empty layers and missing drill holes; then every note stated on the board."""
    n = len(board.copper)
    real = [c for c in board.copper if not c.missing]
    for c in real:
        if not len(c.pieces):
            problems.append(Problem(c.file, f"copper layer {c.name} draws no copper"))
    if not any(d.hole_count for d in board.drills):
        if n >= 3:
            problems.append(
                Problem(
                    bf.source,
                    f"no drill holes on a board of {n} copper layers: vias "
                    "and plated holes would all be missing",
                )
            )
        elif n == 2:
            notes.append("no drill holes: the two copper layers are taken as joined nowhere")
    for note in notes:
        board.assume(note)
    for c in real:
        if c.identified_by == "file name":
            board.assume(
                f"{c.file}: identified as copper {c.name} ({c.side}) from its file name only"
            )
    board.problems = problems
