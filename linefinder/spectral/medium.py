"""Vacuum and air wavelengths.

Standard-air formulas come from ``specutils.utils.wcs_utils.refraction_index``
(Edlén 1953, Edlén 1966, Peck & Reeder 1972, Ciddor 1996 at 15 °C and
101 325 Pa, and Morton 2000, the IAU standard).  What specutils lacks is
written here: the full Ciddor 1996 form (Appl. Opt. 35, 1566) for air at a
laboratory's own temperature, pressure, relative humidity and CO2
concentration, and an exact inversion of air to vacuum (Newton iteration,
converged to 1e-12 relative or better).

All formulas take the vacuum wavelength; conversions are defined only from
200 nm upwards, where air wavelengths are in use; below that air values are
NaN.  The "conventional" medium states lines
in air from 200 nm to 2000 nm and in vacuum elsewhere.
"""

import numpy as np
from astropy import units as u

from ..errors import LinefinderError

__all__ = ["AIR_FORMULAS", "refractive_index", "vacuum_to_air", "air_to_vacuum",
           "ciddor_index", "conventional_wavelength", "AIR_MIN_NM", "CONVENTIONAL_AIR_RANGE_NM"]

AIR_MIN_NM = 200.0
CONVENTIONAL_AIR_RANGE_NM = (200.0, 2000.0)

AIR_FORMULAS = {
    "morton2000": "Morton2000",
    "edlen1966": "Edlen1966",
    "edlen1953": "Edlen1953",
    "peck-reeder1972": "PeckReeder1972",
    "ciddor1996": "Ciddor1996",
}
_ALIASES = {"iau": "morton2000", "morton": "morton2000", "edlen": "edlen1966",
            "peckreeder1972": "peck-reeder1972", "peck-reeder": "peck-reeder1972",
            "ciddor": "ciddor1996"}


class AirFormulaError(LinefinderError, ValueError):
    """An unknown air formula or conditions outside its validity."""


def _formula(name):
    key = str(name).lower()
    key = _ALIASES.get(key, key)
    if key not in AIR_FORMULAS:
        raise AirFormulaError(f"unknown air formula {name!r}; choose one of "
                              f"{', '.join(AIR_FORMULAS)}")
    return key


def ciddor_index(vac_um, *, temperature_c=15.0, pressure_pa=101325.0, humidity=0.0, co2_ppm=450.0):
    """Refractive index of moist air, full Ciddor 1996 form (vacuum wavelength in µm).

    Valid (Ciddor 1996) for 0.3-1.7 µm, -40..100 °C, 80-120 kPa, 0-100 % RH;
    humidity is a fraction 0..1.
    """
    if not (0.0 <= humidity <= 1.0):
        raise AirFormulaError("relative humidity must be a fraction between 0 and 1")
    s2 = (1.0 / np.asarray(vac_um, dtype=float)) ** 2
    k0, k1, k2, k3 = 238.0185, 5792105.0, 57.362, 167917.0
    n_as = 1e-8 * (k1 / (k0 - s2) + k3 / (k2 - s2))
    n_axs = n_as * (1 + 0.534e-6 * (co2_ppm - 450.0))
    w0, w1, w2, w3 = 295.235, 2.6422, -0.032380, 0.004028
    n_ws = 1.022e-8 * (w0 + w1 * s2 + w2 * s2 ** 2 + w3 * s2 ** 3)
    R = 8.314510
    Ma = 1e-3 * (28.9635 + 12.011e-6 * (co2_ppm - 400.0))
    Mw = 0.018015

    def compress(p, T, xw):
        t = T - 273.15
        a0, a1, a2 = 1.58123e-6, -2.9331e-8, 1.1043e-10
        b0, b1 = 5.707e-6, -2.051e-8
        c0, c1 = 1.9898e-4, -2.376e-6
        d, e = 1.83e-11, -0.765e-8
        return (1 - p / T * (a0 + a1 * t + a2 * t ** 2 + (b0 + b1 * t) * xw + (c0 + c1 * t) * xw ** 2)
                + (p / T) ** 2 * (d + e * xw ** 2))

    T = temperature_c + 273.15
    p = pressure_pa
    svp = np.exp(1.2378847e-5 * T ** 2 - 1.9121316e-2 * T + 33.93711047 - 6.3431645e3 / T)
    f = 1.00062 + 3.14e-8 * p + 5.6e-7 * temperature_c ** 2
    xw = f * humidity * svp / p
    rho_axs = 101325.0 * Ma / (compress(101325.0, 288.15, 0.0) * R * 288.15)
    rho_ws = 1333.0 * Mw / (compress(1333.0, 293.15, 1.0) * R * 293.15)
    z = compress(p, T, xw)
    rho_a = p * Ma * (1 - xw) / (z * R * T)
    rho_w = p * Mw * xw / (z * R * T)
    return 1.0 + rho_a / rho_axs * n_axs + rho_w / rho_ws * n_ws


