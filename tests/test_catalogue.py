"""Catalogue building, selection and caching."""

import os

import numpy as np
import pytest
from astropy import units as u

from linefinder import build_catalogue, cache_dir
from linefinder.catalogue.build import parse_range
from linefinder.errors import AccuracyWarning, QuantumNumberError

# Standard air wavelengths of the hydrogen multiplets in Å, as tabulated for
# nebular work (e.g. Osterbrock & Ferland 2006 and the NIST ASD; from memory, to
# the 0.01 Å quoted) and vacuum values of Ly-alpha and Br-gamma (NIST ASD).
H_AIR_ANGSTROM = {(2, 3): 6562.80, (2, 4): 4861.33, (2, 5): 4340.47, (2, 6): 4101.74,
                  (2, 7): 3970.07, (3, 4): 18751.0}
H_VACUUM_ANGSTROM = {(1, 2): 1215.67, (4, 7): 21661.2}


def _row(t, nl, nu):
    sel = (t["n_lower"] == nl) & (t["n_upper"] == nu)
    assert sel.sum() == 1
    return t[sel][0]


def test_hydrogen_reference_wavelengths():
    t = build_catalogue("H", (1, 4), (2, 7), medium="air")
    for (nl, nu), ref in H_AIR_ANGSTROM.items():
        assert _row(t, nl, nu)["wavelength_air"].to_value(u.AA) == pytest.approx(ref, abs=0.02)
    for (nl, nu), ref in H_VACUUM_ANGSTROM.items():
        assert _row(t, nl, nu)["wavelength_vacuum"].to_value(u.AA) == pytest.approx(ref, abs=0.02)


def test_halpha_fine_components():
    # the seven H-alpha fine-structure components in air, Å (NIST ASD, from memory)
    ref = [6562.710, 6562.725, 6562.752, 6562.772, 6562.852, 6562.867, 6562.910]
    t = build_catalogue("H", 2, 3, fine=True, medium="air")
    assert len(t) == 7
    assert np.allclose(np.sort(t["wavelength_air"].to_value(u.AA)), ref, atol=1.5e-3)


def test_isotope_shift_halpha():
    # H-alpha minus D-alpha: 1.79 Å in air (textbook isotope shift, from memory)
    t = build_catalogue(["H", "D"], 2, 3, medium="air")
    h = t[t["species"] == "H I"]["wavelength_air"][0]
    d = t[t["species"] == "D I"]["wavelength_air"][0]
    assert (h - d).to_value(u.AA) == pytest.approx(1.79, abs=0.01)


def test_deuterium_lyman_alpha():
    # D Ly-alpha 1215.339 Å and H Ly-alpha 1215.670 Å, vacuum multiplet centres (NIST ASD
    # strong-line values, from memory to the digits shown)
    t = build_catalogue(["H", "D"], 1, 2)
    lam = dict(zip(t["species"], t["wavelength_vacuum"].to_value(u.AA)))
    assert lam["D I"] == pytest.approx(1215.339, abs=2e-3)
    assert lam["H I"] == pytest.approx(1215.670, abs=2e-3)


def test_radio_h109alpha():
    # H109α = 5008.923 MHz (Lilley & Palmer 1968, ApJS 16, 143)
    t = build_catalogue("H", 109, 110)
    assert t["label"][0] == "H109α"
    assert t["frequency"][0].to_value(u.MHz) == pytest.approx(5008.923, abs=2e-3)


def test_columns_units_and_meta():
    t = build_catalogue("He II", 3, 4, medium="conventional")
    for col in ("species", "label", "series", "n_lower", "l_lower", "j_lower", "n_upper", "l_upper",
                "j_upper", "wavelength_vacuum", "wavelength_air", "wavenumber", "frequency",
                "energy", "a_ul", "f_lu", "g_lower", "g_upper", "wavelength"):
        assert col in t.colnames
    assert t["label"][0] == "He II 4686"
    assert t["wavelength"].unit == u.nm and t["a_ul"].unit == u.s ** -1
    assert t["l_lower"].mask.all()
    for key in ("medium", "air_formula", "constants", "n_lower", "n_upper", "frame"):
        assert key in t.meta


