"""Users' own line lists (CSV or ECSV): name, rest position with unit, medium."""

import numpy as np
from astropy import units as u
from astropy.table import QTable

from ..errors import SpectrumFormatError
from ..spectral.medium import air_to_vacuum
from .units import parse_spectral_unit, unit_from_label

__all__ = ["read_line_list"]


def read_line_list(path):
    """A user's line list (CSV/ECSV): name, rest position with unit, medium (air/vacuum)."""
    try:
        t = QTable.read(path, format="ascii.ecsv") if str(path).endswith(".ecsv") else \
            QTable.read(path, format="ascii.csv", comment="#")
    except FileNotFoundError:
        raise
    except Exception as exc:  # astropy raises many types for malformed tables
        raise SpectrumFormatError(f"{path}: not a readable line list ({str(exc).splitlines()[0]})") \
            from None
    names = {unit_from_label(c)[0].lower(): c for c in t.colnames}
    pos_col = next((names[n] for n in ("wavelength", "wave", "rest", "frequency", "freq", "energy",
                                       "position", "lambda") if n in names), None)
    name_col = next((names[n] for n in ("name", "label", "line", "id") if n in names), None)
    if pos_col is None or name_col is None:
        raise SpectrumFormatError(f"{path}: a line list needs a name column and a rest position "
                                  "column (wavelength, frequency or energy)")
    col = t[pos_col]
    unit = getattr(col, "unit", None)
    if unit is None:
        text = unit_from_label(pos_col)[1] or t.meta.get("unit")
        if text is None:
            raise SpectrumFormatError(f"{path}: the rest positions have no unit (write e.g. "
                                      "'wavelength [Angstrom]')")
        unit = parse_spectral_unit(text)
    values = u.Quantity(np.asarray(col, dtype=float), unit)
    med_col = names.get("medium")
    medium = np.array([str(m).lower() for m in t[med_col]]) if med_col else \
        np.full(len(t), str(t.meta.get("medium", "vacuum")).lower())
    lam = values.to(u.m, equivalencies=u.spectral()).value
    if values.unit.is_equivalent(u.m):
        air = np.char.startswith(medium.astype(str), "air")
        if np.any(air):
            lam[air] = air_to_vacuum(lam[air] * u.m).to_value(u.m)
    return [{"name": str(n), "rest_vacuum_m": float(v)} for n, v in zip(t[name_col], lam)]
