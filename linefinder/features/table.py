"""The feature table and the record every detector returns.

Columns (`FEATURE_COLUMNS` first): centre, FWHM, amplitude, flux, equivalent width with
their errors, S/N, kind, flags, profile, continuum, reduced chi^2, pixel.
"""

from dataclasses import dataclass, field

import numpy as np
from astropy.table import QTable

__all__ = ["FeatureResult", "FEATURE_COLUMNS", "EQUIVALENT_WIDTH_CONVENTION", "feature_table"]

FEATURE_COLUMNS = ["center", "center_err", "fwhm", "fwhm_err", "amplitude", "flux", "flux_err",
                   "equivalent_width", "snr", "kind", "flags"]
EQUIVALENT_WIDTH_CONVENTION = "W = integral of (1 - F/Fc): positive for absorption, negative for emission"


@dataclass
class FeatureResult:
    """Features of one spectrum with what was used to find them."""
    features: QTable
    spectrum: object
    continuum: np.ndarray
    noise: np.ndarray
    meta: dict = field(default_factory=dict)
    scan: object = None     #: the scale-space scan (`scales.ScaleScan`) where one was made


def feature_table(rows, spec, kinds):
    """The feature table of a spectrum from its feature rows (dicts of the columns)."""
    unit = spec.axis.unit
    fu = spec.flux.unit
    rows = [r for r in rows if r["kind"] in kinds]
    rows.sort(key=lambda r: r["center"])
    t = QTable()
    col = lambda k: np.array([r[k] for r in rows], dtype=float)  # noqa: E731
    t["center"] = col("center") * unit
    t["center_err"] = col("center_err") * unit
    t["fwhm"] = col("fwhm") * unit
    t["fwhm_err"] = col("fwhm_err") * unit
    t["amplitude"] = col("amplitude") * fu
    t["flux"] = col("flux") * fu * unit
    t["flux_err"] = col("flux_err") * fu * unit
    t["equivalent_width"] = col("equivalent_width") * unit
    t["equivalent_width_err"] = col("equivalent_width_err") * unit
    t["equivalent_width"].info.description = EQUIVALENT_WIDTH_CONVENTION
    t["snr"] = col("snr")
    t["kind"] = np.array([r["kind"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["flags"] = np.array([r["flags"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["profile"] = np.array([r["profile"] for r in rows], dtype=str) if rows else np.array([], dtype=str)
    t["continuum"] = col("continuum") * fu
    t["chi2_red"] = col("chi2_red")
    t["pixel"] = np.array([r["pixel"] for r in rows], dtype=int)
    return t
