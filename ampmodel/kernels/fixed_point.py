"""Fixed points of maps on arrays: Anderson acceleration, kept within bounds."""
from __future__ import annotations

import math
from typing import Callable

import numpy as np


def anderson(phi: Callable[[np.ndarray], np.ndarray], u0: np.ndarray, tolerance: float, max_iter: int,
             upper: np.ndarray | None = None, depth: int = 6, stagnation: int = 40) -> tuple[np.ndarray, int, float]:
    """Fixed point of ``phi`` by Anderson acceleration (type II, ``depth`` earlier iterates), kept
    within the physical bounds 0 <= u <= upper. Stops without progress for ``stagnation``
    evaluations (the map may have no fixed point) and returns the best image found. Returns (the fixed
    point, map evaluations, residual max|phi(u) − u|/max|phi(u)|).

    References
    ----------
    H. F. Walker and P. Ni, Anderson acceleration for fixed-point iterations, SIAM J. Numer. Anal. 49,
    1715 (2011).
    """
    x = u0
    dfs: list[np.ndarray] = []
    dgs: list[np.ndarray] = []
    f_prev = g_prev = None
    best = (math.inf, u0)
    best_at = 0
    for k in range(1, max_iter + 1):
        g = phi(x)
        f = g - x
        res = float(np.max(np.abs(f)) / max(float(np.max(np.abs(g))), 1e-300))
        if res < best[0]:
            best = (res, g)
            best_at = k
        elif k - best_at >= stagnation:      # no progress (the map may have no fixed point,
            # e.g. when the dump round trip of a repeat jumps from one pulse to the next)
            return best[1], k, best[0]
        elif res > 10.0 * best[0]:        # the extrapolation went astray: restart from the best image
            dfs.clear()
            dgs.clear()
            x, f_prev, g_prev = best[1], None, None
            continue
        if res <= tolerance:
            return g, k, res
        if f_prev is not None:
            dfs.append(f - f_prev)
            dgs.append(g - g_prev)
            if len(dfs) > depth:
                dfs.pop(0)
                dgs.pop(0)
        f_prev, g_prev = f, g
        if dfs:
            gamma = np.linalg.lstsq(np.stack(dfs, axis=1), f, rcond=None)[0]
            x = g - np.stack(dgs, axis=1) @ gamma
        else:
            x = g
        np.maximum(x, 0.0, out=x)
        if upper is not None:
            np.minimum(x, upper, out=x)
    return best[1], max_iter, best[0]
