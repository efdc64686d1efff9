"""Line catalogues built from the physics, and the lists that go with them.

`build` turns levels and rates into a table of Rydberg-series lines (vacuum,
air or the conventional medium; shifted by a redshift or velocity; in any
spectral unit; cached on disk), `names` labels them (Lyα, Hβ, H12, Pa7 ...),
`strengths` states the intensities the search expects (Case B, curve of
growth), `companions` lists the strong non-hydrogenic lines that come with
hydrogen lines, and `contaminants` the night-sky and telluric features.
"""

from .build import CATALOGUE_COLUMNS, MEDIA, build_catalogue, cache_dir, parse_range
from .companions import COMPANION_LINES, companion_lines
from .contaminants import SKY_LINES_AIR, TELLURIC_BANDS_AIR, sky_mask
from .names import line_label, line_labels, series_name, series_names
from .strengths import CASE_B_HBETA, expected_strengths, strength_assumption

__all__ = ["build_catalogue", "parse_range", "cache_dir", "CATALOGUE_COLUMNS", "MEDIA",
           "line_label", "line_labels", "series_name", "series_names", "CASE_B_HBETA",
           "expected_strengths", "strength_assumption", "COMPANION_LINES", "companion_lines",
           "SKY_LINES_AIR", "TELLURIC_BANDS_AIR", "sky_mask"]
