"""Continuum fits: the uniform-knot spline against scipy, long spectra, gaps, lines."""

import numpy as np
import pytest

from linefinder.features.continuum import _UniformSpline, fit_continuum


def test_spline_matches_scipy_least_squares(rng):
    # reference library: scipy.interpolate.make_lsq_spline with the same uniform knots
    from scipy.interpolate import make_lsq_spline

    n = 3001
    y = np.sin(np.arange(n) / 200.0) + rng.normal(0, 0.1, n)
    w2 = rng.uniform(0.5, 2.0, n)
    spline = _UniformSpline(n, 50)
    coef, _ = spline.fit(y, w2)
    mine = spline(coef)
    m = spline.n_coef - 3
    t = (n - 1) / m * np.arange(-3, m + 4)
    x = np.arange(n, dtype=float)
    ref = make_lsq_spline(x, y, t, k=3, w=np.sqrt(w2))(x)
    assert np.max(np.abs(mine - ref)) < 1e-6


def test_gap_wider_than_knots_is_bridged(rng):
    n = 4000
    truth = 10 + np.arange(n) / 1000.0
    y = truth + rng.normal(0, 0.1, n)
    good = np.ones(n, bool)
    exclude = np.zeros(n, bool)
    exclude[1500:2100] = True          # ten knot intervals with no data
    y[1500:2100] += 50                 # a broad feature that must not leak in
    cont, used = fit_continuum(y, np.full(n, 0.1), good, knot_px=60, exclude=exclude)
    assert not used[1500:2100].any()
    assert np.max(np.abs(cont - truth)) < 0.2


@pytest.mark.parametrize("n", [5000, 200_003])
def test_smooth_continuum_recovered(rng, n):
    x = np.arange(n)
    truth = 10 + 2 * np.sin(x / 3000.0)
    y = truth + rng.normal(0, 0.1, n)
    cont, used = fit_continuum(y, np.full(n, 0.1), np.ones(n, bool), knot_px=60)
    # source: least-squares statistics, a cubic spline with knots every 60 pixels averages
    # ~60 pixels, so its error is ~ 0.1/sqrt(60) = 0.013 (0.03 allows the edges)
    assert np.std(cont - truth) < 0.03
    assert used.mean() > 0.95


def test_lines_excluded_do_not_pull_the_continuum(rng):
    n = 3000
    x = np.arange(n)
    line = 50 * np.exp(-0.5 * ((x - 1500) / 3.0) ** 2)
    y = 5 + line + rng.normal(0, 0.1, n)
    cont, _ = fit_continuum(y, np.full(n, 0.1), np.ones(n, bool), knot_px=60)
    assert abs(cont[1500] - 5) < 0.1     # sigma clipping removes the line


def test_lines_found_along_a_long_log_linear_grid(rng):
    # the pixel step of a log-linear grid grows along it (here by e^2): widths must be
    # judged in local pixels, or blue-end lines look like one-pixel spikes
    from astropy import units as u

    from linefinder.features.detect import find_features
    from linefinder.spectral.spectrum import SpectrumData

    R, n = 1000.0, 5000
    dlog = 1 / (2.5 * R)
    lam = 3000.0 * np.exp(dlog * np.arange(n))
    s_ln = 1 / R / 2.3548
    centres = lam[[150, 1200, 2500, 3800, 4850]]
    flux = 10 + sum(40 * np.exp(-0.5 * (np.log(lam / c) / s_ln) ** 2) for c in centres)
    flux = flux + rng.normal(0, 1, n)
    spec = SpectrumData(lam * u.AA, flux * u.adu, np.ones(n) * u.adu,
                        meta={"source": "log grid", "resolution": R})
    found = find_features(spec).features["center"].to_value(u.AA)
    for c in centres:
        assert np.min(np.abs(found - c)) < c / R
