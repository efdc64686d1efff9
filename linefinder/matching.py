"""Scored matching of measured features against a (shifted) catalogue.

For a solution shift s = ln(1+z), feature i and catalogue line j differ by
d_ij = (y_i - s - x_j) / sigma_i, where sigma_i combines the measured centre
error, a wavelength-calibration term and a fraction of the resolution
element (all three stated in the output).  The likelihood of "i is j" is
exp(-d^2/2) times the line's expected strength (relative to the strongest
of its group) times an intensity-plausibility prior; "i is none of them" has
the likelihood of a 3-sigma miss, exp(-4.5).  The probability-like score of
an identification is its likelihood over the sum of all hypotheses.

Assignment is global (scipy's linear_sum_assignment on -log likelihoods),
so one catalogue line explains at most one resolved feature; features
flagged ``blend`` by the measurement may share a line.

Intensity plausibility: within each species and series, observed fluxes
divided by expected strengths (Case B for H I recombination lines, the
catalogue's relative intensity otherwise) should agree; a factor of 3
either way costs one sigma-equivalent.
"""

import numpy as np
from scipy.optimize import linear_sum_assignment

__all__ = ["assign", "NULL_LOG_LIKELIHOOD", "CASE_B_HBETA"]

NULL_LOG_LIKELIHOOD = -4.5
TOL = 4.0

# H I Case B line intensities relative to H-beta at T = 10^4 K, n_e = 100 cm^-3
# (Storey & Hummer 1995, MNRAS 272, 41; from memory, to the digits shown)
CASE_B_HBETA = {(2, 3): 2.863, (2, 4): 1.0, (2, 5): 0.468, (2, 6): 0.259, (2, 7): 0.159,
                (2, 8): 0.105, (2, 9): 0.0731, (2, 10): 0.0530, (2, 11): 0.0397, (2, 12): 0.0305,
                (3, 4): 0.332, (3, 5): 0.162, (3, 6): 0.0901, (3, 7): 0.0554, (4, 5): 0.0779,
                (4, 6): 0.0448, (4, 7): 0.0275}


def assign(y, sy, flux, blend, x, strength, group, s, *, tol=TOL):
    """Best line for every feature at shift s.

    Parameters: feature log-positions `y`, their sigmas `sy`, fluxes, blend
    flags; line log rest positions `x`, expected strengths, and a `group`
    key per line (species and series) for the intensity prior.

    Returns (best, alternatives, scores, residuals): best[i] is a line index
    or -1; alternatives[i] a list of (line, score); scores[i] the score of
    the assignment; residuals[i] the normalised residual.
    """
    nf, nl = len(y), len(x)
    best = np.full(nf, -1)
    scores = np.zeros(nf)
    resid = np.full(nf, np.nan)
    alts = [[] for _ in range(nf)]
    if nf == 0 or nl == 0:
        return best, alts, scores, resid
    d = (y[:, None] - s - x[None, :]) / sy[:, None]
    near = np.abs(d) < tol
    # the prior that a line is there at all: its expected strength (1 for the strongest of
    # its group); a weak line must sit closer than a strong one to beat "unidentified"
    line_prior = np.log(np.clip(strength, 1e-4, 1.0))
    loglike = np.where(near, -0.5 * d ** 2 + line_prior[None, :], -np.inf)
    for _ in range(2):   # second pass with the intensity prior from the first assignment
        prior = _intensity_prior(best, flux, strength, group)
        ll = loglike + prior
        cost = np.where(np.isfinite(ll), -ll, 1e6)
        # dummy columns: each feature may stay unidentified at the null cost
        dummy = np.full((nf, nf), 1e6)
        np.fill_diagonal(dummy, -NULL_LOG_LIKELIHOOD)
        rows, cols = linear_sum_assignment(np.hstack([cost, dummy]))
        best[:] = -1
        for r, c in zip(rows, cols):
            if c < nl and cost[r, c] < 1e5:
                best[r] = c
    # blends may share a line: a blended feature whose best line is taken keeps it too
    for i in range(nf):
        if best[i] < 0 and blend[i] and np.any(near[i]):
            best[i] = int(np.argmax(loglike[i]))
    prior = _intensity_prior(best, flux, strength, group)
    ll = loglike + prior
    for i in range(nf):
        like = np.exp(ll[i][near[i]])
        total = like.sum() + np.exp(NULL_LOG_LIKELIHOOD)
        cand = np.flatnonzero(near[i])
        order = cand[np.argsort(-ll[i][cand])]
        if best[i] >= 0:
            scores[i] = float(np.exp(ll[i, best[i]]) / total)
            resid[i] = float(d[i, best[i]])
        alts[i] = [(int(j), float(np.exp(ll[i, j]) / total)) for j in order if j != best[i]][:3]
    return best, alts, scores, resid


def _intensity_prior(best, flux, strength, group):
    """log prior per (feature, line): does the feature's flux fit the line's group?

    The group's scale is the median of ln(flux / expected strength) over its
    lines matched in the previous pass (two at least); a feature whose ratio
    is a factor of 3 off that scale pays -0.5, a factor of 9 pays -2, capped at -8.
    """
    nf, nl = len(best), len(strength)
    prior = np.zeros((nf, nl))
    scale = {}
    for i in np.flatnonzero(best >= 0):
        j = best[i]
        if strength[j] > 0 and np.isfinite(flux[i]) and flux[i] > 0:
            scale.setdefault(group[j], []).append(np.log(flux[i] / strength[j]))
    scale = {k: float(np.median(v)) for k, v in scale.items() if len(v) >= 2}
    if not scale:
        return prior
    f = np.where(np.isfinite(flux) & (flux > 0), flux, np.nan)
    for j in range(nl):
        g = scale.get(group[j])
        if g is None or strength[j] <= 0:
            continue
        dev = (np.log(f / strength[j]) - g) / np.log(3.0)
        prior[:, j] = np.where(np.isfinite(dev), np.maximum(-0.5 * dev ** 2, -8.0), 0.0)
    return prior
