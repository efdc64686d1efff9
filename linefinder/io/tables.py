"""Writing tables to disk without losing anything.

`write_table` picks the format from the file suffix (.csv, .tsv, .ecsv,
.fits, .parquet, .json, .votable/.xml), refuses to overwrite an existing file
unless ``force`` is set, and writes through a temporary file so that an
interrupted run never leaves half a file behind.
"""

import json
import os
from pathlib import Path

import numpy as np
from astropy.table import QTable, Table

from ..errors import LinefinderError, OutputExistsError

__all__ = ["write_table", "check_writable", "FORMATS_BY_SUFFIX", "table_to_records", "json_default"]

FORMATS_BY_SUFFIX = {".csv": "ascii.csv", ".tsv": "ascii.tab", ".ecsv": "ascii.ecsv",
                     ".fits": "fits", ".fit": "fits", ".parquet": "parquet", ".json": "json",
                     ".votable": "votable", ".xml": "votable", ".vot": "votable"}


class OutputFormatError(LinefinderError, ValueError):
    """An output file name whose suffix names no supported format."""


def check_writable(path, *, force=False):
    """Raise unless `path` may be written (absent, or ``force``)."""
    path = Path(path)
    if path.exists() and not force:
        raise OutputExistsError(f"{path}: exists; use --force to overwrite")
    return path


def json_default(obj):
    """json.dumps fallback for numpy scalars and arrays."""
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return None if not np.isfinite(obj) else float(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


def _clean(value):
    if isinstance(value, (np.floating, float)):
        return None if not np.isfinite(value) else float(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.str_):
        return str(value)
    if value is np.ma.masked:
        return None
    return value


def table_to_records(table):
    """List of dicts (plain Python values, masked and NaN as None) of a table."""
    plain = Table(table, masked=False, copy=False) if isinstance(table, QTable) else table
    out = []
    cols = plain.colnames
    data = {c: plain[c] for c in cols}
    for i in range(len(plain)):
        row = {}
        for c in cols:
            v = data[c][i]
            if np.ma.is_masked(v):
                row[c] = None
            else:
                row[c] = _clean(v.value if hasattr(v, "unit") and hasattr(v, "value") else v)
        out.append(row)
    return out


_FITS_KEYS = {"medium": "MEDIUM", "air_formula": "AIRFORM", "constants": "CONSTANT",
              "linefinder_version": "LFVERS", "frame": "FRAME", "redshift": "REDSHIFT"}


def _ascii_strings(table):
    """Copy of `table` whose text columns and metadata are ASCII (FITS allows no other)."""
    from ..catalogue.names import ascii_label

    out = table.copy(copy_data=True)
    for name in out.colnames:
        col = out[name]
        if col.dtype.kind in "UO":
            out[name] = [ascii_label(v) if v is not np.ma.masked else "" for v in col]
    meta = dict(table.meta)
    out.meta = {}
    for key, card in _FITS_KEYS.items():
        if meta.get(key) is not None:
            out.meta[card] = ascii_label(meta[key]) if isinstance(meta[key], str) else meta[key]
    out.meta["LFMETA"] = ascii_label(json.dumps(meta, default=json_default, ensure_ascii=False))
    return out


def write_table(table, path, *, force=False, fmt=None):
    """Write `table` to `path`; the suffix chooses the format unless `fmt` is given."""
    path = check_writable(path, force=force)
    suffix = path.suffix.lower()
    fmt = fmt or FORMATS_BY_SUFFIX.get(suffix)
    if fmt is None:
        raise OutputFormatError(f"{path}: unknown output format {suffix!r}; use one of "
                                f"{', '.join(sorted(FORMATS_BY_SUFFIX))}")
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.part{os.getpid()}")
    try:
        if fmt == "json":
            payload = {"meta": {k: v for k, v in table.meta.items()},
                       "units": {c: str(table[c].unit) for c in table.colnames
                                 if getattr(table[c], "unit", None) is not None},
                       "rows": table_to_records(table)}
            tmp.write_text(json.dumps(payload, indent=1, ensure_ascii=False, default=json_default))
        else:
            out = table
            if fmt in ("ascii.csv", "ascii.tab"):
                out = Table(table)
            elif fmt == "fits":
                out = _ascii_strings(table)
            out.write(tmp, format=fmt, overwrite=True)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
