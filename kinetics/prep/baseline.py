"""Baselines under a DSC event, written in numpy.

Each function returns ``(baseline, params)``: the baseline on every sample of
``x`` and a JSON-friendly dict that records every choice (provenance).

The functions are axis-agnostic: ``x`` may be time (s) or temperature (K), and
may decrease (a cooling run on its temperature axis); regions are given as
``(a, b)`` pairs in ``x`` units in either order. ``x`` must be monotone.

* :func:`polynomial_baseline` (order 0 to 2) and :func:`linear_baseline` are
  least-squares fits to event-free regions: the samples inside the event window
  get zero weight. For one broad exotherm on a linear or quadratic drift this is
  exact up to noise and easy to explain (the regions are the provenance).
* :func:`sigmoidal_baseline` is the conversion-weighted baseline for events
  across which the heat capacity changes: B = (1 - X) L_pre + X L_post, iterated
  with X from the corrected signal.
"""

from __future__ import annotations

import numpy as np

from ..errors import CrystkinInputError, check_range

__all__ = ["polynomial_baseline", "linear_baseline", "sigmoidal_baseline", "region_mask",
           "cumulative_trapezoid"]


def _pairs(regions, name, where):
    if regions is None:
        return None
    arr = np.asarray(regions, dtype=float)
    if arr.ndim == 1 and arr.size == 2:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != 2 or not np.all(np.isfinite(arr)):
        raise CrystkinInputError(
            f"The '{name}' parameter of {where} must be an (a, b) pair or a list of pairs in "
            f"axis units. Got {regions!r} instead.")
    return np.sort(arr, axis=1)


def region_mask(x, regions) -> np.ndarray:
    """Boolean mask of the samples of ``x`` inside any of the ``(a, b)`` regions (inclusive)."""
    x = np.asarray(x, dtype=float)
    regs = _pairs(regions, "regions", "region_mask")
    if regs is None:
        return np.ones(x.shape, dtype=bool)
    return np.any((x[None, :] >= regs[:, :1]) & (x[None, :] <= regs[:, 1:]), axis=0)


def _fit(x, y, mask, order, where):
    npts = int(mask.sum())
    if npts < order + 2:
        raise CrystkinInputError(
            f"{where}: only {npts} samples in the fitting regions for a polynomial of order "
            f"{order}; widen the regions (anchors) or lower the order")
    xm = x[mask]
    centre = 0.5 * (xm.min() + xm.max())
    half = 0.5 * (xm.max() - xm.min()) or 1.0
    u = (xm - centre) / half
    V = np.vander(u, order + 1, increasing=True)
    coef_u, *_ = np.linalg.lstsq(V, y[mask], rcond=None)
    poly = np.polynomial.Polynomial(coef_u, domain=[centre - half, centre + half],
                                    window=[-1.0, 1.0])
    values = poly(x)
    resid = y[mask] - values[mask]
    dof = max(npts - order - 1, 1)
    params = {
        "order": int(order),
        "coefficients": [float(c) for c in poly.convert().coef],
        "coefficient_convention": "ascending powers of the axis, SI units",
        "n_points": npts,
        "residual_sd": float(np.sqrt(np.sum(resid ** 2) / dof)),
    }
    return values, params


def polynomial_baseline(x, y, *, order=1, anchors=None, exclude=None):
    """Polynomial baseline fitted to event-free regions.

    Parameters
    ----------
    x : array of shape (n,), s or K
        Monotone axis.
    y : array of shape (n,), W or W/kg
        Signal.
    order : {0, 1, 2}
        Polynomial order.
    anchors : (a, b) or list of (a, b), optional
        Regions used for the fit (x units); default all samples.
    exclude : (a, b) or list of (a, b), optional
        Regions given zero weight, normally the event window.

    Returns
    -------
    baseline : ndarray of shape (n,)
        The polynomial evaluated on every ``x``.
    params : dict
        ``method``, ``order``, ``coefficients`` (ascending powers of ``x``),
        ``anchors``, ``exclude``, ``n_points``, ``residual_sd``.

    Notes
    -----
    Weighted least squares, w_i = 1 inside the anchors and outside the excluded
    regions and 0 elsewhere: min sum_i w_i (y_i - sum_j c_j x_i^j)^2, solved on
    a centred and scaled axis for conditioning.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(0.0, 10.0, 101)
    >>> y = 1.0 + 0.1 * x + np.where((x > 4) & (x < 6), 5.0, 0.0)
    >>> b, p = polynomial_baseline(x, y, order=1, exclude=(4, 6))
    >>> [round(c, 6) for c in p["coefficients"]]
    [1.0, 0.1]
    """
    where = "polynomial_baseline"
    if order not in (0, 1, 2):
        raise CrystkinInputError(
            f"The 'order' parameter of {where} must be one of [0, 1, 2]. Got {order!r} instead.")
    x, y = _xy(x, y, where)
    anchors_p = _pairs(anchors, "anchors", where)
    ex = _pairs(exclude, "exclude", where)
    mask = region_mask(x, anchors_p)
    if ex is not None:
        mask &= ~region_mask(x, ex)
    values, params = _fit(x, y, mask, order, where)
    params = {"method": "polynomial", **params,
              "anchors": None if anchors_p is None else anchors_p.tolist(),
              "exclude": None if ex is None else ex.tolist()}
    return values, params


