"""Feature table of a spectrum from the scale-space scan and the joint fit.

Steps: noise (the file's, else a robust estimate with a floor of
`NOISE_FLOOR` of the local flux, see below); the scan of every width
(`scales.scan_scales`); its peaks (`scales.scale_peaks`); one joint linear
fit of all peaks and a spline continuum (`joint.fit_joint`), which drops the
peaks their neighbours or the continuum explain; rows with the same columns
as every feature table of the package.

Noise floor: a table without uncertainties (a standard-star flux table, a
composite, a model) is often smoother than its real errors; the scatter of
its pixel differences then makes every percent-level wiggle of the continuum
"significant".  Its noise is taken as the robust scatter combined in
quadrature with 1 % of the local flux level, a rule of this tool (flux tables
of standard stars are quoted to about a per cent; common practice).
"""

import numpy as np
from scipy.ndimage import median_filter

from ..spectral.spectrum import prepare
from .candidates import find_spikes
from .continuum import robust_noise
from .flags import Flag
from .joint import fit_joint, refine_centres
from .scales import GAUSS_FWHM, scale_peaks, scan_scales
from .table import EQUIVALENT_WIDTH_CONVENTION, FeatureResult, feature_table

__all__ = ["find_features_scales", "is_broad", "NOISE_FLOOR", "DEFAULT_FWHM_PX", "BROAD_KMS"]

NOISE_FLOOR = 0.01
# a spectrum's lines are broad (`is_broad`) when BROAD_COUNT of its BROAD_TOP strongest
# features (|S/N| >= BROAD_SNR) are wider than BROAD_KMS and BROAD_RESOLUTION resolution
# elements: pressure-
# and rotation-broadened stellar lines, quasar broad lines, galaxies' Balmer absorption.
# Rules of this tool, set by the observed and synthetic spectra side by side
# (docs/real-spectra.md)
BROAD_SNR = 10.0
BROAD_TOP = 5
BROAD_COUNT = 2
BROAD_KMS = 1000.0
BROAD_RESOLUTION = 5.0
C_KMS = 299792.458
DEFAULT_FWHM_PX = 2.5


def _noise(spec, y, good):
    if spec.uncertainty is not None:
        sig = spec.uncertainty.value.astype(float).copy()
        return sig, spec.meta.get("noise_source") or "file"
    sig = robust_noise(y, good)
    level = median_filter(np.abs(np.where(good, y, np.nan)), size=min(51, len(y) | 1),
                          mode="nearest")
    level = np.where(np.isfinite(level), level, 0.0)
    sig = np.hypot(sig, NOISE_FLOOR * level)
    return sig, ("estimated: 1.4826 MAD of pixel differences / sqrt(2), with a floor of "
                 f"{NOISE_FLOOR:.0%} of the local flux (no uncertainty in file)")


def find_features_scales(spec, *, snr=5.0, resolution=None, kinds=("emission", "absorption")):
    """Find and measure features by the scale-space scan; returns a `FeatureResult`."""
    spec = prepare(spec)
    x = spec.axis.value.astype(float)
    y = spec.flux.value.astype(float)
    good = ~spec.mask & np.isfinite(y)
    sig, noise_source = _noise(spec, y, good)
    good &= np.isfinite(sig) & (sig > 0)
    # the scan runs in ln(axis) (widths as fractions of the position, as resolution and
    # velocity set them); an axis that reaches zero or below (pixel numbers, offsets) is
    # scanned as it is
    log_axis = bool((x > 0).all())
    u = np.log(x) if log_axis else x
    du = np.diff(u)
    R = resolution or spec.meta.get("resolution")
    res_source = "option" if resolution else ("file" if R else None)
    fwhm_min = 1.0 / R if R and log_axis else DEFAULT_FWHM_PX * float(np.median(du))
    fwhm_px = fwhm_min / float(np.median(du))
    # single-pixel spikes against a running median (cosmic rays, hot pixels)
    k = max(int(4 * fwhm_px) | 1, 5)
    spikes = find_spikes(y, median_filter(np.where(good, y, np.nanmedian(y[good])), size=k,
                                          mode="nearest"), sig, good, fwhm_px)
    good &= ~spikes
    scan = scan_scales(u, y, sig, good, fwhm_min=fwhm_min,
                       **({} if log_axis else {"fwhm_max": np.inf}))
    peaks = scale_peaks(scan, snr=snr, kinds=kinds)
    if peaks:
        keep, amp, err, cont_g = fit_joint(scan.u, scan.y, scan.w, [p.u for p in peaks],
                                           [p.fwhm for p in peaks], [np.sign(p.snr) for p in peaks],
                                           snr=snr)
        centres, c_err = refine_centres(scan.u, scan.y, scan.w, cont_g,
                                        [peaks[i].u for i in keep], [peaks[i].fwhm for i in keep],
                                        amp)
    else:
        keep, amp, err = np.zeros(0, int), np.zeros(0), np.zeros(0)
        centres, c_err = np.zeros(0), np.zeros(0)
        cont_g = _baseline(scan)
    cont = np.interp(u, scan.u, cont_g)
    if not R and log_axis:
        narrow = [peaks[i].fwhm for i, a, e in zip(keep, amp, err)
                  if abs(a / e) > 10 and peaks[i].rung <= 2]
        if len(narrow) >= 3:
            R = 1.0 / float(np.median(narrow))
            res_source = "estimated from the narrowest strong features"
    rows = [_row(peaks[i], a, e, c, ce, scan, u, log_axis)
            for i, a, e, c, ce in zip(keep, amp, err, centres, c_err)]
    table = feature_table(rows, spec, kinds)
    table.meta.update({"source": spec.source, "medium": spec.medium,
                       "medium_source": spec.meta.get("medium_source"),
                       "unit": str(spec.axis.unit), "noise_source": noise_source,
                       "resolution": R, "resolution_source": res_source or
                       f"default {DEFAULT_FWHM_PX}-pixel FWHM",
                       "snr_threshold": snr, "eqw_convention": EQUIVALENT_WIDTH_CONVENTION,
                       "n_pixels": len(y), "n_masked": int(spec.mask.sum()),
                       "spike_pixels": np.flatnonzero(spikes).tolist(),
                       "detector": "scales", "log_axis": log_axis})
    return FeatureResult(features=table, spectrum=spec, continuum=cont, noise=sig,
                         meta=dict(table.meta), scan=scan)


