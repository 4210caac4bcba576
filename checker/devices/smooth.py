"""Smooth minimum and maximum, and a builder of nonlinear stamps for multi-pin devices.

A hard min(a, b) has a kink that can make Newton-Raphson cycle; the log-sum-exp
form -w ln(exp(-a/w) + exp(-b/w)) is smooth, monotone in both arguments and
differs from the true minimum by at most w ln 2, at the corner, and by
w exp(-|a - b|/w) away from it (Boyd & Vandenberghe, "Convex Optimization", 2004,
sec. 3.1.5 on log-sum-exp as a smooth maximum — section from memory).
"""

from __future__ import annotations

import numpy as np
from scipy.special import expit

from checker.devices.base import NonlinearStamp, Triplets


def smooth_min(a: np.ndarray, b: np.ndarray, width: float) -> tuple[np.ndarray, np.ndarray]:
    """The smooth minimum of a and b (same unit as `width`) and its slope with respect to a.

    The slope with respect to b is one minus the slope with respect to a.
    """
    value = np.minimum(a, b) - width * np.log1p(np.exp(-np.abs(a - b) / width))
    return value, expit((b - a) / width)


def smooth_max(a: np.ndarray, b: np.ndarray, width: float) -> tuple[np.ndarray, np.ndarray]:
    """The smooth maximum of a and b and its slope with respect to a (min of the negatives)."""
    value, slope = smooth_min(-a, -b, width)
    return -value, slope


def stamp(rows: np.ndarray, values: np.ndarray, cols: np.ndarray, slopes: np.ndarray) -> NonlinearStamp:
    """A NonlinearStamp from per-part arrays.

    `rows` (parts, r): the residual rows each part adds to; `values` (parts, r) what
    it adds; `cols` (parts, c): the unknowns it depends on; `slopes` (parts, r, c):
    d values / d unknowns. The triplet layout depends only on the shapes, so the
    Jacobian's sparsity pattern is the same at every guess.
    """
    count, r = rows.shape
    c = cols.shape[1]
    jac_rows = np.broadcast_to(rows[:, :, None], (count, r, c)).ravel()
    jac_cols = np.broadcast_to(cols[:, None, :], (count, r, c)).ravel()
    return NonlinearStamp(rows.ravel(), values.ravel(), Triplets(jac_rows, jac_cols, slopes.ravel()))


def two_terminal_stamp(a: np.ndarray, b: np.ndarray, i: np.ndarray, g: np.ndarray) -> NonlinearStamp:
    """A current `i` (A) from net a to net b through each part, with slope dI/dV(a - b) = `g` (S)."""
    rows = np.column_stack([a, b])
    slopes = np.stack([np.column_stack([g, -g]), np.column_stack([-g, g])], axis=1)
    return stamp(rows, np.column_stack([i, -i]), rows, slopes)


def combine(*stamps: NonlinearStamp) -> NonlinearStamp:
    """Several stamps of one device as one."""
    return NonlinearStamp(np.concatenate([s.rows for s in stamps]), np.concatenate([s.currents for s in stamps]),
                          Triplets(np.concatenate([s.jacobian.rows for s in stamps]),
                                   np.concatenate([s.jacobian.cols for s in stamps]),
                                   np.concatenate([s.jacobian.values for s in stamps])))
