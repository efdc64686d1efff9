"""Joint profile fits of overlapping features, and the repairs of a blend's components.

Features closer than GROUP_SEP FWHM are fitted together (`profiles.fit_groups`);
crowded windows are refitted in Gauss-Seidel sweeps on the model of their
neighbours.  Components too wide for one line are split, and blended
components each too uncertain to keep are refitted as one line.
"""

import numpy as np

from .profiles import GAUSS_FWHM, GroupProblem, fit_groups

MAX_GROUP = 6


GROUP_SEP = 2.5      # features closer than this many FWHM are fitted jointly


def make_groups(feats):
    feats = sorted(feats, key=lambda f: f["px"])
    groups = []
    for f in feats:
        if groups and len(groups[-1]) < MAX_GROUP and \
                f["px"] - groups[-1][-1]["px"] < GROUP_SEP * max(f["fwhm_px"], groups[-1][-1]["fwhm_px"]):
            groups[-1].append(f)
        else:
            groups.append([f])
    return groups


def group_model(g, x, a, b):
    from scipy.special import voigt_profile

    out = np.zeros(b - a)
    for f in g:
        res = f.get("fit")
        if not res or not res["ok"] or not np.isfinite(res["center"]):
            continue
        s = res["fwhm"] / GAUSS_FWHM
        if res["profile"] == "gaussian":
            out += res["amplitude"] * np.exp(-0.5 * ((x[a:b] - res["center"]) / s) ** 2)
        else:
            out += res["flux"] * voigt_profile(x[a:b] - res["center"], res["gauss_fwhm"] / GAUSS_FWHM,
                                               res["lorentz_fwhm"] / 2)
    return out


def _touching(windows, hot):
    """Indices of windows that overlap any of the windows listed in `hot`."""
    if not hot:
        return []
    ha = np.array([windows[i][0] for i in hot])
    hb = np.array([windows[i][1] for i in hot])
    order = np.argsort(ha)
    ha, reach = ha[order], np.maximum.accumulate(hb[order])
    a = np.array([w_[0] for w_ in windows])
    b = np.array([w_[1] for w_ in windows])
    j = np.searchsorted(ha, b, side="left")            # hot windows starting before b
    hit = (j > 0) & (reach[np.maximum(j - 1, 0)] > a)
    return np.flatnonzero(hit).tolist()


def _colour_batches(ids, windows):
    """Split groups into batches whose windows do not overlap one another.

    Greedy colouring in order of window start (optimal for intervals): fitting
    the batches one after the other, each on the latest model of the others,
    is a Gauss-Seidel sweep, which settles overlapping neighbours where
    refitting all at once (Jacobi) would make them overcorrect each other."""
    colour_end = []            # last window end per colour
    batches = []
    for i in sorted(ids, key=lambda k: windows[k][0]):
        a, b = windows[i]
        for c, end in enumerate(colour_end):
            if end <= a:
                colour_end[c] = b
                batches[c].append(i)
                break
        else:
            colour_end.append(b)
            batches.append([i])
    return batches


BLEND_SEP = 1.5      # components closer than this many FWHM are flagged as a blend


COINCIDENT = 0.5     # components of opposite sign closer than this many FWHM shape one line


def _mark_blends(g):
    """Flag the components of a joint fit that lie within BLEND_SEP FWHM of another."""
    for f in g:
        f["blend"] = False
    fitted = [f for f in g if f["fit"] and np.isfinite(f["fit"]["center"])]
    for i, f in enumerate(fitted):
        for h in fitted[i + 1:]:
            width = max(f["fit"]["fwhm"], h["fit"]["fwhm"])
            if abs(f["fit"]["center"] - h["fit"]["center"]) < BLEND_SEP * width:
                f["blend"] = h["blend"] = True


