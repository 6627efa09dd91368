"""A track's own frame: a point on the track at the origin, the track running along +x there. The
local solves (the field solve, the DC split) work in it, on a box of it."""

from dataclasses import dataclass

import shapely
import shapely.affinity

__all__ = ["TrackFrame"]


@dataclass
class TrackFrame:
    """Origin (x, y) in board coordinates, the track's direction there (angle, degrees), and the
    box (x0, y0, x1, y1) in local coordinates that clip() keeps."""

    x: float
    y: float
    angle: float
    box: tuple = ()

    def local(self, geom):
        """geom in local coordinates."""
        moved = shapely.affinity.translate(geom, -self.x, -self.y)
        return shapely.affinity.rotate(moved, -self.angle, origin=(0, 0))

    def clip(self, geom):
        """geom's part in the box, in local coordinates (only that part is turned)."""
        back = shapely.affinity.rotate(shapely.box(*self.box), self.angle, origin=(0, 0))
        return self.local(geom.intersection(shapely.affinity.translate(back, self.x, self.y)))
