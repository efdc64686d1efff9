"""Air and vacuum wavelengths against specutils and published values."""

import numpy as np
import pytest
from astropy import units as u
from hypothesis import given, settings
from hypothesis import strategies as st
from specutils.utils.wcs_utils import refraction_index as specutils_index

from linefinder.spectral.medium import (
    AIR_FORMULAS,
    air_to_vacuum,
    ciddor_index,
    conventional_wavelength,
    refractive_index,
    vacuum_to_air,
)


@pytest.mark.parametrize("formula, method", [(k, v) for k, v in AIR_FORMULAS.items()])
def test_matches_specutils(formula, method):
    wl = np.array([250.0, 486.1, 656.5, 1000.0, 1875.6]) * u.nm
    kwargs = {"co2": 450} if method == "Ciddor1996" else {}
    ref = np.asarray(specutils_index(wl, method=method, **kwargs))
    assert np.allclose(refractive_index(wl, formula=formula), ref, rtol=1e-14, atol=0)


def test_ciddor_full_form_reduces_to_standard_air():
    wl = np.array([300.0, 550.0, 1600.0]) * u.nm
    full = refractive_index(wl, conditions=dict(temperature_c=15, pressure_pa=101325,
                                                humidity=0, co2_ppm=450))
    assert np.allclose(full, refractive_index(wl, formula="ciddor1996"), rtol=1e-13, atol=0)


def test_ciddor_nist_example():
    # NIST engineering metrology toolbox worked example (Ciddor 1996 equation):
    # 633 nm, 20 °C, 101.325 kPa, 50 % RH, 450 ppm CO2 -> n = 1.000271374 (from memory)
    n = ciddor_index(0.633, temperature_c=20, pressure_pa=101325, humidity=0.5, co2_ppm=450)
    assert n - 1 == pytest.approx(2.71374e-4, abs=2e-9)


def test_ciddor_trends():
    n_cold = ciddor_index(0.6, temperature_c=0.0)
    n_warm = ciddor_index(0.6, temperature_c=30.0)
    n_low_p = ciddor_index(0.6, pressure_pa=80000.0)
    assert n_cold > n_warm and ciddor_index(0.6) > n_low_p


def test_halpha_air():
    # H-alpha: vacuum 6564.61 Å, air 6562.80 Å (NIST ASD; standard nebular value, from memory)
    air = vacuum_to_air(6564.61 * u.AA)
    assert air.to_value(u.AA) == pytest.approx(6562.80, abs=0.01)


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=200.5, max_value=30000.0), st.sampled_from(sorted(AIR_FORMULAS)))
def test_round_trip(wl_nm, formula):
    vac = wl_nm * u.nm
    back = air_to_vacuum(vacuum_to_air(vac, formula=formula), formula=formula)
    assert abs(back.to_value(u.nm) / wl_nm - 1) < 1e-12


def test_below_200nm_is_nan_and_convention():
    assert np.isnan(vacuum_to_air(121.567 * u.nm).value)
    conv = conventional_wavelength(np.array([121.567, 656.46, 4051.0]) * u.nm)
    assert conv[0].value == 121.567 and conv[2].value == 4051.0
    assert conv[1].value < 656.46
