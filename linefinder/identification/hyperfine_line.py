"""A hyperfine line (H I 21 cm, D I 92 cm, 3He II 3.5 cm) found in a radio spectrum.

A hyperfine line is one line, not a series: nothing but its position says what it is,
and a galaxy's 21-cm profile is tens to hundreds of km/s wide, often double-horned, at
a signal-to-noise ratio of a few.  So it is looked for on the pixels, not among the
detected features:

1. the spectrum on a uniform ln(wavelength) grid, less a robust polynomial baseline of
   degree `BASELINE_DEGREE` (sigma-clipped, so a line does not pull it);
2. a Gaussian matched filter at each width of `WIDTHS_KMS`, its S/N measured against
   the spread (1.4826 x the median absolute deviation) of the filtered spectrum itself
   at that width, so correlated noise, smoothing and baseline ripple count as noise;
3. the strongest filtered peak where a line's allowed redshift puts it; its false-alarm
   probability: the number of independent places and widths tried times the one-sided
   Gaussian tail;
4. status: ``secure`` at S/N >= `SECURE_SNR` (6.5, the threshold above which a survey
   of 21-cm sources counts a detection reliable on its own, recalled from the ALFALFA
   catalogue papers: common practice) and ``tentative`` at S/N >= `TENTATIVE_SNR`, each
   also below a false-alarm probability (`SECURE_FAP`, `TENTATIVE_FAP`).

The centre is the filter's peak refined by a parabola; its error the Cramer-Rao bound
of a Gaussian's centre, sqrt(2) sigma / (S/N).  The redshift is that of the line's
rest frequency; the velocity is c z (the optical convention, in which 21-cm redshifts
of galaxies are usually quoted), in the frame of the file's axis (heliocentric where
the file's frequencies are).
"""

from dataclasses import dataclass

import numpy as np
from astropy import units as u
from astropy.table import QTable
from scipy.ndimage import gaussian_filter1d
from scipy.stats import norm

from ..catalogue.build import build_catalogue
from ..catalogue.hyperfine_rows import HYPERFINE_SERIES
from ..physics.hyperfine import has_hyperfine
from ..spectral.axis import sorted_pixels
from ..spectral.doppler import C_KMS

__all__ = ["HyperfineReading", "read_hyperfine", "hyperfine_species", "WIDTHS_KMS",
           "SECURE_SNR", "TENTATIVE_SNR", "Z_RANGE_21CM"]

#: Gaussian FWHM of the matched filters, km/s: from a dwarf galaxy's or a cloud's line to
#: a massive spiral's (a rule of this tool)
WIDTHS_KMS = (15.0, 20.0, 26.0, 34.0, 45.0, 60.0, 80.0, 105.0, 140.0, 180.0, 240.0, 320.0,
              420.0, 550.0)
#: degree of the robust polynomial baseline: a straight line (survey spectra come baselined
#: already; a cubic took a fifth of a weak galaxy line's S/N in the observed test spectrum)
BASELINE_DEGREE = 1
SECURE_SNR = 6.5
TENTATIVE_SNR = 5.0
SECURE_FAP = 1e-3
TENTATIVE_FAP = 1e-2
#: default redshift range of the 21-cm line: from Local Group velocities to the deepest
#: 21-cm absorption surveys (z ~ 1); the other hyperfine lines are Galactic (the radio
#: recombination lines' range)
Z_RANGE_21CM = (-0.005, 1.0)
#: species searched by default in a radio spectrum
DEFAULT_SPECIES = ("H", "D", "3He II")


@dataclass
class HyperfineReading:
    """The strongest hyperfine-line candidate of a spectrum."""
    line: QTable            #: the catalogue row of the line (one row)
    centre: u.Quantity      #: observed centre in the spectrum's axis unit
    centre_err: u.Quantity
    fwhm: u.Quantity        #: FWHM of the best-matching filter, in the axis unit
    fwhm_kms: float
    amplitude: float        #: peak flux density of the Gaussian that matches
    snr: float              #: matched-filter S/N against the filtered spectrum's spread
    kind: str               #: "emission" or "absorption"
    false_alarm: float      #: chance of a noise peak as strong anywhere tried
    z: float
    z_err: float
    status: str             #: "secure", "tentative" or "none"

    @property
    def label(self):
        return str(self.line["label"][0])

    @property
    def velocity_kms(self):
        return C_KMS * self.z

    @property
    def velocity_err_kms(self):
        return C_KMS * self.z_err


