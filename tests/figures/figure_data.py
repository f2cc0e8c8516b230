"""Reading a figure's content back from its artists (by gid), not from its pixels."""

import numpy as np


def by_gid(fig, gid, prefix=False):
    """Artists of ``fig`` whose gid is ``gid`` (or starts with it)."""
    return fig.findobj(lambda a: (a.get_gid() or "") == gid or (prefix and (a.get_gid() or "").startswith(gid)))


def one(fig, gid):
    found = by_gid(fig, gid)
    assert len(found) == 1, (gid, found)
    return found[0]


def polygon_area(xy):
    """Area of a polygon (shoelace), its vertices (N, 2) in order; a closing repeat is allowed."""
    x, y = np.asarray(xy, float).T
    return 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))


def cell_vectors(patch):
    """The two edge vectors at the first corner of a cell drawn as a 4-corner Polygon."""
    xy = patch.get_xy()[:4]
    return xy[1] - xy[0], xy[3] - xy[0]


def angle(u, v):
    return float(np.degrees(np.arccos(np.dot(u, v) / (np.linalg.norm(u) * np.linalg.norm(v)))))
