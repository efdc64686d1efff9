"""Profile fits of one feature or a blended group: Gaussians, Voigt where the wings demand.

Model over a window of pixels: sum of components plus a linear term that
absorbs a small continuum error, fitted on residuals divided by the 1-sigma
noise: Gaussians by a Levenberg-Marquardt solver that works on many groups
at once, Voigt refits by scipy.optimize.least_squares; the covariance is (J^T J)^-1,
scaled up by the reduced chi^2 when that exceeds 1 (the noise or the
profile is then worse than assumed, and the errors say so).

Gaussian: A exp(-(x - mu)^2 / 2 s^2), FWHM = 2 sqrt(2 ln 2) s, flux = A s sqrt(2 pi).
Voigt: flux V(x - mu; s, g) with scipy.special.voigt_profile, FWHM from
Olivero & Longbothum 1977 (0.5346 fL + sqrt(0.2166 fL^2 + fG^2)).
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares
from scipy.special import voigt_profile, wofz

__all__ = ["fit_group", "fit_groups", "GroupProblem", "GAUSS_FWHM"]

GAUSS_FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))
MAX_VOIGT_COMPONENTS = 3    # larger blends stay Gaussian: a joint Voigt fit of more is ill-posed


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


@dataclass
class GroupProblem:
    """One window of continuum-subtracted data r(x) and the first guesses of its components.

    Positions and widths are in axis units; `widths` are Gaussian sigmas."""
    x: np.ndarray
    r: np.ndarray
    sigma: np.ndarray
    centers: list
    widths: list
    amplitudes: list
    min_sigma: float


def fit_group(x, r, sigma, centers, widths, amplitudes, *, min_sigma, try_voigt=True):
    """Fit components to continuum-subtracted data r(x) (one group; see `fit_groups`)."""
    return fit_groups([GroupProblem(x, r, sigma, list(centers), list(widths), list(amplitudes),
                                    min_sigma)], try_voigt=try_voigt)[0]


def fit_groups(problems, *, try_voigt=True):
    """Joint Gaussian fits of many groups at once; Voigt refits where the wings demand.

    Returns, per problem, a list of dicts, one per component, with center,
    center_err, fwhm, fwhm_err, amplitude, amplitude_err, flux, flux_err,
    profile, chi2_red, ok, at_bound.

    Groups of similar size are stacked into padded arrays and solved together
    by Levenberg-Marquardt (`_lm_batch`), so the cost of thousands of small
    fits is a few dozen array operations rather than thousands of solver calls.
    """
    out = [None] * len(problems)
    background = [None] * len(problems)
    buckets = {}
    for k, pr in enumerate(problems):
        ncomp = len(pr.centers)
        if len(pr.x) <= 3 * ncomp + 2:
            out[k] = [_failed(c) for c in pr.centers]
            continue
        size = 1 << int(np.ceil(np.log2(len(pr.x))))
        buckets.setdefault((ncomp, size), []).append(k)
    for (ncomp, size), ks in buckets.items():
        comps, bg = _gauss_bucket([problems[k] for k in ks], ncomp, size)
        for j, k in enumerate(ks):
            out[k], background[k] = comps[j], bg[j]
    _refit_without_runaways(problems, out, background)
    if try_voigt:
        for k, comps in enumerate(out):
            strong = any(abs(o["flux"]) > 20 * o["flux_err"] for o in comps
                         if np.isfinite(o["flux_err"]))
            # only where the Gaussians converged (a failed fit is no start for a harder one)
            # and misfit: chi^2 above its expectation by more than 3 of its own sigmas
            dof = max(len(problems[k].x) - 3 * len(comps) - 2, 1)
            excess = (comps[0]["chi2_red"] - 1.0) * np.sqrt(dof / 2.0)
            if background[k] is not None and comps[0]["ok"] and excess > 3.0 \
                    and len(comps) <= MAX_VOIGT_COMPONENTS \
                    and strong:
                v = _fit_voigt(problems[k], comps, background[k])
                if v is not None:
                    out[k] = v
    return out


def _runaway(comp, x):
    """A component that left its window or grew wider than it: its Gaussian is then a
    constant or a slope over the data, which the linear term already is, and the group's
    covariance is singular (a dip beside a saturated neighbour can run off this way)."""
    lo, hi = float(np.min(x)), float(np.max(x))
    return not (np.isfinite(comp["center"]) and lo <= comp["center"] <= hi
                and comp["fwhm"] <= hi - lo)


def _refit_without_runaways(problems, out, background):
    """Refit, without them, the groups that hold a runaway component (`_runaway`), from the
    other components' fitted values; the runaways are reported as failed fits.  Their
    degeneracy with the linear term would otherwise leave every line of the group without
    an error, and so unusable."""
    todo, kept = [], []
    for k, comps in enumerate(out):
        if comps is None or background[k] is None:
            continue
        pr = problems[k]
        keep = [i for i, c in enumerate(comps) if not _runaway(c, pr.x)]
        if len(keep) == len(comps) or not keep:
            continue
        todo.append(k)
        kept.append((keep, GroupProblem(
            pr.x, pr.r, pr.sigma, [comps[i]["center"] for i in keep],
            [comps[i]["fwhm"] / GAUSS_FWHM for i in keep], [comps[i]["amplitude"] for i in keep],
            pr.min_sigma)))
    if not todo:
        return
    refits = fit_groups([p for _, p in kept], try_voigt=False)
    for k, (keep, _), fits in zip(todo, kept, refits):
        comps = [_failed(float("nan")) for _ in out[k]]     # (a runaway has no place)
        for i, f in zip(keep, fits):
            comps[i] = f
        out[k] = comps
        background[k] = None       # (no Voigt refit from a partial fit)


def _gauss_bucket(probs, ncomp, size):
    """Fit a stack of groups with `ncomp` Gaussians each and at most `size` pixels."""
    G, P = len(probs), 3 * ncomp + 2
    xs = np.zeros((G, size))
    r = np.zeros((G, size))
    inv = np.zeros((G, size))            # 0 on padding: padded pixels carry no weight
    x0 = np.empty(G)
    m2 = np.empty(G)
    q0 = np.zeros((G, P))
    lo = np.empty(G)
    hi = np.empty(G)
    for g, pr in enumerate(probs):
        n = len(pr.x)
        x0[g] = float(np.mean(pr.x))
        xs[g, :n] = pr.x - x0[g]
        xs[g, n:] = xs[g, n - 1]
        r[g, :n] = pr.r
        inv[g, :n] = 1.0 / pr.sigma
        lo[g], hi[g] = xs[g, 0], xs[g, n - 1]
        m2[g] = pr.min_sigma ** 2
        for k, (c, s_, a) in enumerate(zip(pr.centers, pr.widths, pr.amplitudes)):
            s_ = max(float(s_), pr.min_sigma * 1.05)
            q0[g, 3 * k:3 * k + 3] = [float(a), float(c) - x0[g], np.sqrt(s_ * s_ - m2[g])]
    q, ok = _lm_batch(xs, r, inv, q0, m2, ncomp)
    p = _to_p(q, m2, ncomp)
    f, J = _gauss_fj(xs, r, inv, p, ncomp)
    npix = (inv > 0).sum(axis=1)
    chi2 = np.sum(f * f, axis=1)
    red = chi2 / np.maximum(npix - P, 1)
    cov = _batch_covariance(J) * np.maximum(red, 1.0)[:, None, None]
    centres = p[:, 1:3 * ncomp:3]
    ok &= np.all((centres >= lo[:, None]) & (centres <= hi[:, None]), axis=1)
    ok &= np.all(np.isfinite(p), axis=1)
    out = []
    for g in range(G):
        comps = []
        for k in range(ncomp):
            a, mu, s_ = p[g, 3 * k:3 * k + 3]
            c = cov[g, 3 * k:3 * k + 3, 3 * k:3 * k + 3]
            flux = a * s_ * np.sqrt(2 * np.pi)
            grad = np.array([s_, 0.0, a]) * np.sqrt(2 * np.pi)
            comps.append({"center": mu + x0[g], "center_err": np.sqrt(c[1, 1]),
                          "fwhm": GAUSS_FWHM * s_, "fwhm_err": GAUSS_FWHM * np.sqrt(c[2, 2]),
                          "amplitude": a, "amplitude_err": np.sqrt(c[0, 0]), "flux": flux,
                          "flux_err": np.sqrt(max(grad @ c @ grad, 0.0)), "profile": "gaussian",
                          "chi2_red": float(red[g]), "ok": bool(ok[g]),
                          "at_bound": bool(s_ * s_ < m2[g] * (1 + 1e-3) ** 2)})
        out.append(comps)
    return out, p[:, 3 * ncomp:]


def _to_p(q, m2, ncomp):
    """Widths sigma_k = sqrt(min_sigma^2 + t_k^2): above min_sigma without bounds."""
    p = q.copy()
    p[:, 2:3 * ncomp:3] = np.sqrt(m2[:, None] + q[:, 2:3 * ncomp:3] ** 2)
    return p


def _gauss_fj(xs, r, inv, p, ncomp):
    """Normalised residuals (G, N) and their Jacobian (G, N, P) in the natural parameters."""
    G, N = xs.shape
    J = np.empty((G, N, 3 * ncomp + 2))
    model = p[:, 3 * ncomp, None] + p[:, 3 * ncomp + 1, None] * xs
    for k in range(ncomp):
        a, mu, s_ = (p[:, 3 * k + j, None] for j in range(3))
        d = (xs - mu) / s_
        e = np.exp(-0.5 * d * d)
        model = model + a * e
        J[:, :, 3 * k] = e
        J[:, :, 3 * k + 1] = a * e * d / s_
        J[:, :, 3 * k + 2] = a * e * d * d / s_
    J[:, :, 3 * ncomp] = 1.0
    J[:, :, 3 * ncomp + 1] = xs
    return (model - r) * inv, J * inv[:, :, None]


def _lm_batch(xs, r, inv, q0, m2, ncomp, max_iter=100, ftol=1e-8, xtol=1e-8):
    """Levenberg-Marquardt on a stack of independent least-squares problems.

    Each problem keeps its own damping (Marquardt's diag(J^T J) scaling, the
    usual choice that makes steps invariant to parameter units), accepts a
    step only where it lowers chi^2, and stops by MINPACK's ftol/xtol rules;
    returns (q, converged).
    """
    G, P = q0.shape
    q = q0.copy()
    lam = np.full(G, 1e-3)
    active = np.ones(G, dtype=bool)
    conv = np.zeros(G, dtype=bool)
    wcols = slice(2, 3 * ncomp, 3)

    def fj(qq, idx):
        p = _to_p(qq, m2[idx], ncomp)
        f, J = _gauss_fj(xs[idx], r[idx], inv[idx], p, ncomp)
        J[:, :, wcols] *= (qq[:, wcols] / p[:, wcols])[:, None, :]
        return f, J

    f, J = fj(q, np.arange(G))
    cost = np.sum(f * f, axis=1)
    JtJ = np.einsum("gni,gnj->gij", J, J)
    Jtf = np.einsum("gni,gn->gi", J, f)
    eye = np.eye(P)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if not len(idx):
            break
        A = JtJ[idx]
        d = np.einsum("gii->gi", A)
        scale = np.maximum(d, 1e-30 * np.maximum(d.max(axis=1, keepdims=True), 1e-300))
        M = A + lam[idx, None, None] * scale[:, :, None] * eye
        try:
            step = -np.linalg.solve(M, Jtf[idx][:, :, None])[:, :, 0]
        except np.linalg.LinAlgError:
            step = np.stack([-np.linalg.lstsq(Mi, gi, rcond=None)[0] for Mi, gi in zip(M, Jtf[idx])])
        trial = q[idx] + step
        f_new, J_new = fj(trial, idx)
        c_new = np.sum(f_new * f_new, axis=1)
        better = np.isfinite(c_new) & (c_new <= cost[idx])
        # MINPACK's tests: actual and predicted relative reductions of chi^2 both at most
        # ftol, or a step that is small against the parameters (in the Jacobian's scaling)
        c_old = np.maximum(cost[idx], 1e-300)
        rel = np.where(better, (cost[idx] - c_new) / c_old, 0.0)
        pred = -(2.0 * np.einsum("gi,gi->g", step, Jtf[idx]) +
                 np.einsum("gi,gij,gj->g", step, A, step)) / c_old
        dn = np.sqrt(d)
        small_step = np.linalg.norm(dn * step, axis=1) <= xtol * (np.linalg.norm(dn * q[idx], axis=1)
                                                                    + xtol)
        acc = idx[better]
        q[acc] = trial[better]
        cost[acc] = c_new[better]
        JtJ[acc] = np.einsum("gni,gnj->gij", J_new[better], J_new[better])
        Jtf[acc] = np.einsum("gni,gn->gi", J_new[better], f_new[better])
        lam[acc] = np.maximum(lam[acc] / 3.0, 1e-12)
        rej = idx[~better]
        lam[rej] = lam[rej] * 4.0
        done = ((rel <= ftol) & (np.abs(pred) <= ftol)) | small_step
        conv[idx[done]] = True
        active[idx[done]] = False
        active[idx[~better][lam[rej] > 1e12]] = False      # no step helps: stuck
    return q, conv


def _batch_covariance(J):
    """(J^T J)^-1 from the SVD of each Jacobian, NaN where it is rank deficient."""
    G, N, P = J.shape
    cov = np.full((G, P, P), np.nan)
    try:
        _, sv, vt = np.linalg.svd(J, full_matrices=False)
    except np.linalg.LinAlgError:
        return cov
    thresh = np.finfo(float).eps * max(N, P) * sv[:, :1]
    full = np.all(sv > thresh, axis=1)
    with np.errstate(divide="ignore", over="ignore"):
        inv2 = np.where(sv > thresh, 1.0 / np.where(sv > thresh, sv, 1.0) ** 2, 0.0)
    c = np.einsum("gki,gk,gkj->gij", vt, inv2, vt)
    cov[full] = c[full]
    return cov


def _voigt_sum(xs, p, ncomp):
    out = p[4 * ncomp] + p[4 * ncomp + 1] * xs
    for k in range(ncomp):
        f, mu, s, g = p[4 * k:4 * k + 4]
        out = out + f * voigt_profile(xs - mu, s, g)
    return out


def _voigt_jac(xs, p, ncomp):
    """Analytic Jacobian of `_voigt_sum` from the Faddeeva function w(z).

    V = Re w(z) / (s sqrt(2 pi)) with z = (x - mu + i g) / (s sqrt 2), and
    w'(z) = -2 z w(z) + 2i / sqrt(pi) (Abramowitz & Stegun 7.1.20)."""
    J = np.empty((len(xs), len(p)))
    for k in range(ncomp):
        f, mu, s, g = p[4 * k:4 * k + 4]
        z = (xs - mu + 1j * g) / (s * np.sqrt(2.0))
        w = wofz(z)
        dw = -2.0 * z * w + 2.0j / np.sqrt(np.pi)
        norm = 1.0 / (s * np.sqrt(2.0 * np.pi))
        v = w.real * norm
        J[:, 4 * k] = v
        J[:, 4 * k + 1] = -f * dw.real * norm / (s * np.sqrt(2.0))
        J[:, 4 * k + 2] = f * ((dw * (-z / s)).real * norm - v / s)
        J[:, 4 * k + 3] = -f * dw.imag * norm / (s * np.sqrt(2.0))
    J[:, 4 * ncomp] = 1.0
    J[:, 4 * ncomp + 1] = xs
    return J


