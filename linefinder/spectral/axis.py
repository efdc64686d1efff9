"""The observed spectral axis as ln(vacuum wavelength), written once.

Every comparison of features with catalogue lines happens in ln(lambda_vacuum / m):
`vacuum_ln` converts any spectral Quantity (wavelength in air or vacuum,
frequency, energy, wavenumber) to it; `vacuum_ln_axis`, `observed_window` and
`sorted_pixels` apply it to a prepared spectrum.
"""

import numpy as np
from astropy import units as u

from .medium import air_to_vacuum

__all__ = ["vacuum_ln", "vacuum_ln_axis", "observed_window", "sorted_pixels"]


def vacuum_ln(values, medium="vacuum"):
    """ln of the vacuum wavelength in m of spectral Quantity `values` (air wavelengths converted)."""
    q = u.Quantity(values)
    lam = q.to_value(u.m, equivalencies=u.spectral())
    if q.unit.is_equivalent(u.m) and medium == "air":
        lam = air_to_vacuum(lam * u.m).to_value(u.m)
    return np.log(lam)


def sorted_pixels(feature_result):
    """The spectrum's pixels by ln(vacuum wavelength): (ln lambda, flux with masked pixels
    NaN, noise, continuum), for the Lyman-break test and the lines measured at z."""
    spec = feature_result.spectrum
    ln_axis = vacuum_ln_axis(spec)
    order = np.argsort(ln_axis)
    flux = np.where(np.asarray(spec.mask, bool), np.nan, np.asarray(spec.flux.value, float))
    return (ln_axis[order], flux[order], np.asarray(feature_result.noise, dtype=float)[order],
            np.asarray(feature_result.continuum, dtype=float)[order])


def vacuum_ln_axis(spec):
    """ln of the vacuum wavelength (m) of every pixel of a prepared spectrum."""
    return vacuum_ln(spec.axis, spec.medium)


def observed_window(feature_result, y):
    """ln(lambda) range searched for features: the spectrum's, else the features' span."""
    if feature_result is not None:
        spec = feature_result.spectrum
        ln_lam = vacuum_ln_axis(spec)[~spec.mask]
        return float(ln_lam.min()), float(ln_lam.max())
    if len(y):
        return float(y.min() - 0.01), float(y.max() + 0.01)
    return None
