# temporary: brute-force cast over the old candidate grid, until the new WallGrid lands
import numpy as np
from numba import njit


def kernel_args(grid):
    cand = grid.candidates
    counts = np.full(cand.shape[0], cand.shape[1], dtype=np.int64)
    start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    return (float(grid.x0), float(grid.y0), float(grid.cell), int(grid.nx), int(grid.ny), start,
            np.ascontiguousarray(cand.ravel(), dtype=np.int64), np.ascontiguousarray(grid.start), np.ascontiguousarray(grid.edge))


@njit(cache=True, nogil=True)
def cast_one(px, py, theta, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge):
    i = min(max(int(np.floor((px - gx0) / gcell)), 0), gnx - 1)
    j = min(max(int(np.floor((py - gy0) / gcell)), 0), gny - 1)
    c = j * gnx + i
    dx = np.cos(theta)
    dy = np.sin(theta)
    best = np.inf
    for m in range(cell_start[c], cell_start[c + 1]):
        w = cell_walls[m]
        ex = edge[w, 0]
        ey = edge[w, 1]
        denom = dx * ey - dy * ex
        if denom == 0.0:
            continue
        apx = start[w, 0] - px
        apy = start[w, 1] - py
        t = (apx * ey - apy * ex) / denom
        u = (apx * dy - apy * dx) / denom
        if u >= 0.0 and u <= 1.0 and t >= 0.0 and t <= length and t < best:
            best = t
    return best
