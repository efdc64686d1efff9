import numpy as np
import pytest
from astropy import units as u

from linefinder.doppler import ShiftError, velocity_from_factor, wavelength_factor


def test_conventions_agree_at_low_velocity():
    v = 30 * u.km / u.s
    f = [wavelength_factor(velocity=v, convention=c) for c in ("optical", "radio", "relativistic")]
    beta = 30 / 299792.458
    assert np.ptp(f) < 1.01 * beta ** 2   # they differ at second order in v/c


@pytest.mark.parametrize("conv", ["optical", "radio", "relativistic"])
def test_velocity_round_trip(conv):
    v = 1234.5
    f = wavelength_factor(velocity=v * u.km / u.s, convention=conv)
    assert velocity_from_factor(f, conv) == pytest.approx(v, rel=1e-12)


def test_relativistic_exact():
    # beta = 0.6 -> Doppler factor sqrt(1.6/0.4) = 2 (textbook special relativity)
    c = 299792.458
    assert wavelength_factor(velocity=0.6 * c * u.km / u.s, convention="relativistic") == \
        pytest.approx(2.0, rel=1e-14)


def test_z_and_velocity_combine():
    f = wavelength_factor(z=1.0, velocity=299.792458 * u.km / u.s)
    assert f == pytest.approx(2.0 * 1.001, rel=1e-14)


def test_bad_shift():
    with pytest.raises(ShiftError):
        wavelength_factor(z=-1.5)
    with pytest.raises(ShiftError):
        wavelength_factor(velocity=100.0)
