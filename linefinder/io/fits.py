"""Read 1-D spectra from FITS files, with astropy.io.fits.

Handled: images with linear or log-linear dispersion (CRVAL1, CDELT1 or
CD1_1, CRPIX1; CTYPE1 WAVE, AWAV, FREQ, ENER, WAVE-LOG, AWAV-LOG; DC-FLAG = 1;
COEFF0/COEFF1), 2-D images holding one spectrum per row, companion
extensions with the uncertainty (ERR, ERROR, SIGMA, NOISE, STDDEV, UNCERT),
inverse variance (IVAR, INVVAR, WEIGHT) or variance (VAR, VARIANCE) and a
mask (MASK, QUAL, QUALITY, DQ, FLAG); binary tables with spectral, flux and
uncertainty columns found case-insensitively, as scalar rows or as vector
cells (one spectrum per row).  Anything else goes to specutils' readers.
"""

import warnings

import numpy as np
from astropy import units as u
from astropy.io import fits

from ..errors import SpectrumFormatError, UnitsError
from ..spectral.spectrum import SpectrumData
from . import columns as roles
from .columns import ERROR_ROLES, find_role, to_sigma
from .units import parse_flux_unit, parse_spectral_unit

__all__ = ["read_fits", "describe_fits", "is_fits"]

RESOLUTION_KEYS = ("SPEC_RES", "SPECRES", "RESOLVPW", "RESPOWER", "RESOLUTN", "SPECRP")


def is_fits(path):
    try:
        with open(path, "rb") as fh:
            return fh.read(9) == b"SIMPLE  ="
    except OSError:
        return False


def _open(path):
    """All HDUs read into memory.  The library's warnings about the file (a float TNULLn,
    a non-standard keyword) are kept, one line each, in ``hdul.notes``, not raised: only
    a file the library cannot read (truncated, not FITS) is an error."""
    hdul = None
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            with open(path, "rb") as fh:
                hdul = fits.open(fh, memmap=False, lazy_load_hdus=False)
                for h in hdul:
                    _ = h.data  # force reading: truncated files fail here
                hdul = fits.HDUList([_copy(h) for h in hdul])
        notes = []
        for w in caught:
            text = str(w.message).splitlines()[0] if str(w.message) else type(w.message).__name__
            if "truncated" in text.lower():
                raise SpectrumFormatError(f"{path}: not a readable FITS file ({text})")
            if text not in notes:
                notes.append(text)
        hdul.notes = notes
        return hdul
    except (FileNotFoundError, SpectrumFormatError):
        raise
    except Exception as exc:  # astropy raises several types for broken files
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise SpectrumFormatError(f"{path}: not a readable FITS file ({text})") from None


def _copy(h):
    """An in-memory copy of an HDU, keeping the comments of its column keywords (a
    column's description can say what its values mean: "1 = good") and its TNULLn and
    TUCDn keywords."""
    c = h.copy()
    for key in h.header:
        if key.startswith(("TTYPE", "TCOMM", "TDOC")) and key in c.header:
            c.header.comments[key] = h.header.comments[key]
        elif key.startswith(("TNULL", "TUCD")) and key not in c.header:
            # (a float TNULLn the library will not carry: the reader applies it itself)
            c.header[key] = h.header[key]
    return c


def _name(h):
    return (h.name or "").strip().lower()


def _medium_from_header(header, ctype=""):
    ctype = ctype.upper()
    if ctype.startswith("AWAV"):
        return "air", "CTYPE1 = AWAV"
    if ctype.startswith("WAVE"):
        return "vacuum", "CTYPE1 = WAVE"
    if ctype.startswith(("FREQ", "ENER", "WAVN", "VRAD", "VOPT")):
        return "vacuum", "not a wavelength axis" if ctype in ("ENER", "FREQ") else \
            f"CTYPE1 = {ctype} (not a wavelength)"
    for key in ("AIRORVAC", "MEDIUM", "WAVEMEDI", "WAVFRAME", "SPECSYS_MEDIUM"):
        val = str(header.get(key, "")).strip().lower()
        if val.startswith("air"):
            return "air", f"{key} = {header[key]}"
        if val.startswith("vac"):
            return "vacuum", f"{key} = {header[key]}"
    if "VACUUM" in header:
        return ("vacuum" if header["VACUUM"] else "air"), f"VACUUM = {header['VACUUM']}"
    return None, None


