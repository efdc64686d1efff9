"""Redshift or velocity from the features alone: a scale-invariant search.

Every feature position y_i = ln(lambda_i) (vacuum) and every catalogue rest
position x_j = ln(lambda_j) vote for a shift s = y_i - x_j = ln(1 + z).  Each
candidate shift is scored by a log-likelihood ratio (natural log) of "the
features are catalogue lines at shift s" against "the features fall at random
in the observed window":

    ln L_i = ln(1 + pi_j phi(y_i - s - x_j; sigma_i) / rho_0)

for the nearest line j, with phi a normal density of the combined position
error, rho_0 = 1 / (window width in ln lambda) the density of random
features, and pi_j = f * strength_j / sum(strength in the window) the prior
share of features that line j explains (f = 0.5).  Crowded stretches of the
catalogue (series limits) thus carry less evidence per match than isolated
strong lines.  The best single term is not counted (a shift fitted to one
line always explains that line).  The best distinct trial shifts are refined
by weighted least squares on their matched lines (measurement errors, with
the extra scatter between lines estimated, `weighted_shift`), giving z with
its 1-sigma error and chi^2; the refined score adds whether the matched fluxes follow the
expected strengths (`_intensity_evidence`) and subtracts the lines of a
matched series expected above the detection limit but absent
(`_missing_lines`).  The evidence against the others is the difference of
scores, in nats.

Status:
* ``secure``: at least 3 matched lines, acceptable chi^2, a score of at
  least 8 and a margin over every competing alternative of at least max(5,
  20 % of the score), in nats (an alternative competes when it explains at
  least 30 % of the same features; one built on other features may be a
  second system);
* ``tentative``: 2 or more matched lines with a score of at least 3 nats
  (a likelihood ratio of about 20), short of that;
* ``none``: otherwise.
The thresholds were set on this tool's synthetic suite (benchmarks/); they
are rules of thumb of this tool (common practice in spirit: a z resting on
one line is no z).
"""

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Solution", "search_shift", "refine", "classify", "competitors", "solution_probability",
           "weighted_shift"]


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


