"""From features to named lines, a redshift and what is left unexplained.

`redshift` searches the shift that explains the most features by whole
series, `matching` assigns lines to features globally, `lyman_break` and
`single_line` treat the spectra with one clear line, `forced` measures the
lines a secure solution predicts where the search found none, `table`
builds the identification table, and `pipeline` (`identify`) runs these
steps in order.
"""

from .matching import Assignment, assign
from .pipeline import Identification, default_species, identify
from .redshift import Solution, search_shift

__all__ = ["identify", "Identification", "default_species", "Solution", "search_shift", "assign",
           "Assignment"]
