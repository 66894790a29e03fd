"""Fractions of each form of many weak-acid systems at once, from a_H and constants.

The arithmetic every speciation shares: for a system with stepwise constants
K_1 .. K_s (already mixed with the activity coefficients of its forms), the
fraction of form i is prod_{k<=i} K_k / a_H^i over the sum of the same
products. Pure numpy; imports nothing of the project.
"""

from __future__ import annotations

import numpy as np

__all__ = ["fractions"]


def fractions(ah, kp):
    """Fractions (n, m, s+1) from a_H (n,) and mixed constants as planes
    (s, n, m), one per step (or (s, 1, m): the same constants for every water).

    Built form by form in contiguous (n, m) planes (a stride-4 last axis is
    slow in numpy); the result is a view with the form as its last axis.
    """
    steps = kp.shape[0]
    inv = (1.0 / ah)[:, None]
    planes = np.empty((steps + 1, ah.size, kp.shape[2]))
    planes[0] = 1.0
    for i in range(steps):
        np.multiply(planes[i], kp[i], out=planes[i + 1])
        planes[i + 1] *= inv
    planes /= planes.sum(axis=0)
    return np.moveaxis(planes, 0, -1)
