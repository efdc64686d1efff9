"""Synthetic spectra with known answers, for the accuracy benchmarks and tests.

Everything here is invented data in scenarios of this project's own: narrow
emission-line sources and absorption systems at a redshift between 0 and 7,
seen by a spectrograph of resolving power 500-50 000 in the 3000-25 000 Å
window, with non-hydrogenic lines, night-sky residuals and cosmic-ray spikes
injected.  Emission sources are seen through the Lyα forest: their
continuum blueward of Lyα is depressed by the mean transmission of
`lyman_break.mean_transmission` (the Lyα forest only; the higher Lyman
series and the Lyman limit are left out).  Line positions come from
`build_catalogue` (vacuum); the other lines use rest wavelengths recalled
from the NIST ASD (vacuum Å, to the digits shown).

`make_spectrum` returns a `SpectrumData` and a truth dict.  Each line's
``snr`` in the truth is its matched-filter S/N, A/sigma * sqrt(sqrt(pi) s)
for a Gaussian of peak A and width s pixels on white noise sigma; ``crb``
is the Cramér-Rao bound of its centre in ln(lambda),
dlog * sigma/A * sqrt(2 s / sqrt(pi)), as if it were alone; the truth's
``crb_shift`` is the bound of ln(1+z) for the whole spectrum, overlaps
included (`_crb_shift`).
"""

import numpy as np
from astropy import units as u

from ..catalogue.build import build_catalogue
from ..catalogue.companions import COMPANION_LINES
from ..catalogue.contaminants import SKY_LINES_AIR
from ..catalogue.strengths import CASE_B_HBETA
from ..features.profiles import GAUSS_FWHM
from ..identification.lyman_break import LYA_REST_VACUUM_AA, mean_transmission
from ..spectral.doppler import C_KMS
from ..spectral.medium import air_to_vacuum
from ..spectral.spectrum import SpectrumData

__all__ = ["make_spectrum", "make_noise_spectrum", "random_parameters", "OTHER_LINES_VAC",
           "WINDOW_AA"]

WINDOW_AA = (3000.0, 25000.0)
MAX_PIXELS = 6000
PIXELS_PER_FWHM = 2.5

# non-hydrogenic lines (vacuum Å from `companions`, NIST ASD) and their flux relative to
# H-beta or Ly-alpha (ranges of this benchmark's invention, typical of star-forming galaxies
# and AGN)
_OTHER_FLUX = {
    "N V 1239": (0.02, 0.3), "N V 1243": (0.01, 0.15), "Si IV 1394": (0.02, 0.2),
    "C IV 1548": (0.05, 0.5), "C IV 1551": (0.03, 0.3), "C III] 1909": (0.03, 0.3),
    "Mg II 2796": (0.02, 0.2), "Mg II 2804": (0.01, 0.1), "[O II] 3727": (0.3, 2.0),
    "[O II] 3730": (0.3, 2.5), "[Ne III] 3869": (0.05, 0.6), "[O III] 4960": (0.2, 2.0),
    "[O III] 5008": (0.6, 6.0), "He I 5877": (0.05, 0.15), "[N II] 6550": (0.05, 0.5),
    "[N II] 6585": (0.15, 1.5), "[S II] 6718": (0.1, 0.6), "[S II] 6733": (0.08, 0.5),
    "[S III] 9071": (0.05, 0.3), "[S III] 9533": (0.1, 0.8),
}
OTHER_LINES_VAC = {name: (COMPANION_LINES[name][0], COMPANION_LINES[name][1], flux)
                   for name, flux in _OTHER_FLUX.items()}
# Lyman-series emission relative to Ly-alpha (invented, an IGM-attenuated emitter)
_LYMAN_EMISSION = {2: 1.0, 3: 0.08, 4: 0.03, 5: 0.015}
_H_LOWER = (1, 2, 3, 4)


def random_parameters(rng):
    """z (uniform 0-7), peak S/N (log-uniform 3-100), R (log-uniform 500-50 000), kind."""
    return {"z": float(rng.uniform(0.0, 7.0)),
            "snr": float(np.exp(rng.uniform(np.log(3.0), np.log(100.0)))),
            "resolution": float(np.exp(rng.uniform(np.log(500.0), np.log(50000.0)))),
            "kind": "emission" if rng.uniform() < 0.7 else "absorption"}


