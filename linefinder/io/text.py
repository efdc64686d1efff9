"""Read spectra and peak lists from text: CSV, TSV, whitespace columns, ECSV.

* A header line is recognised when its first field is not a number; comment
  lines start with ``#``, ``%``, ``!`` or ``;``.  Comment lines of the form
  ``# medium: air``, ``# resolution: 5000`` or ``# unit: nm`` are read.
* Columns are chosen by name (wavelength/wave/lambda/wl, frequency/freq/nu,
  energy, wavenumber; flux/intensity/counts/...; error/err/sigma/ivar/var)
  or by position (axis, flux, uncertainty), or explicitly with ``columns``
  (names or 0-based numbers, "axis,flux[,uncertainty]").
* The axis unit comes from the header (``wavelength [Angstrom]``,
  ``wave_nm``, ``freq(MHz)``), an ECSV unit, a ``# unit:`` comment or
  ``input_unit``.
* A table with a ``center`` (or ``centre``, ``peak``, ``position``) column and
  no flux column is a peak list.
"""

import re

import numpy as np
from astropy import units as u
from astropy.table import QTable

from ..errors import SpectrumFormatError, UnitsError
from ..spectral.spectrum import SpectrumData
from . import columns as roles
from .columns import error_role, find_role, to_sigma
from .units import parse_flux_unit, parse_spectral_unit, unit_from_label

__all__ = ["read_text"]

_COMMENT = ("#", "%", "!", ";")


def _is_number(text):
    try:
        float(text)
        return True
    except ValueError:
        return False


def _split(line, delim):
    if delim is None:
        return line.split()
    return [p.strip() for p in line.split(delim)]


def _meta_from_comments(comments):
    meta = {}
    for c in comments:
        m = re.match(r"^[#%!;]+\s*([A-Za-z_ ]+?)\s*[:=]\s*(.+?)\s*$", c)
        if not m:
            continue
        key, val = m.group(1).strip().lower(), m.group(2).strip()
        if key in ("medium", "wavelength medium", "wave medium"):
            meta["medium"] = "air" if val.lower().startswith("air") else "vacuum"
        elif key in ("resolution", "resolving power", "r"):
            try:
                meta["resolution"] = float(val)
            except ValueError:
                pass
        elif key in ("unit", "units", "axis unit", "wavelength unit", "spectral unit"):
            # free text such as "wavelength in Angstrom, flux in erg/s/cm2/Angstrom"
            axis_word = re.search(r"\b(?:wavelength|frequency|energy|wave)\s+in\s+([^\s,;()]+)", val, re.I)
            flux_word = re.search(r"\bflux\s+in\s+([^\s,;()]+)", val, re.I)
            if axis_word:
                meta["unit"] = axis_word.group(1)
                meta["unit_from_text"] = val
                if flux_word:
                    meta["flux_unit"] = flux_word.group(1)
            else:
                meta["unit"] = val
        elif key in ("flux unit", "flux units", "bunit"):
            meta["flux_unit"] = val
        elif key in ("object", "target", "name"):
            meta["object"] = val
    return meta


