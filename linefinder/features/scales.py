"""Features at every width: a matched filter with a local baseline, in scale space.

At every position of a uniform ln(wavelength) grid and for every FWHM of a
geometric ladder (from the instrument's resolution up to ~10^4 km/s), the
spectrum within +/- `WINDOW` FWHM is fitted by weighted linear least squares
with a Gaussian of that FWHM on a straight baseline,

    y(t) = a g(t) + b + c t.

The amplitude a, its 1-sigma error (from the inverse normal matrix) and the
baseline level b follow from nine running weighted sums, each a correlation
of the weights (or weights x flux) with a fixed kernel, so the whole ladder
costs a few dozen FFT convolutions whatever the number or width of the lines.
The baseline is local, so no global continuum is needed: Balmer jumps, steep
ultraviolet rises and flux ranges of several decades leave a straight
baseline over one window, not a feature.  A line is then a peak of |a/err|
in position and width (the matched width gives the largest signal-to-noise),
kept unless a stronger feature of the same sign and broader width contains it
(the narrow responses along a broad line's profile are that line, not others);
features of opposite sign are independent (emission filling an absorption
trough).

Pixels are spread on the grid by linear interpolation, with weights scaled by
the pixel density (grid step / pixel step), so that oversampled stretches do
not count as more independent data than they hold.  The measured values
(position, FWHM, amplitude, continuum level) are those of the best-fitting
ladder rung refined by parabolic interpolation; their errors follow from the
linear fit (amplitude) and the Fisher information of a Gaussian (centre:
sqrt(2) sigma_g / SNR, the standard result for a Gaussian of known width and
white noise).
"""

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import maximum_filter1d
from scipy.signal import oaconvolve

__all__ = ["ScaleScan", "scan_scales", "scale_peaks", "WINDOW", "LADDER_RATIO", "MAX_FWHM_LN"]

# half-width of the local fit, in FWHM of the trial Gaussian: the Gaussian is 1/512 of its
# peak at 2.5 FWHM, so 3 FWHM leaves half a FWHM of baseline on each side
WINDOW = 3.0
# trial FWHM ratio from one rung to the next: a Gaussian filtered with a Gaussian sqrt(2)
# too narrow or too broad keeps 94 % of the matched signal-to-noise
LADDER_RATIO = 2 ** 0.5
# broadest trial FWHM, in ln(lambda): 0.035 ~ 10 500 km/s (quasar broad lines, white-dwarf
# Balmer lines: a few hundred Angstrom at Halpha)
MAX_FWHM_LN = 0.035
GAUSS_FWHM = np.sqrt(8.0 * np.log(2.0))


@dataclass
class ScaleScan:
    """Amplitude, error and baseline of the local Gaussian fit at every grid point and width."""
    u: np.ndarray          # grid, ln(axis value), ascending
    fwhm: np.ndarray       # trial FWHM per rung, in units of u
    amp: np.ndarray        # (rungs, grid) fitted peak amplitude
    err: np.ndarray        # (rungs, grid) its 1-sigma error (inf where the window lacks data)
    base: np.ndarray       # (rungs, grid) fitted baseline at the centre
    y: np.ndarray          # flux on the grid
    w: np.ndarray          # inverse variance on the grid, scaled by the pixel density

    @property
    def snr(self):
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(np.isfinite(self.err) & (self.err > 0), self.amp / self.err, 0.0)