def _hydrogen_lines(z):
    cat = build_catalogue("H", (1, 4), (2, 30), z=z, wavelength_range=(WINDOW_AA[0] * u.AA,
                                                                        WINDOW_AA[1] * u.AA))
    return cat


def _emission_strength(nl, nu, rel):
    """Relative flux of an H I line: Case B where tabulated, else extended smoothly."""
    if nl == 1:
        return 30.0 * _LYMAN_EMISSION.get(nu, 0.0)   # Ly-alpha ~ 30 H-beta (Case B ~ 33)
    if (nl, nu) in CASE_B_HBETA:
        return CASE_B_HBETA[(nl, nu)]
    last = max((k for k in CASE_B_HBETA if k[0] == nl), key=lambda k: k[1])
    return CASE_B_HBETA[last] * rel[(nl, nu)] / rel[last]


def _grid(rng, lam_center, R, max_pixels=MAX_PIXELS):
    """Log-linear grid over a factor 2.8 in wavelength, or what `max_pixels` allow at R."""
    span = min(np.log(2.8), max_pixels / (PIXELS_PER_FWHM * R))
    lo = np.log(lam_center) - rng.uniform(0.1, 0.9) * span
    lo = np.clip(lo, np.log(WINDOW_AA[0]), np.log(WINDOW_AA[1]) - span)
    dlog = 1.0 / (PIXELS_PER_FWHM * R)
    n = int(span / dlog)
    return np.exp(lo + dlog * np.arange(n)), dlog


def _gauss(x, c, s):
    return np.exp(-0.5 * ((x - c) / s) ** 2)


def _add_contaminants(rng, lam, flux, dlog, truth, sigma):
    """Night-sky residuals (fixed observed wavelengths) and cosmic-ray spikes."""
    for name, air in SKY_LINES_AIR.items():
        vac = float(air_to_vacuum(air * u.AA).to_value(u.AA))
        if lam[0] < vac < lam[-1] and rng.uniform() < 0.6:
            amp = rng.choice([-1.0, 1.0]) * rng.uniform(4, 15) * sigma
            s_px = PIXELS_PER_FWHM / GAUSS_FWHM
            flux += amp * _gauss(np.log(lam), np.log(vac), s_px * dlog)
            truth["sky"].append({"name": name, "observed": vac, "amplitude": float(amp)})
    for _ in range(int(rng.integers(0, 4))):
        k = int(rng.integers(5, len(lam) - 5))
        flux[k] += rng.uniform(10, 50) * sigma
        truth["spikes"].append(float(lam[k]))


