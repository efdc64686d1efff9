"""Profile fits of one feature or a blended group: Gaussians, Voigt where the wings demand.

Model over a window of pixels: sum of components plus a linear term that
absorbs a small continuum error.  Fitted with scipy.optimize.least_squares
on residuals divided by the 1-sigma noise; the covariance is (J^T J)^-1,
scaled up by the reduced chi^2 when that exceeds 1 (the noise or the
profile is then worse than assumed, and the errors say so).

Gaussian: A exp(-(x - mu)^2 / 2 s^2), FWHM = 2 sqrt(2 ln 2) s, flux = A s sqrt(2 pi).
Voigt: flux V(x - mu; s, g) with scipy.special.voigt_profile, FWHM from
Olivero & Longbothum 1977 (0.5346 fL + sqrt(0.2166 fL^2 + fG^2)).
"""

import numpy as np
from scipy.optimize import least_squares
from scipy.special import voigt_profile

__all__ = ["fit_group", "GAUSS_FWHM"]

GAUSS_FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))


def _gauss(x, p, ncomp):
    out = p[3 * ncomp] + p[3 * ncomp + 1] * x
    for k in range(ncomp):
        a, mu, s = p[3 * k:3 * k + 3]
        out = out + a * np.exp(-0.5 * ((x - mu) / s) ** 2)
    return out


def _covariance(res, n_par, J=None):
    J = res.jac if J is None else J
    dof = max(len(res.fun) - n_par, 1)
    chi2 = float(np.sum(res.fun ** 2))
    try:
        _, svals, vt = np.linalg.svd(J, full_matrices=False)
        thresh = np.finfo(float).eps * max(J.shape) * svals[0]
        svals = svals[svals > thresh]
        vt = vt[:len(svals)]
        cov = (vt.T / svals ** 2) @ vt
        if len(svals) < n_par:
            cov = np.full((n_par, n_par), np.nan)
    except np.linalg.LinAlgError:
        cov = np.full((n_par, n_par), np.nan)
    red = chi2 / dof
    return cov * max(red, 1.0), red


def fit_group(x, r, sigma, centers, widths, amplitudes, *, min_sigma, try_voigt=True):
    """Fit components to continuum-subtracted data r(x).

    Parameters are in axis units; `widths` are initial Gaussian sigmas.
    Returns a list of dicts, one per component, with center, center_err,
    fwhm, fwhm_err, amplitude, amplitude_err, flux, flux_err, profile,
    chi2_red, ok.
    """
    ncomp = len(centers)
    x0 = float(np.mean(x))
    xs = x - x0
    inv = 1.0 / sigma
    # sigma_k = sqrt(min_sigma^2 + t_k^2) keeps every width above min_sigma without bounds, so
    # the fast Levenberg-Marquardt solver (MINPACK) applies; centres are checked afterwards
    q0 = []
    for c, s, a in zip(centers, widths, amplitudes):
        s = max(float(s), min_sigma * 1.05)
        q0 += [float(a), float(c) - x0, np.sqrt(s * s - min_sigma * min_sigma)]
    q0 += [0.0, 0.0]
    q0 = np.asarray(q0)
    m2 = min_sigma * min_sigma

    def to_p(q):
        p = q.copy()
        p[2:3 * ncomp:3] = np.sqrt(m2 + q[2:3 * ncomp:3] ** 2)
        return p

    def fun(q):
        return (_gauss(xs, to_p(q), ncomp) - r) * inv

    def jac_p(p):
        J = np.empty((len(xs), len(p)))
        for k in range(ncomp):
            a, mu, s = p[3 * k:3 * k + 3]
            d = (xs - mu) / s
            e = np.exp(-0.5 * d * d)
            J[:, 3 * k] = e
            J[:, 3 * k + 1] = a * e * d / s
            J[:, 3 * k + 2] = a * e * d * d / s
        J[:, 3 * ncomp] = 1.0
        J[:, 3 * ncomp + 1] = xs
        return J * inv[:, None]

    def jac(q):
        p = to_p(q)
        J = jac_p(p)
        J[:, 2:3 * ncomp:3] *= q[2:3 * ncomp:3] / p[2:3 * ncomp:3]
        return J

    if len(xs) <= len(q0):
        return [_failed(c) for c in centers]
    try:
        res = least_squares(fun, q0, jac=jac, method="lm", x_scale="jac", max_nfev=50 * len(q0),
                            ftol=1e-8, xtol=1e-8)
    except (ValueError, np.linalg.LinAlgError):
        return [_failed(c) for c in centers]
    p_fit = to_p(res.x)
    res.x = p_fit
    inside = np.all((p_fit[1:3 * ncomp:3] >= xs[0]) & (p_fit[1:3 * ncomp:3] <= xs[-1]))
    res.success = bool(res.success and inside and np.all(np.isfinite(p_fit)))
    cov, red = _covariance(res, len(q0), J=jac_p(p_fit))
    out = []
    for k in range(ncomp):
        a, mu, s = res.x[3 * k:3 * k + 3]
        c = cov[3 * k:3 * k + 3, 3 * k:3 * k + 3]
        flux = a * s * np.sqrt(2 * np.pi)
        grad = np.array([s, 0.0, a]) * np.sqrt(2 * np.pi)
        out.append({"center": mu + x0, "center_err": np.sqrt(c[1, 1]), "fwhm": GAUSS_FWHM * s,
                    "fwhm_err": GAUSS_FWHM * np.sqrt(c[2, 2]), "amplitude": a,
                    "amplitude_err": np.sqrt(c[0, 0]), "flux": flux,
                    "flux_err": np.sqrt(max(grad @ c @ grad, 0.0)), "profile": "gaussian",
                    "chi2_red": red, "ok": bool(res.success),
                    "at_bound": bool(s < min_sigma * (1 + 1e-3))})
    strong = any(abs(o["flux"]) > 20 * o["flux_err"] for o in out if np.isfinite(o["flux_err"]))
    if try_voigt and red > 2.0 and strong:
        v = _fit_voigt(xs, r, inv, res.x, ncomp, min_sigma, x0, red, len(r))
        if v is not None:
            out = v
    return out


