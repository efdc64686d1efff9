"""``linefinder lines`` and ``linefinder levels``."""

import json
import re
import sys

from astropy import units as u
from astropy.table import Table

from ..catalogue.build import MEDIA, build_catalogue
from ..errors import UnitsError
from ..io.tables import json_default, table_to_records, write_table
from ..physics.levels import level_table
from ..spectral.doppler import VELOCITY_CONVENTIONS
from ..spectral.medium import AIR_FORMULAS

__all__ = ["register", "parse_unit", "unit_suffix", "flatten_lines", "parse_spectral_range"]


def parse_unit(text):
    """An astropy spectral unit from a name such as nm, angstrom, um, MHz, keV, cm-1."""
    aliases = {"a": "Angstrom", "aa": "Angstrom", "å": "Angstrom", "angstroms": "Angstrom",
               "micron": "um", "microns": "um", "µm": "um", "cm-1": "cm-1", "1/cm": "cm-1",
               "kayser": "cm-1"}
    key = text.strip()
    name = aliases.get(key.lower(), key)
    try:
        unit = u.Unit(name)
    except ValueError:
        raise UnitsError(f"unknown unit {text!r} (try nm, angstrom, um, Hz, MHz, GHz, eV, keV, cm-1)") \
            from None
    if not unit.is_equivalent(u.m, equivalencies=u.spectral()):
        raise UnitsError(f"unit {text!r} is not a spectral unit (wavelength, frequency, energy or "
                         f"wavenumber)")
    if unit.is_equivalent(u.m) and not (1e-16 <= unit.to(u.m) <= 1e3):
        raise UnitsError(f"unit {text!r} is not a spectroscopic wavelength unit")
    return unit


def unit_suffix(unit):
    """Column-name suffix of a unit: nm, angstrom, um, mhz, kev, cm-1."""
    if unit == u.cm ** -1:
        return "cm-1"
    text = unit.to_string()
    return {"Angstrom": "angstrom", "micron": "um"}.get(text, text).lower().replace(" ", "")


def parse_spectral_range(text, default_unit):
    """"380-700", "380,700", "3-5um", "1.2e3,2e3 GHz" -> (Quantity, Quantity)."""
    m = re.fullmatch(r"\s*([-+]?[0-9.]+(?:[eE][-+]?\d+)?)\s*(?:,|-|:|\.\.)\s*"
                     r"([-+]?[0-9.]+(?:[eE][-+]?\d+)?)\s*([A-Za-zµÅ0-9/\-]*)\s*", text)
    if not m:
        raise UnitsError(f"malformed range {text!r}; use MIN-MAX or MIN,MAX with an optional unit")
    unit = parse_unit(m.group(3)) if m.group(3) else default_unit
    lo, hi = float(m.group(1)), float(m.group(2))
    if not lo < hi:
        raise UnitsError(f"range {text!r}: the minimum must be below the maximum")
    return lo * unit, hi * unit


def flatten_lines(table, unit):
    """Plain Table with unit-suffixed column names (the exchange layout)."""
    out = Table()
    is_length = unit.is_equivalent(u.m)
    wl_unit = unit if is_length else u.nm
    sfx = unit_suffix(wl_unit)
    for col in ("species", "label", "series", "n_lower", "l_lower", "j_lower", "n_upper",
                "l_upper", "j_upper"):
        out[col] = table[col]
    out[f"wavelength_vacuum_{sfx}"] = table["wavelength_vacuum"].to_value(wl_unit)
    out[f"wavelength_air_{sfx}"] = table["wavelength_air"].to_value(wl_unit)
    if not is_length:
        out[f"position_{unit_suffix(unit)}"] = table["wavelength_vacuum"].to_value(
            unit, equivalencies=u.spectral())
    out["wavenumber_cm-1"] = table["wavenumber"].to_value(u.cm ** -1)
    out["frequency_hz"] = table["frequency"].to_value(u.Hz)
    out["energy_ev"] = table["energy"].to_value(u.eV)
    if "a_ul" in table.colnames:
        out["a_ul_s-1"] = table["a_ul"].to_value(u.s ** -1)
        out["f_lu"] = table["f_lu"]
    out["g_lower"] = table["g_lower"]
    out["g_upper"] = table["g_upper"]
    for extra in ("rel_intensity", "blend", "transition", "position_source"):
        if extra in table.colnames:
            out[extra] = table[extra]
    out[f"rest_wavelength_vacuum_{sfx}"] = table["rest_wavelength_vacuum"].to_value(wl_unit)
    out.meta.update(table.meta)
    out.meta["wavelength_unit"] = str(wl_unit)
    return out


