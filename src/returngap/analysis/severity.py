"""The one severity ladder: every finding's severity comes from here, from its estimated effect.

Reflection of a series inductance against the reflection budget (10 % by default, Bogatin, from
memory): at or over the budget an error, over half of it a warning, else info. A gap whose
resonance falls at or below the knee frequency of the edge is raised one step (common practice,
no source). A split (no way through the plane at all) is an error.
"""

__all__ = ["ORDER", "raised", "by_reflection", "gap_crossing"]

ORDER = ("info", "warning", "error")


def by_reflection(reflection, budget):
    if reflection >= budget:
        return "error"
    return "warning" if reflection >= budget / 2 else "info"


def raised(severity):
    """One step up (error stays error)."""
    return ORDER[min(ORDER.index(severity) + 1, len(ORDER) - 1)]


def gap_crossing(split, reflection, lowest_resonance_GHz, settings):
    if split:
        return "error"
    severity = by_reflection(reflection, settings.reflection_budget)
    return raised(severity) if lowest_resonance_GHz <= settings.knee_GHz else severity