def _voigt_sum(xs, p, ncomp):
    out = p[4 * ncomp] + p[4 * ncomp + 1] * xs
    for k in range(ncomp):
        f, mu, s, g = p[4 * k:4 * k + 4]
        out = out + f * voigt_profile(xs - mu, s, g)
    return out


def _fit_voigt(xs, r, inv, pg, ncomp, min_sigma, x0, red_gauss, npix):
    """Refit a group with Voigt components; kept only if the BIC says the wings need it."""
    p0, lo, hi = [], [], []
    for k in range(ncomp):
        a, mu, s = pg[3 * k:3 * k + 3]
        p0 += [a * s * np.sqrt(2 * np.pi), mu, max(s * 0.7, min_sigma * 1.01), s * 0.5]
        lo += [-np.inf, xs[0], min_sigma, 0.0]
        hi += [np.inf, xs[-1], np.inf, np.inf]
    p0 += list(pg[3 * ncomp:3 * ncomp + 2])
    lo += [-np.inf, -np.inf]
    hi += [np.inf, np.inf]

    def fun(p):
        return (_voigt_sum(xs, p, ncomp) - r) * inv

    try:
        res = least_squares(fun, np.clip(p0, lo, hi), bounds=(lo, hi), x_scale="jac",
                            max_nfev=400 * len(p0))
    except (ValueError, np.linalg.LinAlgError):
        return None
    chi2_v = float(np.sum(res.fun ** 2))
    chi2_g = red_gauss * max(npix - 3 * ncomp - 2, 1)
    if chi2_g - chi2_v < ncomp * (10.0 + np.log(npix)):   # BIC: the extra parameters must pay
        return None
    cov, red = _covariance(res, len(p0))
    out = []
    for k in range(ncomp):
        f, mu, s, g = res.x[4 * k:4 * k + 4]
        c = cov[4 * k:4 * k + 4, 4 * k:4 * k + 4]
        fg = GAUSS_FWHM * s
        fl = 2 * g
        root = np.sqrt(0.2166 * fl ** 2 + fg ** 2)
        fwhm = 0.5346 * fl + root
        grad_w = np.array([0.0, 0.0, GAUSS_FWHM * fg / root, 2 * (0.5346 + 0.2166 * fl / root)])
        peak = f * voigt_profile(0.0, s, g)
        out.append({"center": mu + x0, "center_err": np.sqrt(c[1, 1]), "fwhm": fwhm,
                    "fwhm_err": np.sqrt(max(grad_w @ c @ grad_w, 0.0)), "amplitude": peak,
                    "amplitude_err": abs(peak) * np.sqrt(c[0, 0]) / max(abs(f), 1e-300), "flux": f,
                    "flux_err": np.sqrt(c[0, 0]), "profile": "voigt", "chi2_red": red,
                    "ok": bool(res.success), "at_bound": False, "lorentz_fwhm": fl, "gauss_fwhm": fg})
    return out


def _failed(center):
    nan = float("nan")
    return {"center": center, "center_err": nan, "fwhm": nan, "fwhm_err": nan, "amplitude": nan,
            "amplitude_err": nan, "flux": nan, "flux_err": nan, "profile": "gaussian",
            "chi2_red": nan, "ok": False, "at_bound": False}
