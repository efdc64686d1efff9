"""The column-role vocabulary shared by every reader.

A table column (or an image extension) plays one role: the spectral axis, the
flux, its uncertainty as a standard deviation, an inverse variance, a
variance, a mask or quality flag, or a peak centre.  Each role has one list of
names here, matched case-insensitively in the order given (the first name of a
role present in the file wins); FITS tables, FITS image extensions, text
files and ECSV tables all ask this module.
"""

import numpy as np

__all__ = ["AXIS", "FLUX", "SIGMA", "IVAR", "VAR", "MASK", "PEAK_CENTER", "ERROR_ROLES",
           "find_role", "error_role", "to_sigma"]

AXIS = ("wavelength", "wave", "lambda", "loglam", "wave_air", "wave_vac", "awav", "wl", "lam",
        "wavelength_air", "wavelength_vacuum", "freq", "frequency", "nu", "energy", "ener", "e",
        "wavenumber", "sigma_cm", "velocity", "x")
FLUX = ("flux", "flux_density", "fluxdens", "intensity", "counts", "count", "signal", "spec",
        "spectrum", "ta", "t_a", "tmb", "t_mb", "tant", "rate", "f", "y", "t", "temperature", "t_b",
        "tb", "brightness")
SIGMA = ("error", "err", "sigma", "staterror", "stat_err", "flux_err", "fluxerr", "flux_error",
         "uncertainty", "uncert", "unc", "noise", "stddev", "std", "sig", "dflux", "e_flux")
IVAR = ("ivar", "invvar", "inverse_variance", "weight", "wht")
VAR = ("var", "variance")
MASK = ("mask", "qual", "quality", "dq", "flag", "flags", "and_mask", "or_mask")
PEAK_CENTER = ("center", "centre", "peak", "position", "line_center", "wavelength_center")

#: the three ways a file states the noise, in the order they are looked for
ERROR_ROLES = (("sigma", SIGMA), ("ivar", IVAR), ("var", VAR))


def find_role(names, role):
    """Index in `names` of the first name of `role` (a tuple above) present, or None."""
    low = [str(n).lower().strip() for n in names]
    for cand in role:
        if cand in low:
            return low.index(cand)
    return None


def error_role(names):
    """(index, kind) of the noise column among `names` (kind 'sigma', 'ivar' or 'var'), or (None, None)."""
    for kind, role in ERROR_ROLES:
        idx = find_role(names, role)
        if idx is not None:
            return idx, kind
    return None, None


def to_sigma(kind, values):
    """1-sigma uncertainty from a column of `kind` ('sigma', 'ivar' or 'var'); inf where unusable."""
    values = np.asarray(values, dtype=float)
    if kind == "sigma":
        return values
    with np.errstate(divide="ignore", invalid="ignore"):
        if kind == "ivar":
            return np.where(values > 0, 1.0 / np.sqrt(np.where(values > 0, values, 1.0)), np.inf)
        return np.where(values > 0, np.sqrt(np.where(values > 0, values, 0.0)), np.inf)
