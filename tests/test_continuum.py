"""Continuum fits, including the chunked path for long spectra."""

import numpy as np
import pytest

from linefinder.continuum import CHUNK_PX, fit_continuum


@pytest.mark.parametrize("n", [5000, CHUNK_PX * 3 + 777])
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

    from linefinder.features import find_features
    from linefinder.spectrum import SpectrumData

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
