"""net-conflict: copper that carries two nets' labels (analysis/connectivity.NetConflict): a short
in the released data or a wrong label (error), or a part whose own pads join the two there, such
as a net tie or a solder jumper (info: as designed, most likely)."""

from returngap.checks.common import finding

__all__ = ["net_conflicts"]


def net_conflicts(nets):
    out = []
    for c in nets.conflicts:
        sev = "info" if c.part else "error"  # joined at a part's own pads: most likely as designed
        out.append(
            finding(
                "net-conflict",
                sev,
                c.other,
                c.layer,
                c.x,
                c.y,
                conflicting_nets=[c.net, c.other],
                joined_by_part=c.part,
                labels=c.labels,
            )
        )
    return out