def _fit_batch(batch, groups, windows, x, r, sig, good, dx, model, own, passes):
    """Fit the groups of one batch together; update `model` and `own` in place."""
    problems, fitted = [], []
    for i in batch:
        g = groups[i]
        a, b = windows[i]
        sel = np.arange(a, b)
        sel = sel[good[sel]]
        if len(sel) < 3 * len(g) + 3:
            for f in g:
                f["fit"] = None
            continue
        local_dx = float(np.median(dx[sel]))
        prev = [f.get("fit") for f in g]
        data = r[sel] - (model[sel] - own[i][sel - a]) if passes else r[sel]
        problems.append(GroupProblem(
            x[sel], data, sig[sel],
            [x[f["px"]] if not (passes and p and p["ok"]) else p["center"] for f, p in zip(g, prev)],
            [f["fwhm_px"] * local_dx / GAUSS_FWHM for f in g],
            [f["amp0"] for f in g], 0.25 * local_dx))
        fitted.append(i)
    for i, fits in zip(fitted, fit_groups(problems)):
        g = groups[i]
        a, b = windows[i]
        for f, res in zip(g, fits):
            f["fit"] = res
            if res["ok"] and np.isfinite(res["center"]):
                f["last_ok"] = res
            f["group"] = len(g)
        _mark_blends(g)
        new = group_model(g, x, a, b)
        model[a:b] += new - own.get(i, 0.0)
        own[i] = new


def fit_all_groups(groups, x, r, sig, good, lo, hi, dx, changed=None):
    """Fit every group; a second pass refits crowded ones with their neighbours' models subtracted.

    Groups are fitted in batches (`profiles.fit_groups`): all at once in the
    first pass, in batches of non-overlapping windows in the second, each on
    the data minus the latest model of the others (`_colour_batches`).  With `changed`
    (ids of features added since the last call), only groups that hold one of
    them or whose window touches such a group are refitted; the others keep
    their fits and enter the model as they are."""
    windows = []
    for g in groups:
        half = max(max(3 * f["fwhm_px"], f.get("reach_px", 0.0)) for f in g)
        for f in g:
            f["win_px"] = f["fwhm_px"]       # the width this fit's window was made for
        a = max(lo, int(min(f["px"] for f in g) - half) - 2)
        b = min(hi, int(max(f["px"] for f in g) + half) + 3)
        windows.append((a, b))
    model = np.zeros_like(r)
    todo = list(range(len(groups)))
    if changed is not None:
        hot = [i for i, g in enumerate(groups)
               if any(id(f) in changed for f in g) or any(f.get("fit") is None for f in g)]
        todo = _touching(windows, hot)
        todo_set = set(todo)
        for i in range(len(groups)):
            if i not in todo_set:
                a, b = windows[i]
                model[a:b] += group_model(groups[i], x, a, b)
    own = {}
    for passes in range(2):
        if passes == 1:
            # a window is crowded when it overlaps another (groups are ordered by pixel)
            a_arr = np.array([w_[0] for w_ in windows])
            b_arr = np.array([w_[1] for w_ in windows])
            order = np.argsort(a_arr, kind="stable")
            a_s, b_s = a_arr[order], b_arr[order]
            prev_end = np.concatenate([[-np.inf], np.maximum.accumulate(b_s)[:-1]])
            next_start = np.concatenate([np.minimum.accumulate(a_s[::-1])[::-1][1:], [np.inf]])
            hit = (a_s < prev_end) | (b_s > next_start)
            crowded = sorted(order[hit].tolist())
            if changed is not None:
                crowded = [i for i in crowded if i in todo_set]
            if not crowded:
                break
        else:
            crowded = todo
        batches = [crowded] if passes == 0 else _colour_batches(crowded, windows)
        for batch in batches:
            _fit_batch(batch, groups, windows, x, r, sig, good, dx, model, own, passes)
    return model


