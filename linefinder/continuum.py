"""Continuum and noise of a spectrum segment.

Noise: the file's uncertainty where there is one; otherwise a robust local
estimate, 1.4826 x MAD of first differences / sqrt(2) in a running window
(insensitive to lines and continuum slope), reported as such.

Continuum: a least-squares cubic B-spline over pixel index with knots every
`knot_px` pixels, fitted with inverse-variance weights and iterative
sigma-clipping (pixels beyond +/- `clip` sigma rejected, the rejection grown
by a few pixels).  Callers pass the pixels of already found features in
`exclude` and a knot spacing wider than the broadest of them, so that the
spline bridges a broad Balmer line instead of following its wings.
"""

import numpy as np
from scipy.interpolate import make_lsq_spline
from scipy.ndimage import binary_dilation, median_filter

__all__ = ["robust_noise", "fit_continuum"]


def robust_noise(y, good, *, window=101):
    """Per-pixel 1-sigma noise from the scatter of first differences (MAD based)."""
    idx = np.flatnonzero(good)
    sigma = np.full(len(y), np.nan)
    if len(idx) < 4:
        return sigma
    d = np.diff(y[idx])
    absdev = np.abs(d - np.median(d))
    global_mad = np.median(absdev)
    if global_mad == 0:
        global_mad = np.mean(absdev) if np.mean(absdev) > 0 else 1.0
    w = min(window, len(absdev) - (1 - len(absdev) % 2))
    local = median_filter(absdev, size=max(w, 3), mode="nearest") if len(absdev) >= 3 else absdev
    local = np.maximum(local, global_mad / 3.0)
    est = 1.4826 * local / np.sqrt(2.0)
    sig_idx = np.interp(np.arange(len(y)), idx[:-1] + 0.5, est)
    sigma[:] = sig_idx
    return sigma


def _knots(good_idx, n, knot_px):
    inner = np.arange(knot_px, n - 1 - knot_px / 2, knot_px, dtype=float)
    # keep only knots with good data between neighbours (Schoenberg-Whitney): at least 4
    # good pixels strictly between consecutive kept knots (counted by binary search)
    keep = []
    below = np.searchsorted(good_idx, inner, side="left")      # good pixels < knot
    upto = np.searchsorted(good_idx, inner, side="right")      # good pixels <= knot
    after_last = int(np.searchsorted(good_idx, 0.0, side="right"))
    for k, nb, nu in zip(inner.tolist(), below.tolist(), upto.tolist()):
        if nb - after_last >= 4:
            keep.append(k)
            after_last = nu
    while keep and len(good_idx) - np.searchsorted(good_idx, keep[-1], side="right") < 4:
        keep.pop()
    t0, t1 = float(good_idx[0]), float(good_idx[-1])
    return np.concatenate([[t0] * 4, [k for k in keep if t0 < k < t1], [t1] * 4])


CHUNK_PX = 16384


def fit_continuum(y, sigma, good, *, knot_px=60, clip=(3.0, 3.0), iterations=10, grow=2,
                  exclude=None):
    """Continuum of one segment; returns (continuum, pixels used).

    Long segments are fitted in overlapping chunks of about `CHUNK_PX` pixels,
    cross-faded linearly over the overlap, so the cost stays linear in the
    number of pixels (the spline's normal equations grow faster than that).
    """
    n = len(y)
    overlap = int(max(4 * knot_px, 1024))
    if n > CHUNK_PX + 2 * overlap:
        cont = np.zeros(n)
        used = np.zeros(n, dtype=bool)
        weight = np.zeros(n)
        edges = np.linspace(0, n, int(np.ceil(n / CHUNK_PX)) + 1).astype(int)
        for a, b in zip(edges[:-1], edges[1:]):
            lo, hi = max(0, a - overlap), min(n, b + overlap)
            c, u_ = _fit_one(y[lo:hi], sigma[lo:hi], good[lo:hi], knot_px=knot_px, clip=clip,
                             iterations=iterations, grow=grow,
                             exclude=None if exclude is None else exclude[lo:hi])
            # tent weights: 1 well inside the chunk, falling to ~0 at an inner chunk edge
            idx = np.arange(lo, hi)
            left = (idx - lo + 1) / overlap if lo > 0 else np.inf
            right = (hi - idx) / overlap if hi < n else np.inf
            ramp = np.clip(np.minimum(left, right), 1e-3, 1.0)
            cont[lo:hi] += ramp * c
            weight[lo:hi] += ramp
            used[lo:hi] |= u_
        return cont / np.where(weight > 0, weight, 1.0), used
    return _fit_one(y, sigma, good, knot_px=knot_px, clip=clip, iterations=iterations, grow=grow,
                    exclude=exclude)


def _fit_one(y, sigma, good, *, knot_px, clip, iterations, grow, exclude):
    n = len(y)
    use = good.copy()
    if exclude is not None:
        use &= ~exclude
    if use.sum() < 8:
        use = good.copy()
    x = np.arange(n, dtype=float)
    w = np.where(np.isfinite(sigma) & (sigma > 0), 1.0 / np.where(sigma > 0, sigma, 1), 0.0)
    knot_px = max(int(knot_px), 8)
    cont = np.full(n, np.median(y[good]) if good.any() else 0.0)
    for _ in range(iterations):
        idx = np.flatnonzero(use)
        if len(idx) < 8:
            break
        t = _knots(idx, n, knot_px)
        try:
            # banded normal equations: linear in the number of pixels
            spl = make_lsq_spline(x[idx], y[idx], t, k=3, w=w[idx], method="norm-eq")
            new = spl(np.clip(x, t[0], t[-1]))
        except (ValueError, np.linalg.LinAlgError):
            new = np.full(n, np.median(y[idx]))
        resid = (y - new) * w
        bad = good & ((resid > clip[0]) | (resid < -clip[1]))
        bad = binary_dilation(bad, iterations=grow) & good if grow else bad
        updated = good & ~bad
        if exclude is not None:
            updated &= ~exclude
        if updated.sum() < max(8, 0.2 * good.sum()):
            cont = new
            break
        converged = np.array_equal(updated, use)
        use = updated
        cont = new
        if converged:
            break
    return cont, use
