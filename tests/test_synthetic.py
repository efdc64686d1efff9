"""The synthetic generator behind the accuracy benchmarks: its physics must hold."""

import numpy as np

from linefinder.simulate.suite import _saturated_fwhm, make_spectrum


def test_saturated_width_matches_the_profile_numerically():
    # depth profile 1 - exp(-tau g), g a unit Gaussian: half-depth width found on a fine grid
    x = np.linspace(-10, 10, 200001)
    for tau in (1e-4, 0.5, 3.0, 20.0):
        depth = 1 - np.exp(-tau * np.exp(-0.5 * x ** 2))
        above = x[depth >= depth.max() / 2]
        assert abs((above[-1] - above[0]) - _saturated_fwhm(tau, 1.0)) < 1e-3
    # optically thin limit: the Gaussian FWHM, 2 sqrt(2 ln 2)
    assert abs(_saturated_fwhm(1e-6, 1.0) - 2 * np.sqrt(2 * np.log(2))) < 1e-5


def test_absorption_is_multiplicative_and_never_below_zero():
    # a Lyman absorber whose series limit is in the window: the optical depths add, so
    # the crowded lines saturate towards zero flux rather than below it
    rng = np.random.default_rng(13)
    spec, truth = make_spectrum(rng, z=3.0, snr=80.0, resolution=3000.0, kind="absorption",
                                contaminants=False, max_pixels=150000)
    x = np.log(spec.axis.value)
    g = [np.exp(-0.5 * ((x - np.log(l["observed"])) / (l["fwhm_ln"] / 2.3548200450309493)) ** 2)
         for l in truth["lines"]]
    cont = truth["continuum"]
    noiseless = cont * np.exp(-sum(l["tau"] * gi for l, gi in zip(truth["lines"], g)))
    additive = cont + sum(l["amplitude"] * gi for l, gi in zip(truth["lines"], g))
    assert noiseless.min() >= 0
    assert additive.min() < 0          # adding the depths would go below zero flux here
    assert abs(np.std(spec.flux.value - noiseless) - 1.0) < 0.05   # only unit noise is left