def read_text(path, *, columns=None, input_unit=None, medium=None):
    """Read a text file as a `SpectrumData` or, for peak lists, a QTable."""
    text_path = str(path)
    if text_path.lower().endswith(".ecsv"):
        return _read_ecsv(path, input_unit=input_unit, medium=medium)
    try:
        with open(path, "r", encoding="utf-8-sig", errors="strict") as fh:
            raw = fh.read().splitlines()
    except UnicodeDecodeError:
        raise SpectrumFormatError(f"{path}: not a text file (is it FITS or binary?)") from None
    comments = [ln for ln in raw if ln.lstrip().startswith(_COMMENT)]
    body = [(i + 1, ln) for i, ln in enumerate(raw) if ln.strip() and not ln.lstrip().startswith(_COMMENT)]
    if not body:
        raise SpectrumFormatError(f"{path}: the file holds no data")
    first = body[0][1]
    delim = "," if "," in first else "\t" if "\t" in first else ";" if ";" in first else None
    header = None
    if not all(_is_number(tok) for tok in _split(first, delim) if tok):
        header = _split(first, delim)
        body = body[1:]
    if not body:
        raise SpectrumFormatError(f"{path}: a header but no data rows")
    rows = []
    width = None
    for lineno, line in body:
        parts = [p for p in _split(line, delim)]
        if width is None:
            width = len(parts)
        if len(parts) != width:
            raise SpectrumFormatError(f"{path}: line {lineno} has {len(parts)} fields, expected {width}")
        rows.append((lineno, parts))
    if header is None:
        header = [f"col{i}" for i in range(width)]
    if len(header) != width:
        raise SpectrumFormatError(f"{path}: header has {len(header)} names but rows have {width} fields")
    names, units = zip(*(unit_from_label(h) for h in header))
    meta = _meta_from_comments(comments)

    def numeric(col):
        out = np.empty(len(rows))
        for k, (lineno, parts) in enumerate(rows):
            val = parts[col]
            try:
                out[k] = float(val) if val not in ("", "nan", "NaN", "null", "--") else np.nan
            except ValueError:
                raise SpectrumFormatError(f"{path}: line {lineno}, column {header[col]!r}: "
                                          f"{val!r} is not a number") from None
        return out

    center_col = find_role(names, roles.PEAK_CENTER)
    if columns:
        chosen = _columns_option(columns, names, path)
        ax, fl, er = (chosen + [None, None])[:3]
    else:
        ax = find_role(names, roles.AXIS)
        fl = find_role(names, roles.FLUX)
        er = None
        if center_col is not None and fl is None:
            return _peaks_from_rows(path, names, units, numeric, center_col, meta, input_unit, medium)
        if ax is None and fl is None:
            if width < 2:
                raise SpectrumFormatError(f"{path}: need at least two columns (axis and flux)")
            if header[0] != "col0":
                raise SpectrumFormatError(f"{path}: cannot tell which columns hold the axis and the flux "
                                          f"({', '.join(header)}); use --columns AXIS,FLUX[,ERROR]")
            ax, fl = 0, 1
            er = 2 if width >= 3 else None
        elif ax is None or fl is None:
            raise SpectrumFormatError(f"{path}: cannot tell which columns hold the axis and the flux "
                                      f"({', '.join(header)}); use --columns AXIS,FLUX[,ERROR]")
    kind_err = None
    if er is None and not columns:
        er, kind_err = error_role(names)
    elif er is not None:
        low = names[er].lower()
        kind_err = "ivar" if low in roles.IVAR else "var" if low in roles.VAR else "sigma"
    unit_text = input_unit or units[ax] or meta.get("unit")
    if unit_text is None:
        raise SpectrumFormatError(f"{path}: the unit of column {header[ax]!r} is not stated; "
                                  "give it with --input-unit (e.g. angstrom, nm, MHz, keV)")
    try:
        axis_unit = parse_spectral_unit(unit_text, what=f"column {header[ax]!r}")
    except UnitsError as exc:
        raise SpectrumFormatError(f"{path}: {exc}") from None
    flux_unit = parse_flux_unit(units[fl] or meta.get("flux_unit"))
    axis = numeric(ax)
    flux = numeric(fl)
    sigma = None
    noise_source = None
    if er is not None:
        sigma = to_sigma(kind_err, numeric(er))
        noise_source = f"file (column {header[er]}{', inverse variance' if kind_err == 'ivar' else ''})"
    med, med_src = _text_medium(medium, meta, names[ax], axis_unit)
    out_meta = {"source": str(path), "axis_unit_source": "--input-unit" if input_unit else
                ("header" if units[ax] else "comment"), "medium": med, "medium_source": med_src,
                "noise_source": noise_source, "resolution": meta.get("resolution"),
                "columns": [header[ax], header[fl]] + ([header[er]] if er is not None else []),
                "object": meta.get("object", "")}
    return SpectrumData(axis=axis * axis_unit, flux=flux * flux_unit,
                        uncertainty=None if sigma is None else sigma * flux_unit, meta=out_meta)


def _text_medium(override, meta, axis_name, axis_unit):
    if override:
        return override, "--medium"
    if not axis_unit.is_equivalent(u.m):
        return "vacuum", "frequency/energy axis"
    low = axis_name.lower()
    if "air" in low:
        return "air", f"column name {axis_name!r}"
    if "vac" in low:
        return "vacuum", f"column name {axis_name!r}"
    if "medium" in meta:
        return meta["medium"], "comment line"
    return "vacuum", "not stated in the file: assumed vacuum (use --medium air to change)"


