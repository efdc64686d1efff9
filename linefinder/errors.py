"""Exceptions and warnings raised by linefinder.

Every exception also inherits the built-in it resembles, so callers that
already catch ``ValueError`` or ``OSError`` keep working.
"""

__all__ = [
    "LinefinderError",
    "SpeciesError",
    "QuantumNumberError",
    "UnitsError",
    "SpectrumFormatError",
    "OutputExistsError",
    "LinefinderWarning",
    "AccuracyWarning",
]


class LinefinderError(Exception):
    """Base class of every error that linefinder raises on purpose."""


class SpeciesError(LinefinderError, ValueError):
    """A species name that cannot be parsed, or is not hydrogen-like."""


class QuantumNumberError(LinefinderError, ValueError):
    """Quantum numbers or n ranges outside what is physical or supported."""


class UnitsError(LinefinderError, ValueError):
    """A unit that is unknown or does not fit the quantity."""


class SpectrumFormatError(LinefinderError, ValueError):
    """A spectrum or peak-list file that cannot be read as such."""


class OutputExistsError(LinefinderError, FileExistsError):
    """An output file exists and overwriting was not asked for."""


class LinefinderWarning(UserWarning):
    """Base class of linefinder's warnings."""


class AccuracyWarning(LinefinderWarning):
    """A result is computed outside the range where its stated accuracy holds."""
