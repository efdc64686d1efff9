"""Lines measured where a known redshift puts them.

Once the redshift is secure (or fixed by the user), every line the catalogue
predicts inside the spectrum sits at a known position with a known width: the
width the identified lines of the same series show next to it.  A line too
weak, or too crowded by its neighbours near a series limit, to be picked out
by the blind search can then still be measured, as is common practice for
lines at a known redshift: Gaussians of fixed centre and FWHM, one per
predicted line and one per neighbouring feature (at its own measured centre
and width), with amplitudes from a weighted linear least-squares fit to the
flux less the continuum.  Their 1-sigma errors come from the covariance of
that fit, so a line that its neighbours could equally explain gets a large
error and is not claimed.  Near a series limit the continuum under them is first
fitted again with every predicted line left out (`bridge_crowded`): the continuum
found before the redshift was known bends into the crowd of lines too weak to be
found one by one, and would take part of their depth.

Numerics only (ln wavelength, flux and noise arrays); `identify` chooses the
lines and turns the measurements into rows of its feature table.
"""

import numpy as np

__all__ = ["gaussian_templates", "fixed_profile_fit", "choose_lines", "measure_predicted",
           "bridge_crowded", "FWHM_TO_SIGMA", "N_BEYOND", "BLOB_WIDTHS", "CROWD_HALF_WIDTH",
           "CROWD_MIN_RUN"]

# predicted lines are tried up to this many upper levels beyond the highest identified one of
# their series (the next lines of a series are weaker still): a rule of this tool
N_BEYOND = 3
# a feature this many times broader than the lines around it, spanning two predicted lines or
# more, is a blend of them (a series running into its limit) and is replaced by them
BLOB_WIDTHS = 2.5

FWHM_TO_SIGMA = 1.0 / np.sqrt(8.0 * np.log(2.0))
# the continuum under a crowd of predicted lines is bridged (`bridge_crowded`) where their
# +/- CROWD_HALF_WIDTH FWHM reaches join into a stretch over CROWD_MIN_RUN FWHM long
CROWD_HALF_WIDTH = 1.5
CROWD_MIN_RUN = 6.0


def gaussian_templates(x, centres, fwhm):
    """Unit-peak Gaussians, one column per (centre, FWHM), on the points `x`."""
    x = np.asarray(x, dtype=float)[:, None]
    sig = np.asarray(fwhm, dtype=float)[None, :] * FWHM_TO_SIGMA
    return np.exp(-0.5 * ((x - np.asarray(centres, dtype=float)[None, :]) / sig) ** 2)


def fixed_profile_fit(x, r, sigma, centres, fwhm):
    """Peak amplitudes and their 1-sigma errors of Gaussians of fixed centre and FWHM
    fitted together to the residual `r` (flux less continuum) with noise `sigma`.

    Points with a non-finite residual or noise are left out.  A template no point
    constrains, or one its neighbours make degenerate (a singular normal matrix), gets
    amplitude 0 and an infinite error.
    """
    x, r, sigma = (np.asarray(v, dtype=float) for v in (x, r, sigma))
    ok = np.isfinite(r) & np.isfinite(sigma) & (sigma > 0)
    n = len(centres)
    amp, err = np.zeros(n), np.full(n, np.inf)
    if n == 0 or ok.sum() <= n:
        return amp, err
    A = gaussian_templates(x[ok], centres, fwhm) / sigma[ok, None]
    b = r[ok] / sigma[ok]
    # templates with (almost) no weight inside the data are left out of the solve
    live = np.sqrt(np.sum(A * A, axis=0)) > 1e-6
    if not live.any():
        return amp, err
    Al = A[:, live]
    N = Al.T @ Al
    try:
        cov = np.linalg.inv(N)
    except np.linalg.LinAlgError:
        return amp, err
    # a nearly singular system: the errors it gives are meaningless, call them infinite
    if not np.all(np.isfinite(cov)) or np.linalg.cond(N) > 1e14:
        return amp, err
    amp[live] = cov @ (Al.T @ b)
    err[live] = np.sqrt(np.clip(np.diag(cov), 0, None))
    return amp, err


def _merge(lo, hi):
    """Overlapping intervals [lo_i, hi_i] merged; a list of (lo, hi, member indices)."""
    order = np.argsort(lo)
    out = []
    for i in order:
        if out and lo[i] <= out[-1][1]:
            out[-1][1] = max(out[-1][1], hi[i])
            out[-1][2].append(int(i))
        else:
            out.append([float(lo[i]), float(hi[i]), [int(i)]])
    return out