def _grid(u, y, sigma, good, max_points):
    """Uniform grid over u with flux and density-scaled inverse variance."""
    ok = good & np.isfinite(y) & np.isfinite(sigma) & (sigma > 0)
    uu, yy, ss = u[ok], y[ok], sigma[ok]
    du_px = np.diff(uu)
    du = float(np.percentile(du_px, 10)) if len(du_px) else 1.0
    span = uu[-1] - uu[0]
    n = int(span / du) + 1
    if n > max_points:
        n = max_points
        du = span / (n - 1)
    g = uu[0] + du * np.arange(n)
    # local pixel step at each grid point (half-distance to the neighbours), for the density
    step = np.gradient(uu)
    yg = np.interp(g, uu, yy)
    wg = np.interp(g, uu, 1.0 / ss ** 2) * np.minimum(du / np.interp(g, uu, step), 1.0)
    # grid points inside a gap of the data (masked runs, segment gaps) carry no weight
    near = np.searchsorted(uu, g)
    left = uu[np.clip(near - 1, 0, len(uu) - 1)]
    right = uu[np.clip(near, 0, len(uu) - 1)]
    gap = (right - left) > 3.0 * np.maximum(np.interp(g, uu, step), du)
    wg[gap] = 0.0
    return g, yg, wg, du


def _corr(f, k):
    """sum_m f(i + m) k(m) for an odd-length kernel centred on m = 0 (zero beyond the ends)."""
    return oaconvolve(f, k[::-1], mode="same")


def scan_scales(u, y, sigma, good, *, fwhm_min, fwhm_max=MAX_FWHM_LN, max_points=1 << 16):
    """The local Gaussian-on-a-line fit at every grid point for every trial FWHM.

    `u`: ascending ln of the spectral axis; `fwhm_min`, `fwhm_max` in units of u.
    """
    g, yg, wg, du = _grid(u, y, sigma, good, max_points)
    n = len(g)
    fwhm_min = max(float(fwhm_min), 2.0 * du)
    fwhm_max = min(float(fwhm_max), (g[-1] - g[0]) / (2 * WINDOW + 1))
    if fwhm_max < fwhm_min:
        fwhm_max = fwhm_min
    rungs = int(np.floor(np.log(fwhm_max / fwhm_min) / np.log(LADDER_RATIO) + 1e-9)) + 1
    fwhms = fwhm_min * LADDER_RATIO ** np.arange(rungs)
    amp = np.zeros((rungs, n))
    err = np.full((rungs, n), np.inf)
    base = np.zeros((rungs, n))
    wy = wg * yg
    for j, fw in enumerate(fwhms):
        h = max(int(np.ceil(WINDOW * fw / du)), 2)
        m = np.arange(-h, h + 1)
        t = m / h
        k = np.exp(-0.5 * (m * du / (fw / GAUSS_FWHM)) ** 2)
        one = np.ones_like(t)
        s_w = _corr(wg, one)
        s_wt = _corr(wg, t)
        s_wtt = _corr(wg, t * t)
        s_wg = _corr(wg, k)
        s_wgt = _corr(wg, k * t)
        s_wgg = _corr(wg, k * k)
        r_g = _corr(wy, k)
        r_1 = _corr(wy, one)
        r_t = _corr(wy, t)
        det = s_w * s_wtt - s_wt ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            # Schur complement of the baseline block: a = (r_g - v.M^-1 r) / (s_gg - v.M^-1 v)
            mv0 = (s_wtt * s_wg - s_wt * s_wgt) / det
            mv1 = (s_w * s_wgt - s_wt * s_wg) / det
            schur = s_wgg - (s_wg * mv0 + s_wgt * mv1)
            a = (r_g - (r_1 * mv0 + r_t * mv1)) / schur
            b = ((s_wtt * r_1 - s_wt * r_t) - a * (s_wtt * s_wg - s_wt * s_wgt)) / det
            e = 1.0 / np.sqrt(schur)
        # a window must hold most of the line's weight and data on both flanks
        full = float(np.sum(k * k))
        w_typ = _corr(wg > 0, k * k) / full
        lside = _corr((wg > 0).astype(float), (m < -0.5 * h).astype(float))
        rside = _corr((wg > 0).astype(float), (m > 0.5 * h).astype(float))
        valid = (w_typ > 0.6) & (lside > 0.3 * h) & (rside > 0.3 * h) & np.isfinite(e) & (schur > 0)
        valid[:h] = False
        valid[n - h:] = False
        amp[j] = np.where(valid, a, 0.0)
        err[j] = np.where(valid, e, np.inf)
        base[j] = np.where(valid, b, np.nan)
    return ScaleScan(u=g, fwhm=fwhms, amp=amp, err=err, base=base, y=yg, w=wg)


