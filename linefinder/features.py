"""Detect and measure emission and absorption features.

For each contiguous segment of a prepared spectrum:

1. noise from the file's uncertainty or `continuum.robust_noise`;
2. instrument FWHM in pixels from the resolving power R (file, option, or
   estimated from the narrowest strong features), FWHM = x / R;
3. a first continuum, then matched filtering of the residual with Gaussian
   kernels of 1, 2, 4, 8 and 16 instrument FWHM (SNR = sum(g w r) /
   sqrt(sum(g^2 w)), w = 1/sigma^2), candidates at local extrema above the
   threshold;
4. a second continuum with the candidates' pixels excluded and knots wider
   than the broadest of them, so broad lines keep their wings;
5. joint profile fits of overlapping candidates (`profiles.fit_groups`), then
   up to three more rounds of detection on the residual after the fitted
   model, which deblends close groups into their components;
6. rejection of single-pixel spikes (cosmic rays: fitted FWHM far below the
   instrument's) and of features at segment edges; flags for blends, edges,
   masked pixels and poor fits.
"""

import bisect
from dataclasses import dataclass, field
from functools import partial

import numpy as np
from astropy.table import QTable
from scipy.ndimage import correlate1d, maximum_filter1d
from scipy.signal import find_peaks, oaconvolve

from .continuum import find_steps, fit_continuum as _fit_continuum, robust_noise
from .errors import SpectrumFormatError
from .profiles import GAUSS_FWHM, GroupProblem, fit_groups
from .spectrum import prepare, segments

__all__ = ["find_features", "FeatureResult", "FEATURE_COLUMNS", "EQW_CONVENTION"]

FEATURE_COLUMNS = ["center", "center_err", "fwhm", "fwhm_err", "amplitude", "flux", "flux_err",
                   "eqw", "snr", "kind", "flags"]
EQW_CONVENTION = "W = integral of (1 - F/Fc): positive for absorption, negative for emission"
SCALES = (1, 2, 4, 8, 16, 32, 64)
DEFAULT_FWHM_PX = 3.0
MAX_GROUP = 6
GROUP_SEP = 2.5      # features closer than this many FWHM are fitted jointly


@dataclass
class FeatureResult:
    """Features of one spectrum with what was used to find them."""
    features: QTable
    spectrum: object
    continuum: np.ndarray
    noise: np.ndarray
    meta: dict = field(default_factory=dict)


def _smooth(v, k):
    if len(k) > 64 and len(v) > 4 * len(k):
        # long kernels: overlap-add FFT convolution (the kernel is symmetric, so this is the
        # same zero-padded correlation, at a cost that does not grow with the kernel)
        return oaconvolve(v, k, mode="same")
    return correlate1d(v, k, mode="constant")


def _matched_snr(r, w, fwhm_px, den_cache=None):
    sig = fwhm_px / GAUSS_FWHM
    half = int(np.ceil(3 * sig))
    k = np.exp(-0.5 * (np.arange(-half, half + 1) / sig) ** 2)
    num = _smooth(w * r, k)
    # the denominator depends on the weights only: reused while they stay the same
    key = (id(w), half)
    den = den_cache.get(key) if den_cache is not None else None
    if den is None:
        den = _smooth(w, k ** 2)
        if len(k) > 64 and len(r) > 4 * len(k):
            den[den < 1e-9 * max(float(den.max()), 1e-300)] = 0.0   # FFT round-off where w = 0
        if den_cache is not None:
            den_cache[key] = den
    with np.errstate(invalid="ignore", divide="ignore"):
        snr = np.where(den > 0, num / np.sqrt(den), 0.0)
        amp = np.where(den > 0, num / den, 0.0)
    return snr, amp


