"""Continuum and noise of a spectrum segment.

Noise: the file's uncertainty where there is one; otherwise a robust local
estimate, 1.4826 x MAD of first differences / sqrt(2) in a running window
(insensitive to lines and continuum slope), reported as such.

Continuum: a least-squares cubic B-spline over pixel index with knots every
`knot_px` pixels, fitted with inverse-variance weights and iterative
sigma-clipping (pixels beyond +/- `clip` sigma rejected, the rejection grown
by a few pixels).  Uniform knots make the basis cheap and the normal equations
banded, so one fit of 10^6 pixels takes tens of milliseconds.  Callers pass the pixels of already found features in
`exclude` and a knot spacing wider than the broadest of them, so that the
spline bridges a broad Balmer line instead of following its wings.
"""

import numpy as np
from scipy.linalg import solveh_banded
from scipy.ndimage import maximum_filter1d, median_filter

__all__ = ["robust_noise", "fit_continuum", "find_steps"]


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


class _UniformSpline:
    """Cubic B-spline over pixel index with uniform knots every `knot_px` pixels.

    The basis is evaluated once; each weighted least-squares fit accumulates
    the banded normal equations with `np.bincount` and solves them with
    `scipy.linalg.solveh_banded`, so a fit costs time linear in the pixels and
    needs no chunking.  A faint second-difference penalty on the coefficients
    keeps the system regular: faint (1e-9 of the typical normal-matrix
    diagonal) where the data constrain the coefficients, which leaves the
    least-squares fit unchanged there, and growing to the strength of the data
    where a coefficient has lost more than half of its support to excluded or
    clipped pixels (a line near an end, gaps), so the spline bridges such
    stretches smoothly instead of swinging wildly.
    """

    def __init__(self, n, knot_px):
        m = max(1, int(np.ceil((n - 1) / knot_px)))   # intervals
        h = max(n - 1, 1) / m
        u = np.arange(n) / h
        i = np.minimum(u.astype(np.intp), m - 1)
        t = u - i
        t2, t3 = t * t, t * t * t
        self.i = i
        self.m = m
        self.n_coef = m + 3
        self.starts = np.searchsorted(i, np.arange(m))     # every interval holds pixels (h >= 1)
        self.counts = np.diff(np.append(self.starts, n))
        self.t = t
        self.B = np.array([(1 - t) ** 3 / 6, (3 * t3 - 6 * t2 + 4) / 6,
                           (-3 * t3 + 3 * t2 + 3 * t + 1) / 6, t3 / 6])
        self.pairs = [(a, b) for a in range(4) for b in range(a, 4)]
        # B_a B_b as polynomials of degree 6 in t: the sums over an interval follow from
        # seven weighted moments of t, without forming the ten products per pixel
        self.prod = np.array([np.convolve(_BASIS_POLY[a], _BASIS_POLY[b]) for a, b in self.pairs])

    def _project(self, w2y):
        """sum over pixels of w2y * B_j for every coefficient j."""
        m = self.m
        ymom = np.empty((4, m))
        qy = w2y
        for p in range(4):
            ymom[p] = np.add.reduceat(qy, self.starts)
            qy = qy * self.t
        proj = _BASIS_POLY @ ymom           # (4, m): sums of w2 y B_a per interval
        rhs = np.zeros(self.n_coef)
        for a in range(4):
            rhs[a:a + m] += proj[a]
        return rhs

    def fit(self, y, w2, full_diag=None, steps=None):
        """Coefficients minimising sum w2 (y - s)^2 (+ the penalty).

        `full_diag`: the normal-matrix diagonal with every valid pixel used; a
        coefficient that keeps less than half of that support (excluded or
        clipped pixels) counts as weakly constrained.  `steps`: first pixels of
        continuum steps; each adds a Heaviside term to the model, fitted with
        the spline.  Returns (coefficients, step amplitudes)."""
        nc, m = self.n_coef, self.m
        # sums over each knot interval (pixels of one interval are contiguous)
        mom = np.empty((7, m))
        q = w2
        for p in range(7):
            mom[p] = np.add.reduceat(q, self.starts)
            q = q * self.t if p < 6 else q
        gram = self.prod @ mom              # (10, m): sums of w2 B_a B_b per interval
        ab = np.zeros((4, nc))          # upper banded form for solveh_banded
        for k, (a, b) in enumerate(self.pairs):
            # interval i adds to A[i+a, i+b]: band d = b - a, stored at ab[3 - d, column i + b]
            ab[3 - (b - a), b:b + m] += gram[k]
        rhs = self._project(w2 * y)
        if nc >= 3:
            # second-difference penalty, rows k of D2 = (1, -2, 1) at columns k..k+2: faint
            # everywhere, as strong as the data where a row touches a coefficient that the
            # data hardly constrain
            diag = ab[3].copy()
            typical = float(np.median(diag[diag > 0])) if (diag > 0).any() else 1.0
            if full_diag is None:
                lack = (diag < 1e-3 * typical).astype(float)
            else:
                frac = diag / np.maximum(full_diag, 1e-300 * typical)
                lack = np.clip(1.0 - frac / 0.5, 0.0, 1.0) ** 2
                lack[full_diag <= 0] = 1.0
            for p in steps or ():
                # at a step the jump is the Heaviside term's: the spline stays straight
                # there, instead of trading its own bend against the jump where the line on
                # the step leaves no data
                ip = int(self.i[min(max(int(p), 0), len(self.i) - 1)])
                lack[max(ip - 1, 0):ip + 5] = 1.0
            worst = np.maximum(np.maximum(lack[:-2], lack[1:-1]), lack[2:])
            lam = typical * (1e-9 + worst)
            k = np.arange(nc - 2)
            for a, ca in enumerate(_D2):
                for b in range(a, 3):
                    ab[3 - (b - a)] += ca * _D2[b] * np.bincount(k + b, weights=lam, minlength=nc)
        if not steps:
            return solveh_banded(ab, rhs, check_finite=False), np.zeros(0)
        # Heaviside columns H_k by block elimination: A c + C a = r, C^T c + D a = e
        n = len(y)
        H = [(np.arange(n) >= p).astype(float) for p in steps]
        C = np.column_stack([self._project(w2 * h) for h in H])
        D = np.array([[np.sum(w2 * hk * hl) for hl in H] for hk in H])
        e = np.array([np.sum(w2 * hk * y) for hk in H])
        sol = solveh_banded(ab, np.column_stack([rhs, C]), check_finite=False)
        a_r, a_c = sol[:, 0], sol[:, 1:]
        amps = np.linalg.solve(D - C.T @ a_c + 1e-12 * np.trace(D) * np.eye(len(H)), e - C.T @ a_r)
        return a_r - a_c @ amps, amps

    def diag(self, w2):
        """Diagonal of the normal matrix for weights w2."""
        mom = np.empty((7, self.m))
        q = w2
        for p in range(7):
            mom[p] = np.add.reduceat(q, self.starts)
            q = q * self.t
        d = np.zeros(self.n_coef)
        for k, (a, b) in enumerate(self.pairs):
            if a == b:
                d[a:a + self.m] += self.prod[k] @ mom
        return d

    def __call__(self, coef):
        m = self.m
        return sum(np.repeat(coef[a:a + m], self.counts) * self.B[a] for a in range(4))