@dataclass
class ScalePeak:
    """One feature found in scale space (positions and widths in units of u)."""
    u: float
    u_err: float
    fwhm: float
    fwhm_err: float
    amplitude: float
    amplitude_err: float
    continuum: float
    snr: float
    rung: int
    index: int


def _parabola(ym, y0, yp):
    """Offset of the vertex of a parabola through (-1, ym), (0, y0), (1, yp), within +/-0.5."""
    den = ym - 2.0 * y0 + yp
    if not np.isfinite(den) or den >= 0:
        return 0.0
    return float(np.clip(0.5 * (ym - yp) / den, -0.5, 0.5))


def scale_peaks(scan, *, snr=5.0, kinds=("emission", "absorption"), contain=0.5):
    """Features of a scan: peaks of the signal-to-noise in position and width above `snr`.

    A peak is kept unless a stronger peak of the same sign and broader width lies
    within `contain` of that broader FWHM of it.  Returns `ScalePeak` records,
    strongest first.
    """
    S = scan.snr
    du = float(scan.u[1] - scan.u[0]) if len(scan.u) > 1 else 1.0
    found = []
    signs = [s for s, k in ((1.0, "emission"), (-1.0, "absorption")) if k in kinds]
    for sgn in signs:
        v = sgn * S
        # best rung at each position, and peaks along the position of that best value
        best_j = np.argmax(v, axis=0)
        best = v[best_j, np.arange(v.shape[1])]
        for j in range(len(scan.fwhm)):
            size = max(3, int(round(scan.fwhm[j] / du)) | 1)
            peak = (v[j] >= maximum_filter1d(v[j], size=size, mode="constant", cval=-np.inf)) \
                & (v[j] >= snr) & (best_j == j) & (v[j] >= best)
            for i in np.flatnonzero(peak):
                found.append((float(v[j, i]), sgn, j, int(i)))
    found.sort(key=lambda r: -r[0])
    kept = []
    for val, sgn, j, i in found:
        fw = scan.fwhm[j]
        ui = scan.u[i]
        if any(k.snr * sgn > 0 and k.fwhm >= fw and abs(k.u - ui) < contain * k.fwhm
               or k.snr * sgn > 0 and abs(k.u - ui) < 0.5 * min(k.fwhm, fw) for k in kept):
            continue
        kept.append(_measure(scan, sgn, j, i, du))
    return kept


def _measure(scan, sgn, j, i, du):
    S = scan.snr
    n = S.shape[1]
    di = _parabola(S[j, i - 1] * sgn, S[j, i] * sgn, S[j, i + 1] * sgn) if 0 < i < n - 1 else 0.0
    nr = len(scan.fwhm)
    dj = _parabola(S[j - 1, i] * sgn, S[j, i] * sgn, S[j + 1, i] * sgn) if 0 < j < nr - 1 else 0.0
    fwhm = float(scan.fwhm[j] * LADDER_RATIO ** dj)
    snr = float(S[j, i])
    sig_g = fwhm / GAUSS_FWHM
    u_err = float(np.sqrt(2.0) * sig_g / max(abs(snr), 1e-9))
    return ScalePeak(u=float(scan.u[i] + di * du), u_err=u_err, fwhm=fwhm,
                     fwhm_err=float(np.sqrt(2.0) * fwhm / max(abs(snr), 1e-9)),
                     amplitude=float(scan.amp[j, i]), amplitude_err=float(scan.err[j, i]),
                     continuum=float(scan.base[j, i]), snr=snr, rung=int(j), index=int(i))
