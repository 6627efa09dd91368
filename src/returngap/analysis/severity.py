"""The one severity ladder: every finding's severity comes from here, from its estimated effect at
the net's edge rate, never from the kind of gap.

- Reflection: the peak reflected share of the edge from the added series inductance (physics:
  series_inductance_reflection), scaled by the share of the return the gap interrupts, against the
  reflection budget (10 % by default; Bogatin, from memory): at or over the budget an error, over
  half of it a warning, else info.
- Resonance: a gap whose lowest resonance falls at or below the knee frequency of the net's edge
  is raised one step, when its reflection is at least a quarter of the budget (a resonant gap the
  signal barely couples to stays where its reflection puts it). Common practice, no source.
"""

__all__ = ["ORDER", "raised", "by_reflection", "by_effect", "gap_crossing", "at_or_above"]

ORDER = ("info", "warning", "error")


def by_reflection(reflection, budget):
    if reflection >= budget:
        return "error"
    return "warning" if reflection >= budget / 2 else "info"


def raised(severity):
    """One step up (error stays error)."""
    return ORDER[min(ORDER.index(severity) + 1, len(ORDER) - 1)]


def by_effect(reflection, budget, resonance_GHz=None, knee_GHz=None):
    """The ladder itself: reflection against the budget, one step up for a resonance at or below
    the knee frequency (see the module's text)."""
    severity = by_reflection(reflection, budget)
    resonant = resonance_GHz is not None and knee_GHz is not None and resonance_GHz <= knee_GHz
    return raised(severity) if resonant and reflection >= budget / 4 else severity


def gap_crossing(reflection, lowest_resonance_GHz, knee_GHz, settings):
    """A gap crossing: reflection already scaled by the interrupted share; the resonance None
    where the return does not go round the gap (the other plane carries it)."""
    return by_effect(reflection, settings.reflection_budget, lowest_resonance_GHz, knee_GHz)


def at_or_above(severity, level):
    """A severity at or above a level (error, warning, info; "none": nothing is)."""
    return level != "none" and ORDER.index(severity) >= ORDER.index(level)