def sync_fits(feats, x, dx, sig):
    """Move candidates to their fitted centres and widths, and set how far they reach.

    The reach (pixels each side) is 3 FWHM for a Gaussian; for a Voigt profile
    it extends to where the Lorentzian wing, flux gamma / (pi d^2), falls to half
    the noise, so that the fit window, the model and the continuum's exclusion
    hold the whole of a Stark-broadened line."""
    n = len(x)
    for g in feats:
        fit = g["fit"]
        if fit and fit["ok"] and np.isfinite(fit["center"]):
            px = g["px"] = int(np.clip(np.searchsorted(x, fit["center"]), 0, n - 1))
            g["fwhm_px"] = max(fit["fwhm"] / dx[px], 1.0)   # local step: log grids vary
            g["amp0"] = fit["amplitude"]
            reach = 3.0 * g["fwhm_px"]
            if fit["profile"] == "voigt" and np.isfinite(sig[px]) and sig[px] > 0:
                wing = np.sqrt(abs(fit["flux"]) * fit["lorentz_fwhm"] / 2 / (np.pi * 0.5 * sig[px]))
                reach = max(reach, wing / dx[px])
            g["reach_px"] = float(min(reach, n / 4))


def split_wide(feats, x, r, sig, good, dx, fwhm_px, n, threshold):
    """Try two components where one wide component fits badly (an unresolved pair).

    The pair replaces the single component when it fits much better and each
    of its two parts would be kept as a feature on its own (S/N of at least
    half the detection threshold): a pair whose second part is noise only
    soaks up what a neighbour's model leaves, and the line would be lost.
    Returns the features that replaced a single one (empty when none did)."""
    changed = []
    for g in list(feats):
        fit = g["fit"]
        if not fit or g["group"] != 1 or not fit["ok"] or fit["chi2_red"] < 1.5:
            continue
        if g["fwhm_px"] < 1.6 * fwhm_px:
            continue
        half = 0.25 * g["fwhm_px"]
        a = {"px": int(max(0, g["px"] - half)), "fwhm_px": g["fwhm_px"] / 2, "snr_det": g["snr_det"],
             "amp0": fit["amplitude"], "fit": None, "group": 1}
        b = dict(a, px=int(min(n - 1, g["px"] + half)))
        lo = max(0, int(g["px"] - 3 * g["fwhm_px"]))
        hi = min(n, int(g["px"] + 3 * g["fwhm_px"]) + 1)
        sel = np.arange(lo, hi)
        sel = sel[good[sel]]
        if len(sel) < 12:
            continue
        chi_one = fit["chi2_red"] * max(len(sel) - 5, 1)
        trial = [a, b]
        fit_all_groups([trial], x, r, sig, good, 0, n, dx)
        if any(t["fit"] is None or not t["fit"]["ok"] or not t["fit"]["flux_err"] > 0
               or abs(t["fit"]["flux"]) < 0.5 * threshold * t["fit"]["flux_err"] for t in trial):
            continue
        chi_two = trial[0]["fit"]["chi2_red"] * max(len(sel) - 8, 1)
        if chi_one - chi_two > 10 + 3 * np.log(len(sel)):
            feats.remove(g)
            feats.extend(trial)
            changed.extend(trial)
    return changed