def measure_predicted(ax, resid, sigma, cand_x, cand_w, line_x, line_w, feat_x, feat_w,
                      blob, half_window=3.0):
    """Fit the predicted lines `cand_x` (ln wavelength, FWHM `cand_w`) together with what
    surrounds them; their amplitudes and errors.

    `ax`, `resid`, `sigma`: the spectrum's pixels (ln vacuum wavelength, sorted; flux less
    continuum; noise).  `line_x`, `line_w`: every predicted line (the candidates among
    them or not), modelled where a feature in `blob` stood; `feat_x`, `feat_w`: the
    measured features, each modelled at its own centre and FWHM unless it is a `blob`
    (a blend of predicted lines, which the lines themselves replace).  Each candidate's
    stretch is +/- `half_window` FWHM; stretches that overlap are fitted as one.
    """
    cand_x, cand_w = np.asarray(cand_x, float), np.asarray(cand_w, float)
    amp, err = np.zeros(len(cand_x)), np.full(len(cand_x), np.inf)
    if not len(cand_x):
        return amp, err
    line_x, line_w = np.asarray(line_x, float), np.asarray(line_w, float)
    feat_x, feat_w = np.asarray(feat_x, float), np.asarray(feat_w, float)
    blob = np.asarray(blob, bool)
    keep = ~blob
    for lo, hi, members in _merge(cand_x - half_window * cand_w, cand_x + half_window * cand_w):
        a, b = np.searchsorted(ax, lo), np.searchsorted(ax, hi)
        if b - a < 3:
            continue
        # the neighbours: features reaching into the stretch, and predicted lines inside
        # the blobs that reach into it (not the candidates themselves again)
        near_f = keep & (feat_x + 2 * feat_w > lo) & (feat_x - 2 * feat_w < hi)
        spans = [(x - w / 2, x + w / 2) for x, w in zip(feat_x[blob], feat_w[blob])
                 if x + 2 * w > lo and x - 2 * w < hi]
        in_blob = np.zeros(len(line_x), bool)
        for s0, s1 in spans:
            in_blob |= (line_x > s0) & (line_x < s1)
        is_cand = np.isin(line_x, cand_x[members])
        near_l = in_blob & ~is_cand
        centres = np.concatenate([cand_x[members], feat_x[near_f], line_x[near_l]])
        widths = np.concatenate([cand_w[members], feat_w[near_f], line_w[near_l]])
        # a neighbour on top of an earlier template (within half a FWHM) adds nothing the
        # data could tell apart: left out (the candidates come first and stay)
        own = np.ones(len(centres), bool)
        for k in range(len(members), len(centres)):
            prev = np.flatnonzero(own[:k])
            own[k] = not np.any(np.abs(centres[prev] - centres[k])
                                < 0.5 * np.minimum(widths[prev], widths[k]))
        p, e = fixed_profile_fit(ax[a:b], resid[a:b], sigma[a:b], centres[own], widths[own])
        amp[members], err[members] = p[:len(members)], e[:len(members)]
    return amp, err


def bridge_crowded(ax, flux, sigma, cont, line_x, line_w, feat_x=(), feat_w=()):
    """The continuum with each crowded stretch of predicted lines refitted; and the mask of
    the refitted pixels.

    Near a series limit the lines stand closer than a few FWHM: the spline continuum
    fitted before the redshift was known could not tell their overlapping wings (the
    members too weak to be found, above all) from the continuum and bent into them.
    Where the reaches (+/- `CROWD_HALF_WIDTH` FWHM) of the lines `line_x` (ln vacuum
    wavelength, FWHM `line_w`) join into one stretch over `CROWD_MIN_RUN` median FWHM
    long, the continuum is fitted again (`continuum.fit_continuum`, knots 12 FWHM
    apart) to the flux around it with the reaches of every predicted line and of every
    feature (`feat_x`, `feat_w`) left out, so that the spline bridges the crowd from the
    clean pixels on either side, as one draws it by hand over a series limit; the refit
    replaces the continuum inside the stretch.  A stretch without clean pixels on both
    sides is left as it is.
    """
    from ..features.continuum import fit_continuum

    ax, flux, sigma = (np.asarray(v, float) for v in (ax, flux, sigma))
    cont = np.asarray(cont, float)
    line_x, line_w = np.asarray(line_x, float), np.asarray(line_w, float)
    out, bridged = cont.copy(), np.zeros(len(ax), bool)
    ok = np.isfinite(line_x) & np.isfinite(line_w) & (line_w > 0)
    if ok.sum() < 2 or len(ax) < 8:
        return out, bridged
    line_x, line_w = line_x[ok], line_w[ok]
    ref = float(np.median(line_w))
    reach_x = np.concatenate([line_x, np.asarray(feat_x, float)])
    reach_w = np.concatenate([line_w, np.asarray(feat_w, float)])
    fine = np.isfinite(reach_x) & np.isfinite(reach_w) & (reach_w > 0)
    reach_x, reach_w = reach_x[fine], reach_w[fine]
    for lo, hi, _ in _merge(line_x - CROWD_HALF_WIDTH * line_w, line_x + CROWD_HALF_WIDTH * line_w):
        if hi - lo < CROWD_MIN_RUN * ref:
            continue
        a, b = np.searchsorted(ax, lo), np.searchsorted(ax, hi)
        if a == 0 or b >= len(ax) or b - a < 2:     # at or beyond an end of the data
            continue
        # the crowd and as much again, at least 30 FWHM, on either side
        side = max(hi - lo, 30 * ref)
        a0, b0 = np.searchsorted(ax, lo - side), np.searchsorted(ax, hi + side)
        seg = slice(a0, b0)
        good = np.isfinite(flux[seg]) & np.isfinite(sigma[seg]) & (sigma[seg] > 0)
        near = np.flatnonzero((reach_x + 2 * reach_w > ax[a0]) & (reach_x - 2 * reach_w < ax[b0 - 1]))
        exclude = np.zeros(b0 - a0, bool)
        for k in near:
            i0 = np.searchsorted(ax, reach_x[k] - CROWD_HALF_WIDTH * reach_w[k]) - a0
            i1 = np.searchsorted(ax, reach_x[k] + CROWD_HALF_WIDTH * reach_w[k]) - a0
            exclude[max(i0, 0):max(i1, 0)] = True
        clean = good & ~exclude
        if not (clean[:a - a0].sum() >= 8 and clean[b - a0:].sum() >= 8):
            continue
        px_per_fwhm = (b - a) / (hi - lo) * ref
        refit, _ = fit_continuum(np.where(good, flux[seg], 0.0), np.where(good, sigma[seg], np.inf),
                                 good, knot_px=max(12 * px_per_fwhm, 8), exclude=exclude)
        out[a:b] = refit[a - a0:b - a0]
        bridged[a:b] = True
    return out, bridged


