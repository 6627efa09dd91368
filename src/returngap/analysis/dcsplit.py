"""The DC share of a closed slot crossing's return round the slot's near end, from a resistive
solve of the reference layer's plane copper (physics/resistive.py). The current is fed where the
track's run on its layer ends, one end each way: the driver's and the receiver's ground pins are
taken to sit there (the data does not say where they are). The copper is rasterised in a frame
turned so the track runs along +x through the crossing, over the box of the run and the gap plus
a margin; the slot is widened to at least a cell so that the raster cannot bridge it."""

import math
import time
from dataclasses import dataclass

import numpy as np
import shapely

from returngap.analysis import references
from returngap.geometry.frame import TrackFrame
from returngap.physics import resistive

__all__ = ["DcSplit", "dc_split", "MAX_RASTER_CELLS"]

MAX_RASTER_CELLS = 150_000  # a sparse solve of this size takes well under a second here
FINEST_CELL_MM = 0.1
MARGIN_MM = 5.0


@dataclass
class DcSplit:
    share_near: float  # of the current crossing the slot's line, the part round the near end
    cell_mm: float
    cells: int
    seconds: float


def _raster(near, gap, box):
    """(copper mask [i, j], x0, y0, cell): cell centres on the plane copper in the box (`near`),
    off the gap widened to a cell."""
    x0, y0, x1, y1 = box
    cell = max(FINEST_CELL_MM, math.sqrt((x1 - x0) * (y1 - y0) / MAX_RASTER_CELLS))
    nx, ny = max(2, int(math.ceil((x1 - x0) / cell))), max(2, int(math.ceil((y1 - y0) / cell)))
    gx, gy = np.meshgrid(x0 + (np.arange(nx) + 0.5) * cell, y0 + (np.arange(ny) + 0.5) * cell)
    gx, gy = gx.T, gy.T
    shapely.prepare(near)
    wide = gap.buffer(0.75 * cell)
    shapely.prepare(wide)
    copper = shapely.contains_xy(near, gx, gy) & ~shapely.contains_xy(wide, gx, gy)
    return copper, x0, y0, cell


def _nearest_copper(copper, x0, y0, cell, point):
    i, j = np.nonzero(copper)
    d = (x0 + (i + 0.5) * cell - point[0]) ** 2 + (y0 + (j + 0.5) * cell - point[1]) ** 2
    k = int(np.argmin(d))
    return int(i[k]), int(j[k])


def _gap_span_at_origin(gap):
    """(low, high) y of the gap along the line x = 0, through the crossing point."""
    cut = gap.intersection(shapely.LineString([(0, -1e6), (0, 1e6)]))
    parts = [p for p in shapely.get_parts(cut) if p.bounds[1] <= 0.0 <= p.bounds[3]]
    part = parts[0] if parts else cut
    return part.bounds[1], part.bounds[3]


def dc_split(chains, finding, plane, gap_polygon):
    """The DC share round the near end of the slot that `finding` crosses; plane: the reference
    layer's plane copper, gap_polygon: the slot's void in it (board coordinates). Raises
    LookupError without a track there and resistive.NotConnected when the run's two ends sit on
    unjoined copper."""
    t0 = time.perf_counter()
    x, y = finding["x_mm"], finding["y_mm"]
    chain = references.nearest_chain(chains, finding["net"], x, y, finding["layer"])
    if chain is None:
        raise LookupError(f"no track of {finding['net']} near ({x:.2f}, {y:.2f})")
    dx, dy = references.direction_at(chain, x, y)
    frame = TrackFrame(x, y, math.degrees(math.atan2(dy, dx)))
    run, gap = frame.local(chain.line), frame.local(gap_polygon)
    bx = shapely.union(shapely.envelope(run), shapely.envelope(gap)).bounds
    frame.box = (bx[0] - MARGIN_MM, bx[1] - MARGIN_MM, bx[2] + MARGIN_MM, bx[3] + MARGIN_MM)
    copper, x0, y0, cell = _raster(frame.clip(plane), gap, frame.box)
    ends = run.coords[0], run.coords[-1]
    feed, drain = (_nearest_copper(copper, x0, y0, cell, p) for p in ends)
    potential = resistive.sheet_potential(copper, feed, drain)
    low, high = _gap_span_at_origin(gap)
    column = int(np.clip(math.floor((0.0 - x0) / cell), 0, copper.shape[0] - 2))
    ys = y0 + (np.arange(copper.shape[1]) + 0.5) * cell
    below = resistive.flow_across_column(potential, column, np.flatnonzero(ys < low))
    above = resistive.flow_across_column(potential, column, np.flatnonzero(ys > high))
    if abs(below + above) < 1e-9:
        raise LookupError("the track's two ends lie on one side of the slot")
    share_low = below / (below + above)
    near_is_low = -low <= high
    return DcSplit(
        share_near=float(share_low if near_is_low else 1 - share_low),
        cell_mm=cell,
        cells=int(copper.size),
        seconds=time.perf_counter() - t0,
    )