def _resolution(header):
    for key in RESOLUTION_KEYS:
        if key in header:
            try:
                val = float(header[key])
            except (TypeError, ValueError):
                continue
            if val > 0:
                return val
    return None


def _image_axis(header, n, path):
    ctype = str(header.get("CTYPE1", "")).strip().upper()
    crval = header.get("CRVAL1")
    cdelt = header.get("CDELT1", header.get("CD1_1"))
    crpix = header.get("CRPIX1", 1.0)
    pix = np.arange(n, dtype=float) + 1.0
    if crval is None or cdelt is None:
        if "COEFF0" in header and "COEFF1" in header:   # log10(lambda/Å) = COEFF0 + COEFF1 i
            return 10 ** (header["COEFF0"] + header["COEFF1"] * (pix - 1)), u.AA, ctype, "COEFF0/1"
        raise SpectrumFormatError(f"{path}: the image has no spectral axis keywords "
                                  "(CRVAL1 with CDELT1 or CD1_1)")
    crval, cdelt, crpix = float(crval), float(cdelt), float(crpix)
    unit_text = header.get("CUNIT1")
    if ctype.endswith("-LOG"):
        unit = parse_spectral_unit(unit_text or "Angstrom", what="CUNIT1")
        axis = crval * np.exp(cdelt * (pix - crpix) / crval)     # FITS WCS paper III, eq. 5
        return axis, unit, ctype, "log (CTYPE1 -LOG)"
    if header.get("DC-FLAG", 0) == 1:
        unit = parse_spectral_unit(unit_text or "Angstrom", what="CUNIT1")
        return 10 ** (crval + cdelt * (pix - crpix)), unit, ctype, "log10 (DC-FLAG = 1)"
    if unit_text is None:
        if ctype.startswith("FREQ"):
            unit_text = "Hz"
        elif ctype.startswith("ENER"):
            unit_text = "J"
        elif ctype.startswith("WAVN"):
            unit_text = "m-1"
        elif ctype.startswith(("WAVE", "AWAV")):
            unit_text = "m"
        else:
            unit_text = "Angstrom"   # older files without CUNIT1 use Å (IRAF practice)
    unit = parse_spectral_unit(unit_text, what="CUNIT1")
    return crval + cdelt * (pix - crpix), unit, ctype, "linear"


def _companions(hdul, shape, skip):
    found = {}
    for i, h in enumerate(hdul):
        if i == skip or h.data is None or not isinstance(h, (fits.ImageHDU, fits.PrimaryHDU)):
            continue
        if np.shape(h.data) != shape:
            continue
        name = _name(h)
        for kind, names in ERROR_ROLES + (("mask", roles.MASK),):
            if name in names and kind not in found:
                found[kind] = (np.asarray(h.data, dtype=float), name.upper())
    return found


def _spectrum_images(hdul):
    out = []
    for i, h in enumerate(hdul):
        if not isinstance(h, (fits.PrimaryHDU, fits.ImageHDU)) or h.data is None:
            continue
        name = _name(h)
        if name in roles.SIGMA + roles.IVAR + roles.VAR + roles.MASK:
            continue
        if h.data.ndim in (1, 2) and h.data.shape[-1] >= 2:
            out.append(i)
    return out


def _find(names, role):
    """The name in `names` that plays `role` (a tuple of `columns`), or None."""
    names = list(names)
    idx = find_role(names, role)
    return None if idx is None else names[idx]


def _spectrum_tables(hdul):
    out = []
    for i, h in enumerate(hdul):
        if isinstance(h, (fits.BinTableHDU, fits.TableHDU)) and h.data is not None and len(h.data):
            cols = h.columns.names
            if _find(cols, roles.AXIS) and _find(cols, roles.FLUX):
                out.append(i)
    return out


