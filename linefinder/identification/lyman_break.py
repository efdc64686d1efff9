"""The continuum break blueward of Lyα: what names a lone emission line.

A source beyond z ~ 2 is seen through the Lyα forest of the intergalactic
medium: its continuum blueward of its own Lyα is depressed by the mean
transmission exp(-tau_eff), and by z ~ 6 it is gone (the Gunn-Peterson
trough).  An emission line with the continuum stepping down right at its
blue foot is therefore Lyα, where Hα, Hβ or a companion line would show the
same continuum on both sides.  This is how lone Lyα emitters are told from
other single-line sources in practice.

`mean_transmission` is the mean Lyα-forest transmission at the absorber
redshift, tau_eff = 0.0018 (1 + z)^3.92 (Faucher-Giguère et al. 2008, ApJ
681, 831, fitted over 2 < z < 4.2; coefficients recalled from memory),
extrapolated outside that range.  Single sightlines scatter about it, so it
sets expectations only.

`continuum_step` measures the ratio of the mean flux in a window blueward of
a line to the mean flux in a window redward of it, pixels of the line itself
and of other features left out, with its 1-sigma error from the flux
uncertainties.  Windows are 3 % in wavelength on each side (some 35 Å in
the rest frame of Lyα), wide enough to hold tens of resolution elements at
R >= 1000; the ratio over windows half as wide is measured too, and
`is_break` wants both low, so that a break a little way off is not taken for
one at the line: the Balmer jump 2.2 % blueward of [O II] 3727 lowers the
outer part of the blue window only, and the 4000 Å break lies redward of
[O II].
"""

import numpy as np

__all__ = ["break_reading", "LYA_REST_VACUUM_AA", "mean_transmission", "continuum_step", "is_break",
           "BREAK_RATIO", "BREAK_SIGMA", "CONTINUUM_SNR", "WINDOW_LN", "GAP_FWHM"]

# Lyα 1s-2p, vacuum, fine-structure weighted (NIST ASD, Kramida et al.; 1215.67 Å)
LYA_REST_VACUUM_AA = 1215.67
WINDOW_LN = 0.03          # each side of the line
GAP_FWHM = 3.0            # the line's own pixels: +/- this many FWHM
# a break is claimed when the blue/red flux ratio is below BREAK_RATIO by BREAK_SIGMA
# standard errors and the red continuum itself is detected at CONTINUUM_SNR: a power-law
# continuum (f_lambda ~ lambda^-2 ... lambda^+1) changes the ratio by under 4 % across the
# windows, the blue side higher for the blue continua of star-forming galaxies (rules of
# this tool)
BREAK_RATIO = 0.92
BREAK_SIGMA = 5.0
CONTINUUM_SNR = 8.0


def mean_transmission(z_abs):
    """Mean Lyα-forest transmission exp(-tau_eff(z)) at absorber redshift `z_abs` (0 or
    more; 1 at z <= 0)."""
    z_abs = np.asarray(z_abs, dtype=float)
    tau = 0.0018 * np.power(1.0 + np.clip(z_abs, 0.0, None), 3.92)
    return np.where(z_abs > 0, np.exp(-tau), 1.0)


