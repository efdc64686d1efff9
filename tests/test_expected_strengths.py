"""Expected strengths within a series, the prior of the intensity score."""

import numpy as np
from astropy import units as u

from linefinder.catalogue.build import build_catalogue
from linefinder.catalogue.strengths import (
    expected_strengths,
    multiplet_codes,
    strength_assumption,
)


def _row(cat, label):
    return int(np.flatnonzero(np.asarray(cat["label"]).astype(str) == label)[0])


def test_balmer_emission_follows_case_b():
    # Case B, T = 1e4 K, n_e = 100 cm^-3: Halpha/Hbeta = 2.86, Hgamma/Hbeta = 0.468
    # (Storey & Hummer 1995; Osterbrock & Ferland 2006, Table 4.4)
    cat = build_catalogue("H", 2, (3, 8))
    s, _ = expected_strengths(cat, "emission")
    a, b, g = (s[_row(cat, k)] for k in ("Hα", "Hβ", "Hγ"))
    assert a == 1.0
    assert np.isclose(a / b, 2.86, rtol=0.01)
    assert np.isclose(g / b, 0.468, rtol=0.01)


def test_lyman_absorption_follows_flat_curve_of_growth():
    # f(Ly-alpha) = 0.4164, f(Ly-beta) = 0.07912 (NIST ASD, Wiese & Fuhr 2009); vacuum
    # wavelengths 1215.67 and 1025.72 Angstrom; strength ~ (f lambda)^(1/3) by construction
    cat = build_catalogue("H", 1, (2, 6))
    s, _ = expected_strengths(cat, "absorption")
    ratio = s[_row(cat, "Lyβ")] / s[_row(cat, "Lyα")]
    assert np.isclose(ratio, (0.07912 * 1025.72 / (0.4164 * 1215.67)) ** (1 / 3), rtol=2e-3)
    assert strength_assumption("absorption").startswith("absorption: flat curve of growth")


def test_fine_structure_components_share_a_multiplet_code():
    # Lyman-alpha of Fe XXVI is resolved into its 2p3/2 and 2p1/2 components (1.7780 and
    # 1.7834 Angstrom, recalled from memory of the X-ray literature); both are one multiplet
    cat = build_catalogue("Fe XXVI", 1, (2, 3), fine=True, resolution=2000)
    assert len(cat) >= 3
    codes = multiplet_codes(cat)
    alpha = np.asarray(cat["n_upper"]) == 2
    assert len(set(codes[alpha])) == 1
    assert codes[~alpha][0] != codes[alpha][0]
    lam = np.sort(cat["rest_wavelength_vacuum"][alpha].to_value(u.AA))
    assert np.allclose(lam, [1.7780, 1.7834], atol=2e-4)