def describe_fits(path):
    """Lines describing the spectra a FITS file holds (for ``--list``)."""
    hdul = _open(path)
    lines = []
    with hdul:
        for i, h in enumerate(hdul):
            kind = type(h).__name__
            shape = None if h.data is None else (np.shape(h.data) if not hasattr(h, "columns")
                                                 else f"{len(h.data)} rows: {', '.join(h.columns.names)}")
            lines.append(f"HDU {i} {h.name!r} {kind} {shape}")
        arms = _arms(hdul)
        if arms:
            rows = np.atleast_2d(hdul[f"{arms[0]}_FLUX"].data).shape[0]
            lines.append(f"{rows} spectra, arms {', '.join(a.upper() for a in arms)} joined "
                         "(choose with --index):")
            fm = hdul["FIBERMAP"].data if "FIBERMAP" in hdul else None
            for r in range(rows):
                what = ""
                if fm is not None and r < len(fm):
                    what = " ".join(f"{c}={fm[c][r]}" for c in ("TARGETID", "OBJTYPE")
                                    if c in fm.columns.names)
                lines.append(f"  --index {r}: {what}".rstrip())
            return lines
        imgs = _spectrum_images(hdul)
        all_tabs = _spectrum_tables(hdul)
        tabs = _preferred_tables(hdul, all_tabs)
        n = sum((hdul[i].data.shape[0] if hdul[i].data.ndim == 2 else 1) for i in imgs)
        n += sum(_table_count(hdul[i]) for i in tabs)
        if len(tabs) < len(all_tabs):
            lines.append(f"default: HDU {tabs[0]} {hdul[tabs[0]].name!r}"
                         + (" (the coadd; the other tables are single exposures, --hdu N reads one)"
                            if _name(hdul[tabs[0]]) == "coadd" else " (the other tables hold the same data)"))
        lines.append(f"{n} spectrum/spectra readable (choose with --hdu and --index)")
    return lines


def count_fits_spectra(path):
    """How many spectra `read_fits` can read from `path` with ``index`` (no ``hdu``)."""
    hdul = _open(path)
    with hdul:
        arms = _arms(hdul)
        if arms:
            return int(np.atleast_2d(hdul[f"{arms[0]}_FLUX"].data).shape[0])
        tables = _preferred_tables(hdul, _spectrum_tables(hdul))
        if tables:
            return int(sum(_table_count(hdul[i]) for i in tables))
        images = _spectrum_images(hdul)
        if images:
            return int(sum((hdul[i].data.shape[0] if hdul[i].data.ndim == 2 else 1)
                           for i in images))
    return 1


def _table_count(h):
    cols = h.columns.names
    flux = h.data[_find(cols, roles.FLUX)]
    return len(h.data) if np.ndim(flux) == 2 else 1


def read_fits(path, *, index=None, hdu=None, medium=None, input_unit=None):
    """Read one spectrum from a FITS file (see module docstring)."""
    hdul = _open(path)
    with hdul:
        if hdu is not None:
            key = int(hdu) if str(hdu).lstrip("-").isdigit() else str(hdu)
            try:
                hdul[key]
            except (KeyError, IndexError):
                raise SpectrumFormatError(f"{path}: has no HDU {hdu!r} ({len(hdul)} HDUs)") from None
            chosen = hdul.index_of(key) if not isinstance(key, int) else key
            images = [chosen] if chosen in _spectrum_images(hdul) else []
            tables = [chosen] if chosen in _spectrum_tables(hdul) else []
            if not images and not tables:
                raise SpectrumFormatError(f"{path}: HDU {hdu!r} holds no spectrum")
        else:
            arms = _arms(hdul)
            if arms:
                return _read_arms(path, hdul, arms, index, medium)
            images = _spectrum_images(hdul)
            tables = _preferred_tables(hdul, _spectrum_tables(hdul))
        if tables:
            return _read_table(path, hdul, tables, index, medium, input_unit)
        if images:
            return _read_image(path, hdul, images, index, medium, input_unit)
    return _read_with_specutils(path, medium)


def _preferred_tables(hdul, tables):
    """The tables to choose from: a coadd when the file holds one beside its single exposures,
    and one copy of tables that hold the same data."""
    coadd = [i for i in tables if _name(hdul[i]) == "coadd"]
    if coadd:
        return coadd[:1]
    out = []
    for i in tables:
        if not any(hdul[i].data.tobytes() == hdul[j].data.tobytes() for j in out):
            out.append(i)
    return out


def _arms(hdul):
    """Arm prefixes (B, R, Z ...) of a file whose arms keep their wavelengths in image
    extensions of their own (``B_WAVELENGTH`` beside ``B_FLUX``, ``B_IVAR``, ``B_MASK``)."""
    names = {_name(h) for h in hdul}
    return [n[:-len("_wavelength")] for n in (_name(h) for h in hdul)
            if n.endswith("_wavelength") and n[:-len("_wavelength")] + "_flux" in names]


