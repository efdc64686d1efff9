"""Radial dipole integrals against direct quadrature and closed forms."""

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import eval_genlaguerre, gammaln

from linefinder.physics.radial import dipole_radial_integrals


def _u(n, l, r):
    """Normalised u = r R_nl(r) for Z = 1 (scipy's generalised Laguerre polynomials)."""
    rho = 2 * r / n
    log_norm = 1.5 * np.log(2 / n) + 0.5 * (gammaln(n - l) - np.log(2 * n) - gammaln(n + l + 1))
    return r * np.exp(log_norm - rho / 2) * rho ** l * eval_genlaguerre(n - l - 1, 2 * l + 1, rho)


def _quad(n, l, k, lk):
    val, _ = quad(lambda r: _u(n, l, r) * r * _u(k, lk, r), 0, 6 * (n * n + 10), limit=400,
                  points=np.linspace(0, 3 * n * n, 40)[1:])
    return val


def test_closed_forms():
    # <2p|r|1s> = 128 sqrt(6)/243 a0 (source: Bethe & Salpeter 1957, the radial integrals of
    # hydrogen in closed form; recalled from memory)
    X, _ = dipole_radial_integrals(np.array([2]), np.array([1]))
    assert X[0, 1] == pytest.approx(128 * np.sqrt(6) / 243, rel=1e-14)


@pytest.mark.parametrize("n, k", [(3, 2), (5, 3), (9, 4), (12, 7), (15, 2)])
def test_against_quadrature(n, k):
    X, Y = dipole_radial_integrals(np.array([n]), np.array([k]))
    for l in range(1, k + 1):
        assert abs(X[0, l]) == pytest.approx(abs(_quad(n, l, k, l - 1)), rel=1e-7, abs=1e-10)
        if l < k:
            assert abs(Y[0, l]) == pytest.approx(abs(_quad(n, l - 1, k, l)), rel=1e-7, abs=1e-10)


def test_vectorised_rows_agree():
    n = np.array([7, 30, 8, 100])
    k = np.array([3, 10, 7, 2])
    X, Y = dipole_radial_integrals(n, k)
    for i in range(len(n)):
        Xi, Yi = dipole_radial_integrals(n[i:i + 1], k[i:i + 1])
        assert np.allclose(X[i, :k[i] + 1], Xi[0], rtol=1e-13)
        assert np.allclose(Y[i, :k[i] + 1], Yi[0], rtol=1e-13)


def test_bad_input():
    with pytest.raises(ValueError):
        dipole_radial_integrals(np.array([2]), np.array([2]))
