"""Redshift or velocity from the features alone: a scale-invariant search.

Every feature position y_i = ln(lambda_i) (vacuum) and every catalogue rest
position x_j = ln(lambda_j) vote for a shift s = y_i - x_j = ln(1 + z).  Each
candidate shift in the allowed range is scored by how many features it
explains (within `tol` combined sigma, weighted by the features' S/N and the
lines' expected strength), minus a penalty for strong lines it predicts in
the observed window that are not seen.  The best distinct solutions are
refined by weighted least squares on their matched lines, giving z with its
1-sigma error, chi^2 and the evidence against the others.

Status:
* ``secure``: at least 3 matched lines, acceptable chi^2, and a clear margin
  over every alternative: a score difference >= max(3, 30 % of the best
  score), or more matched lines than any alternative with a higher score;
* ``tentative``: 2 or more matched lines but no clear margin, or only 2 lines;
* ``none``: fewer than 2 matched lines.
These are rules of thumb of this tool (common practice in spirit: a z
resting on one line is no z).
"""

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Solution", "search_shift", "refine", "classify"]


@dataclass
class Solution:
    s: float                      #: ln(1 + z)
    s_err: float
    score: float
    matches: list = field(default_factory=list)   #: (feature index, line index, normalised residual)
    chi2: float = 0.0
    missing: list = field(default_factory=list)   #: indices of strong lines expected but not seen
    status: str = "none"

    @property
    def z(self):
        return float(np.expm1(self.s))

    @property
    def z_err(self):
        return float(np.exp(self.s) * self.s_err)

    @property
    def n_lines(self):
        return len(self.matches)


def _nearest(sorted_x, values):
    idx = np.clip(np.searchsorted(sorted_x, values), 1, len(sorted_x) - 1)
    left = sorted_x[idx - 1]
    right = sorted_x[idx]
    pick = np.where(np.abs(values - left) <= np.abs(values - right), idx - 1, idx)
    return pick


def _score(s_values, y, sy, w, x, strength, kinds_ok, window, tol, missing_weight):
    """Scores of many trial shifts at once (K trials x F features)."""
    order = np.argsort(x)
    xs = x[order]
    target = y[None, :] - s_values[:, None]
    j = _nearest(xs, target)
    d = (target - xs[j]) / sy[None, :]
    ok = (np.abs(d) < tol) & kinds_ok[order][j]
    gain = np.where(ok, w[None, :] * (1 - (d / tol) ** 2) * (0.2 + 0.8 * strength[order][j]), 0.0)
    score = gain.sum(axis=1)
    if missing_weight > 0:
        strong = strength >= 0.2
        if np.any(strong):
            xo = x[strong][None, :] + s_values[:, None]
            inside = (xo > window[0]) & (xo < window[1])
            ys = np.sort(y)
            k = _nearest(ys, xo) if len(ys) > 1 else np.zeros(xo.shape, dtype=int)
            seen = np.abs(ys[k] - xo) < tol * np.median(sy)
            score = score - missing_weight * np.sum(inside & ~seen, axis=1) * np.mean(w)
    return score


def search_shift(y, sy, w, x, strength, *, smin, smax, kinds_ok=None, tol=3.0, n_solutions=5,
                 missing_weight=0.5, anchors=None):
    """The best distinct shifts s = ln(1+z) in [smin, smax], best first."""
    if len(y) == 0 or len(x) == 0:
        return []
    if kinds_ok is None:
        kinds_ok = np.ones(len(x), dtype=bool)
    anchor_x = x if anchors is None else x[anchors]
    cand = (y[:, None] - anchor_x[None, :]).ravel()
    cand = cand[(cand >= smin) & (cand <= smax)]
    if smin <= 0 <= smax and len(cand) == 0:
        cand = np.array([0.0])
    if len(cand) == 0:
        return []
    step = 0.5 * float(np.median(sy))
    cand = np.unique(np.round(cand / step)) * step
    window = (y.min() - 3 * sy.max(), y.max() + 3 * sy.max())
    scores = np.concatenate([_score(cand[i:i + 2000], y, sy, w, x, strength, kinds_ok, window, tol,
                                    missing_weight) for i in range(0, len(cand), 2000)])
    order = np.argsort(-scores)
    chosen = []
    sep = tol * float(np.median(sy))
    for k in order:
        if scores[k] <= 0:
            break
        if all(abs(cand[k] - c) > sep for c, _ in chosen):
            chosen.append((cand[k], scores[k]))
        if len(chosen) >= n_solutions * 3:
            break
    sols = [refine(c, y, sy, w, x, strength, kinds_ok, tol=tol, window=window) for c, _ in chosen]
    sols = [s for s in sols if s.n_lines > 0]
    # refinement can bring two trial shifts onto one solution: keep the better
    unique = []
    for s in sorted(sols, key=lambda s: -s.score):
        if all(abs(s.s - u.s) > 3 * max(s.s_err, u.s_err, 1e-12) for u in unique):
            unique.append(s)
    return unique[:n_solutions]


