"""``linefinder peaks``: measured features of a spectrum."""

import sys

import numpy as np
from astropy import units as u
from astropy.table import Table

from ..errors import SpectrumFormatError
from ..features.detect import FEATURE_COLUMNS, find_features
from ..io.read import describe_input, is_peak_list, read_input
from .catalogue import _common_output, _emit, parse_unit

__all__ = ["register", "add_spectrum_options", "add_reading_options", "list_input", "load_input", "features_in_unit", "kinds_from_args"]


def add_spectrum_options(p):
    """Options shared by every command that reads one spectrum."""
    p.add_argument("spectrum", metavar="SPECTRUM", help="FITS, CSV/TSV/text or ECSV file")
    p.add_argument("--index", type=int, help="which spectrum of a file holding several (0-based)")
    add_reading_options(p)
    p.add_argument("--list", action="store_true", help="list what the file holds and stop")


def add_reading_options(p):
    """How spectra are read and their features found (every spectrum command, batch too)."""
    p.add_argument("--hdu", help="FITS extension (number or EXTNAME)")
    p.add_argument("--medium", choices=["air", "vacuum"], help="override the medium the file states")
    p.add_argument("--columns", metavar="AXIS,FLUX[,ERR]", help="text columns by name or 0-based number")
    p.add_argument("--input-unit", metavar="UNIT", help="unit of the file's spectral axis if not stated")
    p.add_argument("--snr", type=float, default=5.0, help="detection threshold in sigma (default 5)")
    p.add_argument("--resolution", type=float, metavar="R", help="resolving power (default: file or estimated)")
    p.add_argument("--detector", choices=["auto", "profiles", "scales"], default="auto",
                   help="feature finder: profiles (profile fits), scales (scale-space scan and "
                        "one joint fit: fast, finds lines 10-300 Å wide), or auto (default: "
                        "scales where the strong lines are broad, else profiles)")
    p.add_argument("--emission", action="store_true", help="emission features only")
    p.add_argument("--absorption", action="store_true", help="absorption features only")


def kinds_from_args(args):
    if args.emission and not args.absorption:
        return ("emission",)
    if args.absorption and not args.emission:
        return ("absorption",)
    return ("emission", "absorption")


def list_input(args):
    """With --list: print what the file holds (before any --index or --hdu is applied); True
    when it did, and the command stops there."""
    if not getattr(args, "list", False):
        return False
    for line in describe_input(args.spectrum):
        print(line)
    return True


def load_input(args):
    """Read the file named on the command line (spectrum or peak list)."""
    if args.snr is not None and not args.snr > 0:
        raise SpectrumFormatError("--snr must be positive")
    if args.resolution is not None and not args.resolution > 0:
        raise SpectrumFormatError("--resolution must be positive")
    data = read_input(args.spectrum, index=args.index, hdu=args.hdu, medium=args.medium,
                      columns=args.columns, input_unit=args.input_unit)
    for note in data.meta.get("read_notes", []):    # what the reader noticed, said once
        print(f"note: {args.spectrum}: {note}", file=sys.stderr)
    return data


def _convert(values, unit_from, unit_to):
    return (values * unit_from).to_value(unit_to, equivalencies=u.spectral())


def features_in_unit(table, unit):
    """Exchange-layout table of features (contract columns first) in `unit`."""
    src = table["center"].unit
    c = table["center"].value
    out = Table()
    out["center"] = _convert(c, src, unit) if len(c) else np.array([], float)

    def width(w):
        w = np.asarray(w, dtype=float)
        if not len(c):
            return np.array([], float)
        return np.abs(_convert(c + w / 2, src, unit) - _convert(c - w / 2, src, unit))

    out["center_err"] = width(2 * table["center_err"].value) / 2
    out["fwhm"] = width(table["fwhm"].value)
    out["fwhm_err"] = width(2 * table["fwhm_err"].value) / 2
    out["amplitude"] = table["amplitude"].value
    out["flux"] = table["flux"].value
    out["flux_err"] = table["flux_err"].value
    equivalent_width = table["equivalent_width"].value
    out["equivalent_width"] = np.sign(equivalent_width) * width(np.abs(equivalent_width)) if len(c) else np.array([], float)
    out["snr"] = table["snr"]
    out["kind"] = table["kind"]
    out["flags"] = table["flags"]
    for extra in ("equivalent_width_err", "profile", "continuum", "chi2_red"):
        if extra in table.colnames:
            col = table[extra]
            out[extra] = width(col.value) if extra == "equivalent_width_err" else getattr(col, "value", col)
    out.meta.update(table.meta)
    out.meta["unit"] = str(unit)
    out.meta["flux_unit"] = str(table["flux"].unit)
    out.meta["amplitude_unit"] = str(table["amplitude"].unit)
    return out


def _cmd_peaks(args):
    if list_input(args):
        return 0
    data = load_input(args)
    if is_peak_list(data):
        raise SpectrumFormatError(f"{args.spectrum}: is already a peak list; 'peaks' needs a spectrum")
    result = find_features(data, snr=args.snr, resolution=args.resolution, kinds=kinds_from_args(args),
                           detector=args.detector)
    unit = parse_unit(args.unit) if args.unit else data.axis.unit
    flat = features_in_unit(result.features, unit)
    meta = result.features.meta
    title = (f"# {args.spectrum}: {len(flat)} features at S/N >= {args.snr:g}; axis {unit}, medium "
             f"{meta['medium']} ({meta.get('medium_source')}); noise {meta['noise_source']}; "
             f"R {_fmt_r(meta['resolution'])} ({meta['resolution_source']})")
    return _emit(flat, args, default_columns=FEATURE_COLUMNS, title=title)


def _fmt_r(r):
    return f"{r:.0f}" if r else "unknown"


def register(sub):
    p = sub.add_parser("peaks", help="detect and measure emission and absorption features",
                       description="Detect and measure features of a 1-D spectrum with honest "
                                   "uncertainties.")
    add_spectrum_options(p)
    p.add_argument("--unit", help="unit of the output positions (default: the file's)")
    _common_output(p)
    p.set_defaults(func=_cmd_peaks)
