"""Features of a spectrum: continuum, detection and measurement.

`continuum` fits the smooth continuum and finds its steps, `candidates`
finds features by matched filtering at several widths, `profiles` fits
Gaussian and Voigt profiles to groups of them, `deblend` organises those
joint fits and repairs their components, and `detect` (`find_features`)
runs the whole path and returns a table with honest uncertainties.
"""

from .continuum import find_steps, fit_continuum, robust_noise
from .detect import (
           EQUIVALENT_WIDTH_CONVENTION,
           FEATURE_COLUMNS,
           FeatureResult,
           find_features,
)

__all__ = ["find_features", "FeatureResult", "FEATURE_COLUMNS", "EQUIVALENT_WIDTH_CONVENTION", "fit_continuum",
           "robust_noise", "find_steps"]
