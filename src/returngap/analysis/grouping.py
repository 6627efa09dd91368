"""The findings a reviewer reads: below the noise floor dropped, near-duplicates merged, and the
crossings of one gap given one gap id.

- Noise floor: a gap crossing or edge run adding less than settings.min_added_nH, and a graze the
  return detours round by less than settings.min_detour_mm (as for crossings), is no finding
  unless settings.show_all (common practice, no source).
- Near-duplicates: findings of one kind on one net, layer and reference layer within DUPLICATE_MM
  of each other are one finding, the worst kept, with the count it absorbed.
- Gaps: the crossings of one enclosed gap (a slot, a void) share its id; a gap open to the plane's
  edge (a split, a notch) can run round the whole board, so its crossings are grouped where they
  lie within GROUP_REACH_MM of each other (a bus), each group its own id.
"""

import dataclasses

import numpy as np

from returngap.analysis import severity
from returngap.geometry.shapes import near_clusters

__all__ = ["DUPLICATE_MM", "GROUP_REACH_MM", "refine", "below_floor", "merge_duplicates", "gap_ids"]

DUPLICATE_MM = 0.5  # common practice, no source
GROUP_REACH_MM = 5.0  # tracks of one bus cross a split within this of each other (same)


def refine(findings, settings):
    """The three steps, in order."""
    kept = [f for f in findings if settings.show_all or not below_floor(f, settings)]
    return gap_ids(merge_duplicates(kept))


def below_floor(f, settings):
    if f["kind"] not in ("gap-crossing", "edge-run"):
        return False
    added = f.get("added_inductance_nH")
    if added is not None and added < settings.min_added_nH:
        return True
    if f["kind"] != "gap-crossing" or f["return_path"] != "detour":
        return False
    # a graze the return barely bends round: the crossings' own detour threshold holds for it too
    return f["crossing"] == "graze" and (f["detour_mm"] or 0.0) < settings.min_detour_mm


def _rank(f):
    return (severity.ORDER.index(f["severity"]), f.get("added_inductance_nH") or 0.0)


def merge_duplicates(findings):
    """Near-duplicates folded into the worst of them, the order otherwise kept."""
    groups = {}
    for k, f in enumerate(findings):
        groups.setdefault((f["kind"], f["net"], f["layer"], f.get("reference_layer")), []).append(k)
    drop, absorbed = set(), {}
    for idx in groups.values():
        if len(idx) < 2:
            continue
        for comp in _clusters(
            np.array([[findings[k]["x_mm"], findings[k]["y_mm"]] for k in idx]), DUPLICATE_MM
        ):
            if len(comp) < 2:
                continue
            members = [idx[c] for c in comp]
            best = max(members, key=lambda k: _rank(findings[k]))
            drop.update(m for m in members if m != best)
            absorbed[best] = len(members) - 1
    out = []
    for k, f in enumerate(findings):
        if k in drop:
            continue
        if k in absorbed and f["kind"] == "gap-crossing":
            f = dataclasses.replace(f, merged=absorbed[k])
        out.append(f)
    return out


def _clusters(xy, reach):
    """Single-linkage clusters of points within `reach`: lists of positions."""
    labels = near_clusters(xy, reach)
    comps = {}
    for i, label in enumerate(labels.tolist()):
        comps.setdefault(label, []).append(i)
    return list(comps.values())


def gap_ids(findings):
    """Each gap crossing with its group's id (see the module's text)."""
    by_gap = {}
    for k, f in enumerate(findings):
        if f["kind"] == "gap-crossing":
            by_gap.setdefault(f["gap_id"], []).append(k)
    new = {}
    for gid, idx in by_gap.items():
        if findings[idx[0]]["gap_enclosed"]:
            continue
        xy = np.array([[findings[k]["x_mm"], findings[k]["y_mm"]] for k in idx])
        comps = sorted(_clusters(xy, GROUP_REACH_MM), key=lambda c: tuple(xy[min(c)]))
        if len(comps) > 1:
            for n, comp in enumerate(comps):
                new.update((idx[c], f"{gid}-{n + 1}") for c in comp)
    return [
        dataclasses.replace(f, gap_id=new[k]) if k in new else f for k, f in enumerate(findings)
    ]