def merge_weak_blends(feats, x, r, sig, good, dx, n, fwhm_px, threshold):
    """Fit as one line the blended components that are each too uncertain to keep.

    A line whose profile is not quite a Gaussian (a saturated, flat-bottomed
    absorption line; a line with a weak neighbour) can end up fitted as two
    components a FWHM or so apart.  Such a pair is nearly degenerate: each part's
    flux error is large and neither passes `usable`, although their sum is
    measured well, and the line would be lost.  Runs of such components of one
    sign and comparable width, within `BLEND_SEP` FWHM of each other, are replaced
    by one component with their summed flux, flux-weighted centre and combined
    width, and refitted with their neighbours (the refit can leave a neighbouring
    pair too uncertain in its turn: the caller repeats this).  A dip and a bump of
    comparable width within `COINCIDENT` FWHM are merged too, starting from the
    stronger one's centre, the narrower width and the depth of their sum.  Returns the new model of all features, or None when
    nothing was merged."""
    def weak(f):
        fit = f.get("fit")
        if not fit or not np.isfinite(fit["center"]) or not np.isfinite(fit["flux"]):
            return False
        # a singular covariance (NaN errors: two components on one line, the extreme of
        # a degenerate pair) counts as too uncertain as well
        err = fit["flux_err"]
        return usable(fit, x, dx, n, fwhm_px, threshold) is None and \
            (err > 0 or not np.isfinite(err)) and x[0] <= fit["center"] <= x[-1]
    cands = sorted((f for f in feats if weak(f)), key=lambda f: f["fit"]["center"])
    runs, run = [], []
    for f in cands:
        if run:
            p = run[-1]["fit"]
            q = f["fit"]
            # comparable widths (a broad trough's component is no part of a line); of one
            # sign within BLEND_SEP of the narrower (no chains along a series limit), or of
            # opposite signs on one spot (a dip and a bump whose difference shapes one
            # line that is not Gaussian)
            narrow, wide = sorted((p["fwhm"], q["fwhm"]))
            reach = BLEND_SEP if np.sign(p["flux"]) == np.sign(q["flux"]) else COINCIDENT
            if wide < 2.5 * narrow and q["center"] - p["center"] < reach * narrow:
                run.append(f)
                continue
            if len(run) >= 2:
                runs.append(run)
        run = [f]
    if len(run) >= 2:
        runs.append(run)
    if not runs:
        return None
    merged = []
    for run in runs:
        flux = np.array([f["fit"]["flux"] for f in run])
        c = np.array([f["fit"]["center"] for f in run])
        s2 = np.array([f["fit"]["fwhm"] / GAUSS_FWHM for f in run]) ** 2
        if np.all(np.sign(flux) == np.sign(flux[0])):
            wgt = flux / flux.sum()
            centre = float(np.sum(wgt * c))
            width = float(np.sqrt(np.sum(wgt * (s2 + (c - centre) ** 2)))) * GAUSS_FWHM
            amp = float(flux.sum() / (width / GAUSS_FWHM * np.sqrt(2 * np.pi)))
        else:
            # mixed signs (a dip and a bump nearly cancelling, their sum a narrow core with
            # shoulders): the refit starts at the strongest one's place, with the narrowest
            # width and the depth of the sum there (their net flux can be near nothing)
            k = int(np.argmax(np.abs(flux)))
            centre, width = float(c[k]), float(np.sqrt(s2.min())) * GAUSS_FWHM
            amp = float(np.sum(flux / np.sqrt(2 * np.pi * s2) * np.exp(-0.5 * (centre - c) ** 2 / s2)))
        px = int(np.clip(np.searchsorted(x, centre), 0, n - 1))
        width_px = max(width / max(dx[px], 1e-300), 1.0)
        one = {"px": px, "fwhm_px": width_px, "snr_det": max(f["snr_det"] for f in run),
               "amp0": amp, "fit": None, "group": 1}
        for f in run:
            feats.remove(f)
        feats.append(one)
        merged.append(one)
    model = fit_all_groups(make_groups(feats), x, r, sig, good, 0, n, dx, changed={id(f) for f in merged})
    sync_fits(feats, x, dx, sig)
    return model


def usable(fit, x, dx, n, fwhm_px, threshold):
    """(fitted S/N, pixel, FWHM in pixels, distance from the edge) of a fit worth
    reporting, else None: not a single-pixel spike, centre inside the segment, S/N at
    least half the detection threshold."""
    if fit is None or not np.isfinite(fit["center"]):
        return None
    snr_fit = abs(fit["flux"]) / fit["flux_err"] if fit["flux_err"] > 0 else 0.0
    ipx = int(np.clip(np.searchsorted(x, fit["center"]), 0, n - 1))
    fpx = fit["fwhm"] / max(dx[ipx], 1e-300)     # in local pixels: log grids vary
    if (fpx < 0.8) or (fwhm_px >= 1.5 and fpx < 0.45 * fwhm_px):
        return None   # a single-pixel spike (cosmic ray, hot pixel)
    from_edge = min(ipx, n - 1 - ipx)
    if from_edge < 0.5 * fpx or fit["center"] < x[0] or fit["center"] > x[-1]:
        return None
    if snr_fit < 0.5 * threshold:
        return None
    return snr_fit, ipx, fpx, from_edge