def _join_arms(pieces):
    """One spectrum from arms (wave, flux, ivar, bad); where arms share pixels (same
    wavelengths within 1e-6 of a pixel) they are combined by inverse variance, and elsewhere
    an overlap is split at its middle."""
    wave, flux, ivar = (np.array(pieces[0][k]) for k in range(3))
    for w2, f2, iv2 in (p[:3] for p in pieces[1:]):
        lo, hi = w2[0], wave[-1]
        if hi < lo:                                   # no overlap: append
            wave, flux, ivar = (np.concatenate([a, b]) for a, b in ((wave, w2), (flux, f2), (ivar, iv2)))
            continue
        j = np.searchsorted(wave, w2)
        step = np.median(np.diff(wave))
        same = (j < len(wave)) & (np.abs(wave[np.minimum(j, len(wave) - 1)] - w2) < 1e-6 * step)
        if same.sum() >= 0.9 * np.sum(w2 <= hi):
            k = j[same]
            tot = ivar[k] + iv2[same]
            with np.errstate(invalid="ignore", divide="ignore"):
                flux[k] = np.where(tot > 0, (flux[k] * ivar[k] + f2[same] * iv2[same]) / tot, flux[k])
            ivar[k] = tot
            rest = ~same & (w2 > hi)
        else:
            mid = 0.5 * (lo + hi)
            keep = wave < mid
            wave, flux, ivar = wave[keep], flux[keep], ivar[keep]
            rest = w2 >= mid
        wave, flux, ivar = (np.concatenate([a, b[rest]]) for a, b in ((wave, w2), (flux, f2), (ivar, iv2)))
    return wave, flux, ivar


def _read_arms(path, hdul, arms, index, medium):
    """One row of a file with per-arm wavelength extensions, its arms joined."""
    rows = np.atleast_2d(hdul[f"{arms[0]}_FLUX"].data).shape[0]
    row = _pick(path, rows, index, "spectra")
    pieces = []
    for arm in arms:
        wave = np.asarray(hdul[f"{arm}_WAVELENGTH"].data, dtype=float)
        flux = np.atleast_2d(np.asarray(hdul[f"{arm}_FLUX"].data, dtype=float))[row]
        names = {_name(h) for h in hdul}
        ivar = np.atleast_2d(np.asarray(hdul[f"{arm}_IVAR"].data, dtype=float))[row] \
            if f"{arm}_ivar" in names else np.ones_like(flux)
        if f"{arm}_mask" in names:
            ivar = np.where(np.atleast_2d(hdul[f"{arm}_MASK"].data)[row] != 0, 0.0, ivar)
        ivar = np.where(np.isfinite(flux) & np.isfinite(ivar), ivar, 0.0)
        pieces.append((wave, flux, ivar))
    pieces.sort(key=lambda p: p[0][0])
    wave, flux, ivar = _join_arms(pieces)
    header = hdul[f"{arms[0]}_FLUX"].header
    unit = parse_spectral_unit(hdul[f"{arms[0]}_WAVELENGTH"].header.get("BUNIT", "Angstrom"),
                               what="BUNIT of the wavelength extension")
    flux_unit = parse_flux_unit(header.get("BUNIT"))
    med, med_src = _medium(hdul[f"{arms[0]}_WAVELENGTH"].header, hdul[0].header, "", medium)
    obj = ""
    if "FIBERMAP" in hdul and row < len(hdul["FIBERMAP"].data):
        fm = hdul["FIBERMAP"].data[row]
        cols = [c.upper() for c in hdul["FIBERMAP"].columns.names]
        obj = " ".join(f"{c}={fm[c]}" for c in ("TARGETID", "OBJTYPE") if c in cols).strip()
    meta = {"source": str(path), "hdu": None, "index": row, "arms": [a.upper() for a in arms],
            "axis_unit_source": "BUNIT of the wavelength extensions", "medium": med,
            "medium_source": med_src, "noise_source": "file (per-arm IVAR, arms joined)",
            "resolution": None, "object": obj}
    sigma = to_sigma("ivar", ivar)
    return SpectrumData(axis=wave * unit, flux=flux * flux_unit, uncertainty=sigma * flux_unit,
                        mask=ivar <= 0, meta=meta)


def _pick(path, n, index, what):
    if index is None:
        if n > 1:
            raise SpectrumFormatError(f"{path}: holds {n} {what}; choose one with --index 0..{n - 1}")
        return 0
    if not (0 <= index < n):
        raise SpectrumFormatError(f"{path}: --index {index} is out of range (0..{n - 1})")
    return index


