"""Built-in contaminants at fixed observed wavelengths (never redshifted).

Night-sky emission lines and telluric absorption bands, standard air
wavelengths in Å (values recalled from common sky-line atlases, e.g.
Osterbrock et al. 1996, to the 0.01 Å shown; band edges are approximate,
common practice).  Features on a sky line are flagged ``sky``, absorption
features in a telluric band ``telluric``; each set is left out of the
redshift search when asked (``mask_sky``, ``mask_telluric``), and a masked
feature is named only where the solution's other lines predict a line above
the detection limit there (it keeps its flag).
"""

import numpy as np
from astropy import units as u

from ..spectral.medium import air_to_vacuum

__all__ = ["SKY_LINES_AIR", "TELLURIC_BANDS_AIR", "sky_mask"]

SKY_LINES_AIR = {"[O I] 5577": 5577.34, "Na I D2": 5889.95, "Na I D1": 5895.92,
                 "[O I] 6300": 6300.30, "[O I] 6364": 6363.78, "OH 6864": 6863.96,
                 "OH 7913": 7913.71, "OH 8399": 8399.17, "OH 8827": 8827.10}
SKY_FLOOR_AA = 0.2
TELLURIC_BANDS_AIR = {"O2 B band": (6867.0, 6884.0), "H2O 7200": (7160.0, 7340.0),
                      "O2 A band": (7594.0, 7621.0), "H2O 8200": (8130.0, 8350.0),
                      "H2O 9300": (9300.0, 9650.0)}


def sky_mask(center, center_err, fwhm, *, medium="vacuum", tolerance=1.0, kind=None, lines=True,
             bands=True):
    """Boolean array: features that coincide with a sky line or are absorption in a telluric band.

    `center`, `center_err`, `fwhm` are wavelength Quantities; a feature is on a
    sky line when closer than `tolerance` times (its FWHM/4 + 3 sigma), at least
    SKY_FLOOR_AA (sky-line wavelengths and a typical calibration).  A quarter
    FWHM still catches a residual pulled by a weaker neighbour, while a strong
    line merely overlapping a sky line keeps its own, distinct centre.  Sky-line
    residuals can have either sign; telluric bands absorb, so with `kind`
    ("emission"/"absorption" per feature) only absorption features in a band
    are masked: an emission line seen through a band is attenuated, not made.
    `lines` and `bands` choose which of the two tests apply.
    """
    c = u.Quantity(center)
    if not c.unit.is_equivalent(u.m):
        return np.zeros(c.shape, dtype=bool)
    c_aa = c.to_value(u.AA)
    err = u.Quantity(center_err).to_value(u.AA)
    quarter = u.Quantity(fwhm).to_value(u.AA) / 4
    use_lines, use_bands = lines, bands
    sky = np.array(list(SKY_LINES_AIR.values()))
    band = np.array(list(TELLURIC_BANDS_AIR.values()))
    if medium == "vacuum":
        sky = air_to_vacuum(sky * u.AA).to_value(u.AA)
        band = air_to_vacuum(band * u.AA).to_value(u.AA)
    out = np.zeros(len(c_aa), dtype=bool)
    absorbing = np.ones(len(c_aa), dtype=bool) if kind is None else \
        np.asarray(kind).astype(str) != "emission"
    for i, x in enumerate(np.atleast_1d(c_aa)):
        tol = tolerance * (quarter[i] + 3 * err[i] if np.isfinite(err[i]) else 2 * quarter[i])
        if use_lines and np.any(np.abs(sky - x) < max(tol, SKY_FLOOR_AA)):
            out[i] = True
        elif use_bands and absorbing[i] and np.any((band[:, 0] <= x) & (x <= band[:, 1])):
            out[i] = True
    return out