def refine(s0, y, sy, w, x, strength, kinds_ok, *, tol=3.0, window=None, iterations=3):
    """Weighted least squares on the lines matched at s0 (one line per feature and vice versa)."""
    s = float(s0)
    sol = Solution(s=s, s_err=np.inf, score=0.0)
    for _ in range(iterations):
        d = (y[:, None] - s - x[None, :]) / sy[:, None]
        ok = (np.abs(d) < tol) & kinds_ok[None, :]
        pairs = []
        used_f, used_l = set(), set()
        for flat in np.argsort(np.where(ok, np.abs(d), np.inf), axis=None):
            i, j = divmod(int(flat), d.shape[1])
            if not ok[i, j]:
                break
            if i in used_f or j in used_l:
                continue
            used_f.add(i)
            used_l.add(j)
            pairs.append((i, j))
        if not pairs:
            return sol
        fi = np.array([p[0] for p in pairs])
        lj = np.array([p[1] for p in pairs])
        wt = 1 / sy[fi] ** 2
        s_new = float(np.sum(wt * (y[fi] - x[lj])) / np.sum(wt))
        s_err = float(1 / np.sqrt(np.sum(wt)))
        resid = (y[fi] - s_new - x[lj]) / sy[fi]
        chi2 = float(np.sum(resid ** 2))
        score = float(np.sum(w[fi] * (1 - np.clip(np.abs(resid) / tol, 0, 1) ** 2)
                             * (0.2 + 0.8 * strength[lj])))
        missing = []
        if window is not None:
            strong = np.flatnonzero(strength >= 0.2)
            xo = x[strong] + s_new
            for jj, xx in zip(strong, xo):
                if window[0] < xx < window[1] and jj not in used_l and \
                        not np.any(np.abs(y - xx) < tol * sy):
                    missing.append(int(jj))
        score -= 0.5 * len(missing) * float(np.mean(w))
        if len(pairs) > 1:
            s_err *= max(1.0, np.sqrt(chi2 / (len(pairs) - 1)))
        sol = Solution(s=s_new, s_err=s_err, score=score,
                       matches=[(int(i), int(j), float(r)) for i, j, r in zip(fi, lj, resid)],
                       chi2=chi2, missing=missing)
        if abs(s_new - s) < 1e-3 * s_err:
            break
        s = s_new
    return sol


def classify(solutions):
    """Set the status of the best solution (and 'alternative' on the others)."""
    if not solutions:
        return "none"
    best = solutions[0]
    dof = max(best.n_lines - 1, 1)
    good_fit = best.chi2 / dof < 6.0
    margin = min((best.score - s.score for s in solutions[1:]), default=np.inf)
    more_lines = all(best.n_lines >= s.n_lines + 1 for s in solutions[1:])
    clear = margin >= max(3.0, 0.3 * best.score) or (more_lines and margin > 0)
    if best.n_lines >= 3 and good_fit and clear:
        status = "secure"
    elif best.n_lines >= 2:
        status = "tentative"
    else:
        status = "none"
    best.status = status
    for s in solutions[1:]:
        s.status = "alternative"
    return status