def _emit(table, args, *, default_columns, title=None):
    fmt = args.format
    if args.output:
        path = write_table(table, args.output, force=args.force)
        if title:
            print(title, file=sys.stderr)
        print(f"wrote {len(table)} rows to {path}", file=sys.stderr)
        return 0
    if fmt == "csv":
        table.write(sys.stdout, format="ascii.csv", overwrite=True)
    elif fmt == "ecsv":
        table.write(sys.stdout, format="ascii.ecsv", overwrite=True)
    elif fmt == "json":
        json.dump({"meta": dict(table.meta), "rows": table_to_records(table)}, sys.stdout, indent=1,
                  ensure_ascii=False, default=json_default)
        sys.stdout.write("\n")
    else:
        cols = [c for c in default_columns if c in table.colnames]
        view = table[cols]
        for name in view.colnames:
            if view[name].dtype.kind == "f":
                view[name].format = ".6g" if name.startswith(("a_ul", "f_lu", "frequency")) else ".8g"
        meta = table.meta
        if title is None:
            title = (f"# {len(table)} lines; medium {meta.get('medium')}, air formula "
                     f"{meta.get('air_formula')}, {meta.get('constants')}; frame {meta.get('frame')}")
        print(title)
        for line in view.pformat(max_lines=-1, max_width=-1):
            print(line)
    return 0


def _cmd_lines(args):
    unit = parse_unit(args.unit)
    velocity = args.velocity * u.km / u.s if args.velocity is not None else None
    wrange = parse_spectral_range(args.range, unit) if args.range else None
    conditions = None
    if args.air_temperature is not None or args.air_pressure is not None or args.humidity is not None:
        conditions = {"temperature_c": 15.0 if args.air_temperature is None else args.air_temperature,
                      "pressure_pa": 101325.0 if args.air_pressure is None else args.air_pressure,
                      "humidity": 0.0 if args.humidity is None else args.humidity / 100.0,
                      "co2_ppm": args.co2}
    table = build_catalogue(args.species, args.lower, args.upper, fine=args.fine, medium=args.medium,
                            a_values=not args.no_a_values, air_formula=args.air_formula,
                            air_conditions=conditions, z=args.z, velocity=velocity,
                            velocity_convention=args.velocity_convention, wavelength_range=wrange,
                            min_a=args.min_a, min_intensity=args.min_intensity,
                            resolution=args.resolution, hyperfine=args.hyperfine)
    flat = flatten_lines(table, unit)
    sfx = unit_suffix(unit if unit.is_equivalent(u.m) else u.nm)
    wl_col = f"wavelength_{'air' if args.medium == 'air' else 'vacuum'}_{sfx}"
    cols = ["species", "label", "transition", "n_lower", "n_upper", wl_col]
    if args.medium == "conventional":
        cols.append(f"wavelength_air_{sfx}")
    if not unit.is_equivalent(u.m):
        cols.append(f"position_{unit_suffix(unit)}")
    cols += ["a_ul_s-1", "f_lu", "rel_intensity"]
    if args.hyperfine:
        cols.append("position_source")
    return _emit(flat, args, default_columns=cols)


