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

from functools import partial

import numpy as np

from ..errors import SpectrumFormatError
from ..spectral.spectrum import prepare, segments
from .candidates import (
    exclusion,
    find_candidates,
    find_spikes,
    inflated_weights,
    new_features,
)
from .continuum import find_steps, robust_noise, snap_steps
from .continuum import fit_continuum as _fit_continuum
from .deblend import (
    fit_all_groups,
    group_model,
    make_groups,
    merge_weak_blends,
    split_wide,
    sync_fits,
    usable,
)
from .flags import Flag, has_flag
from .table import (
    EQUIVALENT_WIDTH_CONVENTION,
    FEATURE_COLUMNS,
    FeatureResult,
    feature_table,
)

__all__ = ["find_features", "FeatureResult", "FEATURE_COLUMNS", "EQUIVALENT_WIDTH_CONVENTION"]

DEFAULT_FWHM_PX = 3.0


def find_features(spec, *, snr=5.0, resolution=None, kinds=("emission", "absorption"),
                  knot_px=None, min_separation_px=None, detector="auto"):
    """Find and measure features; returns a `FeatureResult`.

    Parameters
    ----------
    spec : SpectrumData (prepared or not)
    snr : detection threshold in sigma (matched filter), default 5
    resolution : resolving power R; default from the file, else estimated
    kinds : which of "emission", "absorption" to report
    knot_px : continuum knot spacing in pixels (default: from the line widths)
    detector : "profiles" (this module: continuum, matched filter, profile fits),
        "scales" (`scale_detect`: scale-space scan and one joint linear fit), or "auto"
        (the default: the scan first, which is cheap; its result where the strong lines
        are broad (`scale_detect.is_broad`), where profile fits fail and are slow;
        otherwise the profile fits, which measure narrow lines best)
    """
    if detector not in ("auto", "profiles", "scales"):
        raise ValueError(f"unknown detector {detector!r}: 'auto', 'profiles' or 'scales'")
    if detector in ("auto", "scales"):
        from .scale_detect import find_features_scales, is_broad

        found = find_features_scales(spec, snr=snr, resolution=resolution, kinds=kinds)
        if detector == "scales" or is_broad(found):
            return found
        return find_features(spec, snr=snr, resolution=resolution, kinds=kinds,
                             knot_px=knot_px, min_separation_px=min_separation_px,
                             detector="profiles")
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
                      if f["group"] == 1 and f["snr"] > 10 and not has_flag(f["flags"], Flag.POOR_FIT)]
            estimated_widths.extend(narrow)
        cont_all[lo:hi] = cont
        rows.extend(seg_rows)
    if not R and len(estimated_widths) >= 3:
        est_px = float(np.median(estimated_widths))
        R = float(np.median(x_all / (est_px * np.abs(np.gradient(x_all)))))
        res_source = "estimated from the narrowest strong features"
        again = find_features(spec, snr=snr, resolution=R, kinds=kinds, knot_px=knot_px,
                              min_separation_px=min_separation_px, detector="profiles")
        again.features.meta["resolution_source"] = res_source
        again.meta["resolution_source"] = res_source
        return again
    table = feature_table(rows, spec, kinds)
    table.meta.update({"source": spec.source, "medium": spec.medium, "detector": "profiles",
                       "medium_source": spec.meta.get("medium_source"),
                       "unit": str(spec.axis.unit), "noise_source": noise_source,
                       "resolution": R, "resolution_source": res_source or "default 3-pixel FWHM",
                       "snr_threshold": snr, "eqw_convention": EQUIVALENT_WIDTH_CONVENTION,
                       "n_pixels": len(y_all), "n_masked": int(spec.mask.sum()),
                       "spike_pixels": spike_pixels})
    return FeatureResult(features=table, spectrum=spec, continuum=cont_all, noise=sig_all,
                         meta=dict(table.meta))