def hyperfine_species(species):
    """The species among `species` (or the default ones) that have hyperfine lines."""
    names = list(species) if species else list(DEFAULT_SPECIES)
    return [n for n in names if has_hyperfine(n)]


def _lines(species, lo_m, hi_m, zmin, zmax):
    """Hyperfine catalogue rows that a redshift in range puts inside the window (m)."""
    if not species:
        return None
    cat = build_catalogue(species, 1, 2, hyperfine=True, cache=False,
                          wavelength_range=(lo_m / (1 + zmax) * u.m, hi_m / (1 + zmin) * u.m))
    return cat[np.asarray(cat["series"]).astype(str) == HYPERFINE_SERIES]


def _z_range(label, zmin, zmax):
    if zmin is not None and zmax is not None:
        return zmin, zmax
    lo, hi = Z_RANGE_21CM if "21 cm" in label else (-0.005, 0.005)
    return (lo if zmin is None else zmin), (hi if zmax is None else zmax)


def _uniform(ln_lam, flux):
    """The spectrum on a uniform ln-wavelength grid (step: the median pixel step)."""
    good = np.isfinite(flux) & np.isfinite(ln_lam)
    x, f = ln_lam[good], flux[good]
    step = float(np.median(np.diff(x))) if len(x) > 1 else 0.0
    if not step > 0:
        return None
    grid = np.arange(x[0], x[-1] + 0.5 * step, step)
    # pixels of a gap (masked runs) stay out: weight 0 there
    near = np.abs(np.interp(grid, x, x, left=np.nan, right=np.nan) - grid)
    idx = np.clip(np.searchsorted(x, grid), 1, len(x) - 1)
    gap = np.minimum(np.abs(x[idx] - grid), np.abs(x[idx - 1] - grid)) > 1.5 * step
    weight = (~gap & np.isfinite(near)).astype(float)
    return grid, np.where(weight > 0, np.interp(grid, x, f), 0.0), weight, step


def _baseline(x, f, weight):
    """A polynomial of degree BASELINE_DEGREE fitted with 3-sigma clipping."""
    t = (x - x.mean()) / max(np.ptp(x), 1e-300)
    use = weight > 0
    coef = np.zeros(BASELINE_DEGREE + 1)
    for _ in range(5):
        if use.sum() <= BASELINE_DEGREE + 1:
            break
        coef = np.polynomial.polynomial.polyfit(t[use], f[use], BASELINE_DEGREE)
        r = f - np.polynomial.polynomial.polyval(t, coef)
        spread = 1.4826 * np.median(np.abs(r[use]))
        new = (weight > 0) & (np.abs(r) <= 3 * spread)
        if np.array_equal(new, use):
            break
        use = new
    return np.polynomial.polynomial.polyval(t, coef)


def _filtered(resid, weight, sigma_px):
    num = gaussian_filter1d(resid * weight, sigma_px, mode="constant")
    den = gaussian_filter1d(weight, sigma_px, mode="constant")
    with np.errstate(invalid="ignore", divide="ignore"):
        out = num / den
    out[den < 0.8] = np.nan        # (near an edge or a gap the filter sees too little)
    return out


