"""Doppler conventions against special relativity and astropy's equivalencies."""

import numpy as np
import pytest
from astropy import constants as const
from astropy import units as u

from linefinder.spectral.doppler import (
    ShiftError,
    velocity_from_factor,
    wavelength_factor,
)


def test_conventions_agree_at_low_velocity():
    v = 30 * u.km / u.s
    f = [wavelength_factor(velocity=v, convention=c) for c in ("optical", "radio", "relativistic")]
    beta = float(v / const.c)
    assert np.ptp(f) < 1.01 * beta ** 2   # they differ at second order in v/c


@pytest.mark.parametrize("conv", ["optical", "radio", "relativistic"])
def test_velocity_round_trip(conv):
    v = 1234.5
    f = wavelength_factor(velocity=v * u.km / u.s, convention=conv)
    assert velocity_from_factor(f, conv) == pytest.approx(v, rel=1e-12)


def test_relativistic_exact():
    # beta = 0.6 -> Doppler factor sqrt(1.6/0.4) = 2 (textbook special relativity)
    assert wavelength_factor(velocity=0.6 * const.c, convention="relativistic") == \
        pytest.approx(2.0, rel=1e-14)


def test_z_and_velocity_combine():
    f = wavelength_factor(z=1.0, velocity=1e-3 * const.c)
    assert f == pytest.approx(2.0 * 1.001, rel=1e-14)


def test_bad_shift():
    with pytest.raises(ShiftError):
        wavelength_factor(z=-1.5)
    with pytest.raises(ShiftError):
        wavelength_factor(velocity=100.0)


@pytest.mark.parametrize("conv, equiv", [("optical", u.doppler_optical),
                                         ("radio", u.doppler_radio),
                                         ("relativistic", u.doppler_relativistic)])
@pytest.mark.parametrize("factor", [0.7, 0.999, 1.0004, 1.3, 2.5])
def test_velocities_agree_with_astropy_equivalencies(conv, equiv, factor):
    # source: astropy's Doppler equivalencies, a reference library (optical v = c (lambda/lambda0 - 1),
    # radio v = c (1 - nu/nu0), relativistic the exact special-relativistic form)
    rest = 6564.61 * u.AA
    v_ref = (rest * factor).to(u.km / u.s, equivalencies=equiv(rest)).value
    assert velocity_from_factor(factor, conv) == pytest.approx(v_ref, rel=1e-12, abs=1e-9)