def refractive_index(vacuum_wavelength, *, formula="morton2000", conditions=None):
    """Refractive index of air at a vacuum wavelength (Quantity), as a plain array.

    ``conditions`` (dict with temperature_c, pressure_pa, humidity, co2_ppm)
    selects the full Ciddor 1996 form whatever ``formula`` says.
    """
    wl = u.Quantity(vacuum_wavelength).to(u.um, equivalencies=u.spectral())
    out = np.full(wl.shape, np.nan)
    ok = wl.value >= AIR_MIN_NM / 1000.0
    if conditions:
        out[ok] = ciddor_index(wl.value[ok], **conditions)
        return out
    key = _formula(formula)
    if np.any(ok):
        from specutils.utils.wcs_utils import refraction_index

        method = AIR_FORMULAS[key]
        kwargs = {"co2": 450} if key == "ciddor1996" else {}
        out[ok] = np.asarray(refraction_index(wl[ok], method=method, **kwargs))
    return out


def vacuum_to_air(vacuum_wavelength, *, formula="morton2000", conditions=None):
    """Air wavelength (same unit as the input) of a vacuum wavelength; NaN below 200 nm."""
    wl = u.Quantity(vacuum_wavelength)
    if not wl.unit.is_equivalent(u.m):
        raise AirFormulaError("air wavelengths need a wavelength input")
    return wl / refractive_index(wl, formula=formula, conditions=conditions)


def air_to_vacuum(air_wavelength, *, formula="morton2000", conditions=None, rtol=1e-13, max_iter=20):
    """Vacuum wavelength of an air wavelength, by Newton iteration on vacuum_to_air."""
    air = u.Quantity(air_wavelength)
    if not air.unit.is_equivalent(u.m):
        raise AirFormulaError("air wavelengths need a wavelength input")
    a = np.atleast_1d(air.to_value(u.nm)).astype(float)
    vac = a * refractive_index(a * u.nm, formula=formula, conditions=conditions)
    vac = np.where(np.isfinite(vac), vac, a)
    for _ in range(max_iter):
        n = refractive_index(vac * u.nm, formula=formula, conditions=conditions)
        h = vac * 1e-7
        n2 = refractive_index((vac + h) * u.nm, formula=formula, conditions=conditions)
        g = vac / n - a
        dg = ((vac + h) / n2 - vac / n) / h
        step = g / dg
        vac = vac - np.where(np.isfinite(step), step, 0.0)
        if np.all(~np.isfinite(step) | (np.abs(step) <= rtol * vac)):
            break
    vac = np.where(a >= AIR_MIN_NM, vac, np.nan)
    result = (vac * u.nm).to(air.unit)
    return result if np.ndim(air) else result[0]


def conventional_wavelength(vacuum_wavelength, *, formula="morton2000"):
    """Wavelength in the reference-database convention: air in 200-2000 nm, vacuum elsewhere."""
    wl = u.Quantity(vacuum_wavelength)
    nm = wl.to_value(u.nm)
    air = vacuum_to_air(wl, formula=formula)
    use_air = (nm >= CONVENTIONAL_AIR_RANGE_NM[0]) & (nm <= CONVENTIONAL_AIR_RANGE_NM[1])
    return np.where(use_air, air.to_value(wl.unit), wl.value) * wl.unit