def continuum_step(ln_lam, flux, sigma, center_ln, fwhm_ln, *, exclude=None, window=WINDOW_LN,
                   inner=True):
    """Blue/red mean-flux ratio about a line at `center_ln` (ln wavelength).

    `ln_lam`, `flux`, `sigma`: the spectrum's pixels (ln of wavelength, any
    flux unit, 1-sigma errors); `fwhm_ln`: the line's FWHM in ln(lambda);
    `exclude`: a boolean array of pixels to leave out (other features).
    Returns a dict with ``ratio``, ``ratio_err``, ``red_mean``, ``red_snr``,
    ``blue_mean`` and ``n_blue``/``n_red`` (pixels used), and with `inner` the
    same ratio over windows half as wide (``inner_ratio``, ``inner_ratio_err``,
    NaN where they are too short), or None when either window holds fewer than
    5 usable pixels.
    """
    ln_lam = np.asarray(ln_lam, dtype=float)
    flux = np.asarray(flux, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    good = np.isfinite(flux) & np.isfinite(sigma) & (sigma > 0)
    if exclude is not None:
        good &= ~np.asarray(exclude, bool)
    gap = GAP_FWHM * max(float(fwhm_ln), 0.0)
    d = ln_lam - center_ln
    blue = good & (d < -gap) & (d >= -gap - window)
    red = good & (d > gap) & (d <= gap + window)
    if blue.sum() < 5 or red.sum() < 5:
        return None

    def mean(sel):
        w = 1.0 / sigma[sel] ** 2
        return float(np.sum(w * flux[sel]) / np.sum(w)), float(1.0 / np.sqrt(np.sum(w)))

    mb, eb = mean(blue)
    mr, er = mean(red)
    out = {"ratio": np.nan, "ratio_err": np.nan, "red_mean": mr, "red_snr": mr / er,
           "blue_mean": mb, "n_blue": int(blue.sum()), "n_red": int(red.sum()),
           "inner_ratio": np.nan, "inner_ratio_err": np.nan}
    if mr > 0:
        out["ratio"] = float(mb / mr)
        out["ratio_err"] = float(np.hypot(eb, mb / mr * er) / mr)
    if inner:
        half = continuum_step(ln_lam, flux, sigma, center_ln, fwhm_ln, exclude=exclude,
                              window=window / 2, inner=False)
        if half is not None:
            out["inner_ratio"], out["inner_ratio_err"] = half["ratio"], half["ratio_err"]
    return out


def is_break(step):
    """True when a `continuum_step` result shows a significant drop blueward that starts
    at the line: the ratio below `BREAK_RATIO` by `BREAK_SIGMA` standard errors, and the
    half-width windows next to the line below it too (by 2 standard errors), so that a
    break a little way off (a Balmer jump beside [O II]) is not taken for it."""
    if not step or not np.isfinite(step["ratio"]) or step["red_snr"] < CONTINUUM_SNR:
        return False
    inner = step.get("inner_ratio", np.nan), step.get("inner_ratio_err", np.nan)
    return bool(step["ratio"] + BREAK_SIGMA * step["ratio_err"] < BREAK_RATIO
                and np.isfinite(inner[0]) and inner[0] + 2.0 * inner[1] < BREAK_RATIO)


def break_reading(pixels, R, cand, readings, y, fwhm_ln):
    """The continuum step at feature `cand` when it may be Lyα (a single-line reading) and
    the continuum drops blueward of it (`lyman_break.is_break`); a dict for the result's
    ``lyman_break`` (with the reading's ``z``), else None.  `pixels`: `spectral.axis.sorted_pixels`."""
    lya = [r for r in readings if r["label"] == "Lyα" and r["species"] == "H I"]
    if cand is None or not lya:
        return None
    ax, flux, sigma = pixels[:3]
    # (features much broader than the windows are left in: the trace of a continuum that
    # did not follow the step, not lines)
    others = fwhm_ln < WINDOW_LN / 3
    others[cand] = False
    # other features' pixels left out (+/- 2 FWHM; unknown widths: 3 resolution elements)
    half = 2.0 * np.where(fwhm_ln[others] > 0, fwhm_ln[others], 1.5 / R)
    yo = y[others]
    exclude = np.zeros(len(ax), bool)
    for a, b in zip(np.searchsorted(ax, yo - half), np.searchsorted(ax, yo + half)):
        exclude[a:b] = True
    width = float(fwhm_ln[cand]) or 1.0 / R
    step = continuum_step(ax, flux, sigma, float(y[cand]), width, exclude=exclude)
    if not is_break(step):
        return None
    zz = lya[0]["z"]
    gap = GAP_FWHM * width
    return {"z": zz, "ratio": step["ratio"], "ratio_err": step["ratio_err"],
            "continuum_snr": step["red_snr"], "blue_mean": step["blue_mean"],
            "red_mean": step["red_mean"],
            # the windows as ratios to the line's position: blue (lo, hi), red (lo, hi)
            "windows": [[float(np.exp(-gap - WINDOW_LN)), float(np.exp(-gap))],
                        [float(np.exp(gap)), float(np.exp(gap + WINDOW_LN))]],
            "expected_transmission": float(mean_transmission(zz)), "feature": int(cand)}