def linear_baseline(x, y, *, anchors=None, exclude=None):
    """Straight-line baseline fitted to event-free regions (order-1 :func:`polynomial_baseline`).

    Returns
    -------
    baseline : ndarray of shape (n,)
    params : dict
        As for :func:`polynomial_baseline`, with ``method`` "linear".
    """
    values, params = polynomial_baseline(x, y, order=1, anchors=anchors, exclude=exclude)
    params["method"] = "linear"
    return values, params


def _xy(x, y, where):
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.shape != y.shape or x.ndim != 1:
        raise CrystkinInputError(
            f"{where}: x and y must be one-dimensional arrays of equal length; got shapes "
            f"{x.shape} and {y.shape}")
    return x, y


def cumulative_trapezoid(y, x):
    """Running trapezoidal integral of ``y`` over ``x``, starting at 0 (same length as ``y``)."""
    y = np.asarray(y, dtype=float)
    x = np.asarray(x, dtype=float)
    out = np.empty_like(y)
    out[0] = 0.0
    np.cumsum(0.5 * (y[1:] + y[:-1]) * np.diff(x), out=out[1:])
    return out


def sigmoidal_baseline(x, y, *, window, pre, post, max_iter=20, tol=1e-6, pre_order=1,
                       post_order=1):
    """Conversion-weighted (sigmoidal) baseline across an event with a heat-capacity change.

    Parameters
    ----------
    x : array of shape (n,), s or K
        Monotone axis (time, or temperature of a scan).
    y : array of shape (n,), W or W/kg
        Exotherm-positive signal.
    window : (a, b)
        Event limits on ``x``.
    pre, post : (a, b) or list of (a, b)
        Event-free regions before and after the event (in record order), to which
        the lines L_pre and L_post are fitted.
    max_iter : int
    tol : float
        Stop when the conversion changes by less than this anywhere.
    pre_order, post_order : {0, 1, 2}
        Polynomial orders of L_pre and L_post.

    Returns
    -------
    baseline : ndarray of shape (n,)
        L_pre before the window, L_post after it, the weighted mixture inside.
    params : dict
        ``method``, ``window``, the two fits (``pre``, ``post``), ``iterations``,
        ``converged``, ``max_change`` (last change of X).

    Notes
    -----
    B(x) = (1 - X(x)) L_pre(x) + X(x) L_post(x), where X is the fraction of the
    area of y - B accumulated along ``x`` in record order (trapezoidal rule over
    |dx|, made non-decreasing and clipped to [0, 1] for the weighting). The iteration starts
    from a straight line between L_pre(a) and L_post(b) and repeats until
    max |X_new - X_old| < tol or ``max_iter`` is reached. On a scan the
    accumulation along temperature equals that along time for a constant rate.

    Weighting the pre- and post-event lines by the degree of conversion is
    common DSC practice (no source named here); this implementation is our own.
    """
    where = "sigmoidal_baseline"
    x, y = _xy(x, y, where)
    check_range("max_iter", int(max_iter), where, lower=1)
    check_range("tol", float(tol), where, lower=0.0, inclusive=False)
    win = _pairs(window, "window", where)
    if win is None or win.shape[0] != 1:
        raise CrystkinInputError(
            f"The 'window' parameter of {where} must be one (a, b) pair. Got {window!r} instead.")
    inside = np.flatnonzero(region_mask(x, win))
    if inside.size < 3:
        raise CrystkinInputError(
            f"{where}: the window {win[0].tolist()} holds {inside.size} samples; it needs at "
            "least 3")
    i0, i1 = int(inside[0]), int(inside[-1])
    L_pre, p_pre = polynomial_baseline(x, y, order=pre_order, anchors=pre)
    L_post, p_post = polynomial_baseline(x, y, order=post_order, anchors=post)
    xs, ys = x[i0:i1 + 1], y[i0:i1 + 1]
    lp, lq = L_pre[i0:i1 + 1], L_post[i0:i1 + 1]
    frac = (xs - xs[0]) / (xs[-1] - xs[0])
    B = (1.0 - frac) * lp[0] + frac * lq[-1]
    X = np.zeros_like(xs)
    direction = 1.0 if xs[-1] > xs[0] else -1.0
    scale = float(np.abs(cumulative_trapezoid(np.abs(ys), xs)[-1]))
    change = np.inf
    iteration = 0
    converged = False
    while iteration < int(max_iter) and not converged:
        iteration += 1
        c = direction * cumulative_trapezoid(ys - B, xs)
        total = c[-1]
        if not total > 1e-9 * scale:
            raise CrystkinInputError(
                f"{where}: the corrected signal has no positive area in the window "
                f"{win[0].tolist()}; check the window and the exotherm sign (y must be "
                "exotherm-positive)")
        X_new = np.clip(np.maximum.accumulate(c / total), 0.0, 1.0)
        change = float(np.max(np.abs(X_new - X)))
        X = X_new
        B = (1.0 - X) * lp + X * lq
        converged = change < tol
    values = np.where(np.arange(len(x)) < i0, L_pre, L_post)
    values[i0:i1 + 1] = B
    params = {
        "method": "sigmoidal (conversion-weighted)", "window": win[0].tolist(),
        "pre": p_pre, "post": p_post, "iterations": iteration, "converged": converged,
        "max_change": change, "tol": float(tol),
    }
    return values, params
