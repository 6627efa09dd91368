"""net-conflict: copper that carries two nets' labels (analysis/connectivity.NetConflict): a short
in the released data or a wrong label (error), or a part whose own pads join the two there, such
as a net tie or a solder jumper (info: as designed, most likely)."""

from returngap.checks.common import finding

__all__ = ["net_conflicts"]


def net_conflicts(nets):
    out = []
    for c in nets.conflicts:
        if c.part:
            sev = "info"
            why = (
                f"joined by copper at part {c.part}, whose own pads carry both labels (a net tie, "
                "a jumper or a bypassed part: check that it is intended)"
            )
        else:
            sev, why = "error", "a short in the released data, or a wrong label"
        msg = (
            f"copper of net {c.net} on {c.layer} also carries the label {c.other} "
            f"({c.labels} object(s)) at ({c.x:.2f}, {c.y:.2f}): {why}"
        )
        out.append(
            finding(
                "net-conflict",
                sev,
                c.other,
                c.layer,
                c.x,
                c.y,
                msg,
                conflicting_nets=[c.net, c.other],
                joined_by_part=c.part,
            )
        )
    return out