def _median(a):
    """Median of a small finite array, as np.median gives it (whose call overhead is most
    of the cost at the sizes met here: a few to a few tens of lines)."""
    a = np.sort(np.asarray(a, dtype=float), axis=None)
    n = a.size
    return float(0.5 * (a[(n - 1) // 2] + a[n // 2]))


def _nearest(sorted_x, values):
    idx = np.clip(np.searchsorted(sorted_x, values), 1, len(sorted_x) - 1)
    left = sorted_x[idx - 1]
    right = sorted_x[idx]
    pick = np.where(np.abs(values - left) <= np.abs(values - right), idx - 1, idx)
    return pick


LINE_FRACTION = 0.5
SECURE_SCORE = 8.0     # nats of evidence beyond the first line
# nats (a likelihood ratio of ~90): weaker evidence is no redshift at all.  On the synthetic
# suite (z 0-7, wide windows) over half of the two-line answers scoring 3-4.5 nats were
# chance coincidences: the search over the whole z range spends that much on its trials.
TENTATIVE_SCORE = 4.5
SECURE_MARGIN = 5.0    # nats over the best alternative (a likelihood ratio of ~150)
MISSING_COST = 1.0


def _evidence(d, sy, strength_j, strength_in_window, width):
    """ln(1 + pi phi / rho_0) per (trial, feature); d in sigmas, sy the sigmas (ln lambda)."""
    pi = LINE_FRACTION * strength_j / np.maximum(strength_in_window, 1e-300)
    phi = np.exp(-0.5 * d * d) / (np.sqrt(2 * np.pi) * sy)
    return np.log1p(pi * phi * width)


def _window_strength(xs, cum, s_values, window):
    """Sum of expected strengths of the lines that shift s puts inside the window."""
    hi = np.searchsorted(xs, window[1] - s_values, side="right")
    lo = np.searchsorted(xs, window[0] - s_values, side="left")
    return cum[hi] - cum[lo]


def _score(s_values, y, sy, x, strength, kinds_ok, window, tol):
    """Scores (log-likelihood ratios) of many trial shifts at once (K trials x F features)."""
    order = np.argsort(x)
    xs = x[order]
    st = strength[order]
    cum = np.concatenate([[0.0], np.cumsum(st)])
    width = window[1] - window[0]
    target = y[None, :] - s_values[:, None]
    j = _nearest(xs, target)
    d = (target - xs[j]) / sy[None, :]
    ok = (np.abs(d) < tol) & kinds_ok[order][j]
    total = _window_strength(xs, cum, s_values, window)[:, None]
    gain = np.where(ok, _evidence(d, sy[None, :], st[j], total, width), 0.0)
    # the first line is free: any single feature matches some line at some shift
    # (missing lines are costed in `refine`, per series, where the scale is known)
    score = gain.sum(axis=1) - gain.max(axis=1)
    return score


def search_shift(y, sy, w, x, strength, *, smin, smax, kinds_ok=None, tol=3.0, n_solutions=5,
                 anchors=None, window=None, flux=None,
                 intensity_sigma=np.log(3.0), fwhm_ln=0.0, group=None, line_weight=None,
                 sy_fit=None, s_floor=0.0, multiplet=None, half_width=None,
                 intensity_strength=None):
    """The best distinct shifts s = ln(1+z) in [smin, smax], best first.

    `window` is the observed range (ln lambda) where features could have been
    found; default the span of the features.  `multiplet` (per line) and
    `half_width` (per feature) refine the missing-line test (`_missing_lines`).
    `intensity_strength` (per line, default `strength`) is what the intensity
    check compares the fluxes with; 0 leaves a line out of it."""
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
    med_sy = _median(sy)
    step = 0.5 * med_sy
    cand = np.unique(np.round(cand / step)) * step
    if window is None:
        window = (y.min() - 3 * sy.max(), y.max() + 3 * sy.max())
    scores = np.concatenate([_score(cand[i:i + 2000], y, sy, x, strength, kinds_ok, window, tol)
                             for i in range(0, len(cand), 2000)])
    order = np.argsort(-scores)
    chosen = []
    # trial shifts one position error apart are distinct hypotheses (not the match
    # tolerance apart: H I and its He II twin pattern lie ~3 errors apart at low R)
    sep = med_sy
    for k in order:
        if scores[k] <= 0:
            break
        if all(abs(cand[k] - c) > sep for c, _ in chosen):
            chosen.append((cand[k], scores[k]))
        if len(chosen) >= n_solutions * 4:
            break
    sols = [refine(c, y, sy, w, x, strength, kinds_ok, tol=tol, window=window, flux=flux,
                   intensity_sigma=intensity_sigma, fwhm_ln=fwhm_ln, group=group,
                   line_weight=line_weight, sy_fit=sy_fit, s_floor=s_floor, multiplet=multiplet,
                   half_width=half_width, intensity_strength=intensity_strength)
            for c, _ in chosen]
    sols = [s for s in sols if s.n_lines > 0]
    # refinement can bring two trial shifts onto one solution: keep the better
    unique = []
    for s in sorted(sols, key=lambda s: -s.score):
        if all(abs(s.s - u.s) > max(3 * s.s_err, 3 * u.s_err, med_sy)
               for u in unique):
            unique.append(s)
    return unique[:n_solutions]


MISSING_SNR = 3.0      # fitted S/N below which an absent line is no surprise


def _within(sorted_vals, x, tol):
    """For each x: is any of sorted_vals closer than tol?"""
    if not len(sorted_vals) or not len(x):
        return np.zeros(len(x), dtype=bool)
    return np.abs(sorted_vals[_nearest(sorted_vals, x)] - x) < tol


def _covered(lo, hi, points):
    """True for each point inside any interval [lo_k, hi_k]."""
    order = np.argsort(lo)
    lo_s, reach = lo[order], np.maximum.accumulate(hi[order])
    k = np.searchsorted(lo_s, points, side="right") - 1
    return (k >= 0) & (reach[np.maximum(k, 0)] >= points)


def _missing_lines(s, y, sy, w, x, strength, fi, lj, used_l, window, tol, fwhm_ln=0.0,
                   group=None, multiplet=None, half_width=None):
    """Lines the solution predicts above the detection limit that no feature explains.

    The S/N expected of each catalogue line in the window is its strength times
    the median S/N per unit strength of the matched lines of its group (species
    and series; groups with fewer than two matched lines predict nothing); a line expected at
    S/N p but absent costs MISSING_COST * min((p - 3) / 1.5, 4) nats (the
    feature S/N is that of the profile fit, about half the matched-filter
    detection S/N).  A line within one resolution element (`fwhm_ln`) of a
    feature or of a matched line, or inside a feature's measured half width
    (`half_width`, ln units: saturated troughs are broader than the
    instrument), counts as seen (it would be blended), and a line within two
    of another line of its series (another multiplet: the fine-structure
    components of one line, `multiplet`, are not a crowd) is not predicted at all.
    Returns (indices, cost of each).
    """
    if window is None or not len(fi):
        return [], np.zeros(0)
    snr = np.expm1(w[fi])
    if group is None:
        group = np.zeros(len(x), dtype=int)
    per_unit = {}
    for g in set(group[lj].tolist()):
        ok = (group[lj] == g) & (strength[lj] > 0)
        if ok.sum() >= 2:     # one matched line may be a chance coincidence: no scale
            per_unit[g] = _median(snr[ok] / strength[lj][ok])
    xo = x + s
    inside = np.flatnonzero((xo > window[0]) & (xo < window[1]) & (strength > 0)
                            & np.isin(group, list(per_unit)))
    # lines crowded within two resolution elements of a neighbour of their own series
    # (series limits) blend into a pseudo-continuum: their absence says nothing
    if fwhm_ln > 0 and len(inside) > 1:
        keep = np.ones(len(inside), dtype=bool)
        for g in np.unique(group[inside]):
            sel = np.flatnonzero(group[inside] == g)
            order = sel[np.argsort(xo[inside][sel])]
            xi = xo[inside][order]
            gap = np.diff(xi)
            if multiplet is not None:
                mi = multiplet[inside][order]
                gap = np.where(mi[1:] == mi[:-1], np.inf, gap)
            near_gap = np.minimum(np.concatenate([[np.inf], gap]), np.concatenate([gap, [np.inf]]))
            keep[order[near_gap < 2 * fwhm_ln]] = False
        inside = inside[keep]
    tol_ln = max(tol * _median(sy), fwhm_ln)
    scale = np.array([per_unit.get(g, 0.0) for g in group[inside].tolist()])
    pred = scale * strength[inside]
    cand = (pred > MISSING_SNR) & ~np.isin(inside, list(used_l))
    inside, pred = inside[cand], pred[cand]
    seen = _within(np.sort(y), xo[inside], tol_ln) | _within(np.sort(xo[lj]), xo[inside],
                                                               max(fwhm_ln, 1e-12))
    if half_width is not None and len(y):
        seen |= _covered(y - half_width, y + half_width, xo[inside])
    missing = [int(j) for j in inside[~seen]]
    costs = MISSING_COST * np.minimum((pred[~seen] - MISSING_SNR) / 1.5, 4.0)
    return missing, costs


RANDOM_FLUX_SIGMA = np.log(30.0)   # scatter of ln(flux) of unrelated features (rule of thumb)


def _intensity_evidence(flux, strength, sigma, sigma_random=RANDOM_FLUX_SIGMA):
    """Do the matched fluxes follow the expected strengths?  ln-likelihood ratio of
    ln(flux / strength) scattering by `sigma` about a common scale, against
    fluxes unrelated to strength (scatter `sigma_random`).  The scale is fitted,
    so one line's normalisation term is not counted: one flux carries no evidence."""
    terms, norm = _intensity_terms(flux, strength, sigma, sigma_random)
    return float(np.sum(terms)) - norm


def _intensity_terms(flux, strength, sigma, sigma_random=RANDOM_FLUX_SIGMA):
    """Per-line terms of `_intensity_evidence` (0 where a flux is unusable) and the
    normalisation term taken off their sum."""
    terms = np.zeros(len(flux))
    ok = np.isfinite(flux) & (flux > 0) & (strength > 0)
    if ok.sum() < 2:
        return terms, 0.0
    v = np.log(flux[ok] / strength[ok])
    v0 = np.log(flux[ok])
    dev = v - _median(v)
    dev0 = v0 - _median(v0)
    terms[ok] = np.log(sigma_random / sigma) - 0.5 * (dev / sigma) ** 2 + 0.5 * (dev0 / sigma_random) ** 2
    return terms, float(np.log(sigma_random / sigma))


def weighted_shift(d, sigma):
    """Common shift of offsets d_i = y_i - x_i with 1-sigma errors sigma_i; (s, s_err, tau).

    Inverse-variance weights 1 / (sigma_i^2 + tau^2), where tau is the scatter
    between lines beyond their measured errors (blends, profile asymmetries),
    estimated by the Paule & Mandel (1982) iteration that brings chi^2 to its
    expected value n - 1 (recalled from memory; the usual consensus-value
    estimator).  Lines that agree within their errors give tau = 0 and the
    optimal weights; discordant ones flatten the weights instead of letting
    one over-precise line dictate s, and s_err grows accordingly.
    """
    d = np.asarray(d, dtype=float)
    v = np.asarray(sigma, dtype=float) ** 2
    n = len(d)
    tau2 = 0.0
    for _ in range(50):
        wt = 1.0 / (v + tau2)
        s = float(np.sum(wt * d) / np.sum(wt))
        if n < 2:
            break
        r2 = (d - s) ** 2
        excess = float(np.sum(wt * r2)) - (n - 1)
        if excess <= 1e-6 * (n - 1) and (tau2 == 0.0 or abs(excess) <= 1e-6 * (n - 1)):
            break
        tau2 = max(tau2 + excess / float(np.sum(wt * wt * r2)), 0.0)
    return s, float(1.0 / np.sqrt(np.sum(wt))), float(np.sqrt(tau2))


def refine(s0, y, sy, w, x, strength, kinds_ok, *, tol=3.0, window=None, iterations=3, flux=None,
           intensity_sigma=np.log(3.0), fwhm_ln=0.0, group=None, line_weight=None, sy_fit=None,
           s_floor=0.0, multiplet=None, half_width=None, intensity_strength=None):
    """Weighted least squares on the lines matched at s0 (one line per feature and vice versa).

    Lines are matched and scored with the combined position errors `sy`; the
    shift itself is fitted (`weighted_shift`) with the measurement errors
    `sy_fit` alone (default `sy`): the calibration and resolution terms of
    `sy` are tolerances of the match, not independent errors of each line.
    `s_floor` (a common calibration zero-point error) is added in quadrature
    to the error of the shift.

    With `flux`, the score adds `_intensity_evidence` of the matched lines
    (beyond the first: one flux only sets the scale), against
    `intensity_strength` (default `strength`; lines at 0 are left out of
    it).  `line_weight` scales
    the evidence each line can give (identify gives lines of species other than
    the primary one half weight, and half again when no primary line is matched: a He II or D I pattern without H I support is
    less believable, and He II n -> 2 lines repeat the Balmer series at four
    times the wavelength)."""
    s = float(s0)
    sol = Solution(s=s, s_err=np.inf, score=0.0)
    st_flux = strength if intensity_strength is None else intensity_strength
    banned = set()
    kept = []       # the previous round's pairs
    for _ in range(iterations):
        d = (y[:, None] - s - x[None, :]) / sy[:, None]
        ok = (np.abs(d) < tol) & kinds_ok[None, :]
        pairs = []
        used_f, used_l = set(), set()
        # a feature keeps the line it was matched to while that stays within tolerance: the
        # shift fitted to the first matches must not carry the solution over to a twin
        # pattern (He II 2m -> 4 against H I m -> 2, 4e-4 apart in ln) that lies nearer
        # after the fit; each trial shift is one hypothesis, and the search tries both
        for i, j in kept:
            if ok[i, j] and (i, j) not in banned:
                used_f.add(i)
                used_l.add(j)
                pairs.append((i, j))
        oi, oj = np.nonzero(ok)
        for k in np.argsort(np.abs(d[oi, oj]), kind="stable"):
            i, j = int(oi[k]), int(oj[k])
            if i in used_f or j in used_l or (i, j) in banned:
                continue
            used_f.add(i)
            used_l.add(j)
            pairs.append((i, j))
        if not pairs:
            return sol
        while True:
            fi = np.array([p[0] for p in pairs])
            lj = np.array([p[1] for p in pairs])
            s_new, s_err, _ = weighted_shift(y[fi] - x[lj], (sy if sy_fit is None else sy_fit)[fi])
            s_err = float(np.hypot(s_err, s_floor))
            resid = (y[fi] - s_new - x[lj]) / sy[fi]
            chi2 = float(np.sum(resid ** 2))
            if window is not None:
                inside = (x + s_new > window[0]) & (x + s_new < window[1])
                total = float(np.sum(strength[inside]))
                width = window[1] - window[0]
            else:
                total, width = float(np.sum(strength)), float(np.ptp(y) + 1e-3)
            gains = _evidence(resid, sy[fi], strength[lj], total, width)
            if line_weight is not None:
                gains = gains * line_weight[lj]
                if not np.any(line_weight[lj] >= 1):
                    gains = gains * 0.5   # no primary-species line at all: half again
            terms, norm = (_intensity_terms(np.abs(flux[fi]), st_flux[lj], intensity_sigma)
                           if flux is not None and len(fi) >= 2 else (np.zeros(len(fi)), 0.0))
            # a match whose flux contradicts its expected strength by more than its position
            # supports it explains nothing: the feature is left to something else
            net = gains + terms
            worst = int(np.argmin(net))
            if len(pairs) > 2 and net[worst] < 0:
                banned.add(pairs[worst])
                used_l.discard(pairs[worst][1])
                del pairs[worst]
                continue
            missing, costs = _missing_lines(s_new, y, sy, w, x, strength, fi, lj, used_l, window,
                                            tol, fwhm_ln, group, multiplet, half_width)
            # likewise a series whose absent lines cost more than its matches gain is not
            # there: its matches are given up (the features stay unexplained), rather than
            # the series sinking the whole solution
            g_of = np.zeros(len(x), dtype=int) if group is None else group
            g_miss = g_of[np.asarray(missing, dtype=int)]
            bad = [g for g in set(g_miss.tolist())
                   if costs[g_miss == g].sum() > net[g_of[lj] == g].sum()]
            if bad and len(pairs) > 2:
                drop = [k for k, (i, j) in enumerate(pairs) if g_of[j] in bad]
                if len(drop) < len(pairs):
                    for k in sorted(drop, reverse=True):
                        banned.add(pairs[k])
                        used_l.discard(pairs[k][1])
                        del pairs[k]
                    continue
            break
        score = float(np.sum(gains) - np.max(gains))   # the first line is free
        cost = float(np.sum(costs))
        score -= cost
        if flux is not None and len(fi) >= 2:
            score += float(np.sum(terms)) - norm
        sol = Solution(s=s_new, s_err=s_err, score=score,
                       matches=[(int(i), int(j), float(r)) for i, j, r in zip(fi, lj, resid)],
                       chi2=chi2, missing=missing)
        if abs(s_new - s) < 1e-3 * s_err:
            break
        s = s_new
        kept = pairs
    return sol


def competitors(solutions):
    """The solutions after the first that explain (partly) the same features as it.

    A solution built on other features is a candidate second system, not
    evidence against the first."""
    mine = {m[0] for m in solutions[0].matches}
    out = []
    for s in solutions[1:]:
        theirs = {m[0] for m in s.matches}
        if len(mine & theirs) >= 0.3 * max(min(len(mine), len(theirs)), 1):
            out.append(s)
    return out


def solution_probability(solutions):
    """Probability-like weight of the best solution: its likelihood ratio against
    no solution (score 0) and against each competitor, normalised,
    1 / (1 + e^-S + sum_k e^(S_k - S)) with S the scores in nats."""
    if not solutions:
        return 0.0
    best = solutions[0].score
    rest = np.array([s.score for s in competitors(solutions)], dtype=float)
    return float(1.0 / (1.0 + np.exp(-best) + np.sum(np.exp(rest - best))))


def classify(solutions):
    """Set the status of the best solution (and 'alternative' on the others)."""
    if not solutions:
        return "none"
    best = solutions[0]
    dof = max(best.n_lines - 1, 1)
    good_fit = best.chi2 / dof < 6.0
    margin = min((best.score - s.score for s in competitors(solutions)), default=np.inf)
    clear = margin >= max(SECURE_MARGIN, 0.2 * best.score)
    if best.n_lines >= 3 and good_fit and clear and best.score >= SECURE_SCORE:
        status = "secure"
    elif best.n_lines >= 2 and best.score >= TENTATIVE_SCORE:
        status = "tentative"
    else:
        status = "none"
    best.status = status
    for s in solutions[1:]:
        s.status = "alternative"
    return status
