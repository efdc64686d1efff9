"""The 21-cm line found in radio spectra: injected galaxy profiles and noise (invented
data, scenarios of this test), and an observed 21-cm survey spectrum (tests/data/real/,
origin and expected answer in its README: ALFALFA, AGC 100051, cz = 13 632 km/s,
W50 = 136 km/s, S/N 5.6)."""

from pathlib import Path

import numpy as np
import pytest
from astropy import units as u
from helpers import gaussian_spectrum
from scipy.ndimage import convolve1d

import linefinder as lf
from linefinder.features.table import FeatureResult
from linefinder.identification.hyperfine_line import read_hyperfine
from linefinder.spectral.spectrum import prepare

REAL = Path(__file__).parent / "data" / "real"
C_KMS = 299792.458
NU21_MHZ = 1420.405751768
# a survey-like band: 1024 channels over 1340-1365 MHz (about 5.4 km/s each)
BAND = np.linspace(1340.0, 1365.0, 1024) * u.MHz


def _galaxy(rng, cz, width_kms, peak, sigma=1.0):
    """A double-horned profile (two Gaussians a width apart) at optical velocity cz."""
    centre = NU21_MHZ / (1 + cz / C_KMS)
    half = 0.5 * width_kms / C_KMS * centre
    horn = 0.45 * width_kms / C_KMS * centre
    return gaussian_spectrum(BAND, [(centre - half / 2, horn, peak), (centre + half / 2, horn, peak)],
                             sigma=sigma, rng=rng, unit=u.mJy)


def _pixels_only(spec):
    """A feature result with no features: what `read_hyperfine` needs (the pixels)."""
    p = prepare(spec)
    return FeatureResult(features=None, spectrum=p, continuum=np.zeros(len(p)),
                         noise=np.ones(len(p)))


def test_galaxy_line_recovered_with_honest_error():
    rng = np.random.default_rng(21)
    pulls = []
    for cz in (12500.0, 13500.0, 15000.0, 16500.0):
        spec = _galaxy(rng, cz, 200.0, 2.5)
        r = read_hyperfine(_pixels_only(spec))
        assert r.label == "H I 21 cm" and r.status == "secure"
        pulls.append((r.velocity_kms - cz) / r.velocity_err_kms)
    # (a double-horned profile is no Gaussian: its centre still comes within 3 sigma)
    assert np.max(np.abs(pulls)) < 3


@pytest.mark.parametrize("smooth", [False, True])
def test_noise_gives_no_line(smooth):
    """White noise, and noise smoothed as survey spectra are (Hanning, 1/4 1/2 1/4): the
    matched filter's S/N is measured against the filtered spectrum's own spread, so
    correlated noise claims no line."""
    rng = np.random.default_rng(2100 + smooth)
    found = []
    for _ in range(30):
        spec = gaussian_spectrum(BAND, [], sigma=1.0, rng=rng, unit=u.mJy)
        if smooth:
            spec.flux = convolve1d(spec.flux.value, [0.25, 0.5, 0.25], mode="nearest") * u.mJy
        r = read_hyperfine(_pixels_only(spec))
        found.append(r.status)
    assert found.count("none") == 30


def test_identify_names_the_21cm_line_in_a_synthetic_galaxy():
    spec = _galaxy(np.random.default_rng(5), 14000.0, 250.0, 3.0)
    res = lf.identify(spec)
    assert res.status == "secure"
    assert res.velocity_convention == "optical"
    assert abs(res.velocity_kms - 14000.0) < 3 * res.velocity_err_kms + 10
    labels = [str(x) for x in res.features["label"] if x]
    assert labels == ["H I 21 cm"]


def test_observed_21cm_spectrum():
    """ALFALFA AGC 100051: cz = 13 632 km/s, W50 = 136 km/s, S/N 5.6 (catalogue values,
    tests/data/real/README.md).  At S/N ~ 6 the line is tentative on its own, and no
    recombination-line system is built from the noise."""
    spec = lf.read_spectrum(REAL / "hi21cm_agc100051.fits")
    res = lf.identify(spec)
    assert res.status in ("secure", "tentative")
    assert abs(res.velocity_kms - 13632.0) < 68.0          # half the line's W50
    named = [str(x) for x in res.features["label"] if x]
    assert named == ["H I 21 cm"]
