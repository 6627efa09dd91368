"""The completeness gate: a board model that is not whole is refused before its findings are
trusted, because for a sign-off gate a clean pass on half a board is the worst answer there is.

What the importer found (empty, unreadable or truncated files, missing copper layers, an outline
that does not hold the copper, no drill holes on a multilayer board) is in board.problems; what
only the analysis can tell (no reference plane, no signal track to check) is added here. With
allow_incomplete the problems become stated assumptions and the run's status says `incomplete`.
"""

from returngap.errors import IncompleteError
from returngap.model.board import Problem

__all__ = ["COMPLETE", "INCOMPLETE", "analysis_problems", "enforce"]

COMPLETE, INCOMPLETE = "complete", "incomplete"


def analysis_problems(board, planes, chains, settings):
    """Problems that show once the reference planes and the checked tracks are known."""
    out = []
    n = len(board.copper)
    if n >= 3 and not any(planes.values()):
        out.append(
            Problem(
                board.source,
                f"no reference plane found on a board of {n} copper layers (no layer's "
                f"plane-net copper covers {settings.plane_min_fraction:.0%} of the outline)",
            )
        )
    if not chains:
        if n < 2:
            why = (
                f"only one copper layer ({board.copper[0].file}): no reference plane "
                "to check against"
            )
        elif settings.nets:
            why = f"no signal track of the nets {', '.join(settings.nets)} has a reference plane"
        else:
            why = "no signal track has a reference plane to be checked against"
        out.append(Problem(board.source, f"zero signal tracks checked: {why}"))
    return out


def enforce(board, problems, allow_incomplete):
    """The run's status; refuses (IncompleteError, exit status 2) unless allowed, in which case each
    problem is stated as an assumption."""
    if not problems:
        return COMPLETE
    if not allow_incomplete:
        raise IncompleteError(problems)
    for p in problems:
        board.assume(f"incomplete: {p}")
    return INCOMPLETE
