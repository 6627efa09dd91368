"""The convex hull of many points (geometry/shapes.points_hull) against shapely's hull of a
MultiPoint of the same points, the reference, to the bit."""

import numpy as np
import shapely

from returngap.geometry.shapes import points_hull


def _cases():
    rng = np.random.default_rng(7)
    boxes = rng.uniform(0, 50, (500, 2))
    grid = np.round(rng.uniform(0, 5, (400, 2)), 1)  # many repeated points
    line = np.column_stack([np.linspace(0, 9, 30), np.linspace(1, 4, 30)])  # all on one line
    same = np.full((5, 2), 3.25)  # one point, five times
    corners = np.array([[0, 0], [4, 0], [4, 3], [0, 3], [2, 1.5]], dtype=float)
    return [boxes, grid, line, same, corners, boxes[:2], rng.normal(0, 1e-7, (50, 2))]


def test_points_hull_equals_the_hull_of_a_multipoint():
    for pts in _cases():
        theirs = shapely.convex_hull(shapely.multipoints(pts))
        ours = points_hull(pts)
        assert shapely.to_wkb(ours) == shapely.to_wkb(theirs), pts[:3]


def test_points_hull_of_box_corners_is_their_outer_rectangle():
    # analytic: the corners of boxes inside [0, 10] x [0, 4], two of them touching the sides
    b = np.array([[0, 1, 2, 2], [3, 0, 10, 1], [5, 3, 6, 4], [1, 1, 2, 2]], dtype=float)
    pts = np.concatenate([b[:, [0, 1]], b[:, [2, 1]], b[:, [2, 3]], b[:, [0, 3]]])
    hull = points_hull(pts)
    assert hull.area == shapely.convex_hull(shapely.multipoints(pts)).area
    assert hull.bounds == (0.0, 0.0, 10.0, 4.0)