def _columns_option(text, names, path):
    out = []
    low = [n.lower() for n in names]
    for part in str(text).split(","):
        part = part.strip()
        if part.isdigit():
            idx = int(part)
            if idx >= len(names):
                raise SpectrumFormatError(f"{path}: --columns names column {idx}, the file has {len(names)}")
        elif part.lower() in low:
            idx = low.index(part.lower())
        else:
            raise SpectrumFormatError(f"{path}: --columns: no column {part!r} ({', '.join(names)})")
        out.append(idx)
    if len(out) < 2:
        raise SpectrumFormatError(f"{path}: --columns needs at least AXIS,FLUX")
    return out


def _peaks_from_rows(path, names, units, numeric, center_col, meta, input_unit, medium):
    unit_text = input_unit or units[center_col] or meta.get("unit")
    if unit_text is None:
        raise SpectrumFormatError(f"{path}: the unit of the peak centres is not stated; "
                                  "give it with --input-unit")
    unit = parse_spectral_unit(unit_text, what="peak centres")
    t = QTable()
    t["center"] = numeric(center_col) * unit
    low = [n.lower() for n in names]
    for want, cands, has_unit in (("center_err", ("center_err", "centre_err", "err", "error", "sigma",
                                                  "uncertainty", "center_error"), True),
                                  ("fwhm", ("fwhm", "width"), True),
                                  ("amplitude", ("amplitude", "height", "peak_flux", "amp"), False),
                                  ("flux", ("flux", "integrated_flux"), False),
                                  ("snr", ("snr", "s/n", "sn", "significance"), False)):
        for c in cands:
            if c in low:
                vals = numeric(low.index(c))
                t[want] = vals * unit if has_unit else vals
                break
    if "kind" in low:
        t["kind"] = ["emission"] * len(t)
    return _finish_peaks(t, path, meta, medium, unit)


def _finish_peaks(t, path, meta, medium, unit):
    if len(t) == 0:
        raise SpectrumFormatError(f"{path}: the peak list is empty")
    if not np.all(np.isfinite(t["center"].value)):
        raise SpectrumFormatError(f"{path}: the peak list has non-numeric centres")
    med, med_src = _text_medium(medium, meta, "center", unit)
    t.meta.update({"source": str(path), "medium": med, "medium_source": med_src,
                   "kind": "peaks", "resolution": meta.get("resolution")})
    if "kind" not in t.colnames:
        t["kind"] = "emission"
    return t


def _read_ecsv(path, *, input_unit=None, medium=None):
    try:
        table = QTable.read(path, format="ascii.ecsv")
    except Exception as exc:  # astropy raises several types for broken ECSV
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise SpectrumFormatError(f"{path}: not a readable ECSV table ({text})") from None
    names = table.colnames
    low = [n.lower() for n in names]
    meta = {k.lower(): v for k, v in table.meta.items() if isinstance(v, (str, int, float))}
    center = find_role(names, roles.PEAK_CENTER)
    flux = find_role(names, roles.FLUX)
    if center is not None and flux is None:
        t = QTable()
        col = table[names[center]]
        unit = getattr(col, "unit", None) or (parse_spectral_unit(input_unit) if input_unit else None)
        if unit is None:
            raise SpectrumFormatError(f"{path}: the peak centres have no unit; give --input-unit")
        t["center"] = u.Quantity(col, unit)
        for want in ("center_err", "fwhm", "amplitude", "flux", "snr", "kind"):
            if want in low:
                t[want] = table[names[low.index(want)]]
        return _finish_peaks(t, path, meta, medium, unit)
    ax = find_role(names, roles.AXIS)
    if ax is None or flux is None:
        raise SpectrumFormatError(f"{path}: no axis and flux columns among {', '.join(names)}")
    axis = u.Quantity(table[names[ax]])
    if axis.unit is None or axis.unit == u.dimensionless_unscaled:
        if not input_unit:
            raise SpectrumFormatError(f"{path}: column {names[ax]!r} has no unit; give --input-unit")
        axis = axis.value * parse_spectral_unit(input_unit)
    fl = u.Quantity(table[names[flux]])
    unc = None
    src = None
    idx, kind = error_role(names)
    if idx is not None:
        unc = to_sigma(kind, u.Quantity(table[names[idx]]).value) * fl.unit
        src = f"file (column {names[idx]})"
    med, med_src = _text_medium(medium, meta, names[ax], axis.unit)
    return SpectrumData(axis=axis, flux=fl, uncertainty=unc,
                        meta={"source": str(path), "medium": med, "medium_source": med_src,
                              "noise_source": src, "resolution": meta.get("resolution"),
                              "axis_unit_source": "ECSV unit"})