def _segment(x, y, sig, good, dx, fwhm_px, threshold, kinds, knot_px, offset, *, blue_first=True):
    n = len(y)
    w = np.where(good & np.isfinite(sig) & (sig > 0), 1.0 / np.where(sig > 0, sig, 1) ** 2, 0.0)
    base_knots = knot_px or max(40, 12 * fwhm_px)
    # first guess with wide knots, so that lines broader than the resolution element (galaxy
    # velocity widths at high R) are not absorbed before they are seen
    first_knots = max(base_knots, min(n / 10, 400))
    # continuum steps (a Lyman break, a badly joined order): the continuum may jump there
    # (kept where an emission line stands on one, or where nothing says it is a trough: see
    # `snap_steps`)
    steps = find_steps(y, sig, good, width_px=max(25, 10 * fwhm_px), gap_px=max(3, 2 * fwhm_px))
    fit_continuum = _fit_continuum
    cont, _ = fit_continuum(y, sig, good, knot_px=min(first_knots, max(n // 3, 8)))
    spikes = find_spikes(y, cont, sig, good, fwhm_px)
    if spikes.any():
        good = good & ~spikes
        w = np.where(spikes, 0.0, w)
    feats = []
    den_cache = {}      # matched-filter denominators for the weights w (keyed by id(w))
    # continuum and features refine each other: wide features push the knots apart
    for _ in range(2):
        feats = new_features(find_candidates(y - cont, w, fwhm_px, threshold, kinds, n, den_cache),
                             [])
        if not feats:
            break
        if len(steps):
            steps = snap_steps(steps, feats, max(25, 10 * fwhm_px), y, blue_first=blue_first)
            fit_continuum = partial(_fit_continuum, steps=steps)
        # widths from the matched-filter scale (within a factor ~1.4): no profile fits yet
        broad = [f for f in feats if f["amp0"] < 0 and f["fwhm_px"] > 6 * fwhm_px]
        if broad:
            # broad absorption (stellar Balmer lines): the continuum is the upper envelope,
            # with knots wider than the wings and clipping that is harder below than above
            exclude, _ = exclusion(broad, n, lambda f: f["fwhm_px"], half_widths=1.0)
            # (wider than the wings; an eighth of the segment at most, so that a long
            # spectrum with one broad line keeps a continuum that can follow it elsewhere)
            widest = max(f["fwhm_px"] for f in broad)
            knots = max(base_knots, 3.0 * widest, min(6.0 * widest, n / 8))
            cont, _ = fit_continuum(y, sig, good, knot_px=min(knots, max(n // 2, 8)),
                                    exclude=exclude, clip=(3.5, 1.5), iterations=20)
        else:
            exclude, longest = exclusion(feats, n, lambda f: f["fwhm_px"])
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
            split = split_wide(feats, x, rr, sig, good, dx, fwhm_px, n, threshold)
            if split:
                model = fit_all_groups(make_groups(feats), x, rr, sig, good, 0, n, dx,
                                       changed={id(f) for f in split})
                sync_fits(feats, x, dx, sig)
        # (inflated weights need a model: with none, the unfitted lines would inflate their
        # own local RMS and hide themselves)
        w_round = w if fresh else inflated_weights(rr, model, sig, good, w, feats)
        added = new_features(find_candidates(rr - model, w_round, fwhm_px, threshold, kinds, n,
                                             den_cache if w_round is w else None), feats + frozen)
        feats.extend(added)
        if not added:
            if split:
                continue
            break
        model = fit_all_groups(make_groups(feats), x, rr, sig, good, 0, n, dx,
                               changed=None if fresh else {id(f) for f in added})
        fresh = False
        sync_fits(feats, x, dx, sig)
        for _ in range(2):
            # a line found at a narrower kernel than its width was fitted in too small a
            # window, where its wings and the linear term trade off: refit in a window of
            # the fitted width
            grown = {id(f) for f in feats if f["fit"] and f["fit"]["ok"]
                     and f["fwhm_px"] > 1.5 * f.get("win_px", np.inf)}
            if not grown:
                break
            model = fit_all_groups(make_groups(feats), x, rr, sig, good, 0, n, dx, changed=grown)
            sync_fits(feats, x, dx, sig)
        voigt = [f for f in feats if f["fit"] and f["fit"]["ok"] and f["fit"]["profile"] == "voigt"]
        if voigt and not frozen:
            frozen = voigt
            fixed = sum(group_model([f], x, 0, n) for f in frozen)
            exclude, longest = exclusion(feats, n, lambda f: f["fwhm_px"], use_reach=False)
            knots = max(base_knots, 1.2 * longest)
            cont, _ = fit_continuum(y - fixed, sig, good, knot_px=min(knots, max(n // 2, 8)),
                                    exclude=exclude)
            r = y - cont
            feats, model, fresh = [], np.zeros(n), True
    for _ in range(3):     # three rounds at most
        remodel = merge_weak_blends(feats, x, r - fixed, sig, good, dx, n, fwhm_px, threshold) \
            if feats else None
        if remodel is None:
            break
        model = remodel
    if frozen:
        # the held features measured last, on the data less everything else found
        fit_all_groups(make_groups(frozen), x, r - model, sig, good, 0, n, dx)
        sync_fits(frozen, x, dx, sig)
        feats = feats + frozen
    rows = _rows(feats, x, dx, n, fwhm_px, threshold, good, cont, offset)
    return rows, cont, (np.flatnonzero(spikes) + offset).tolist()


def _rows(feats, x, dx, n, fwhm_px, threshold, good, cont, offset):
    """One row per usable feature of a segment: its fit, S/N, flags and equivalent width."""
    rows = []
    for g in feats:
        # the last fit, else (when it is unusable) the last converged one: a neighbour added
        # late, beside a series-limit trough, can drive a group's fit off, and the line is
        # then reported with its earlier fit (flagged poor_fit) rather than lost
        tries = [(g["fit"], False)]
        if g.get("last_ok") is not None and g.get("last_ok") is not g["fit"]:
            tries.append((g["last_ok"], True))
        for fit, refit_failed in tries:
            kept = usable(fit, x, dx, n, fwhm_px, threshold)
            if kept:
                break
        if not kept:
            continue
        snr_fit, ipx, fpx, from_edge = kept
        flags = []
        if g.get("blend"):
            flags.append(Flag.BLEND.value)
        if from_edge < 2 * fpx:
            flags.append(Flag.EDGE.value)
        a, b = max(0, int(ipx - fpx)), min(n, int(ipx + fpx) + 1)
        if not good[a:b].all():
            flags.append(Flag.MASKED.value)
        if (not fit["ok"]) or fit["chi2_red"] > 3 or not np.isfinite(fit["center_err"]) \
                or refit_failed:
            flags.append(Flag.POOR_FIT.value)
        if fit.get("at_bound"):
            flags.append(Flag.UNRESOLVED.value)
        c = float(np.interp(fit["center"], x, cont))
        equivalent_width = -fit["flux"] / c if c != 0 else np.nan
        equivalent_width_err = abs(fit["flux_err"] / c) if c != 0 else np.nan
        rows.append({**fit, "flags": ",".join(flags), "snr": snr_fit, "snr_det": g["snr_det"],
                     "kind": "emission" if fit["amplitude"] > 0 else "absorption",
                     "equivalent_width": equivalent_width,
                     "equivalent_width_err": equivalent_width_err, "continuum": c,
                     "pixel": ipx + offset,
                     "group": g["group"]})
    return rows
