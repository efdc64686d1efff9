"""Einstein A and f values against Wiese & Fuhr 2009 and sum rules.

Wiese & Fuhr 2009, J. Phys. Chem. Ref. Data 38, 565 (hydrogen tables), values
recalled to the five digits shown; the comparison tolerance is 1e-3 relative.
"""

import numpy as np
import pytest

from linefinder.physics.transitions import fine_components, multiplets

WF2009_MULTIPLET_A = {  # (n_upper, n_lower): A in s^-1
    (2, 1): 4.6986e8, (3, 1): 5.5751e7, (4, 1): 1.2785e7,
    (3, 2): 4.4101e7, (4, 2): 8.4193e6, (5, 2): 2.5304e6, (6, 2): 9.7320e5,
    (4, 3): 8.9860e6, (5, 3): 2.2008e6, (5, 4): 2.6993e6,
}
WF2009_F = {(2, 1): 0.41641, (3, 1): 0.079142, (3, 2): 0.64108, (4, 2): 0.11938}


@pytest.mark.parametrize("pair, ref", WF2009_MULTIPLET_A.items())
def test_multiplet_a_wiese_fuhr(pair, ref):
    m = multiplets("H", [pair[0]], [pair[1]])
    assert m["A"][0] == pytest.approx(ref, rel=1e-3)


@pytest.mark.parametrize("pair, ref", WF2009_F.items())
def test_multiplet_f_wiese_fuhr(pair, ref):
    m = multiplets("H", [pair[0]], [pair[1]])
    assert m["f"][0] == pytest.approx(ref, rel=1e-3)


def test_fine_components_wiese_fuhr():
    c = fine_components("H", [2, 3, 3], [1, 1, 2])
    sel = (c["pair"] == 0) & (c["l_upper"] == 1)
    # 2p -> 1s: 6.2649e8 s^-1 for both j (Wiese & Fuhr 2009)
    assert np.allclose(c["A"][sel], 6.2649e8, rtol=1e-3)
    sel = (c["pair"] == 2) & (c["l_upper"] == 2) & (c["j_upper"] == 2.5)
    # 3d5/2 -> 2p3/2: 6.4651e7 s^-1 (Wiese & Fuhr 2009)
    assert c["A"][sel][0] == pytest.approx(6.4651e7, rel=1e-3)


def test_component_sums_equal_multiplet():
    c = fine_components("H", [5], [3])
    m = multiplets("H", [5], [3])
    assert np.sum(c["g_upper"] * c["A"]) / 50 == pytest.approx(m["A"][0], rel=1e-14)
    # line strengths of the doublet split must sum to the LS multiplet strength
    assert c["S"].sum() == pytest.approx(m["S"][0], rel=1e-14)


@pytest.mark.parametrize("species", ["H", "He II", "Fe XXVI"])
def test_multiplet_centre_is_weighted_mean_of_components(species):
    # many pairs in one call (the plan is built for all of them at once), up to n' = 10
    nl = np.array([1, 2, 3, 6, 10, 10, 4])
    nu = np.array([2, 3, 40, 7, 11, 300, 5])
    c = fine_components(species, nu, nl)
    m = multiplets(species, nu, nl)
    w = c["g_upper"] * c["A"]
    centre = np.bincount(c["pair"], weights=w * c["frequency"]) / np.bincount(c["pair"], weights=w)
    np.testing.assert_allclose(m["frequency"], centre, rtol=1e-14)
    np.testing.assert_array_equal(m["components"], np.bincount(c["pair"]))
    np.testing.assert_allclose(m["S"], np.bincount(c["pair"], weights=c["S"]), rtol=1e-13)


def test_trk_sum_from_ground_state():
    # Sum of f(1s -> np) over bound states = 0.5650 (Bethe & Salpeter 1957, sec. 61;
    # the continuum carries the remaining 0.4350 of the Thomas-Reiche-Kuhn sum).
    # f defined with the electron mass sums to m_e/m_r for the two-body atom.
    from linefinder.physics.species import parse_species
    n = np.arange(2, 1501)
    m = multiplets("H", n, np.ones_like(n))
    tail = 1.6 / (2 * 1500 ** 2)   # f ~ 1.6 n^-3 (Kramers), summed beyond n = 1500
    mass_factor = 1 / parse_species("H").reduced_mass_ratio
    assert m["f"].sum() + tail == pytest.approx(0.5650 * mass_factor, abs=1e-4)


def test_menzel_high_n():
    # f(n -> n+1) ~ n M1 (1 + 1.5/n), M1 = 0.190775 (Menzel 1968, Nature 218, 756),
    # an approximation good to ~1e-3 for n >~ 50
    n = np.array([60, 109, 300, 999])
    m = multiplets("H", n + 1, n)
    approx = n * 0.190775 * (1 + 1.5 / n)
    assert np.allclose(m["f"] / approx, 1, atol=1.5e-3)


def test_2p_lifetime():
    # H 2p lifetime 1.596 ns (Bethe & Salpeter; common textbook value)
    c = fine_components("H", [2], [1])
    assert 1 / c["A"][0] == pytest.approx(1.596e-9, rel=1e-3)


def test_ion_scaling():
    # non-relativistic hydrogenic A scales as Z^4 (times the reduced-mass factor)
    h = multiplets("H", [3], [2])["A"][0]
    c6 = multiplets("C VI", [3], [2])["A"][0]
    assert c6 / h == pytest.approx(6 ** 4, rel=3e-3)
