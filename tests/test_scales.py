"""The scale-space detector and the pixel check of solutions.

Injected Gaussians (invented data) for the measurements; observed spectra of
tests/data/real/ (origin of each in its README) for what the detector and the
check must do on real data.
"""

from pathlib import Path

import numpy as np
import pytest
from astropy import units as u

import linefinder as lf
from linefinder.features.scales import scale_peaks, scan_scales
from linefinder.spectral.spectrum import SpectrumData

REAL = Path(__file__).parent / "data" / "real"
C_KMS = 299792.458


def _gaussian_spectrum(rng, centre, fwhm, amp, sigma=0.02, n=4000):
    lam = np.geomspace(4000.0, 6000.0, n)
    y = 1 + 0.3 * (lam / 5000.0 - 1) + amp * np.exp(-0.5 * ((lam - centre) / (fwhm / 2.3548)) ** 2)
    y = y + rng.normal(0, sigma, n)
    return SpectrumData(lam * u.AA, y * u.adu, np.full(n, sigma) * u.adu,
                        meta={"source": "synthetic", "resolution": 5000.0})


@pytest.mark.parametrize("fwhm", [2.0, 20.0, 150.0])
def test_a_line_of_any_width_is_found_at_its_width(rng, fwhm):
    spec = _gaussian_spectrum(rng, 5003.0, fwhm, -0.3)
    t = lf.find_features(spec, detector="scales").features
    k = int(np.argmin(np.abs(t["center"].to_value(u.AA) - 5003.0)))
    assert t["kind"][k] == "absorption"
    # the ladder's rungs are sqrt(2) apart: the width comes within that factor
    assert 1 / 1.5 < t["fwhm"][k].to_value(u.AA) / max(fwhm, 1.0) < 1.5
    assert abs(t["center"][k].to_value(u.AA) - 5003.0) < 4 * t["center_err"][k].to_value(u.AA) + 0.05


def test_scan_finds_nothing_in_noise(rng):
    n = 5000
    u_ax = np.log(np.geomspace(4000.0, 8000.0, n))
    y = 1 + rng.normal(0, 0.01, n)
    scan = scan_scales(u_ax, y, np.full(n, 0.01), np.ones(n, bool), fwhm_min=3e-4)
    assert len(scale_peaks(scan, snr=5.0)) <= 1


def test_white_dwarf_balmer_lines_found_and_named():
    # GD 71, DA white dwarf (ESO standard-star table): Balmer absorption tens to hundreds
    # of Angstrom wide; expected velocity within 150 km/s of 0 [memory]
    res = lf.identify(REAL / "gd71_white_dwarf.csv", detector="scales")
    assert res.status in ("secure", "tentative")
    assert abs(res.velocity_kms) < 150.0
    labels = {str(x) for x in res.features["label"]}
    assert {"Hα", "Hβ", "Hγ", "Hδ", "Hε"} <= labels


def test_supernova_without_hydrogen_gets_no_hydrogen():
    # SN 2014J, Type Ia (Open Supernova Catalog export): no hydrogen lines in a Type Ia
    for detector in ("scales", "profiles"):
        res = lf.identify(REAL / "sn2014j_type_ia_nir.csv", detector=detector)
        assert res.status != "secure"
        assert not any(str(x) for x in res.features["label"])


def test_galaxy_absorption_and_emission_redshift():
    # SDSS DR18 spectrum of NGC 3073: SPECOBJ Z = 0.003763 [file]; Balmer absorption
    # with Halpha emission
    res = lf.identify(REAL / "sdss_ngc3073.fits", detector="scales")
    assert res.status == "secure"
    assert abs(res.z - 0.003763) / (1 + 0.003763) * C_KMS < 150.0
    labels = {str(x) for x in res.features["label"]}
    assert {"Hβ", "Hδ"} <= labels
    # the stellar lines are named as companions, not as hydrogen
    assert {"Ca II K"} <= {str(x) for x in res.features["companion"]}


def test_noise_band_of_a_21cm_spectrum_makes_no_secure_system():
    # ALFALFA spectrum of AGC 100051: no recombination line is expected in 1340-1365 MHz
    res = lf.identify(REAL / "hi21cm_agc100051.fits", detector="scales")
    assert res.status != "secure"
