"""Scored matching of measured features against a (shifted) catalogue.

For a solution shift s = ln(1+z), feature i and catalogue line j differ by
d_ij = (y_i - s - x_j) / sigma_i, where sigma_i combines the measured centre
error, a wavelength-calibration term and a fraction of the resolution
element (all three stated in the output).  The likelihood of "i is j" is
exp(-d^2/2) times the line's expected strength (relative to the strongest
of its group) times an intensity-plausibility prior; "i is none of them" has
the likelihood of a 3-sigma miss, exp(-4.5).  The probability-like score of
an identification is its likelihood over the sum of all hypotheses.

Assignment is global, so one catalogue line explains at most one resolved
feature; features flagged ``blend`` by the measurement may share a line.  It
is sort/search based: each feature's candidate lines come from a binary
search of the sorted catalogue (never all pairs), every feature takes its
best hypothesis, and only where two features want the same line is the
small group of features that share candidates solved exactly (scipy's
linear_sum_assignment on -log likelihoods, with a "none" column per feature).

Intensity plausibility: within each species and series, observed fluxes
divided by expected strengths (Case B for H I recombination lines, the
catalogue's relative intensity otherwise) should agree; a factor of 3
either way costs one sigma-equivalent.
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

from .redshift import _within

__all__ = ["assign", "Assignment", "candidate_pairs", "withdraw_unsupported", "NULL_LOG_LIKELIHOOD"]

NULL_LOG_LIKELIHOOD = -4.5
TOL = 4.0

N_ALTERNATIVES = 3


@dataclass
class Assignment:
    """Result of `assign`, one entry per feature (line indices refer to the input order)."""
    best: np.ndarray          #: line index or -1 (unidentified)
    score: np.ndarray         #: probability-like score of the chosen line (0 if none)
    resid: np.ndarray         #: normalised residual (y - s - x) / sigma of the chosen line
    alt_index: np.ndarray     #: (n_features, 3) next-best line indices, -1 where fewer
    alt_score: np.ndarray     #: (n_features, 3) their scores

    def alternatives(self, i):
        """[(line index, score), ...] of feature i, best first."""
        return [(int(j), float(p)) for j, p in zip(self.alt_index[i], self.alt_score[i]) if j >= 0]


def candidate_pairs(y, sy, xs, s, tol):
    """(feature, sorted-line) pairs with |y - s - xs| < tol * sy, by binary search.

    ``xs`` must be sorted.  Returns rows, cols and the normalised residuals d,
    rows ascending.
    """
    lo = np.searchsorted(xs, y - s - tol * sy, side="left")
    hi = np.searchsorted(xs, y - s + tol * sy, side="right")
    cnt = hi - lo
    total = int(cnt.sum())
    rows = np.repeat(np.arange(len(y)), cnt)
    cols = np.arange(total) - np.repeat(np.cumsum(cnt) - cnt, cnt) + np.repeat(lo, cnt)
    d = (y[rows] - s - xs[cols]) / sy[rows]
    keep = np.abs(d) < tol
    return rows[keep], cols[keep], d[keep], lo, hi


def _rank_in_runs(keys):
    """0, 1, 2 ... within each run of equal consecutive keys."""
    if not len(keys):
        return np.zeros(0, dtype=np.int64)
    first = np.ones(len(keys), dtype=bool)
    first[1:] = keys[1:] != keys[:-1]
    starts = np.flatnonzero(first)
    return np.arange(len(keys)) - np.repeat(starts, np.diff(np.append(starts, len(keys))))


def _components(lo, hi):
    """Groups of features whose candidate windows [lo, hi) overlap (label per feature)."""
    order = np.argsort(lo, kind="stable")
    reach = np.maximum.accumulate(hi[order])
    new = np.ones(len(order), dtype=bool)
    new[1:] = lo[order][1:] >= reach[:-1]
    label = np.empty(len(order), dtype=np.int64)
    label[order] = np.cumsum(new) - 1
    return label


def _best_per_row(rows, ll, nf):
    """Index (into the pairs) of each feature's most likely line, -1 where it has none.

    `rows` must be ascending (as `candidate_pairs` returns them)."""
    top = np.full(nf, -1)
    if not len(rows):
        return top
    first = np.ones(len(rows), dtype=bool)
    first[1:] = rows[1:] != rows[:-1]
    starts = np.flatnonzero(first)
    row_max = np.maximum.reduceat(ll, starts)
    span = np.diff(np.append(starts, len(rows)))
    idx = np.where(ll == np.repeat(row_max, span), np.arange(len(rows)), len(rows))
    top[rows[starts]] = np.minimum.reduceat(idx, starts)
    return top


def _choose(rows, cols, ll, nf, comp):
    """Global choice: each feature its best hypothesis, exact assignment where lines collide."""
    top = _best_per_row(rows, ll, nf)
    choice = np.full(nf, -1)
    has = top >= 0
    good = has.copy()
    good[has] = ll[top[has]] > NULL_LOG_LIKELIHOOD
    choice[good] = cols[top[good]]
    taken = choice[choice >= 0]
    uniq, counts = np.unique(taken, return_counts=True)
    clash_lines = uniq[counts > 1]
    if not len(clash_lines):
        return choice
    clash_feats = np.flatnonzero(np.isin(choice, clash_lines))
    pair_comp = comp[rows]
    todo = np.unique(comp[clash_feats])
    in_todo = np.flatnonzero(np.isin(pair_comp, todo))
    in_todo = in_todo[np.argsort(pair_comp[in_todo], kind="stable")]
    bounds = np.searchsorted(pair_comp[in_todo], todo)
    bounds = np.append(bounds, len(in_todo))
    for k in range(len(todo)):
        sel = in_todo[bounds[k]:bounds[k + 1]]
        f_ids, f_loc = np.unique(rows[sel], return_inverse=True)
        l_ids, l_loc = np.unique(cols[sel], return_inverse=True)
        k, m = len(f_ids), len(l_ids)
        cost = np.full((k, m + k), 1e6)
        cost[f_loc, l_loc] = -ll[sel]
        cost[np.arange(k), m + np.arange(k)] = -NULL_LOG_LIKELIHOOD
        r, cc = linear_sum_assignment(cost)
        for a, b in zip(r, cc):
            choice[f_ids[a]] = l_ids[b] if b < m and cost[a, b] < 1e5 else -1
    return choice


def assign(y, sy, flux, blend, x, strength, group, s, *, tol=TOL, snr=None, masked=None):
    """Best line for every feature at shift s.

    Parameters: feature log-positions `y`, their sigmas `sy`, fluxes, blend
    flags; line log rest positions `x`, expected strengths, and a `group`
    key per line (species and series) for the intensity prior.  With the
    features' `snr`, a line whose group's matched lines predict it well above
    the detection limit is expected to be seen however weak it is next to the
    strongest of its group (`_presence_prior`).

    `masked` features (on a night-sky line or in a telluric band) may take a
    line only where the other features' matched lines predict it above the
    detection limit at their flux: a sky residual is no evidence of a line,
    but a line that must be there is not lost because the sky lies on it.
    They take no part in setting the groups' flux scales.

    Returns an `Assignment`.
    """
    y = np.asarray(y, dtype=float)
    nf, nl = len(y), len(x)
    out = Assignment(best=np.full(nf, -1), score=np.zeros(nf), resid=np.full(nf, np.nan),
                     alt_index=np.full((nf, N_ALTERNATIVES), -1),
                     alt_score=np.zeros((nf, N_ALTERNATIVES)))
    if nf == 0 or nl == 0:
        return out
    sy = np.asarray(sy, dtype=float)
    flux = np.asarray(flux, dtype=float)
    order = np.argsort(x, kind="stable")
    xs = np.asarray(x, dtype=float)[order]
    st = np.asarray(strength, dtype=float)[order]
    _, gcode = np.unique(np.asarray(group)[order], return_inverse=True)
    rows, cols, d, lo, hi = candidate_pairs(y, sy, xs, s, tol)
    if not len(rows):
        return out
    comp = _components(lo, hi)
    # the prior that a line is there at all: its expected strength (1 for the strongest of
    # its group); a weak line must sit closer than a strong one to beat "unidentified"
    base = -0.5 * d * d
    presence = np.log(np.clip(st[cols], 1e-4, 1.0))
    masked = np.zeros(nf, bool) if masked is None else np.asarray(masked, dtype=bool)
    on_mask = masked[rows]
    choice = np.full(nf, -1)
    for _ in range(2):
        # second pass with the intensity priors (and predicted S/N) of the lines matched in
        # the first; in the first no group scale is known, so masked features take no line
        ll = base + _priors(np.where(masked, -1, choice), flux, st, gcode, rows, cols, snr,
                            presence, masked=on_mask)
        choice = _choose(rows, cols, ll, nf, comp)
    # blends may share a line: a blended feature left without one keeps its best candidate,
    # if that is likelier than "unidentified"
    top = _best_per_row(rows, ll, nf)
    blend = np.asarray(blend, dtype=bool)
    lone = (choice < 0) & blend & (top >= 0) & ~masked
    lone[lone] = ll[top[lone]] > NULL_LOG_LIKELIHOOD
    choice[lone] = cols[top[lone]]
    ll = base + _priors(np.where(masked, -1, choice), flux, st, gcode, rows, cols, snr, presence,
                        masked=on_mask)
    like = np.exp(ll)
    total = np.bincount(rows, weights=like, minlength=nf) + np.exp(NULL_LOG_LIKELIHOOD)
    chosen_pair = np.flatnonzero(cols == choice[rows])
    ci = rows[chosen_pair]
    out.best[ci] = order[cols[chosen_pair]]
    out.score[ci] = like[chosen_pair] / total[ci]
    out.resid[ci] = d[chosen_pair]
    # alternatives: the next most likely lines of each feature
    srt = np.lexsort((-ll, rows))
    r = rows[srt]
    not_best = cols[srt] != choice[r]
    alt = srt[not_best]
    ar = r[not_best]
    a_rank = _rank_in_runs(ar)
    keep = a_rank < N_ALTERNATIVES
    out.alt_index[ar[keep], a_rank[keep]] = order[cols[alt[keep]]]
    out.alt_score[ar[keep], a_rank[keep]] = like[alt[keep]] / total[ar[keep]]
    return out


DETECTION_SNR = 5.0
_EXCLUDED = -1e6     # log prior of a pair that may not be chosen (finite for the assignment)


def _priors(choice, flux, strength, gcode, rows, cols, snr, presence, masked=None):
    """log priors per (feature, line) pair: is the line there, and does its flux fit?"""
    prior, sc = _intensity_prior(choice, flux, strength, gcode, rows, cols)
    return prior + _presence_prior(presence, sc, flux, strength, rows, cols, snr, masked)


def _presence_prior(presence, scale, flux, strength, rows, cols, snr, masked=None):
    """log prior that the line of each pair is in the spectrum at all.

    By default its expected strength (1 for the strongest of its group): a weak
    line must sit closer than a strong one to beat "unidentified".  Where the
    group's flux scale is known from its matched lines and the feature's S/N
    gives its flux error, the line's expected S/N over the detection limit
    (S/N 5) raises that prior, up to 1: a high Balmer line predicted at S/N 20
    is no less likely to be there than H-alpha.  A `masked` pair is excluded
    unless that prediction puts its line above the detection limit."""
    if snr is None:
        return presence if masked is None else np.where(masked, _EXCLUDED, presence)
    snr_r = np.asarray(snr, dtype=float)[rows]
    fr = flux[rows]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        expected = np.exp(scale) * strength[cols] * snr_r / fr
    ok = np.isfinite(expected) & (expected > 0)
    out = presence.copy()
    out[ok] = np.maximum(presence[ok], np.log(np.minimum(expected[ok] / DETECTION_SNR, 1.0)))
    if masked is not None:
        loud = ok & (np.nan_to_num(expected) >= DETECTION_SNR)
        out[masked] = np.where(loud[masked], 0.0, _EXCLUDED)
    return out


def _intensity_prior(choice, flux, strength, gcode, rows, cols):
    """log prior per (feature, line) pair: does the feature's flux fit the line's group?

    The group's scale is the median of ln(flux / expected strength) over its
    lines matched in the previous pass (two at least); a feature whose ratio
    is a factor of 3 off that scale pays -0.5, a factor of 9 pays -2, capped at -8.
    Returns the priors and the group scale of each pair (NaN where unknown).
    """
    prior = np.zeros(len(rows))
    nan = np.full(len(rows), np.nan)
    matched = np.flatnonzero(choice >= 0)
    if not len(matched):
        return prior, nan
    j = choice[matched]
    f = flux[matched]
    ok = (strength[j] > 0) & np.isfinite(f) & (f > 0)
    if not np.any(ok):
        return prior, nan
    g = gcode[j[ok]]
    vals = np.log(f[ok] / strength[j[ok]])
    scale = np.full(gcode.max() + 1, np.nan)
    for code in np.unique(g):
        v = vals[g == code]
        if len(v) >= 2:
            scale[code] = np.median(v)
    sc = scale[gcode[cols]]
    fr = flux[rows]
    with np.errstate(divide="ignore", invalid="ignore"):
        dev = (np.log(fr / strength[cols]) - sc) / np.log(3.0)
    use = np.isfinite(dev)
    prior[use] = np.maximum(-0.5 * dev[use] ** 2, -8.0)
    return prior, sc


def withdraw_unsupported(res, y, snr, x, strength, group, s, window, fwhm_ln, claimable, *,
                         detection_snr=DETECTION_SNR, pixels=None):
    """Take back the identifications of a species and series whose stronger lines are absent.

    For every group (species and series) of the `claimable` lines that `res` assigned
    features to, the matched features' S/N per unit expected strength (their median)
    predicts the S/N of the group's other lines in the `window` (ln observed
    wavelength, 2 FWHM `fwhm_ln` inside its ends).  A line predicted at twice the
    detection limit or more with no feature within a FWHM of it, and no line of its
    own group within two (a series running into its limit is no single line), says
    the group is not there: its features are left unidentified.  A claimed He II 917
    in a Lyman absorber whose He II 958 and 992 would be far stronger, and are not
    seen, is a feature of something else.  With `pixels` (sorted ln observed wavelengths
    of the valid pixels) a line counts only where the data cover it: a gap between
    windows or a masked stretch says nothing.  `res` is changed in place; returns the
    indices of the features taken back.
    """
    y, snr, x = (np.asarray(v, dtype=float) for v in (y, snr, x))
    strength, group = np.asarray(strength, dtype=float), np.asarray(group)
    claimable = np.asarray(claimable, dtype=bool)
    took = []
    if window is None or not len(y):
        return took
    j_all = np.asarray(res.best)
    lo, hi = window[0] + 2 * fwhm_ln, window[1] - 2 * fwhm_ln
    ys = np.sort(y)
    for g in np.unique(group[j_all[j_all >= 0]]):
        feats = np.flatnonzero((j_all >= 0) & (group[np.maximum(j_all, 0)] == g))
        lines = j_all[feats]
        if not claimable[lines].all():
            continue
        ok = (strength[lines] > 0) & np.isfinite(snr[feats]) & (snr[feats] > 0)
        if not ok.any():
            continue
        per_unit = float(np.median(snr[feats][ok] / strength[lines][ok]))
        mine = np.flatnonzero(group == g)
        xo = x[mine] + s
        order = np.argsort(xo)
        mine, xo = mine[order], xo[order]
        gap = np.diff(xo)
        crowded = np.minimum(np.concatenate([[np.inf], gap]), np.concatenate([gap, [np.inf]])) \
            < 2 * fwhm_ln
        absent = (xo > lo) & (xo < hi) & ~crowded & ~_within(ys, xo, fwhm_ln) \
            & (per_unit * strength[mine] >= 2 * detection_snr) & ~np.isin(mine, lines)
        if pixels is not None:
            absent &= _within(np.asarray(pixels, dtype=float), xo, fwhm_ln)
        if absent.any():
            res.best[feats] = -1
            res.score[feats] = 0.0
            res.resid[feats] = np.nan
            took.extend(feats.tolist())
    return sorted(took)