def _baseline(scan):
    """Continuum with no features: the broadest rung's baseline, bridged over its edges."""
    b = scan.base[-1]
    ok = np.isfinite(b)
    if not ok.any():
        return np.full(len(scan.u), float(np.median(scan.y)))
    return np.interp(scan.u, scan.u[ok], b[ok])


def _row(p, a, e, centre_u, centre_err, scan, u_pix, log_axis=True):
    # in the axis unit: x = exp(u), dx = x du (or x = u on a linear scan)
    c_u = np.exp(centre_u) if log_axis else centre_u
    scale = c_u if log_axis else 1.0
    sig_u = p.fwhm / GAUSS_FWHM
    snr = a / e
    fwhm = scale * p.fwhm
    s = scale * sig_u
    flux = a * s * np.sqrt(2 * np.pi)
    rel_w = np.sqrt(2.0) / max(abs(snr), 1e-9)
    flux_err = abs(flux) * np.hypot(1.0 / max(abs(snr), 1e-9), rel_w)
    # the centre's error from its local fit (`refine_centres`); else that of a Gaussian of
    # known width in white noise, sqrt(2) sigma_g / SNR
    u_err = centre_err if np.isfinite(centre_err) else np.sqrt(2.0) * sig_u / max(abs(snr), 1e-9)
    j = int(np.clip(np.searchsorted(scan.u, centre_u), 0, len(scan.u) - 1))
    c = p.continuum
    flags = []
    if centre_u - 2 * p.fwhm < u_pix[0] or centre_u + 2 * p.fwhm > u_pix[-1]:
        flags.append(Flag.EDGE.value)
    lo, hi = np.searchsorted(scan.u, [centre_u - p.fwhm, centre_u + p.fwhm])
    if (scan.w[lo:hi] <= 0).any():
        flags.append(Flag.MASKED.value)
    if p.rung == 0:
        flags.append(Flag.UNRESOLVED.value)
    ew = -flux / c if c else np.nan
    return {"center": c_u, "center_err": scale * u_err,
            "fwhm": fwhm, "fwhm_err": fwhm * rel_w, "amplitude": a, "flux": flux,
            "flux_err": flux_err, "equivalent_width": ew,
            "equivalent_width_err": abs(flux_err / c) if c else np.nan,
            "snr": snr, "kind": "emission" if a > 0 else "absorption", "flags": ",".join(flags),
            "profile": "gaussian", "continuum": c, "chi2_red": np.nan,
            "pixel": int(np.searchsorted(u_pix, centre_u)), "grid_index": j}


def is_broad(result):
    """Are the strong lines of a scale-space feature result broad?  At least BROAD_COUNT of
    its BROAD_TOP strongest features (|S/N| >= BROAD_SNR), of one kind, are wider than
    BROAD_KMS and than BROAD_RESOLUTION resolution elements."""
    t = result.features
    if not len(t) or not result.meta.get("log_axis", True):
        return False
    snr = np.abs(np.asarray(t["snr"], float))
    top = np.argsort(-snr)[:BROAD_TOP]
    top = top[snr[top] >= BROAD_SNR]
    if not len(top):
        return False
    centre = np.abs(np.asarray(t["center"].value, float))
    fw = np.abs(np.asarray(t["fwhm"].to_value(t["center"].unit), float)) / centre
    R = result.meta.get("resolution")
    limit = max(BROAD_KMS / C_KMS, BROAD_RESOLUTION / R if R else 0.0)
    # of one kind: a step of the continuum (a Lyman break) reads as a broad pair of
    # opposite signs
    broad = fw[top] > limit
    sign = np.sign(np.asarray(t["snr"], float)[top])
    return max(int(np.sum(broad & (sign > 0))), int(np.sum(broad & (sign < 0)))) >= BROAD_COUNT