def _read_image(path, hdul, images, index, medium, input_unit):
    spectra = []
    for i in images:
        data = hdul[i].data
        rows = data.shape[0] if data.ndim == 2 else 1
        spectra.extend((i, r if data.ndim == 2 else None) for r in range(rows))
    which = _pick(path, len(spectra), index, "spectra")
    i, row = spectra[which]
    h = hdul[i]
    header = h.header
    data = np.asarray(h.data, dtype=float)
    flux = data[row] if row is not None else data
    if input_unit:
        axis, _, ctype, form = _image_axis(header, len(flux), path)
        unit = parse_spectral_unit(input_unit, what="--input-unit")
        unit_source = "--input-unit"
    else:
        axis, unit, ctype, form = _image_axis(header, len(flux), path)
        unit_source = "CUNIT1" if "CUNIT1" in header else "assumed (no CUNIT1)"
    comp = _companions(hdul, data.shape, i)
    sigma = None
    noise_source = None
    for kind in ("sigma", "ivar", "var"):
        if kind in comp:
            values, name = comp[kind]
            values = values[row] if row is not None else values
            sigma = to_sigma(kind, values)
            noise_source = f"file ({name} extension, {'inverse variance' if kind == 'ivar' else kind})"
            break
    mask = None
    if "mask" in comp:
        values = comp["mask"][0]
        mask = (values[row] if row is not None else values) != 0
    flux_unit = parse_flux_unit(header.get("BUNIT", hdul[0].header.get("BUNIT")))
    med, med_src = _medium(header, hdul[0].header, ctype, medium)
    meta = {"source": str(path), "hdu": i, "index": row, "dispersion": form,
            "axis_unit_source": unit_source, "medium": med, "medium_source": med_src,
            "noise_source": noise_source, "resolution": _resolution(header) or _resolution(hdul[0].header),
            "object": str(hdul[0].header.get("OBJECT", header.get("OBJECT", ""))).strip()}
    return SpectrumData(axis=axis * unit, flux=flux * flux_unit,
                        uncertainty=None if sigma is None else sigma * flux_unit, mask=mask, meta=meta)


def _medium(header, primary, ctype, override):
    if override:
        return override, "--medium"
    med, src = _medium_from_header(header, ctype)
    if med is None:
        med, src = _medium_from_header(primary, "")
    if med is None:
        return "vacuum", "not stated in the file: assumed vacuum (use --medium air to change)"
    return med, src


