"""Features of a spectrum: continuum, detection and measurement.

`continuum` fits the smooth continuum and finds its steps, `candidates`
finds features by matched filtering at several widths, `profiles` fits
Gaussian and Voigt profiles to groups of them, `deblend` organises those
joint fits and repairs their components, and `detect` (`find_features`)
runs the whole path and returns a table with honest uncertainties.
"""

from .detect import find_features, FeatureResult, FEATURE_COLUMNS, EQUIVALENT_WIDTH_CONVENTION
from .continuum import fit_continuum, robust_noise, find_steps

__all__ = ["find_features", "FeatureResult", "FEATURE_COLUMNS", "EQUIVALENT_WIDTH_CONVENTION", "fit_continuum",
           "robust_noise", "find_steps"]
