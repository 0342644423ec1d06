"""Fitted fronts are drawn only inside each spherulite's own territory."""

import numpy as np

from app.microscopy.overlays import OverlayMark, clipped_fronts


def test_front_is_hidden_where_it_crosses_a_neighbour_or_leaves_the_field():
    territories = np.zeros((60, 60), np.int32)
    territories[:, :30] = 1  # spherulite 1 owns the left half, 2 the right half
    territories[:, 30:] = 2
    marks = [OverlayMark(1, 20.0, 30.0, "ok", False, None), OverlayMark(2, 45.0, 30.0, "ok", False, None)]
    x, y, connect = clipped_fronts(marks, np.array([15.0, 40.0]), territories)
    drawn = connect.astype(bool)
    first_circle = np.hypot(x - 20.0, y - 30.0) < 15.5
    assert drawn[first_circle].any() and not drawn[first_circle].all()
    assert np.all(x[drawn & first_circle] < 30.5)  # never inside the neighbour
    assert not np.any(drawn & ((x < -0.5) | (y < -0.5) | (y > 59.5)))  # nor outside the field
    assert np.all(x[drawn & ~first_circle] > 29.5)


def test_circles_are_never_joined_to_each_other():
    territories = np.ones((100, 100), np.int32)
    marks = [OverlayMark(1, 30.0, 30.0, "ok", False, None), OverlayMark(1, 70.0, 70.0, "ok", False, None)]
    x, y, connect = clipped_fronts(marks, np.array([10.0, 10.0]), territories)
    ends = np.flatnonzero(connect == 0)
    assert len(ends) == 2 and np.hypot(x[ends[0]] - 40.0, y[ends[0]] - 30.0) < 1e-6
