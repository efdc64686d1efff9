"""The public verbs: what a script calls, whatever form its spectrum is in.

`identify` and `find_features` accept a file path, a ``specutils.Spectrum``,
linefinder's own `SpectrumData`, a peak list (QTable with a ``center``
column), or arrays with units: a spectral axis (wavelength, frequency,
energy or wavenumber) as the first argument, the flux as the second and,
optionally, the 1-sigma uncertainty as the third.
"""

from os import PathLike
from pathlib import Path

from astropy import units as u

from .errors import SpectrumFormatError
from .identification.pipeline import identify as _identify
from .io.read import is_peak_list, read_input, read_spectrum
from .spectral.spectrum import SpectrumData, from_specutils

__all__ = ["identify", "find_features", "read_spectrum", "as_spectrum"]

_READ_OPTIONS = ("index", "hdu", "medium", "columns", "input_unit")


def as_spectrum(data, flux=None, uncertainty=None, *, medium="vacuum", **read_options):
    """`SpectrumData` or peak list from any of the accepted forms (see the module docstring)."""
    if isinstance(data, (str, PathLike)):
        path = Path(data)
        if not path.is_file():
            raise SpectrumFormatError(f"{data}: no such file")
        return read_input(path, **{k: v for k, v in read_options.items() if k in _READ_OPTIONS})
    if flux is not None:
        axis, flux = u.Quantity(data), u.Quantity(flux)
        if not (axis.unit.is_equivalent(u.m, equivalencies=u.spectral())):
            raise SpectrumFormatError(f"the spectral axis is in {axis.unit or 'no unit'}, "
                                      "not a wavelength, frequency, energy or wavenumber unit")
        unc = None if uncertainty is None else u.Quantity(uncertainty, flux.unit)
        return SpectrumData(axis=axis, flux=flux, uncertainty=unc,
                            meta={"source": "arrays", "medium": medium,
                                  "medium_source": "argument"})
    if isinstance(data, SpectrumData) or is_peak_list(data):
        return data
    if hasattr(data, "spectral_axis") and hasattr(data, "flux"):
        return from_specutils(data, source="specutils spectrum",
                              meta={"medium": medium, "medium_source": "argument"})
    raise SpectrumFormatError(f"cannot read a spectrum from a {type(data).__name__}; give a file "
                              "path, a specutils Spectrum, or axis and flux arrays with units")


def identify(data, flux=None, uncertainty=None, **options):
    """Identify the hydrogenic lines of a spectrum; returns an `Identification`.

    ``data`` (with ``flux``/``uncertainty`` when it is an axis array) is read by
    `as_spectrum`; the reading options (index, hdu, medium, columns, input_unit)
    and the identification options (species, z, zmin, zmax, snr, resolution,
    mask_sky ...; see `linefinder.identification.identify`) are keywords.
    """
    return _identify(_input(data, flux, uncertainty, options), **options)


def find_features(data, flux=None, uncertainty=None, **options):
    """Find and measure the features of a spectrum; returns a `FeatureResult`.

    Accepts the same inputs as `identify`; options as for
    `linefinder.features.find_features` (snr, resolution, kinds ...).
    """
    from .features.detect import find_features as _find

    spec = _input(data, flux, uncertainty, options)
    if is_peak_list(spec):
        raise SpectrumFormatError(f"{data}: holds a peak list; features are found in spectra")
    return _find(spec, **options)


def _input(data, flux, uncertainty, options):
    """The spectrum or peak list of a call; the reading options are taken out of `options`."""
    read_options = {k: options.pop(k) for k in _READ_OPTIONS if k in options}
    if isinstance(data, (str, PathLike)):
        return as_spectrum(data, **read_options)
    return as_spectrum(data, flux, uncertainty, medium=read_options.get("medium") or "vacuum")