def _find_peaks(s, height, prominence, distance):
    """`scipy.signal.find_peaks` on the stretches of s above height - prominence only.

    A peak whose saddle towards every higher peak lies below that floor passes
    the prominence test whatever the exact saddle, so pixels below the floor
    can be replaced by zeros and long runs of them shortened to
    `distance` + 1 pixels: the peaks found, their order and the distance rule
    are unchanged, and a long noise spectrum costs a fraction of the time.
    """
    floor = max(height - prominence, 0.0)
    above = s > floor
    if above.mean() > 0.3:
        return find_peaks(np.where(above, s, 0.0), height=height, prominence=prominence,
                          distance=distance)[0]
    sep = int(np.ceil(distance)) + 1
    keep = maximum_filter1d(above.view(np.uint8), size=2 * (sep // 2 + 1) + 1).astype(bool)
    idx = np.flatnonzero(keep)
    sub = np.where(above[idx], s[idx], 0.0)
    peaks = find_peaks(sub, height=height, prominence=prominence, distance=distance)[0]
    return idx[peaks]


def _narrow_snr(near):
    """SNR of the narrower candidates a wide one would replace: the strongest, and in
    quadrature with it each further one that stands clear of all those already counted
    (gap over twice the wider kernel of the two), strongest first.  Peaks on one
    blended profile are not independent evidence; resolved lines below a series limit
    are, even beside a merged clump of the highest members."""
    counted = []
    for d in sorted(near, key=lambda d: -d[2]):
        if all(abs(d[0] - e[0]) > 2 * max(d[1], e[1]) for e in counted):
            counted.append(d)
    return float(np.sqrt(sum(d[2] ** 2 for d in counted)))


def _candidates(r, w, fwhm_px, threshold, kinds, n, den_cache=None):
    """Peaks of the matched-filter SNR at each kernel width, narrowest first.

    A peak at a wider kernel replaces the narrower ones it overlaps only when
    its SNR is 1.3 times theirs or more (a truly broad feature; narrow ones that
    stand clear of each other count together, in quadrature, so that a row of
    resolved lines below a series limit is not taken for one broad trough); otherwise
    neighbouring narrow lines keep their own identity (a Gaussian line up to
    about four kernel widths broad is still found at the narrow kernel, with
    >= 70 % of the optimal SNR, and the profile fit finds its real width).
    """
    accepted = []
    for scale in SCALES:
        f = fwhm_px * scale
        if f > n / 8 and scale > 1:
            break
        snr, amp = _matched_snr(r, w, f, den_cache)
        found = []
        for sign, kind in ((1, "emission"), (-1, "absorption")):
            if kind not in kinds:
                continue
            # prominence, not just height: a noise wiggle on the wing of a strong line is
            # high but not prominent; a real neighbour stands out of the saddle between them
            peaks = _find_peaks(sign * snr, threshold, max(3.0, 0.6 * threshold), max(1, f / 2))
            found.extend((int(p), f, abs(float(snr[p])), float(amp[p])) for p in peaks)
        found.sort(key=lambda c: -c[2])
        # accepted candidates kept sorted by pixel: the neighbours of a new one are found by
        # binary search within the widest possible reach (linear, not quadratic, in lines)
        pos = sorted((d[0], id(d), d) for d in accepted)
        widest = max((d[1] for d in accepted), default=0.0)
        for c in found:
            reach = 0.75 * max(c[1], widest)
            lo = bisect.bisect_left(pos, (c[0] - reach, -1))
            hi = bisect.bisect_right(pos, (c[0] + reach, float("inf")))
            near = [e[2] for e in pos[lo:hi] if abs(c[0] - e[2][0]) < 0.75 * max(c[1], e[2][1])]
            if not near:
                bisect.insort(pos, (c[0], id(c), c))
                widest = max(widest, c[1])
            elif all(np.sign(d[3]) == np.sign(c[3]) and d[1] < c[1] for d in near) and \
                    c[2] > 1.3 * _narrow_snr(near):
                gone = {id(d) for d in near}
                pos = [e for e in pos if e[1] not in gone]
                bisect.insort(pos, (c[0], id(c), c))
                widest = max(widest, c[1])
        accepted = [e[2] for e in pos]
    accepted.sort(key=lambda c: -c[2])
    return accepted


def _inflated_weights(r, model, sig, good, w, feats):
    """Weights for detection on the residual after the model.

    Where the model leaves structure (a profile that is not Gaussian), the
    local RMS of the normalised residual exceeds 1 and weights drop by its
    square: a new feature must stand out of what the model already fails to
    explain, not just out of the photon noise.
    """
    z = np.where(good & np.isfinite(sig) & (sig > 0), (r - model) / np.where(sig > 0, sig, 1), 0.0)
    widths = [f["fwhm_px"] for f in feats] or [5.0]
    win = int(max(5, 4 * np.median(widths)))
    from scipy.ndimage import uniform_filter1d

    rms = np.sqrt(uniform_filter1d(z ** 2, size=win, mode="nearest"))
    return w / np.maximum(rms, 1.0) ** 2


def _groups(feats):
    feats = sorted(feats, key=lambda f: f["px"])
    groups = []
    for f in feats:
        if groups and len(groups[-1]) < MAX_GROUP and \
                f["px"] - groups[-1][-1]["px"] < GROUP_SEP * max(f["fwhm_px"], groups[-1][-1]["fwhm_px"]):
            groups[-1].append(f)
        else:
            groups.append([f])
    return groups


def _group_model(g, x, a, b):
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
        new = _group_model(g, x, a, b)
        model[a:b] += new - own.get(i, 0.0)
        own[i] = new


def _fit_groups(groups, x, r, sig, good, lo, hi, dx, changed=None):
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
                model[a:b] += _group_model(groups[i], x, a, b)
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


def find_features(spec, *, snr=5.0, resolution=None, kinds=("emission", "absorption"),
                  knot_px=None, min_separation_px=None):
    """Find and measure features; returns a `FeatureResult`.

    Parameters
    ----------
    spec : SpectrumData (prepared or not)
    snr : detection threshold in sigma (matched filter), default 5
    resolution : resolving power R; default from the file, else estimated
    kinds : which of "emission", "absorption" to report
    knot_px : continuum knot spacing in pixels (default: from the line widths)
    """
    spec = prepare(spec)
    x_all = spec.axis.value
    y_all = spec.flux.value
    good_all = ~spec.mask
    if spec.uncertainty is not None:
        sig_all = spec.uncertainty.value.copy()
        noise_source = spec.meta.get("noise_source") or "file"
    else:
        sig_all = np.full(len(y_all), np.nan)
        noise_source = "estimated: 1.4826 MAD of pixel differences / sqrt(2) (no uncertainty in file)"
    res_source = "option" if resolution else None
    R = resolution or spec.meta.get("resolution")
    if R and not res_source:
        res_source = "file"
    segs = segments(spec)
    if not segs:
        raise SpectrumFormatError(f"{spec.source}: no contiguous stretch of valid pixels long enough")
    cont_all = np.full(len(y_all), np.nan)
    rows = []
    estimated_widths = []
    spike_pixels = []       # single-pixel spikes masked before the search (cosmic rays)
    for lo, hi in segs:
        y = y_all[lo:hi]
        x = x_all[lo:hi]
        good = good_all[lo:hi]
        if np.isfinite(sig_all[lo:hi]).any() and spec.uncertainty is not None:
            sig = np.where(np.isfinite(sig_all[lo:hi]), sig_all[lo:hi], np.inf)
        else:
            sig = robust_noise(y, good)
            sig_all[lo:hi] = sig
        dx = np.gradient(x)
        if R:
            fwhm_px = float(np.median(x / (R * dx)))
        else:
            fwhm_px = DEFAULT_FWHM_PX
        fwhm_px = max(fwhm_px, 1.0)
        # which way is blue along the pixels: wavelength rising, or frequency/energy falling
        blue_first = spec.is_wavelength == bool(x[-1] > x[0])
        seg_rows, cont, seg_spikes = _segment(x, y, sig, good, dx, fwhm_px, snr, kinds, knot_px, lo,
                                              blue_first=blue_first)
        spike_pixels.extend(seg_spikes)
        if not R:
            narrow = [f["fwhm"] / dx[f["pixel"] - lo] for f in seg_rows
                      if f["group"] == 1 and f["snr"] > 10 and "poor_fit" not in f["flags"]]
            estimated_widths.extend(narrow)
        cont_all[lo:hi] = cont
        rows.extend(seg_rows)
    if not R and len(estimated_widths) >= 3:
        est_px = float(np.median(estimated_widths))
        R = float(np.median(x_all / (est_px * np.abs(np.gradient(x_all)))))
        res_source = "estimated from the narrowest strong features"
        again = find_features(spec, snr=snr, resolution=R, kinds=kinds, knot_px=knot_px,
                              min_separation_px=min_separation_px)
        again.features.meta["resolution_source"] = res_source
        again.meta["resolution_source"] = res_source
        return again
    table = _table(rows, spec, cont_all, kinds)
    table.meta.update({"source": spec.source, "medium": spec.medium,
                       "medium_source": spec.meta.get("medium_source"),
                       "unit": str(spec.axis.unit), "noise_source": noise_source,
                       "resolution": R, "resolution_source": res_source or "default 3-pixel FWHM",
                       "snr_threshold": snr, "eqw_convention": EQW_CONVENTION,
                       "n_pixels": len(y_all), "n_masked": int(spec.mask.sum()),
                       "spike_pixels": spike_pixels})
    return FeatureResult(features=table, spectrum=spec, continuum=cont_all, noise=sig_all,
                         meta=dict(table.meta))


def _exclusion(feats, n, fallback, half_widths=2.5, use_reach=True):
    """Pixels to keep out of the continuum fit: +/- `half_widths` FWHM of every feature
    (or its reach, where that is wider and `use_reach`)."""
    exclude = np.zeros(n, dtype=bool)
    longest = 0
    for f in feats:
        fit = f.get("fit")
        width = f["fwhm_px"] if not (fit and np.isfinite(fit.get("fwhm", np.nan))) else \
            max(f["fwhm_px"], 1.0)
        reach = f.get("reach_px", 0.0) if use_reach else 0.0
        half = max(half_widths * width, reach) if fit else 1.5 * fallback(f)
        a, b = max(0, int(f["px"] - half)), min(n, int(f["px"] + half) + 1)
        exclude[a:b] = True
        longest = max(longest, b - a)
    return exclude, longest


def _new_feats(cands, feats):
    """Candidates not already represented by a feature (within 0.7 of the narrower width)."""
    known = sorted((g["px"], g["fwhm_px"]) for g in feats)
    widest = max((w_ for _, w_ in known), default=0.0)
    added = []
    for px, f, s, amp in cands:
        reach = 0.7 * max(f, widest)
        lo = bisect.bisect_left(known, (px - reach, -np.inf))
        hi = bisect.bisect_right(known, (px + reach, np.inf))
        if any(abs(px - p) < 0.7 * min(f, w_) for p, w_ in known[lo:hi]):
            continue
        added.append({"px": px, "fwhm_px": f, "snr_det": s, "amp0": amp, "fit": None, "group": 1})
        bisect.insort(known, (px, f))
        widest = max(widest, f)
    return added


def _sync(feats, x, dx, sig):
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


def _split_wide(feats, x, r, sig, good, dx, fwhm_px, n, threshold):
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
        _fit_groups([trial], x, r, sig, good, 0, n, dx)
        if any(t["fit"] is None or not t["fit"]["ok"] or not t["fit"]["flux_err"] > 0
               or abs(t["fit"]["flux"]) < 0.5 * threshold * t["fit"]["flux_err"] for t in trial):
            continue
        chi_two = trial[0]["fit"]["chi2_red"] * max(len(sel) - 8, 1)
        if chi_one - chi_two > 10 + 3 * np.log(len(sel)):
            feats.remove(g)
            feats.extend(trial)
            changed.extend(trial)
    return changed


SPIKE_SIGMA = 5.0


def _spikes(y, cont, sig, good, fwhm_px):
    """Single-pixel spikes (cosmic rays, hot or dead pixels), to be masked before the search.

    A pixel is a spike when it stands more than SPIKE_SIGMA sigma above (or
    below) both neighbours and its neighbours carry less than half of the
    share of its excess over the continuum that a line of the instrument's
    width would give them (exp(-1/2 s^2) of the peak, s the Gaussian sigma in
    pixels).  A line on which a spike lands keeps its other pixels.  Only on
    grids that sample the resolution element with 1.5 pixels or more: on
    coarser ones a narrow line and a spike look alike, and the fitted width
    decides afterwards (see `_segment`).
    """
    n = len(y)
    out = np.zeros(n, dtype=bool)
    if fwhm_px < 1.5 or n < 3:
        return out
    share = 0.5 * np.exp(-0.5 * (GAUSS_FWHM / fwhm_px) ** 2)
    e = np.where(good, y - cont, np.nan)
    with np.errstate(invalid="ignore"):
        for sign in (1.0, -1.0):
            v = sign * e
            left = np.concatenate([[np.nan], v[:-1]])
            right = np.concatenate([v[1:], [np.nan]])
            nb = np.fmax(left, right)           # the higher good neighbour
            out |= good & (v - nb > SPIKE_SIGMA * sig) & (nb < share * v) & np.isfinite(nb)
    return out


def _snap_steps(steps, feats, reach, y, *, blue_first=True):
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


def _merge_weak_blends(feats, x, r, sig, good, dx, n, fwhm_px, threshold):
    """Fit as one line the blended components that are each too uncertain to keep.

    A line whose profile is not quite a Gaussian (a saturated, flat-bottomed
    absorption line; a line with a weak neighbour) can end up fitted as two
    components a FWHM or so apart.  Such a pair is nearly degenerate: each part's
    flux error is large and neither passes `_usable`, although their sum is
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
        return _usable(fit, x, dx, n, fwhm_px, threshold) is None and \
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
    model = _fit_groups(_groups(feats), x, r, sig, good, 0, n, dx, changed={id(f) for f in merged})
    _sync(feats, x, dx, sig)
    return model


def _usable(fit, x, dx, n, fwhm_px, threshold):
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


def _segment(x, y, sig, good, dx, fwhm_px, threshold, kinds, knot_px, offset, *, blue_first=True):
    n = len(y)
    w = np.where(good & np.isfinite(sig) & (sig > 0), 1.0 / np.where(sig > 0, sig, 1) ** 2, 0.0)
    base_knots = knot_px or max(40, 12 * fwhm_px)
    # first guess with wide knots, so that lines broader than the resolution element (galaxy
    # velocity widths at high R) are not absorbed before they are seen
    first_knots = max(base_knots, min(n / 10, 400))
    # continuum steps (a Lyman break, a badly joined order): the continuum may jump there
    # (kept where an emission line stands on one, or where nothing says it is a trough: see
    # `_snap_steps`)
    steps = find_steps(y, sig, good, width_px=max(25, 10 * fwhm_px), gap_px=max(3, 2 * fwhm_px))
    fit_continuum = _fit_continuum
    cont, _ = fit_continuum(y, sig, good, knot_px=min(first_knots, max(n // 3, 8)))
    spikes = _spikes(y, cont, sig, good, fwhm_px)
    if spikes.any():
        good = good & ~spikes
        w = np.where(spikes, 0.0, w)
    feats = []
    den_cache = {}      # matched-filter denominators for the weights w (keyed by id(w))
    # continuum and features refine each other: wide features push the knots apart
    for _ in range(2):
        feats = _new_feats(_candidates(y - cont, w, fwhm_px, threshold, kinds, n, den_cache), [])
        if not feats:
            break
        if len(steps):
            steps = _snap_steps(steps, feats, max(25, 10 * fwhm_px), y, blue_first=blue_first)
            fit_continuum = partial(_fit_continuum, steps=steps)
        # widths from the matched-filter scale (within a factor ~1.4): no profile fits yet
        broad = [f for f in feats if f["amp0"] < 0 and f["fwhm_px"] > 6 * fwhm_px]
        if broad:
            # broad absorption (stellar Balmer lines): the continuum is the upper envelope,
            # with knots wider than the wings and clipping that is harder below than above
            exclude, _ = _exclusion(broad, n, lambda f: f["fwhm_px"], half_widths=1.0)
            # (wider than the wings; an eighth of the segment at most, so that a long
            # spectrum with one broad line keeps a continuum that can follow it elsewhere)
            widest = max(f["fwhm_px"] for f in broad)
            knots = max(base_knots, 3.0 * widest, min(6.0 * widest, n / 8))
            cont, _ = fit_continuum(y, sig, good, knot_px=min(knots, max(n // 2, 8)),
                                    exclude=exclude, clip=(3.5, 1.5), iterations=20)
        else:
            exclude, longest = _exclusion(feats, n, lambda f: f["fwhm_px"])
            # knots tied to the widths the lines actually have (velocity widths can be many
            # resolution elements): a spline that can follow a line eats the undetected ones
            typical = float(np.median([f["fwhm_px"] for f in feats]))
            knots = max(base_knots, 12 * typical, 1.2 * longest)
            cont, _ = fit_continuum(y, sig, good, knot_px=min(knots, max(n // 3, 8)), exclude=exclude)
    r = y - cont
    feats = []
    model = np.zeros(n)
    # Voigt features (Stark-broadened lines) are held fixed over the whole segment while
    # the continuum and the other features are found again: their Lorentzian wings reach
    # far beyond any window and would otherwise bend the continuum and seed false features
    frozen, fixed = [], np.zeros(n)
    fresh = True      # no model yet (first round, or just after the Voigt lines were frozen)
    for round_ in range(5):
        rr = r - fixed
        split = []
        if not fresh:
            # a wide single component that fits badly is tried as a pair first: its residual
            # would otherwise seed spurious neighbours of the opposite sign
            split = _split_wide(feats, x, rr, sig, good, dx, fwhm_px, n, threshold)
            if split:
                model = _fit_groups(_groups(feats), x, rr, sig, good, 0, n, dx,
                                    changed={id(f) for f in split})
                _sync(feats, x, dx, sig)
        # (inflated weights need a model: with none, the unfitted lines would inflate their
        # own local RMS and hide themselves)
        w_round = w if fresh else _inflated_weights(rr, model, sig, good, w, feats)
        added = _new_feats(_candidates(rr - model, w_round, fwhm_px, threshold, kinds, n,
                                       den_cache if w_round is w else None), feats + frozen)
        feats.extend(added)
        if not added:
            if split:
                continue
            break
        model = _fit_groups(_groups(feats), x, rr, sig, good, 0, n, dx,
                            changed=None if fresh else {id(f) for f in added})
        fresh = False
        _sync(feats, x, dx, sig)
        for _ in range(2):
            # a line found at a narrower kernel than its width was fitted in too small a
            # window, where its wings and the linear term trade off: refit in a window of
            # the fitted width
            grown = {id(f) for f in feats if f["fit"] and f["fit"]["ok"]
                     and f["fwhm_px"] > 1.5 * f.get("win_px", np.inf)}
            if not grown:
                break
            model = _fit_groups(_groups(feats), x, rr, sig, good, 0, n, dx, changed=grown)
            _sync(feats, x, dx, sig)
        voigt = [f for f in feats if f["fit"] and f["fit"]["ok"] and f["fit"]["profile"] == "voigt"]
        if voigt and not frozen:
            frozen = voigt
            fixed = sum(_group_model([f], x, 0, n) for f in frozen)
            exclude, longest = _exclusion(feats, n, lambda f: f["fwhm_px"], use_reach=False)
            knots = max(base_knots, 1.2 * longest)
            cont, _ = fit_continuum(y - fixed, sig, good, knot_px=min(knots, max(n // 2, 8)),
                                    exclude=exclude)
            r = y - cont
            feats, model, fresh = [], np.zeros(n), True
    for _ in range(3):     # three rounds at most
        remodel = _merge_weak_blends(feats, x, r - fixed, sig, good, dx, n, fwhm_px, threshold) \
            if feats else None
        if remodel is None:
            break
        model = remodel
    if frozen:
        # the held features measured last, on the data less everything else found
        _fit_groups(_groups(frozen), x, r - model, sig, good, 0, n, dx)
        _sync(frozen, x, dx, sig)
        feats = feats + frozen
    rows = []
    for g in feats:
        # the last fit, else (when it is unusable) the last converged one: a neighbour added
        # late, beside a series-limit trough, can drive a group's fit off, and the line is
        # then reported with its earlier fit (flagged poor_fit) rather than lost
        tries = [(g["fit"], False)]
        if g.get("last_ok") is not None and g.get("last_ok") is not g["fit"]:
            tries.append((g["last_ok"], True))
        for fit, refit_failed in tries:
            kept = _usable(fit, x, dx, n, fwhm_px, threshold)
            if kept:
                break
        if not kept:
            continue
        snr_fit, ipx, fpx, from_edge = kept
        flags = []
        if g.get("blend"):
            flags.append("blend")
        if from_edge < 2 * fpx:
            flags.append("edge")
        a, b = max(0, int(ipx - fpx)), min(n, int(ipx + fpx) + 1)
        if not good[a:b].all():
            flags.append("masked")
        if (not fit["ok"]) or fit["chi2_red"] > 3 or not np.isfinite(fit["center_err"]) \
                or refit_failed:
            flags.append("poor_fit")
        if fit.get("at_bound"):
            flags.append("unresolved")
        c = float(np.interp(fit["center"], x, cont))
        eqw = -fit["flux"] / c if c != 0 else np.nan
        eqw_err = abs(fit["flux_err"] / c) if c != 0 else np.nan
        rows.append({**fit, "flags": ",".join(flags), "snr": snr_fit, "snr_det": g["snr_det"],
                     "kind": "emission" if fit["amplitude"] > 0 else "absorption",
                     "eqw": eqw, "eqw_err": eqw_err, "continuum": c, "pixel": ipx + offset,
                     "group": g["group"]})
    return rows, cont, (np.flatnonzero(spikes) + offset).tolist()


def _table(rows, spec, cont_all, kinds):
    unit = spec.axis.unit
    fu = spec.flux.unit
    rows = [r for r in rows if r["kind"] in kinds]
    rows.sort(key=lambda r: r["center"])
    t = QTable()
    col = lambda k: np.array([r[k] for r in rows], dtype=float)  # noqa: E731
    t["center"] = col("center") * unit
    t["center_err"] = col("center_err") * unit
    t["fwhm"] = col("fwhm") * unit
    t["fwhm_err"] = col("fwhm_err") * unit
    t["amplitude"] = col("amplitude") * fu
    t["flux"] = col("flux") * fu * unit
    t["flux_err"] = col("flux_err") * fu * unit
    t["eqw"] = col("eqw") * unit
    t["eqw_err"] = col("eqw_err") * unit
    t["snr"] = col("snr")
    t["kind"] = np.array([r["kind"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["flags"] = np.array([r["flags"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["profile"] = np.array([r["profile"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["continuum"] = col("continuum") * fu
    t["chi2_red"] = col("chi2_red")
    t["pixel"] = np.array([r["pixel"] for r in rows], dtype=int)
    return t