def _cmd_levels(args):
    table = level_table(args.species, args.n_max, n_min=args.n_min)
    out = Table()
    for col in ("species", "n", "l", "j", "g", "label"):
        out[col] = table[col]
    out["energy_cm-1"] = table["energy"].to_value(u.cm ** -1)
    out["binding_cm-1"] = table["binding"].to_value(u.cm ** -1)
    out.meta.update(table.meta)
    out["energy_cm-1"].format = ".7f"
    out["binding_cm-1"].format = ".7f"
    return _emit(out, args, default_columns=out.colnames)


def _common_output(p):
    p.add_argument("--format", choices=["table", "csv", "ecsv", "json"], default="table",
                   help="what to print when no -o is given (default: a readable table)")
    p.add_argument("-o", "--output", metavar="FILE",
                   help="write to FILE (.csv, .ecsv, .fits, .parquet, .json, .votable)")
    p.add_argument("--force", action="store_true", help="overwrite an existing output file")


def register(sub):
    p = sub.add_parser("lines", help="compute hydrogenic lines from atomic theory",
                       description="Compute Rydberg-series lines of H, D, T, hydrogen-like ions and "
                                   "Rydberg atoms, in vacuum or air, rest or shifted.")
    p.add_argument("--species", nargs="+", default=["H"], metavar="NAME",
                   help="H, D, T, 'He II', 'Fe XXVI', Fe25+, 3He II, C (Rydberg C I) ... (default H)")
    p.add_argument("--lower", default="1-6", metavar="N[-M]", help="lower n or range (default 1-6)")
    p.add_argument("--upper", default="2-30", metavar="N[-M]", help="upper n or range (default 2-30)")
    p.add_argument("--fine", action="store_true", help="one row per fine-structure component")
    p.add_argument("--hyperfine", action="store_true",
                   help="add the hyperfine lines of the 1s and 2s levels (H I 21 cm, D I 92 cm, "
                        "3He II 3.5 cm ...), whatever --lower/--upper say")
    p.add_argument("--medium", choices=MEDIA, default="vacuum",
                   help="medium of the printed wavelength (conventional: air 200-2000 nm, vacuum elsewhere)")
    p.add_argument("--air-formula", default="morton2000",
                   help=f"one of {', '.join(AIR_FORMULAS)} (default morton2000, the IAU standard)")
    p.add_argument("--air-temperature", type=float, metavar="C",
                   help="laboratory air temperature in °C (full Ciddor 1996 form)")
    p.add_argument("--air-pressure", type=float, metavar="PA", help="laboratory air pressure in Pa")
    p.add_argument("--humidity", type=float, metavar="PERCENT", help="relative humidity in percent")
    p.add_argument("--co2", type=float, default=450.0, metavar="PPM", help="CO2 in ppm (default 450)")
    p.add_argument("--unit", default="nm", help="unit of wavelengths: nm, angstrom, um, ... "
                                                "(a frequency or energy unit adds a position column)")
    p.add_argument("--z", type=float, help="redshift")
    p.add_argument("--velocity", type=float, metavar="KM/S", help="radial velocity in km/s")
    p.add_argument("--velocity-convention", choices=VELOCITY_CONVENTIONS, default="optical")
    p.add_argument("--range", metavar="MIN-MAX", help="observed-frame window, in --unit unless given")
    p.add_argument("--resolution", type=float, metavar="R", help="merge lines closer than lambda/R")
    p.add_argument("--min-a", type=float, metavar="S-1", help="minimum Einstein A in s^-1")
    p.add_argument("--min-intensity", type=float, metavar="REL", help="minimum relative intensity")
    p.add_argument("--no-a-values", action="store_true", help="positions only")
    _common_output(p)
    p.set_defaults(func=_cmd_lines)

    q = sub.add_parser("levels", help="fine-structure energy levels from theory")
    q.add_argument("--species", default="H", metavar="NAME")
    q.add_argument("--n-max", type=int, default=5)
    q.add_argument("--n-min", type=int, default=1)
    _common_output(q)
    q.set_defaults(func=_cmd_levels)