def _fit_voigt(pr, gauss, bg):
    """Refit a group with Voigt components; kept only if the BIC says the wings need it."""
    ncomp, min_sigma = len(gauss), pr.min_sigma
    x0 = float(np.mean(pr.x))
    xs, r, inv, npix = pr.x - x0, pr.r, 1.0 / pr.sigma, len(pr.x)
    red_gauss = gauss[0]["chi2_red"]
    p0, lo, hi = [], [], []
    for o in gauss:
        a, mu, s = o["amplitude"], o["center"] - x0, o["fwhm"] / GAUSS_FWHM
        p0 += [a * s * np.sqrt(2 * np.pi), mu, max(s * 0.7, min_sigma * 1.01), s * 0.5]
        lo += [-np.inf, xs[0], min_sigma, 0.0]
        hi += [np.inf, xs[-1], np.inf, np.inf]
    p0 += list(bg)
    lo += [-np.inf, -np.inf]
    hi += [np.inf, np.inf]

    def fun(p):
        return (_voigt_sum(xs, p, ncomp) - r) * inv

    def jac(p):
        return _voigt_jac(xs, p, ncomp) * inv[:, None]

    try:
        res = least_squares(fun, np.clip(p0, lo, hi), jac=jac, bounds=(lo, hi), x_scale="jac",
                            max_nfev=30 * len(p0))
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
