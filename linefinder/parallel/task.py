"""What a worker runs for one spectrum: read it, identify its lines, and return the
summary row and the rows of its identified features as plain values.  A failure is
returned as a row carrying its one-line message, never raised: the batch goes on."""

import time
import warnings

import numpy as np
from astropy import units as u

__all__ = ["run_task", "READ_OPTIONS", "failed_row"]

READ_OPTIONS = ("hdu", "medium", "columns", "input_unit")


def failed_row(path, index, key, message, seconds=0.0):
    """The summary row of a spectrum that could not be identified."""
    return {"source": str(path), "index": int(index), "key": key, "z": None, "z_err": None,
            "status": "failed", "velocity_kms": None, "velocity_err_kms": None,
            "velocity_convention": None, "n_lines": 0, "lines": "", "seconds": float(seconds),
            "error": message}


def run_task(path, index, options, key, count_error=None):
    """(summary row, feature rows) of spectrum `index` of file `path`."""
    from ..errors import LinefinderError
    from ..identification.pipeline import identify
    from ..io.line_lists import read_line_list
    from ..io.read import read_input

    t0 = time.perf_counter()
    if count_error:
        return failed_row(path, index, key, count_error), []
    options = dict(options)
    read = {k: options.pop(k) for k in READ_OPTIONS if k in options}
    extra = options.pop("extra_lines", None)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")     # library warnings about one file of thousands
            data = read_input(path, index=index, **read)
            lines = read_line_list(extra) if extra else None
            res = identify(data, extra_lines=lines, **options)
    except (LinefinderError, OSError, ValueError, TypeError, KeyError, IndexError,
            ArithmeticError, MemoryError, RuntimeError) as exc:
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        if isinstance(exc, OSError) and getattr(exc, "strerror", None):
            text = exc.strerror
        return failed_row(path, index, key, f"{path}: {text}" if str(path) not in text else text,
                          time.perf_counter() - t0), []
    seconds = time.perf_counter() - t0
    f = res.features
    named = [str(x) for x, s in zip(f["label"], f["system"]) if x and int(s) == 1]
    row = {"source": str(path), "index": int(index), "key": key, "z": res.z, "z_err": res.z_err,
           "status": res.status, "velocity_kms": res.velocity_kms,
           "velocity_err_kms": res.velocity_err_kms,
           "velocity_convention": res.velocity_convention if res.z is not None else None,
           "n_lines": len(named), "lines": ";".join(named), "seconds": seconds, "error": None}
    return row, _feature_rows(f, path, index, key)


def _feature_rows(f, path, index, key):
    """The identified features (a hydrogenic label, a companion or a user line)."""
    rows = []
    if not len(f):
        return rows
    unit = f["center"].unit
    cols = {c: (u.Quantity(f[c]).value if hasattr(f[c], "unit") and f[c].unit is not None
                else np.asarray(f[c])) for c in f.colnames}
    rest = u.Quantity(f["rest_wavelength_vacuum"]).to_value(u.nm)
    for i in range(len(f)):
        if not (cols["label"][i] or cols["companion"][i] or cols["user_line"][i]):
            continue
        rows.append({
            "source": str(path), "index": int(index), "key": key,
            "center": float(cols["center"][i]), "center_err": float(cols["center_err"][i]),
            "fwhm": float(cols["fwhm"][i]), "unit": str(unit), "flux": float(cols["flux"][i]),
            "snr": float(cols["snr"][i]), "kind": str(cols["kind"][i]),
            "flags": str(cols["flags"][i]), "label": str(cols["label"][i]),
            "species": str(cols["species"][i]), "series": str(cols["series"][i]),
            "n_lower": int(cols["n_lower"][i]), "n_upper": int(cols["n_upper"][i]),
            "rest_wavelength_vacuum_nm": float(rest[i]),
            "residual_kms": float(cols["residual_kms"][i]), "score": float(cols["score"][i]),
            "system": int(cols["system"][i]), "companion": str(cols["companion"][i]),
            "user_line": str(cols["user_line"][i])})
    return rows