def make_spectrum(rng, *, z, snr, resolution, kind="emission", velocity_fwhm_kms=None,
                  contaminants=True, other_lines=True, max_pixels=MAX_PIXELS):
    """One synthetic spectrum and its truth (see the module docstring).

    The grid covers a factor 2.8 in wavelength (e.g. 3500-9800 Å, a survey
    spectrograph or a merged echelle) unless `max_pixels` at resolving power
    R limits it to less (the default keeps spectra small for tests).
    """
    R = float(resolution)
    cat = _hydrogen_lines(z)
    if kind == "absorption":
        # an absorption system: the Lyman series where it is in the window, else Balmer lines
        # (a star or a post-starburst galaxy)
        nl_all = np.asarray(cat["n_lower"])
        cat = cat[nl_all == (1 if np.any(nl_all == 1) else 2)]
    # observers point where lines are: the window is centred near a line chosen with a
    # preference for the strong ones (Ly-alpha, H-alpha, H-beta, Pa-alpha ...)
    rank = np.asarray(cat["n_upper"]) - np.asarray(cat["n_lower"])
    pref = 1.0 / rank ** 1.5
    anchor = cat[int(rng.choice(len(cat), p=pref / pref.sum()))]
    lam, dlog = _grid(rng, anchor["wavelength_vacuum"].to_value(u.AA), R, max_pixels)
    x = np.log(lam)
    sigma = 1.0
    vfwhm = velocity_fwhm_kms if velocity_fwhm_kms is not None else float(rng.uniform(0, 250))
    fwhm_ln = np.hypot(1.0 / R, vfwhm / C_KMS)
    s_ln = fwhm_ln / GAUSS_FWHM
    s_px = s_ln / dlog
    inside = [r for r in cat if lam[0] < r["wavelength_vacuum"].to_value(u.AA) < lam[-1]]
    truth = {"z": float(z), "kind": kind, "resolution": R, "snr_peak": float(snr), "lines": [],
             "other": [], "sky": [], "spikes": [], "velocity_fwhm_kms": vfwhm,
             "n_pixels": len(lam), "window": [float(lam[0]), float(lam[-1])]}
    rest = build_catalogue("H", (1, 4), (2, 30))
    rel = {(int(a), int(b)): float(c) for a, b, c in zip(rest["n_lower"], rest["n_upper"],
                                                          rest["rel_intensity"])}
    if kind == "emission":
        cont = 5.0 * (lam / lam[0]) ** rng.uniform(-1.5, 0.5)
        # the Lyα forest in front of the source: its continuum blueward of its Lyα is
        # depressed by the mean transmission at the absorbers' redshift (the lines are
        # left as they are: their strengths above are already those seen)
        z_abs = lam / LYA_REST_VACUUM_AA - 1
        cont = np.where(z_abs < z, cont * mean_transmission(z_abs), cont)
        strengths = [_emission_strength(int(r["n_lower"]), int(r["n_upper"]), rel)
                     for r in inside]
    else:
        cont = np.full(len(lam), 20.0)
        # saturated-ish absorption: depths fall slowly up the series (invented)
        strengths = [0.97 ** (int(r["n_upper"]) - int(r["n_lower"])) for r in inside]
    strengths = np.asarray(strengths, dtype=float)
    others = []
    if other_lines and kind == "emission":
        lyman = anchor["n_lower"] == 1
        for name, (rest_aa, band, (lo_f, hi_f)) in OTHER_LINES_VAC.items():
            obs = rest_aa * (1 + z)
            if not (lam[0] < obs < lam[-1]) or rng.uniform() < 0.3:
                continue
            # optical lines scale with H-beta (1), UV lines with Ly-alpha (30) in emitters
            base = 30.0 if (band == "uv" and lyman) else 1.0
            others.append((name, obs, base * np.exp(rng.uniform(np.log(lo_f), np.log(hi_f)))))
    norm = np.sqrt(np.sqrt(np.pi) * s_px)
    top = max([*strengths, *(o[2] for o in others), 0.0]) or 1.0
    amp_unit = snr * sigma / norm / top    # the strongest line in the window gets the S/N asked
    sign = 1.0 if kind == "emission" else -1.0
    if kind == "absorption":
        # absorption is multiplicative, F = C exp(-sum tau_i g_i): the strongest line is
        # depth_top deep at its centre, so overlapping lines below a series limit saturate
        # towards zero flux and never below it
        depth_top = float(rng.uniform(0.3, 0.95))
        cont = np.full(len(lam), amp_unit * top / depth_top)
    flux = cont.copy()
    tau = np.zeros(len(lam))
    for r, st in zip(inside, strengths):
        a = amp_unit * st
        if a <= 0:
            continue
        c = np.log(r["wavelength_vacuum"].to_value(u.AA))
        line = {"label": str(r["label"]), "species": "H I",
                "n_lower": int(r["n_lower"]), "n_upper": int(r["n_upper"]),
                "observed": float(np.exp(c)), "snr": float(a / sigma * norm),
                "crb": float(dlog * sigma / a * np.sqrt(2 * s_px / np.sqrt(np.pi))),
                "fwhm_ln": float(fwhm_ln), "kind": kind, "amplitude": float(sign * a)}
        if kind == "absorption":
            line["tau"] = float(-np.log1p(-a / cont[0]))   # central optical depth
            line["fwhm_obs_ln"] = _saturated_fwhm(line["tau"], s_ln)
            tau += line["tau"] * _gauss(x, c, s_ln)
        else:
            flux += a * _gauss(x, c, s_ln)
        truth["lines"].append(line)
    if kind == "absorption":
        flux = cont * np.exp(-tau)
        truth["continuum"] = float(cont[0])
    for name, obs, st in others:
        a = amp_unit * st
        flux += a * _gauss(x, np.log(obs), s_ln)
        truth["other"].append({"name": name, "observed": obs, "snr": float(a / sigma * norm),
                               "amplitude": float(a)})
    if contaminants:
        _add_contaminants(rng, lam, flux, dlog, truth, sigma)
    truth["crb_shift"] = _crb_shift(x, truth, s_ln, sigma)
    flux = flux + rng.normal(0.0, sigma, len(lam))
    spec = SpectrumData(axis=lam * u.AA, flux=flux * u.dimensionless_unscaled,
                        uncertainty=np.full(len(lam), sigma) * u.dimensionless_unscaled,
                        meta={"source": "synthetic", "medium": "vacuum", "medium_source": "synthetic",
                              "resolution": R})
    return spec, truth


