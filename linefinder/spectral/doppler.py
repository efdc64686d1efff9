"""Redshift and radial-velocity shifts of rest-frame positions.

Conventions (IAU / radio practice):

* ``z``: lambda_obs = lambda_rest (1 + z), cosmological or any redshift.
* ``optical``: lambda_obs = lambda_rest (1 + v/c).
* ``radio``: nu_obs = nu_rest (1 - v/c).
* ``relativistic``: lambda_obs = lambda_rest sqrt((1 + v/c) / (1 - v/c)).

A redshift and a velocity may be combined (a peculiar velocity on top of a
systemic redshift): the factors multiply.
"""

import numpy as np
from astropy import units as u
from astropy.constants import c as _c

from ..errors import LinefinderError

__all__ = ["VELOCITY_CONVENTIONS", "wavelength_factor", "velocity_from_factor", "describe_shift"]

VELOCITY_CONVENTIONS = ("optical", "radio", "relativistic")
C_KMS = _c.to_value(u.km / u.s)


class ShiftError(LinefinderError, ValueError):
    """A redshift or velocity outside its physical range."""


def _kms(velocity):
    if velocity is None:
        return None
    if isinstance(velocity, u.Quantity):
        return velocity.to_value(u.km / u.s)
    raise ShiftError("velocity needs a unit (e.g. 120 * u.km / u.s)")


def wavelength_factor(*, z=None, velocity=None, convention="optical"):
    """lambda_obs / lambda_rest for a redshift and/or a velocity (Quantity)."""
    factor = 1.0
    if z is not None:
        if z <= -1:
            raise ShiftError(f"redshift z = {z} must be > -1")
        factor *= 1.0 + z
    v = _kms(velocity)
    if v is not None:
        beta = v / C_KMS
        if convention == "optical":
            f = 1.0 + beta
        elif convention == "radio":
            if beta >= 1:
                raise ShiftError("radio-convention velocity must be below c")
            f = 1.0 / (1.0 - beta)
        elif convention == "relativistic":
            if abs(beta) >= 1:
                raise ShiftError("relativistic velocity must be below c in magnitude")
            f = np.sqrt((1 + beta) / (1 - beta))
        else:
            raise ShiftError(f"unknown velocity convention {convention!r}; use one of "
                             f"{', '.join(VELOCITY_CONVENTIONS)}")
        if f <= 0:
            raise ShiftError("velocity gives a non-positive wavelength factor")
        factor *= f
    return factor


def velocity_from_factor(factor, convention="optical"):
    """Velocity (km/s) that gives lambda_obs / lambda_rest = factor."""
    factor = np.asarray(factor, dtype=float)
    if convention == "optical":
        beta = factor - 1.0
    elif convention == "radio":
        beta = 1.0 - 1.0 / factor
    elif convention == "relativistic":
        beta = (factor ** 2 - 1) / (factor ** 2 + 1)
    else:
        raise ShiftError(f"unknown velocity convention {convention!r}")
    return beta * C_KMS


def describe_shift(*, z=None, velocity=None, convention="optical"):
    """Metadata dict describing a shift."""
    meta = {"frame": "rest" if z is None and velocity is None else "observed"}
    if z is not None:
        meta["redshift"] = float(z)
    if velocity is not None:
        meta["velocity_kms"] = float(_kms(velocity))
        meta["velocity_convention"] = convention
    meta["wavelength_factor"] = wavelength_factor(z=z, velocity=velocity, convention=convention)
    return meta
