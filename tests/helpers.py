"""Shared test spectra: the frozen suite spectra of tests/data/suite/ (invented data)."""

import json
from pathlib import Path

import numpy as np
from astropy import units as u

from linefinder.spectral.spectrum import SpectrumData

SUITE = Path(__file__).parent / "data" / "suite"


def suite_spectrum(seed, index):
    """Spectrum `index` of the identify suite's seed `seed`, as frozen by
    tests/data/suite/freeze.py; returns (SpectrumData, truth)."""
    path = SUITE / f"suite_s{seed}_i{index}.npz"
    with np.load(path) as f:
        axis_unit, flux_unit = (u.Unit(s) for s in f["units"])
        spec = SpectrumData(axis=f["axis"] * axis_unit, flux=f["flux"] * flux_unit,
                            uncertainty=f["uncertainty"] * flux_unit, mask=f["mask"],
                            meta=json.loads(str(f["meta"])))
    truth = json.loads(path.with_suffix(".truth.json").read_text())
    return spec, truth


def gaussian_spectrum(axis, lines, *, sigma, rng, continuum=None, unit=u.adu, meta=None,
                      with_errors=True):
    """A spectrum on `axis` (Quantity) of Gaussian lines (centre, FWHM, amplitude; centre
    and FWHM in the axis unit) on `continuum` (an array, default 0) with white noise of
    `sigma` drawn from `rng` (invented data for tests)."""
    x = axis.value
    y = np.zeros(len(x)) if continuum is None else np.asarray(continuum, float).copy()
    for centre, fwhm, amp in lines:
        y = y + amp * np.exp(-0.5 * ((x - centre) / (fwhm / 2.3548)) ** 2)
    y = y + rng.normal(0.0, sigma, len(x))
    err = np.full(len(x), sigma) * unit if with_errors else None
    return SpectrumData(axis, y * unit, err, meta=dict(meta or {"source": "synthetic"}))