def _saturated_fwhm(tau, s_ln):
    """FWHM (ln units) of the depth 1 - exp(-tau g) of a Gaussian optical-depth profile g
    of width s_ln: where the depth is half its central value.  Saturation broadens it
    beyond the Gaussian FWHM, to which it tends as tau -> 0."""
    g_half = -np.log1p(-0.5 * (1 - np.exp(-tau))) / tau
    return float(2 * s_ln * np.sqrt(-2 * np.log(g_half)))


def _crb_shift(x, truth, s_ln, sigma):
    """Cramér-Rao bound of the common shift ln(1+z) for this spectrum's own model.

    Parameters: the shift shared by the hydrogen lines, and per line a free
    amplitude (optical depth for absorption, whose profile is multiplicative) and
    width; the other lines and sky residuals with free
    amplitude, centre and width; a linear continuum term.  The bound is
    sqrt((F^-1)_ss) of the Fisher matrix F = J^T J / sigma^2 (white noise).
    Unlike the inverse-variance sum of the isolated-line bounds, it counts
    what overlapping lines cost: the bound a line-by-line fit can reach.
    """
    cols = []
    ds = np.zeros_like(x)
    absorbing = truth["kind"] == "absorption"
    # absorption, F = C exp(-T) with T = sum tau_i g_i: dF/dp = -F dT/dp for a line's
    # parameter p; emission adds amplitude a_i g_i to the continuum
    t_sum = np.zeros_like(x)
    for line in truth["lines"]:
        c = np.log(line["observed"])
        a = line["tau"] if absorbing else line["amplitude"]
        g = _gauss(x, c, s_ln)
        t_sum += a * g
        ds += a * g * (x - c) / s_ln ** 2
        cols += [g, a * g * (x - c) ** 2 / s_ln ** 3]
    if absorbing:
        f_line = -truth["continuum"] * np.exp(-t_sum)
        ds = ds * f_line
        cols = [col * f_line for col in cols]
    others = [(np.log(o["observed"]), o["amplitude"]) for o in truth["other"]]
    s_sky = PIXELS_PER_FWHM / GAUSS_FWHM * (x[1] - x[0])
    others += [(np.log(o["observed"]), o["amplitude"]) for o in truth["sky"]]
    for k, (c, a) in enumerate(others):
        w = s_ln if k < len(truth["other"]) else s_sky
        g = _gauss(x, c, w)
        cols += [g, a * g * (x - c) / w ** 2, a * g * (x - c) ** 2 / w ** 3]
    base = np.exp(-t_sum) if absorbing else np.ones_like(x)
    cols += [base, base * (x - x.mean())]
    J = np.column_stack([ds] + cols) / sigma
    keep = np.any(J != 0, axis=0)
    keep[0] = True
    J = J[:, keep]
    scale = np.linalg.norm(J, axis=0)
    scale[scale == 0] = 1.0
    F = (J / scale).T @ (J / scale)
    try:
        cov = np.linalg.pinv(F, rcond=1e-12, hermitian=True)
    except np.linalg.LinAlgError:
        return float("nan")
    return float(np.sqrt(max(cov[0, 0], 0.0)) / scale[0])


def make_noise_spectrum(rng, *, resolution, contaminants=True, max_pixels=MAX_PIXELS):
    """Pure noise on a flat continuum (with sky residuals and spikes if asked)."""
    R = float(resolution)
    lam, dlog = _grid(rng, float(np.exp(rng.uniform(np.log(3500.0), np.log(20000.0)))), R,
                      max_pixels)
    flux = np.full(len(lam), 5.0)
    truth = {"z": None, "kind": "noise", "resolution": R, "lines": [], "other": [], "sky": [],
             "spikes": [], "n_pixels": len(lam)}
    if contaminants:
        _add_contaminants(rng, lam, flux, dlog, truth, 1.0)
    flux = flux + rng.normal(0.0, 1.0, len(lam))
    spec = SpectrumData(axis=lam * u.AA, flux=flux * u.dimensionless_unscaled,
                        uncertainty=np.ones(len(lam)) * u.dimensionless_unscaled,
                        meta={"source": "synthetic-noise", "medium": "vacuum",
                              "medium_source": "synthetic", "resolution": R})
    return spec, truth
