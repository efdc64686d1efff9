"""One entry point for every input: spectra (FITS, text, ECSV, specutils formats) and peak lists."""

from pathlib import Path

from astropy.table import QTable

from ..errors import SpectrumFormatError
from ..spectral.spectrum import SpectrumData
from .fits import count_fits_spectra, describe_fits, is_fits, read_fits
from .text import read_text

__all__ = ["read_input", "read_spectrum", "describe_input", "is_peak_list", "count_spectra"]


def is_peak_list(obj):
    return isinstance(obj, QTable) and "center" in obj.colnames


def _is_fits_name(p):
    return is_fits(p) or p.suffix.lower() in (".fits", ".fit", ".fts", ".fz") or \
        p.name.lower().endswith(".fits.gz")


def count_spectra(path):
    """How many spectra `read_spectrum` can read from `path` (``index`` 0 .. n-1); 1 for a
    text file.  Raises the reader's errors for a file that is no spectrum file."""
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(2, "No such file", str(p))
    if p.is_file() and p.stat().st_size and _is_fits_name(p):
        return count_fits_spectra(p)
    return 1


def read_input(path, *, index=None, hdu=None, medium=None, columns=None, input_unit=None):
    """Read `path` into a `SpectrumData` or a peak-list QTable (column ``center``)."""
    p = Path(path)
    if not p.exists():
        raise FileNotFoundError(2, "No such file", str(p))
    if p.is_dir():
        raise SpectrumFormatError(f"{p}: is a folder, not a spectrum file")
    if p.stat().st_size == 0:
        raise SpectrumFormatError(f"{p}: the file is empty")
    if medium not in (None, "air", "vacuum"):
        raise SpectrumFormatError(f"{p}: --medium must be air or vacuum, not {medium!r}")
    if _is_fits_name(p):
        out = read_fits(p, index=index, hdu=hdu, medium=medium, input_unit=input_unit)
    else:
        if hdu is not None:
            raise SpectrumFormatError(f"{p}: --hdu applies to FITS files only")
        out = read_text(p, columns=columns, input_unit=input_unit, medium=medium)
        if index not in (None, 0) and isinstance(out, SpectrumData):
            raise SpectrumFormatError(f"{p}: holds one spectrum; --index {index} is out of range")
    return out


def read_spectrum(path, *, index=None, hdu=None, medium=None, columns=None, input_unit=None):
    """Read one spectrum from a FITS or text file as a `SpectrumData`.

    ``index`` chooses a spectrum of a multi-spectrum file, ``hdu`` an
    extension; ``medium`` ('air' or 'vacuum') overrides what the file says;
    ``columns`` and ``input_unit`` help with text files that do not name them.
    """
    out = read_input(path, index=index, hdu=hdu, medium=medium, columns=columns,
                     input_unit=input_unit)
    if is_peak_list(out):
        raise SpectrumFormatError(f"{path}: holds a peak list, not a spectrum")
    return out


def describe_input(path):
    p = Path(path)
    if is_fits(p):
        return describe_fits(p)
    out = read_text(p)
    if is_peak_list(out):
        return [f"peak list with {len(out)} peaks"]
    return [f"one spectrum of {len(out)} pixels, axis in {out.axis.unit}"]
