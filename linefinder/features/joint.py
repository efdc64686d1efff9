"""All features and the continuum in one linear least-squares fit.

The scale-space peaks (`scales.scale_peaks`) are each measured against a
baseline of their own window; where lines crowd, a window's baseline is
pulled by the neighbours and the stretch between two absorption lines reads
as emission.  Here every peak becomes a Gaussian of fixed centre and FWHM and
the continuum a cubic B-spline in ln(lambda), and all amplitudes and spline
coefficients are fitted together (weighted linear least squares).  A peak
whose joint amplitude is not significant, or changed sign, was explained by
its neighbours or by the continuum: it is dropped and the fit repeated.

The spline's knots are spaced `KNOT_FWHM` times the broadest feature's FWHM
(at least `MIN_KNOT_LN` in ln lambda): stiff enough that a line cannot be
taken into the continuum, free enough for a Balmer jump or a steep
ultraviolet rise over a few times that width.
"""

import numpy as np
from scipy.interpolate import BSpline

__all__ = ["fit_joint", "refine_centres", "KNOT_FWHM", "MIN_KNOT_LN"]

KNOT_FWHM = 3.0
MIN_KNOT_LN = 0.01     # 1 % in wavelength
GAUSS_FWHM = np.sqrt(8.0 * np.log(2.0))


def _spline_basis(u, spacing):
    lo, hi = float(u[0]), float(u[-1])
    m = max(int(np.ceil((hi - lo) / spacing)), 1)
    inner = np.linspace(lo, hi, m + 1)
    t = np.concatenate([[lo] * 3, inner, [hi] * 3])
    return BSpline.design_matrix(np.clip(u, lo, hi), t, 3).toarray()


def fit_joint(u, y, w, centres, fwhms, signs, *, snr=5.0, max_rounds=4, knot=None):
    """Joint fit of Gaussians (fixed centres and FWHM, units of u) and a spline continuum.

    `u` ascending grid, `y` flux, `w` inverse variances (0 = no data), `signs` +1 for
    emission and -1 for absorption as found.  Returns
    (kept indices, amplitudes, their 1-sigma errors, continuum on the grid).
    """
    centres = np.asarray(centres, float)
    fwhms = np.asarray(fwhms, float)
    signs = np.sign(np.asarray(signs, float))
    keep = np.arange(len(centres))
    sw = np.sqrt(np.maximum(w, 0.0))
    amp = err = np.zeros(0)
    cont = None
    for _ in range(max_rounds):
        broad = float(fwhms[keep].max()) if len(keep) else 0.0
        spacing = knot or max(KNOT_FWHM * broad, MIN_KNOT_LN)
        B = _spline_basis(u, spacing)
        sig = fwhms[keep] / GAUSS_FWHM
        # Gaussians cut at 4 sigma (their tails there are 3e-4 of the peak)
        d = (u[:, None] - centres[keep][None, :]) / sig[None, :]
        G = np.where(np.abs(d) < 4.0, np.exp(-0.5 * d * d), 0.0)
        A = np.hstack([G, B]) * sw[:, None]
        rhs = y * sw
        # columns scaled to unit norm for conditioning; a column the data do not reach is 0
        norm = np.sqrt(np.sum(A * A, axis=0))
        norm[norm == 0] = 1.0
        An = A / norm
        coef, *_ = np.linalg.lstsq(An, rhs, rcond=None)
        cov = _covariance(An)
        coef = coef / norm
        sd = np.sqrt(np.maximum(np.diag(cov), 0.0)) / norm
        k = len(keep)
        amp, err = coef[:k], sd[:k]
        cont = B @ coef[k:]
        with np.errstate(divide="ignore", invalid="ignore"):
            s = amp / err
        good = np.isfinite(s) & (np.abs(s) >= snr) & (np.sign(amp) == signs[keep])
        if good.all():
            break
        keep, amp, err = keep[good], amp[good], err[good]
        if not len(keep):
            break
    return keep, amp, err, cont


def _covariance(An):
    """(A^T A)^-1 through the SVD, zeroing directions the data do not constrain."""
    _, s, vt = np.linalg.svd(An, full_matrices=False)
    thresh = s.max() * 1e-10 if len(s) else 0.0
    inv = np.where(s > thresh, 1.0 / np.where(s > thresh, s, 1.0) ** 2, np.inf)
    inv = np.where(np.isfinite(inv), inv, 1e30)
    return (vt.T * inv) @ vt


def refine_centres(u, y, w, cont, centres, fwhms, amps, *, steps=2):
    """Centres of the jointly fitted Gaussians refined one by one, with their errors.

    Each line is fitted on the data less the continuum and the other lines, within
    +/- 2 FWHM, by a weighted linear fit of its Gaussian, the Gaussian's derivative in
    the centre and a constant (one Gauss-Newton step: the derivative's coefficient over
    the amplitude is the shift); `steps` steps, each held within half a sigma.  The
    error is that of the shift in the last step, from the fit's covariance.
    """
    centres = np.array(centres, float)
    fwhms = np.asarray(fwhms, float)
    amps = np.asarray(amps, float)
    err = np.full(len(centres), np.nan)
    sig = fwhms / GAUSS_FWHM

    def gauss(k):
        d = (u - centres[k]) / sig[k]
        return np.where(np.abs(d) < 4.0, amps[k] * np.exp(-0.5 * d * d), 0.0)

    model = sum((gauss(k) for k in range(len(centres))), np.zeros(len(u)))
    for k in range(len(centres)):
        lo, hi = np.searchsorted(u, [centres[k] - 2 * fwhms[k], centres[k] + 2 * fwhms[k]])
        if hi - lo < 5:
            continue
        uu, ww = u[lo:hi], w[lo:hi]
        own = gauss(k)[lo:hi]
        r = y[lo:hi] - cont[lo:hi] - (model[lo:hi] - own)
        for _ in range(steps):
            d = (uu - centres[k]) / sig[k]
            g = np.exp(-0.5 * d * d)
            A = np.column_stack([g, g * d, np.ones_like(g)]) * np.sqrt(ww)[:, None]
            try:
                cov = np.linalg.inv(A.T @ A)
            except np.linalg.LinAlgError:
                break
            a, b, _ = cov @ (A.T @ (r * np.sqrt(ww)))
            if not a or not np.isfinite(a):
                break
            shift = sig[k] * b / a
            err[k] = abs(sig[k] / a) * np.sqrt(max(cov[1, 1], 0.0))
            if abs(shift) > 0.5 * sig[k]:
                centres[k] += np.sign(shift) * 0.5 * sig[k]
            else:
                centres[k] += shift
    return centres, err