def choose_lines(line_x, line_group, line_n, primary, matched, feat_x, feat_w, feat_blend, s,
                 window, min_fwhm):
    """Which predicted lines to measure, and with what FWHM.

    `line_x` (ln rest vacuum wavelength), `line_group`, `line_n` (upper level) and
    `primary` (lines that may be measured) describe the catalogue; `matched` maps identified catalogue lines to their
    features ({line: feature}); `feat_x`, `feat_w`, `feat_blend`: the features' ln centres,
    ln FWHM and blend flags; `s`: ln(1 + z); `window`: the observed ln range.

    A line is measured when its series has an identified line, it is a primary line not
    identified itself, no more than `N_BEYOND` levels above the highest identified one, at
    least two FWHM inside the window, and no feature covers its position (within half
    that feature's FWHM, or 0.75 of the line's) unless the feature is a blob: a blend of
    predicted lines, `BLOB_WIDTHS` times broader than they are.  Its FWHM is the median
    of those of the (up to three) identified lines of its series nearest in level, blends
    left out where there are others, never below `min_fwhm`.

    Returns (candidate line indices, their FWHM, FWHM of every line, blob mask of the
    features).
    """
    line_x = np.asarray(line_x, float)
    obs = line_x + s
    n_lines = len(line_x)
    width = np.full(n_lines, np.nan)
    wanted = np.zeros(n_lines, bool)
    line_group = np.asarray(line_group)
    line_n = np.asarray(line_n)
    for g in np.unique(line_group[list(matched)]) if matched else []:
        js = [j for j in matched if line_group[j] == g]
        fi = np.array([matched[j] for j in js])
        nj = line_n[js]
        w_j = np.asarray(feat_w, float)[fi]
        clean = ~np.asarray(feat_blend, bool)[fi] & np.isfinite(w_j) & (w_j > 0)
        if not clean.any():
            clean = np.isfinite(w_j) & (w_j > 0)
        if not clean.any():
            continue
        members = np.flatnonzero(line_group == g)
        for j in members:
            near = np.argsort(np.abs(nj[clean] - line_n[j]))[:3]
            width[j] = max(float(np.median(w_j[clean][near])), min_fwhm)
        wanted[members] = primary[members] & (line_n[members] <= nj.max() + N_BEYOND)
    wanted[list(matched)] = False
    lo, hi = window
    wanted &= np.isfinite(width) & (obs - 2 * np.nan_to_num(width) > lo) & \
        (obs + 2 * np.nan_to_num(width) < hi)
    feat_x, feat_w = np.asarray(feat_x, float), np.asarray(feat_w, float)
    fw = np.where(np.isfinite(feat_w) & (feat_w > 0), feat_w, min_fwhm)
    # blobs: broad features spanning two predicted lines or more
    ref = np.nanmedian(width[np.isfinite(width)]) if np.isfinite(width).any() else min_fwhm
    inside = (np.abs(obs[None, :] - feat_x[:, None]) < fw[:, None] / 2) & np.isfinite(width)[None, :]
    blob = (fw > BLOB_WIDTHS * ref) & (inside.sum(axis=1) >= 2)
    cand = np.flatnonzero(wanted)
    if len(cand) and len(feat_x):
        d = np.abs(obs[cand][:, None] - feat_x[None, :])
        covered = (d < np.maximum(fw[None, :] / 2, 0.75 * width[cand][:, None])) & ~blob[None, :]
        cand = cand[~covered.any(axis=1)]
    return cand, width[cand], width, blob
