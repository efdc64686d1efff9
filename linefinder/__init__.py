"""linefinder: identify hydrogen and hydrogen-like spectral lines.

The catalogue side is importable without matplotlib or the spectrum readers:

>>> from linefinder import build_catalogue
>>> t = build_catalogue("H", 2, (3, 6), medium="air")
"""

from ._version import __version__
from .catalogue import build_catalogue, cache_dir
from .levels import level_table
from .species import Species, parse_species

__all__ = ["__version__", "build_catalogue", "cache_dir", "level_table", "parse_species", "Species"]
