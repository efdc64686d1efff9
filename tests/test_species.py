import pytest
import scipy.constants as sc

from linefinder.errors import SpeciesError
from linefinder.physics.species import from_roman, parse_species, to_roman


@pytest.mark.parametrize("text, name, Z, A, charge", [
    ("H", "H I", 1, 1, 1), ("H I", "H I", 1, 1, 1), ("D", "D I", 1, 2, 1), ("2H", "D I", 1, 2, 1),
    ("T", "T I", 1, 3, 1), ("He II", "He II", 2, 4, 2), ("He+", "He II", 2, 4, 2),
    ("3He II", "3He II", 2, 3, 2), ("C VI", "C VI", 6, 12, 6), ("C5+", "C VI", 6, 12, 6),
    ("Fe XXVI", "Fe XXVI", 26, 56, 26), ("Fe25+", "Fe XXVI", 26, 56, 26),
    ("Fe+25", "Fe XXVI", 26, 56, 26), ("O^7+", "O VIII", 8, 16, 8), ("U XCII", "U XCII", 92, 238, 92),
    ("Z=26", "Fe XXVI", 26, 56, 26), ("He", "He I", 2, 4, 1), ("C I", "C I", 6, 12, 1),
])
def test_parse(text, name, Z, A, charge):
    sp = parse_species(text)
    assert (sp.name, sp.Z, sp.A, sp.charge) == (name, Z, A, charge)


@pytest.mark.parametrize("bad", ["Xx", "Fe XXV", "He III", "Z=119", "", "H II", "Fe 30+", "3D"])
def test_bad_species(bad):
    with pytest.raises(SpeciesError):
        parse_species(bad)


def test_codata_masses():
    # source: CODATA 2022 mass ratios as shipped by scipy.constants
    assert parse_species("H").core_mass_me == sc.physical_constants["proton-electron mass ratio"][0]
    assert parse_species("D").core_mass_me == sc.physical_constants["deuteron-electron mass ratio"][0]
    assert parse_species("He II").core_mass_me == pytest.approx(
        sc.physical_constants["alpha particle-electron mass ratio"][0], rel=1e-15)


def test_ame_nuclear_mass():
    # AME2020 atomic mass of 12C is 12 u exactly (definition of u); the nucleus is
    # 12 u - 6 m_e + B_e / c^2 with B_e(C) ~ 1030 eV (Lunney et al. 2003 fit).
    sp = parse_species("C VI")
    me_u = sc.physical_constants["electron mass in u"][0]
    expected = 12.0 / me_u - 6 + 1030.1 / 510998.95
    assert sp.core_mass_me == pytest.approx(expected, rel=2e-9)
    # 56Fe atomic mass 55.93493554 u (AME2020, Wang et al. 2021)
    fe = parse_species("Fe XXVI")
    assert fe.core_mass_me * me_u == pytest.approx(55.93493554 - 26 * me_u, rel=1e-6)


def test_roman_round_trip():
    for n in range(1, 120):
        assert from_roman(to_roman(n)) == n
    with pytest.raises(ValueError):
        from_roman("IIII")