def test_redshift_and_velocity():
    rest = build_catalogue("H", 2, 3)
    z = build_catalogue("H", 2, 3, z=2.0)
    ratio = (z["wavelength_vacuum"][0] / rest["wavelength_vacuum"][0]).to_value(u.one)
    assert ratio == pytest.approx(3.0, rel=1e-14)
    v = build_catalogue("H", 2, 3, velocity=-300 * u.km / u.s, velocity_convention="optical")
    ratio = (v["wavelength_vacuum"][0] / rest["wavelength_vacuum"][0]).to_value(u.one)
    assert (ratio - 1) * 299792.458 == pytest.approx(-300, rel=1e-10)
    assert z.meta["redshift"] == 2.0 and v.meta["velocity_convention"] == "optical"
    assert np.allclose(z["rest_wavelength_vacuum"], rest["wavelength_vacuum"], rtol=1e-15)


def test_selection():
    t = build_catalogue("H", (1, 5), (2, 40), wavelength_range=(400 * u.nm, 700 * u.nm))
    assert t["wavelength_vacuum"].min() >= 400 * u.nm and t["wavelength_vacuum"].max() <= 700 * u.nm
    assert set(t["series"]) == {"Balmer"}
    strong = build_catalogue("H", 2, (3, 40), min_a=1e6 * u.s ** -1)
    assert set(strong["label"]) == {"Hα", "Hβ", "Hγ"}
    energy = build_catalogue("H", 1, (2, 5), wavelength_range=(10 * u.eV, 12.5 * u.eV))
    assert list(energy["label"]) == ["Lyβ", "Lyα"]


def test_resolution_merges_fine_structure():
    sharp = build_catalogue("H", 2, 3, fine=True, resolution=1e7)
    assert len(sharp) == 7
    blended = build_catalogue(["H", "D"], 2, 3, fine=True, resolution=20000)
    assert len(blended) == 2 and list(blended["blend"]) == [7, 7]
    multiplet = build_catalogue("H", 2, 3)
    h = blended[blended["species"] == "H I"]
    assert h["wavelength_vacuum"][0].to_value(u.nm) == pytest.approx(
        multiplet["wavelength_vacuum"][0].to_value(u.nm), rel=1e-9)


def test_cache_round_trip():
    first = build_catalogue("T", (1, 3), (2, 60))
    files = [p for p in os.listdir(cache_dir()) if p.startswith("lines-")]
    assert files
    again = build_catalogue("T", (1, 3), (2, 60))
    assert np.array_equal(first["frequency"].value, again["frequency"].value)
    assert np.array_equal(first["a_ul"].value, again["a_ul"].value)


def test_positions_only():
    t = build_catalogue("H", 2, (3, 10), a_values=False)
    assert "a_ul" not in t.colnames and "wavelength_vacuum" in t.colnames


@pytest.mark.parametrize("bad", ["3-x", "0", "5-3", (2, 1), "3000"])
def test_bad_ranges(bad):
    with pytest.raises(QuantumNumberError):
        parse_range(bad)


def test_upper_not_above_lower():
    with pytest.raises(QuantumNumberError):
        build_catalogue("H", 5, 3)


def test_rydberg_atom_warns_at_low_n():
    with pytest.warns(AccuracyWarning):
        build_catalogue("C", 2, 3)
    t = build_catalogue("C", 109, 110)
    assert t["label"][0] == "C109α"


def test_merged_rows_record_their_highest_level():
    # at R = 755 the Lyman lines from n ~ 12 up lie closer than a resolution element
    # (Rydberg formula: 1/lambda = R_H (1 - 1/n^2), spacing 2 R_H^-1 / n^3 against lambda/R)
    # and merge into one row: its n_upper_max is above its n_upper; Ly10 stays alone
    cat = build_catalogue("H", 1, (2, 40), fine=True, resolution=755.0,
                          wavelength_range=(900 * u.AA, 925 * u.AA))
    ly10 = cat[cat["n_upper"] == 10]
    assert len(ly10) == 1 and ly10["n_upper_max"][0] == 10
    merged = cat[cat["blend"] > 2]
    assert len(merged) == 1 and merged["n_upper_max"][0] == 40 > merged["n_upper"][0]
    # without merging every row is one line
    plain = build_catalogue("H", 1, (2, 40), wavelength_range=(900 * u.AA, 925 * u.AA))
    assert np.all(plain["n_upper_max"] == plain["n_upper"])
