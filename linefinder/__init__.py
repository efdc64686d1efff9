"""linefinder: identify hydrogen and hydrogen-like spectral lines.

The main verbs:

>>> import linefinder as lf
>>> t = lf.build_catalogue("H", 2, (3, 6), medium="air")     # Balmer lines from theory
>>> result = lf.identify("spectrum.fits")                    # doctest: +SKIP
>>> result.status, result.z                                  # doctest: +SKIP

`identify` and `find_features` take a file path, a ``specutils.Spectrum`` or
arrays with units; `read_spectrum` reads a file; `write_report` writes the
tables, plots and HTML page of an identification; `level_table` lists the
energy levels of a species; `batch` identifies many spectra on Dask into Parquet
tables.  The subpackages hold the parts: `physics`,
`catalogue`, `spectral`, `io`, `features`, `identification`, `report`,
`parallel`, `simulate`, `cli`.
"""

from ._version import __version__
from .api import as_spectrum, find_features, identify, read_spectrum
from .catalogue.build import build_catalogue, cache_dir
from .features.detect import FeatureResult
from .identification.pipeline import Identification
from .parallel import batch
from .physics.levels import level_table
from .physics.species import Species, parse_species
from .report.summary import write_report
from .spectral.spectrum import SpectrumData

__all__ = ["__version__", "identify", "find_features", "read_spectrum", "as_spectrum", "batch",
           "build_catalogue", "cache_dir", "level_table", "write_report", "parse_species",
           "Species", "SpectrumData", "FeatureResult", "Identification"]
