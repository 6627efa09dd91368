"""What a check looks for and where it draws its lines: every threshold in one place, each default
with its source or marked "common practice, no source". The whole of it is in every report, and
it travels whole to batch workers (to_json / from_json), so a new field needs no hand copying."""

import dataclasses
import fnmatch
import json
from dataclasses import dataclass

from returngap import physics

__all__ = ["Settings"]


@dataclass
class Settings:
    # the signal
    rise_time_ns: float = 0.5  # a fast CMOS edge (common practice, no source)
    max_freq_GHz: float | None = None  # when given, overrides the rise time: T_r = 0.5 / f
    nets: tuple = ()  # glob patterns; empty = every signal net
    # [[net_class]] tables: {"name", "nets": globs, "rise_time_ns" | "max_freq_GHz", "check"}; a
    # net takes the first class it matches, others the edge rate above
    net_classes: tuple = ()
    # the return footprint and what counts as a gap crossing
    current_fraction: float = 0.90  # share of the return the footprint holds (REFERENCE 1.4)
    reflection_budget: float = 0.10  # 10 % reflection noise (Bogatin, from memory)
    min_interrupted_fraction: float = 0.10  # smaller: not reported (common practice, no source)
    min_detour_mm: float = 1.0  # shorter detours (no split): not reported (same)
    min_gap_length_mm: float = 2.0  # single antipads beside a track: not reported (same)
    # own-layer plane copper this close beside a track over a gap carries its return (coplanar)
    coplanar_max_gap_mm: float = 0.3  # common practice, no source
    slot_aspect_ratio: float = 3.0  # elongated beyond this: a slot, else a void (same)
    plane_min_fraction: float = 0.20  # plane-net copper over this share of the board: a reference
    # a plane layer with signal tracks longer than this many board widths (sqrt of its area) is a
    # pour on a signal layer, not a solid plane (common practice, no source)
    solid_plane_track_factor: float = 3.0
    # the other checks
    edge_distance_h: float = 3.0  # tracks closer than 3 h to their plane edge (CVEL asks >= 1 h)
    edge_min_run_mm: float = 1.0  # shorter runs are ignored (common practice, no source)
    floating_min_area_mm2: float = 1.0  # smaller islands are ignored (common practice, no source)
    floating_coupling_mm: float = 1.0  # an island this close to a track couples to it (same)
    stitch_fraction: float = 0.1  # lambda/10 (lambda/20 stricter); REFERENCE 6.3, common practice
    stitch_min_pour_mm2: float = 20.0  # smaller pours are not checked (common practice, no source)
    split_max_ratio: float = 3.0  # return-split only where the far way is within 3x the near one
    # the noise floor: smaller effects are no finding unless show_all (common practice, no source)
    min_added_nH: float = 0.1
    show_all: bool = False
    # the completeness gate
    allow_incomplete: bool = False  # state the gate's problems instead of refusing the board
    # the local field solve (analysis/fieldsolve.py) of this many crossings nearest the budget
    field_solves: int = 0
    # the frequency view (analysis/frequency.py) of gap crossings at or above this severity
    frequency_view: str = "warning"  # error | warning | info | none

    @property
    def rise_ns(self):
        return (
            physics.rise_time_for_knee_ns(self.max_freq_GHz)
            if self.max_freq_GHz
            else self.rise_time_ns
        )

    @property
    def knee_GHz(self):
        return self.max_freq_GHz or physics.knee_frequency_GHz(self.rise_time_ns)

    def net_class(self, net):
        """The first [[net_class]] whose globs match the net (any case), or None."""
        low = (net or "").lower()
        for c in self.net_classes:
            if any(fnmatch.fnmatchcase(low, g.lower()) for g in c["nets"]):
                return c
        return None

    def rise_ns_for(self, net):
        """The edge rate of a net: its class's, else the default."""
        c = self.net_class(net)
        if c and c.get("max_freq_GHz"):
            return physics.rise_time_for_knee_ns(c["max_freq_GHz"])
        if c and c.get("rise_time_ns"):
            return c["rise_time_ns"]
        return self.rise_ns

    def knee_GHz_for(self, net):
        return physics.knee_frequency_GHz(self.rise_ns_for(net))

    def checks_net(self, net):
        c = self.net_class(net)
        return c is None or c.get("check", True)

    def as_dict(self):
        """For the reports: every field, with the edge rate actually used."""
        out = dataclasses.asdict(self)
        out["nets"] = list(self.nets)
        out["net_classes"] = [dict(c) for c in self.net_classes]
        out["rise_time_ns"] = round(self.rise_ns, 6)
        out["knee_frequency_GHz"] = round(self.knee_GHz, 6)
        return out

    def to_json(self):
        return json.dumps(
            {
                **dataclasses.asdict(self),
                "nets": list(self.nets),
                "net_classes": [dict(c) for c in self.net_classes],
            }
        )

    @classmethod
    def from_json(cls, text):
        data = json.loads(text)
        known = {f.name for f in dataclasses.fields(cls)}
        data = {k: v for k, v in data.items() if k in known}
        data["nets"] = tuple(data.get("nets", ()))
        data["net_classes"] = tuple(dict(c) for c in data.get("net_classes", ()))
        return cls(**data)
