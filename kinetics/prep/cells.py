"""Sampling cells: block averages of a signal and the edges of the cells they cover.

A sampled calorimeter signal is a sequence of cell averages; averaging equal
blocks of m samples gives coarser cells whose model value is the cell-averaged
rate over the block's edges, exactly, while white noise shrinks by sqrt(m).
"""

from __future__ import annotations

import numpy as np

__all__ = ["block_average"]


def block_average(t, y, max_points):
    """Average equal blocks of samples so that at most ``max_points`` remain.

    Parameters
    ----------
    t : array of shape (n,), s
        Sample times (increasing).
    y : array of shape (n,)
    max_points : int

    Returns
    -------
    edges : ndarray of shape (nb + 1,), s
        Cell edges (midpoints between samples; half a step beyond the ends).
    means : ndarray of shape (nb,)
        Block means; a last incomplete block is dropped.
    block : int
        Samples per block.
    """
    n = len(t)
    m = max(1, int(np.ceil(n / max_points)))
    nb = n // m
    t = t[: nb * m]
    y = y[: nb * m]
    mid = 0.5 * (t[1:] + t[:-1])
    first = t[0] - 0.5 * (t[1] - t[0])
    last = t[-1] + 0.5 * (t[-1] - t[-2])
    edges_all = np.concatenate([[first], mid, [last]])
    edges = edges_all[::m]
    if len(edges) == nb:
        edges = np.append(edges, last)
    return edges, y.reshape(nb, m).mean(axis=1), m


