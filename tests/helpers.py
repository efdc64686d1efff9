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
