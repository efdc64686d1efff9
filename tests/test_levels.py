"""Energy levels against measured intervals and the reference database.

Reference values (each beside its check):
* NIST ASD hydrogen levels, Kramida 2010 (At. Data Nucl. Data Tables 96, 586),
  n = 2 fine-structure levels, hyperfine-averaged, in cm^-1 (recalled to the digits shown).
* H 1S-2S: 2 466 061 413 187.035 kHz (Parthey et al. 2011, PRL 107, 203001).
* H-D 1S-2S isotope shift: 670 994 334.606 kHz (Parthey et al. 2010, PRL 104, 233001).
* H 2S1/2-2P1/2 Lamb shift: 1057.845 MHz (Lundeen & Pipkin 1981, from memory).
* Hydrogen-like Lyman-alpha doublets: NIST ASD vacuum wavelengths in Å (theory of
  Erickson 1977 / Johnson & Soff 1985 as compiled there), recalled to the 4-5 digits shown.
"""

import numpy as np
import pytest

from linefinder.errors import QuantumNumberError
from linefinder.physics import constants as K
from linefinder.physics.levels import (
    binding_energy_hz,
    enumerate_levels,
    level_table,
    shift_terms_hz,
)

NIST_H_N2 = {  # Kramida 2010 via NIST ASD, cm^-1 above 1S1/2
    (2, 0, 0.5): 82258.9543992821,
    (2, 1, 0.5): 82258.9191133,
    (2, 1, 1.5): 82259.2850014,
}


@pytest.mark.parametrize("state, ref", NIST_H_N2.items())
def test_h_levels_nist(state, ref):
    e = (binding_energy_hz("H", *state) - binding_energy_hz("H", 1, 0, 0.5)) / K.HZ_PER_CM
    # target of 2e-9 relative; the theory values in the database carry ~1e-10
    assert abs(e / ref - 1) < 2e-9


def test_h_1s_2s_parthey():
    nu = binding_energy_hz("H", 2, 0, 0.5) - binding_energy_hz("H", 1, 0, 0.5)
    assert abs(nu - 2466061413187.035e3) < 2e6


def test_d_1s_2s_isotope_shift():
    nu_h = binding_energy_hz("H", 2, 0, 0.5) - binding_energy_hz("H", 1, 0, 0.5)
    nu_d = binding_energy_hz("D", 2, 0, 0.5) - binding_energy_hz("D", 1, 0, 0.5)
    assert abs((nu_d - nu_h) - 670994334.606e3) < 2e6


def test_lamb_shift():
    lamb = binding_energy_hz("H", 2, 0, 0.5) - binding_energy_hz("H", 2, 1, 0.5)
    assert abs(lamb - 1057.845e6) < 1e6


LYMAN_ALPHA = {  # NIST ASD vacuum wavelengths (Å): (2p3/2, 2p1/2)
    "He II": (303.7804, 303.7858),
    "C VI": (33.7342, 33.7396),
    "O VIII": (18.9671, 18.9725),
    "Ne X": (12.1321, 12.1375),
    "Si XIV": (6.1804, 6.1858),
    "Ar XVIII": (3.7311, 3.7365),
    "Fe XXVI": (1.7780, 1.7834),
}


@pytest.mark.parametrize("species, ref", LYMAN_ALPHA.items())
def test_lyman_alpha_ions(species, ref):
    e1 = binding_energy_hz(species, 1, 0, 0.5)
    for j, lam_ref in zip((1.5, 0.5), ref):
        lam = K.C / (binding_energy_hz(species, 2, 1, j) - e1) * 1e10
        # tolerance: 1e-5 relative (the target), widened to one unit of the last digit
        # quoted because these 4-decimal values are recalled, not read off the table
        tol = max(1e-5 * lam_ref, 1e-4)
        assert abs(lam - lam_ref) < tol


def test_fe_xxvi_lyman_alpha_energies():
    # Fe XXVI Ly-alpha1 6973.18 eV and Ly-alpha2 6951.86 eV (Johnson & Soff 1985,
    # At. Data Nucl. Data Tables 33, 405, as used in X-ray line lists; from memory)
    e1 = binding_energy_hz("Fe XXVI", 1, 0, 0.5)
    for j, ev in ((1.5, 6973.18), (0.5, 6951.86)):
        e = (binding_energy_hz("Fe XXVI", 2, 1, j) - e1) / K.HZ_PER_EV
        assert abs(e / ev - 1) < 1e-5


def test_dirac_limit_exact():
    # without QED, recoil or size, the Dirac formula with reduced mass must give
    # the Sommerfeld fine-structure splitting of 2P: (Z alpha)^2 R / 16 to leading order
    terms = shift_terms_hz("H", [2, 2], [1, 1], [0.5, 1.5])
    split = terms["dirac_reduced_mass"][1] - terms["dirac_reduced_mass"][0]
    r = 1 / (1 + 1 / K.MP_ME)
    leading = K.ALPHA ** 2 * K.RYDBERG_HZ * r / 16
    assert split == pytest.approx(leading, rel=2 * K.ALPHA ** 2)


def test_level_degeneracies():
    n, l, j = enumerate_levels(1, 6)
    g = (2 * j + 1)
    for k in range(1, 7):
        assert g[n == k].sum() == 2 * k ** 2


def test_high_n_smooth():
    # binding energy at high n approaches the Rydberg formula with reduced mass
    n = np.array([100, 500, 1000])
    e = binding_energy_hz("H", n, n - 1, n - 0.5)
    ryd = -K.RYDBERG_HZ / (1 + 1 / K.MP_ME) / n ** 2
    assert np.allclose(e / ryd, 1, rtol=1e-8)


def test_level_table_columns():
    t = level_table("D", 3)
    assert list(t.colnames[:6]) == ["species", "n", "l", "j", "g", "label"]
    assert t["energy"][0].value == 0
    assert t.meta["constants"].startswith("CODATA")


@pytest.mark.parametrize("args", [(0, 0, 0.5), (2, 2, 2.5), (2, 1, 2.5), (1, 0, -0.5)])
def test_bad_quantum_numbers(args):
    with pytest.raises(QuantumNumberError):
        binding_energy_hz("H", *args)
