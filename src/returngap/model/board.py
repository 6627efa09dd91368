"""The board model that the importer builds and later stages read."""

from dataclasses import dataclass, field

import numpy as np
import shapely

__all__ = ["CopperLayer", "DrillFile", "Dielectric", "Stackup", "NetPoint", "Problem", "Board"]


@dataclass
class CopperLayer:
    """One copper layer: its copper as pieces (overlapping shapes, never unioned here: a union of
    every track is the one cost that does not scale) plus the drawn objects that later stages
    need."""

    name: str  # "L1" .. "Ln", top to bottom
    file: str
    side: str  # top | inner | bottom
    polarity: str = "positive"
    type_hint: str | None = None  # Signal | Plane | Mixed | Hatched, when the file says
    identified_by: str = ""
    # shapely Polygons that together make the copper: the parts of everything a later clear
    # object cut (resolved in file order), then each dark object drawn after the last clear one
    pieces: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=object))
    # dark strokes as centre-line segments: columns x1, y1, x2, y2, width (mm)
    segments: np.ndarray = field(default_factory=lambda: np.zeros((0, 5)))
    segment_net: list = field(default_factory=list)  # str or None per segment
    segment_function: list = field(default_factory=list)  # .AperFunction or None
    # dark flashes: columns x, y, size (mm)
    flashes: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    flash_net: list = field(default_factory=list)
    flash_function: list = field(default_factory=list)
    flash_part: list = field(default_factory=list)  # (refdes, pin) or None
    # dark regions: (polygon, net, function)
    regions: list = field(default_factory=list)
    repaired_regions: int = 0
    skipped_objects: int = 0
    missing: bool = False  # a placeholder for a layer whose file is absent or unreadable
    area_mm2: float | None = None  # the copper area, set by the pipeline from the nets' islands
    # worked out once, where the layer is read (analysis/connectivity.layer_islands): the island of
    # every piece, segment, flash and region, the island count, touching pairs; the pieces' tree
    islands_found: tuple | None = field(default=None, repr=False, compare=False)
    # per segment, the piece its stroke drew (-1 where that piece was merged, cut or dropped):
    # its island is that piece's, with no lookup (set by the import, used by layer_islands)
    segment_piece: np.ndarray | None = field(default=None, repr=False, compare=False)
    piece_tree: object = field(default=None, repr=False, compare=False)
    _geometry: object = field(default=None, repr=False, compare=False)

    @property
    def index(self):
        return int(self.name[1:]) - 1

    @property
    def geometry(self):
        """The copper as one (Multi)Polygon: a union, so only for pictures, cross-checks and
        small boards."""
        if self._geometry is None:
            parts = [p for p in self.pieces if p is not None and not p.is_empty]
            self._geometry = shapely.union_all(parts) if parts else shapely.Polygon()
        return self._geometry

    @property
    def bounds(self):
        if not len(self.pieces):
            return None
        b = shapely.bounds(self.pieces)
        return (
            float(b[:, 0].min()),
            float(b[:, 1].min()),
            float(b[:, 2].max()),
            float(b[:, 3].max()),
        )

    @property
    def copper_area_mm2(self):
        """The copper area: as the pipeline measured it from the islands, else from the union."""
        if self.area_mm2 is None:
            self.area_mm2 = float(self.geometry.area)
        return self.area_mm2

    def object_nets(self):
        return {n for n in self.segment_net + self.flash_net + [r[1] for r in self.regions] if n}


@dataclass
class DrillFile:
    file: str
    plated: bool | None  # every hole plated / none plated / None: mixed (see hole_plated)
    from_layer: int  # 1-based copper layer numbers
    to_layer: int
    holes: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))  # x, y, diameter
    slots: np.ndarray = field(default_factory=lambda: np.zeros((0, 5)))  # x1, y1, x2, y2, width
    hole_is_via: list = field(default_factory=list)  # True / False / None per hole
    hole_plated: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))
    slot_plated: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))
    identified_by: str = ""
    span_source: str = ""  # where the layer span came from
    plating_source: str = ""  # where the plating came from
    number_format: str = ""
    skipped: int = 0

    @property
    def hole_count(self):
        return int(len(self.holes) + len(self.slots))

    @property
    def plating(self):
        return {True: "plated", False: "non-plated", None: "mixed"}[self.plated]


@dataclass
class Dielectric:
    between: tuple  # ("L1", "L2")
    thickness_mm: float
    er: float
    source: str = ""


@dataclass
class Stackup:
    dielectrics: list  # top to bottom, one between each pair of neighbouring copper layers
    copper_thickness_mm: dict  # layer name -> thickness
    board_thickness_mm: float
    source: str = ""

    def height_mm(self, upper, lower):
        """Dielectric thickness between two copper layers (sum of what lies between them)."""
        a, b = sorted((int(upper[1:]), int(lower[1:])))
        total = 0.0
        for d in self.dielectrics:
            i = int(d.between[0][1:])
            if a <= i < b:
                total += d.thickness_mm
        for n in range(a + 1, b):  # copper of layers in between
            total += self.copper_thickness_mm.get(f"L{n}", 0.035)
        return total

    def er_between(self, upper, lower):
        """Thickness-weighted permittivity of the dielectrics between two copper layers."""
        a, b = sorted((int(upper[1:]), int(lower[1:])))
        parts = [d for d in self.dielectrics if a <= int(d.between[0][1:]) < b]
        t = sum(d.thickness_mm for d in parts)
        return sum(d.er * d.thickness_mm for d in parts) / t if t > 0 else 4.3


@dataclass
class NetPoint:
    """A netlist test point (IPC-D-356): where a net has a pad or via."""

    net: str
    x: float
    y: float
    refdes: str | None
    pin: str | None
    is_via: bool
    layers: tuple | None  # (k, k): reached from layer k only (IPC access side); None: both sides


@dataclass
class Problem:
    """Something that makes the board model incomplete: an empty, unreadable or truncated file, a
    missing layer, an outline that does not hold the copper, nothing to check."""

    file: str
    message: str
    line: int | None = None

    def __str__(self):
        return f"{self.file}{'' if self.line is None else f':{self.line}'}: {self.message}"


@dataclass
class Board:
    name: str
    source: str
    copper: list  # CopperLayer, top to bottom
    drills: list  # DrillFile
    outline: object  # shapely Polygon of the board profile
    stackup: Stackup | None = None
    netlist: list = field(default_factory=list)  # NetPoint
    assumptions: list = field(default_factory=list)
    ignored: list = field(default_factory=list)  # {"file", "reason"}
    other_files: list = field(default_factory=list)  # recognised but unused here (mask, silk, ...)
    problems: list = field(default_factory=list)  # Problem: what makes this model incomplete
    job: dict = field(default_factory=dict)  # the job file's JSON, when there is one
    job_file: str | None = None
    netlist_file: str | None = None
    outline_file: str | None = None  # the file the outline came from (None: the copper)
    outline_why: str = ""  # why that outline was taken

    @property
    def track_segments(self):
        """Drawn track segments on all copper: the measure of a board's size for running it."""
        return sum(len(c.segments) for c in self.copper)

    def layer(self, name):
        for c in self.copper:
            if c.name == name:
                return c
        raise KeyError(name)

    def assume(self, text):
        if text not in self.assumptions:
            self.assumptions.append(text)
