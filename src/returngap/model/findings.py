"""Findings as typed values: one dataclass per finding kind over the fields every kind shares.

Checks build them; reports read them as mappings (f["net"]) or as_dict(), the JSON fields in
order: the shared ones, then the kind's own (report/messages.py adds the sentence). A field the
finding does not have (a reference change with no stitching via has no return point) is left
UNSET and out of the JSON; None is a value ("no detour": a split).
"""

from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import ClassVar

__all__ = [
    "UNSET",
    "Finding",
    "GapCrossing",
    "ReferenceChange",
    "EdgeRun",
    "FloatingCopper",
    "StitchingSpacing",
    "NetConflict",
    "KINDS",
]


class _Unset:
    def __repr__(self):
        return "UNSET"

    def __reduce__(self):  # one instance, also across processes
        return (_unset, ())


def _unset():
    return UNSET


UNSET = _Unset()
_SHARED = (
    "id",
    "kind",
    "gap_type",
    "severity",
    "net",
    "layer",
    "reference_layer",
    "reference_net",
    "x_mm",
    "y_mm",
)


_OWN = {}  # finding class -> the names of its own fields, in order


def _own_fields(cls):
    own = _OWN.get(cls)
    if own is None:
        own = _OWN[cls] = tuple(f.name for f in fields(cls) if f.name not in _SHARED)
    return own


def _opt():
    return field(default=UNSET)


@dataclass(kw_only=True)
class Finding(Mapping):
    """What every finding has: where it is, on which net and layers, and how bad it is."""

    kind: ClassVar[str] = ""
    id: str
    severity: str  # error | warning | info (analysis/severity.py)
    net: str
    layer: str
    x_mm: float
    y_mm: float
    gap_type: str | None = None
    reference_layer: str | None = None
    reference_net: str | None = None

    def as_dict(self):
        """The JSON fields, in order."""
        v = self.__dict__
        d = v.get("_dict")
        if d is None:
            d = {k: (self.kind if k == "kind" else v[k]) for k in _SHARED}
            d.update((k, v[k]) for k in _own_fields(type(self)) if v[k] is not UNSET)
            v["_dict"] = d
        return d

    def __getitem__(self, key):
        return self.as_dict()[key]

    def __iter__(self):
        return iter(self.as_dict())

    def __len__(self):
        return len(self.as_dict())


@dataclass(kw_only=True)
class GapCrossing(Finding):
    """A track whose return footprint crosses or grazes a slot, split or void in its plane."""

    kind: ClassVar[str] = "gap-crossing"
    gap_length_mm: float
    gap_width_mm: float
    detour_mm: float | None
    detour_method: str | None
    interrupted_fraction: float
    added_inductance_nH: float
    added_inductance_range_nH: list
    inductance_method: str
    resonance_GHz: float
    resonance_range_GHz: list
    resonance_er_eff: float
    resonance_mode: str
    reflection_fraction: float
    z0_ohm: float
    trace_width_mm: float
    height_mm: float
    line_type: str
    plane_share: float
    crossing: str  # cross | graze
    detour_path_mm: list | None
    slot_ends_mm: list | None
    return_path: str  # detour | other plane | split
    rise_time_ns: float  # the net's edge rate the numbers are for
    gap_enclosed: bool  # the plane closes round the gap (else it opens to the plane's edge)
    gap_id: str = ""  # one id per gap: the crossings of one slot share it (analysis/grouping.py)
    side_nets: list = _opt()  # a split between two nets' copper: [one side, the other]
    # a closed slot: the share of the return round each end (checks/return_split.py)
    return_split: dict = _opt()
    merged: int = _opt()  # near-duplicate crossings folded into this one
    field_solve: dict = _opt()  # the local field solve's numbers, where one was run
    # a split between two plane nets: the nearest part bridging them (None: none in the data)
    bridge_part: str | None = _opt()
    bridge_distance_mm: float = _opt()
    parts_known: bool = _opt()  # whether the data tells parts at all
    # the frequency view (analysis/frequency.py): the track's insertion loss over frequency
    s21_first_dip_GHz: float | None = _opt()
    s21_loss_at_knee_dB: float = _opt()
    s21_loss_at_knee_no_gap_dB: float = _opt()


@dataclass(kw_only=True)
class ReferenceChange(Finding):
    """A signal via whose two track layers return in different planes."""

    kind: ClassVar[str] = "reference-change"
    other_reference_layer: str
    other_reference_net: str
    to_layer: str
    plane_spacing_mm: float
    z0_ohm: float
    distance_mm: float | None
    added_inductance_nH: float | None
    bridge_part: str = _opt()
    return_x_mm: float = _opt()
    return_y_mm: float = _opt()
    added_inductance_range_nH: list = _opt()
    inductance_method: str = _opt()
    reflection_fraction: float = _opt()
    parts_known: bool = _opt()  # no bridging part: does the data tell parts at all


@dataclass(kw_only=True)
class EdgeRun(Finding):
    """A track running along, or off, the edge of its reference plane's copper."""

    kind: ClassVar[str] = "edge-run"
    run_length_mm: float
    edge_distance_mm: float
    edge_distance_h: float
    beyond_edge_fraction: float
    height_mm: float
    off_plane: bool  # the run leaves the plane at a track end (else it runs near its edge)
    added_inductance_nH: float
    inductance_method: str
    reflection_fraction: float
    z0_ohm: float
    rise_time_ns: float
    run_ends_mm: list = _opt()  # [[x, y], [x, y]]: where the run starts and ends


@dataclass(kw_only=True)
class FloatingCopper(Finding):
    """Copper tied to nothing, within coupling distance of a signal track."""

    kind: ClassVar[str] = "floating-copper"
    island_net: str
    area_mm2: float
    island_length_mm: float
    island_width_mm: float
    resonance_GHz: float
    stitching_vias_needed: int
    height_mm: float
    # the frequency view (analysis/frequency.py): the track's loss with the island beside it
    s21_first_dip_GHz: float | None = _opt()
    s21_loss_at_knee_dB: float = _opt()
    s21_loss_at_knee_no_gap_dB: float = _opt()


@dataclass(kw_only=True)
class StitchingSpacing(Finding):
    """Neighbouring stitching vias of ground copper farther apart than the limit, by a track."""

    kind: ClassVar[str] = "stitching-spacing"
    via_spacing_mm: float
    spacing_limit_mm: float
    er_eff: float
    via_count: int
    from_via_mm: list
    to_via_mm: list


@dataclass(kw_only=True)
class NetConflict(Finding):
    """Copper that carries two nets' labels."""

    kind: ClassVar[str] = "net-conflict"
    conflicting_nets: list
    joined_by_part: str | None
    labels: int  # objects carrying the other label there


KINDS = {
    c.kind: c
    for c in (
        GapCrossing,
        ReferenceChange,
        EdgeRun,
        FloatingCopper,
        StitchingSpacing,
        NetConflict,
    )
}