def read_hyperfine(feature_result, species=None, zmin=None, zmax=None, z=None,
                   kinds=("emission", "absorption")):
    """The strongest hyperfine-line candidate of a radio spectrum (`HyperfineReading`), or
    None where no hyperfine line can fall in the window or the spectrum is too short."""
    names = hyperfine_species(species)
    ln_lam, flux, _, _ = sorted_pixels(feature_result)
    grid = _uniform(ln_lam, flux)
    if grid is None or not names:
        return None
    x, f, weight, step = grid
    if z is not None:
        zmin = zmax = z
    lines = _lines(names, np.exp(x[0]), np.exp(x[-1]), *_z_range("21 cm", zmin, zmax))
    if lines is None or not len(lines):
        return None
    step_kms = step * C_KMS
    resid = f - _baseline(x, f, weight)
    x_rest = np.log(lines["wavelength_vacuum"].to_value(u.m))
    signs = [s for s, k in ((1.0, "emission"), (-1.0, "absorption")) if k in kinds]
    best = None
    trials = 0.0
    for width in WIDTHS_KMS:
        sigma_px = width / 2.3548 / step_kms
        if sigma_px < 0.5 or width > 0.2 * len(f) * step_kms:
            continue
        filt = _filtered(resid, weight, sigma_px)
        ok = np.isfinite(filt)
        if ok.sum() < 20:
            continue
        spread = 1.4826 * np.median(np.abs(filt[ok] - np.median(filt[ok])))
        if not spread > 0:
            continue
        snr = (filt - np.median(filt[ok])) / spread
        for j, xr in enumerate(x_rest):
            lo_z, hi_z = _z_range(str(lines["label"][j]), zmin, zmax)
            span = (xr + np.log1p(lo_z) - width / C_KMS, xr + np.log1p(hi_z) + width / C_KMS)
            inside = ok & (x >= span[0]) & (x <= span[1])
            if not inside.any():
                continue
            trials += max(1.0, (min(span[1], x[-1]) - max(span[0], x[0])) / (width / C_KMS))
            for sign in signs:
                k = np.flatnonzero(inside)[np.argmax(sign * snr[inside])]
                if best is None or sign * snr[k] > best[0]:
                    best = (sign * snr[k], k, width, sigma_px, j, sign, filt, spread)
    if best is None:
        return None
    return _reading(best, x, step, trials * len(signs), lines, feature_result, zmin, zmax)


def _reading(best, x, step, trials, lines, feature_result, zmin, zmax):
    snr, k, width, sigma_px, j, sign, filt, spread = best
    # parabola through the filtered peak and its neighbours
    dk = 0.0
    if 0 < k < len(filt) - 1 and np.all(np.isfinite(filt[k - 1:k + 2])):
        a, b, c = filt[k - 1], filt[k], filt[k + 1]
        den = a - 2 * b + c
        dk = float(np.clip(0.5 * (a - c) / den, -0.5, 0.5)) if den != 0 else 0.0
    y = x[k] + dk * step
    sig_ln = sigma_px * step
    y_err = np.sqrt(2.0) * sig_ln / max(snr, 1e-9)
    xr = float(np.log(lines["wavelength_vacuum"][j].to_value(u.m)))
    zz = float(np.expm1(y - xr))
    z_err = float(np.exp(y - xr) * y_err)
    fap = float(min(1.0, trials * norm.sf(snr)))
    status = "none"
    if snr >= SECURE_SNR and fap <= SECURE_FAP:
        status = "secure"
    elif snr >= TENTATIVE_SNR and fap <= TENTATIVE_FAP:
        status = "tentative"
    unit = feature_result.spectrum.axis.unit
    lam = np.exp(y) * u.m
    centre = lam.to(unit, equivalencies=u.spectral())
    edge = (np.exp(y + y_err) * u.m).to(unit, equivalencies=u.spectral())
    fw = abs((np.exp(y + width / C_KMS / 2) * u.m).to_value(unit, equivalencies=u.spectral())
             - (np.exp(y - width / C_KMS / 2) * u.m).to_value(unit, equivalencies=u.spectral()))
    # a Gaussian line of the filter's width peaks at sqrt(2) times its filtered value
    amplitude = float(np.sqrt(2.0) * filt[k])
    return HyperfineReading(line=lines[j:j + 1], centre=centre, centre_err=abs(edge - centre),
                            fwhm=fw * unit, fwhm_kms=float(width), amplitude=amplitude,
                            snr=float(snr), kind="emission" if sign > 0 else "absorption",
                            false_alarm=fap, z=zz, z_err=z_err, status=status)