_D2 = (1.0, -2.0, 1.0)
# uniform cubic B-spline pieces on one knot interval, coefficients of 1, t, t^2, t^3
_BASIS_POLY = np.array([[1, -3, 3, -1], [4, 0, -6, 3], [1, 3, 3, -3], [0, 0, 0, 1]]) / 6.0


def find_steps(y, sigma, good, *, width_px=25, gap_px=5, min_sigma=8.0, min_fraction=0.15,
               flat=0.25, scales=5):
    """Pixels where the continuum steps from one level to another (a Lyman break, a
    badly joined order); returns a sorted array of pixel indices (the first pixel of the
    new level).

    Medians of `width_px` pixels either side of each pixel (`gap_px` left out
    between them; medians of block medians, blocks a fifth of a window long)
    are compared: a step differs by `min_sigma` standard errors of the medians
    and by `min_fraction` of the higher level, and each level is straight: over
    it and the two windows further out the medians change by less than `flat`
    times the step from one window to the next and bend by less than that, so
    that a gently sloping continuum passes and the flanks of a broad line or of
    a series-limit trough are not taken for a step.  Windows of 1, 2, 4 ...
    (`scales`) times `width_px` are tried, so that a faint continuum's step is
    found in the wider ones.  The step is then put where a two-level model fits
    best (least absolute deviations).
    """
    n = len(y)
    ok_px = good & np.isfinite(y)
    g = max(int(gap_px), 1)
    if ok_px.sum() < 4 * max(int(width_px), 5) + 2 * g:
        return np.zeros(0, int)
    if ok_px.all():
        v = y
    else:                                          # masked pixels bridged for the medians
        idx = np.flatnonzero(ok_px)
        v = np.interp(np.arange(n), idx, y[idx])
    sig = np.where(np.isfinite(sigma) & (sigma > 0), sigma, np.nan)
    steps = []
    # medians of blocks of b pixels, and of runs of 5 x 2^level blocks: a median of medians
    # stands for the running median of a window (fine enough to find a step; its pixel
    # comes from the two-level fit below)
    W0 = max(int(width_px), 5)
    b = max(W0 // 5, 1)
    nb = n // b
    blocks = np.median(v[:nb * b].reshape(nb, b), axis=1)
    # standard error of a median (of medians) of W Gaussian pixels, in sigma / sqrt(W):
    # sqrt(pi / 2) for a plain median; about 1.5 for a median of medians (1.46 by simulation
    # of white noise, blocks of 5 pixels, 20 blocks)
    spread = 1.2533 if b == 1 else 1.5
    for level in range(scales):
        W = 5 * b * 2 ** level
        if n < 6 * W + 2 * g + 2:
            break
        run, q = 5 * 2 ** level, 2 ** level
        med = np.median(np.lib.stride_tricks.sliding_window_view(blocks, run)[::q], axis=1)
        h = W // 2
        i = np.arange(0, nb * b, q * b)    # pixels examined; med[k] is centred on h + k q b

        def at(j):
            k = np.rint((j - h) / (q * b)).astype(int)
            inside = (k >= 0) & (k < len(med))
            return np.where(inside, med[np.clip(k, 0, len(med) - 1)], np.nan)

        left, right = at(i - g - h - 1), at(i + g + h)
        left2, right2 = at(i - g - h - 1 - W), at(i + g + h + W)
        left3, right3 = at(i - g - h - 1 - 2 * W), at(i + g + h + 2 * W)
        d = right - left
        with np.errstate(all="ignore"):
            score = np.abs(d) / (spread * sig[i] * np.sqrt(2.0 / W))
            ok = (score > min_sigma) & (np.abs(d) > min_fraction * np.fmax(np.abs(left),
                                                                           np.abs(right))) \
                & (np.abs(right2 - right) < flat * np.abs(d)) \
                & (np.abs(left2 - left) < flat * np.abs(d)) \
                & (np.abs(right - 2 * right2 + right3) < flat * np.abs(d)) \
                & (np.abs(left - 2 * left2 + left3) < flat * np.abs(d))
        ok &= np.isfinite(score)
        for m in np.flatnonzero(ok)[np.argsort(-score[ok])]:
            k = int(i[m])
            if any(abs(k - p) < 4 * W for p in steps):
                continue
            # the best place within +/- W of k: two levels, least absolute deviations
            lo, hi = max(k - W - g, 0), min(k + W + g, n)
            seg = np.where(ok_px[lo:hi], y[lo:hi], np.nan)
            if np.isfinite(seg).sum() < 2 * W:
                continue
            cost = np.nancumsum(np.abs(seg - left[m])) - np.nancumsum(np.abs(seg - right[m]))
            steps.append(int(lo + np.argmin(cost) + 1))
    return np.sort(np.asarray(steps, int))


def fit_continuum(y, sigma, good, *, knot_px=60, clip=(3.0, 3.0), iterations=15, grow=2,
                  exclude=None, steps=None):
    """Continuum of one segment; returns (continuum, pixels used).  With `steps`
    (pixel indices, from `find_steps`), the spline carries a jump at each: one
    smooth curve plus Heaviside terms fitted with it, so that the continuum under
    a line on a step is constrained from both sides."""
    n = len(y)
    steps = [int(p) for p in (steps if steps is not None else []) if 8 <= p <= n - 8]
    use = good.copy()
    if exclude is not None:
        use &= ~exclude
    if use.sum() < 8:
        use = good.copy()
    w = np.where(np.isfinite(sigma) & (sigma > 0), 1.0 / np.where(sigma > 0, sigma, 1), 0.0)
    w2 = w * w
    y0 = np.where(good & np.isfinite(y), y, 0.0)
    spline = _UniformSpline(n, max(int(knot_px), 8))
    full = spline.diag(np.where(good, w2, 0.0))
    cont = np.full(n, np.median(y[good]) if good.any() else 0.0)
    for _ in range(iterations):
        if use.sum() < 8:
            break
        try:
            coef, amps = spline.fit(y0, np.where(use, w2, 0.0), full, steps=steps)
            new = spline(coef)
            for p, a in zip(steps, amps):
                new[p:] += a
        except (ValueError, np.linalg.LinAlgError):
            new = np.full(n, np.median(y[use]))
        resid = (y0 - new) * w
        # thresholds in sigmas, widened while the fit is still far off (robust scatter of
        # the residuals above 1): a first fit dragged by a strong line clips the line, not
        # the whole spectrum
        r_use = resid[use]
        spread = 1.4826 * float(np.median(np.abs(r_use - np.median(r_use)))) if len(r_use) else 1.0
        widen = max(spread, 1.0)
        bad = good & ((resid > clip[0] * widen) | (resid < -clip[1] * widen))
        if grow:   # grown by `grow` pixels each side (a 1-D binary dilation)
            bad = maximum_filter1d(bad.view(np.uint8), size=2 * grow + 1).view(bool) & good
        updated = good & ~bad
        if exclude is not None:
            updated &= ~exclude
        if updated.sum() < max(8, 0.2 * good.sum()):
            cont = new
            break
        converged = np.array_equal(updated, use) and widen == 1.0
        use = updated
        cont = new
        if converged:
            break
    return cont, use


def snap_steps(steps, feats, reach, y, *, blue_first=True):
    """The continuum steps to fit: a step with an emission line on it is put at the line's
    centre (Lyα at a Lyman break: the forest absorbs from the line's own wavelength
    blueward; the placement from the levels alone is pulled to the line's foot).  A step
    with no line on it is kept only when the continuum is lower on its blue side and no
    absorption lines crowd the red side: the merged members below an absorption series
    limit make a level change that must stay lines, with the resolved members just beyond
    it.  `blue_first`: blue is at the low pixel indices (a rising wavelength axis, or a
    falling frequency or energy axis)."""
    out = []
    for p in steps:
        near = [f for f in feats if f["amp0"] > 0 and abs(f["px"] - p) <= reach]
        if near:
            out.append(int(np.ceil(max(near, key=lambda f: f["amp0"])["px"])))
            continue
        lo, hi = max(int(p - 4 * reach), 0), min(int(p + 4 * reach), len(y))
        rising = p - lo > 4 and hi - p > 4 and \
            (np.nanmedian(y[p:hi]) > np.nanmedian(y[lo:p])) == blue_first
        if blue_first:
            crowd = sum(1 for f in feats if f["amp0"] < 0 and p < f["px"] <= p + 8 * reach)
        else:
            crowd = sum(1 for f in feats if f["amp0"] < 0 and p - 8 * reach <= f["px"] < p)
        if rising and crowd < 2:
            out.append(int(p))
    return np.asarray(out, int)