def _read_table(path, hdul, tables, index, medium, input_unit):
    entries = []
    for i in tables:
        h = hdul[i]
        entries.extend((i, r) for r in range(_table_count(h)))
    which = _pick(path, len(entries), index, "spectra")
    i, row = entries[which]
    h = hdul[i]
    cols = h.columns.names
    data = h.data
    ax_name = _find(cols, roles.AXIS)
    fl_name = _find(cols, roles.FLUX)
    vector = np.ndim(data[fl_name]) == 2

    notes = list(getattr(hdul, "notes", []))
    # TNULLn as the header states it (the library drops a float one, with a warning)
    nulls = {c.name: h.header.get(f"TNULL{k}", c.null) for k, c in enumerate(h.columns, 1)}

    def column(name):
        values = np.asarray(data[name], dtype=float)
        values = values[row] if vector else values
        null = nulls.get(name)
        if null is not None and str(null).strip() != "":
            # a declared null value, even where the standard allows none (float columns):
            # those pixels are missing
            try:
                hit = values == float(null)
            except (TypeError, ValueError):
                hit = np.zeros(len(values), bool)
            if hit.any():
                values = np.where(hit, np.nan, values)
                note = f"column {name}: {int(hit.sum())} values equal to TNULL = {null} read as missing"
                if note not in notes:
                    # (in place of the library's warning about the same keyword)
                    notes[:] = [n for n in notes if "TNULL" not in n] + [note]
        return values

    try:
        axis = column(ax_name)
        flux = column(fl_name)
    except (TypeError, ValueError):
        raise SpectrumFormatError(f"{path}: column {ax_name} or {fl_name} is not numeric") from None
    col_units = {c.name: c.unit for c in h.columns}
    if ax_name.lower() == "loglam":
        axis = 10 ** axis
        unit = u.AA
        unit_source = "LOGLAM (log10 Å)"
    elif input_unit:
        unit = parse_spectral_unit(input_unit, what="--input-unit")
        unit_source = "--input-unit"
    elif col_units.get(ax_name):
        unit = parse_spectral_unit(col_units[ax_name], what=f"column {ax_name}")
        unit_source = f"TUNIT of {ax_name}"
    else:
        low = ax_name.lower()
        guess = "MHz" if low.startswith(("freq", "nu")) else "keV" if low.startswith(("en", "e")) \
            else "Angstrom"
        unit = parse_spectral_unit(guess)
        unit_source = f"assumed {guess} (column {ax_name} has no unit)"
    sigma = None
    noise_source = None
    for kind, names in ERROR_ROLES:
        name = _find(cols, names)
        if name:
            values = column(name)
            if not np.isfinite(values).any():
                notes.append(f"column {name} holds only null values: dropped (noise estimated)")
                continue
            sigma = to_sigma(kind, values)
            noise_source = f"file (column {name}{', inverse variance' if kind == 'ivar' else ''})"
            break
    mask_name = _find(cols, roles.MASK) or _find(cols, GOOD_COLUMNS)
    mask = None
    if mask_name:
        q = column(mask_name)
        if _good_is_one(h.header, cols, mask_name):
            mask = q != 1
            notes.append(f"column {mask_name}: 1 = good pixel, anything else masked")
        else:
            mask = q != 0
    try:
        flux_unit = parse_flux_unit(col_units.get(fl_name) or h.header.get("BUNIT"))
    except UnitsError:
        flux_unit = u.dimensionless_unscaled
    ctype = "AWAV" if ax_name.lower() in ("wave_air", "awav") or _ucd_air(h.header, cols, ax_name) \
        else ""
    if ax_name.lower() == "wave_vac":
        ctype = "WAVE"
    if not unit.is_equivalent(u.m):
        ctype = "ENER" if unit.is_equivalent(u.eV) else "FREQ"
    med, med_src = _medium(h.header, hdul[0].header, ctype, medium)
    meta = {"source": str(path), "hdu": i, "index": row if vector else None,
            "axis_unit_source": unit_source, "medium": med, "medium_source": med_src,
            "noise_source": noise_source, "columns": [ax_name, fl_name],
            "resolution": _resolution(h.header) or _resolution(hdul[0].header),
            "object": str(hdul[0].header.get("OBJECT", "")).strip(), "read_notes": notes}
    if ctype == "AWAV" and not medium:
        meta["medium_source"] = f"UCD of column {ax_name} (em.wl;obs.atmos: air)" \
            if _ucd_air(h.header, cols, ax_name) else meta["medium_source"]
    return SpectrumData(axis=axis * unit, flux=flux * flux_unit,
                        uncertainty=None if sigma is None else sigma * flux_unit, mask=mask, meta=meta)


# quality columns whose documented sense is 1 = good (names; a TTYPE comment or TDOC saying
# "1 = good" does the same for any mask column)
GOOD_COLUMNS = ("good", "goodpix", "good_pixel", "valid", "use")


def _good_is_one(header, cols, name):
    """Does the file document `name` as 1 = good (by its name or its description)?"""
    if name.lower() in GOOD_COLUMNS:
        return True
    k = cols.index(name) + 1
    text = " ".join(str(header.get(key, "")) for key in (f"TDOC{k}", f"TCOMM{k}")) + " " + \
        str(header.comments[f"TTYPE{k}"] if f"TTYPE{k}" in header else "")
    text = text.lower().replace(" ", "")
    return "1=good" in text or "1:good" in text


def _ucd_air(header, cols, name):
    """Is the axis column's UCD (TUCDn) that of wavelengths in air (em.wl;obs.atmos)?"""
    k = cols.index(name) + 1
    ucd = str(header.get(f"TUCD{k}", "")).lower()
    return "em.wl" in ucd and "obs.atmos" in ucd


def _read_with_specutils(path, medium):
    from specutils import Spectrum

    from ..spectral.spectrum import from_specutils

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            spec = Spectrum.read(path)
    except Exception as exc:  # specutils raises many kinds for unknown layouts
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise SpectrumFormatError(f"{path}: no spectrum found in this FITS file ({text})") from None
    meta = {"medium": medium or "vacuum",
            "medium_source": "--medium" if medium else "assumed vacuum (specutils reader)",
            "noise_source": "file" if spec.uncertainty is not None else None}
    return from_specutils(spec, source=str(path), meta=meta)