def with_hyperfine(result, reading):
    """The identification `result` with a hyperfine line read on the pixels: where the
    recombination-line solution is not secure, the hyperfine line is the answer (the
    recombination-line labels, built on what is then noise, are withdrawn); where it is
    secure, the hyperfine line is added as a second system."""
    if reading is None or reading.status == "none":
        if reading is not None:
            result.meta["hyperfine_line"] = _describe(reading)
        return result
    from .redshift import Solution

    out = result.features
    s = float(np.log1p(reading.z))
    sol = Solution(s=s, s_err=reading.z_err / (1 + reading.z), score=-np.log(reading.false_alarm
                   if reading.false_alarm > 0 else 1e-300), status=reading.status)
    if result.status == "secure":
        system = 2
        result.systems = list(result.systems) + [sol]
    else:
        system = 1
        out = _cleared(out, reading)
        result.status = reading.status
        result.solutions = [sol]
        result.lines = reading.line
        result.z, result.z_err = reading.z, reading.z_err
        result.velocity_convention = "optical"
        result.velocity_kms, result.velocity_err_kms = reading.velocity_kms, reading.velocity_err_kms
        result.single_line_readings = []
    out = _appended(out, reading, system)
    sol.matches = [(len(out) - 1, 0, 0.0)]
    result.features = out
    result.meta["hyperfine_line"] = _describe(reading)
    return result


def _describe(reading):
    return {"label": reading.label, "snr": reading.snr, "false_alarm": reading.false_alarm,
            "fwhm_kms": reading.fwhm_kms, "z": reading.z, "z_err": reading.z_err,
            "status": reading.status, "velocity_convention": "optical",
            "position_source": str(reading.line["position_source"][0])}


_ID_COLUMNS = {"label": "", "species": "", "series": "", "n_lower": 0, "n_upper": 0,
               "residual_kms": np.nan, "residual_sigma": np.nan, "score": 0.0, "system": 0,
               "alternatives": ""}


def _cleared(out, reading):
    """The feature table without identifications, without the lines measured at the
    withdrawn solution's redshift and without the features inside the hyperfine line
    (fragments of its profile)."""
    from ..features.flags import Flag, has_flag

    centre = u.Quantity(out["center"]).value
    half = 0.5 * abs(reading.fwhm.to_value(out["center"].unit)) if len(out) else 0.0
    c0 = reading.centre.to_value(out["center"].unit) if len(out) else 0.0
    keep = np.array([not has_flag(f, Flag.AT_Z) for f in out["flags"]], dtype=bool) \
        & (np.abs(centre - c0) > half)
    out = out[keep]
    for col, empty in _ID_COLUMNS.items():
        if col in out.colnames:
            out[col] = np.full(len(out), empty, dtype=out[col].dtype)
    out["rest_wavelength_vacuum"] = np.full(len(out), np.nan) * u.nm
    out["residual"] = np.full(len(out), np.nan) * out["center"].unit
    out.meta.pop("alternatives_detail", None)
    return out


def _appended(out, reading, system):
    """`out` with one row for the hyperfine line."""
    from .table import new_table

    unit = out["center"].unit if len(out) else reading.centre.unit
    row = QTable()
    row["center"] = [reading.centre.to_value(unit)] * unit
    row["center_err"] = [reading.centre_err.to_value(unit)] * unit
    row["fwhm"] = [reading.fwhm.to_value(unit)] * unit
    flux = reading.amplitude * reading.fwhm.to_value(unit) * np.sqrt(np.pi / (4 * np.log(2)))
    row["flux"] = [flux] * (out["flux"].unit if len(out) else u.one)
    row["snr"] = [reading.snr]
    row["kind"] = [reading.kind]
    row["flags"] = [""]
    row = new_table(row, np.zeros(1, bool), np.zeros(1, bool), False, False)
    line = reading.line
    row["label"] = [reading.label]
    row["species"] = [str(line["species"][0])]
    row["series"] = [str(line["series"][0])]
    row["n_lower"] = [int(line["n_lower"][0])]
    row["n_upper"] = [int(line["n_upper"][0])]
    row["rest_wavelength_vacuum"] = line["wavelength_vacuum"].to(u.nm)
    row["residual_kms"] = [0.0]
    row["residual"] = [0.0] * unit
    row["residual_sigma"] = [0.0]
    row["score"] = [1.0 - reading.false_alarm]
    row["system"] = [system]
    if not len(out):
        return row
    both = QTable([np.concatenate([out[c], row[c]]) for c in out.colnames], names=out.colnames)
    both.meta = dict(out.meta)
    return both
