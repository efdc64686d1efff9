"""Build and select line catalogues of hydrogenic species.

`build_catalogue` is the public entry point.  It computes every line from
`linefinder.levels` and `linefinder.transitions`, caches the rest-frame table
on disk (folder ``$LINEFINDER_CACHE_DIR`` or the user's cache folder), then
applies medium, shift, selection and resolution merging, all cheap.
"""

import hashlib
import json
import os
import warnings
from pathlib import Path

import numpy as np
from astropy import units as u
from astropy.table import MaskedColumn, QTable

from .._version import __version__
from ..errors import AccuracyWarning, QuantumNumberError
from ..physics import constants as K
from ..physics.levels import level_label
from ..physics.species import parse_species
from ..physics.transitions import fine_components, multiplets
from ..spectral.doppler import describe_shift, wavelength_factor
from ..spectral.medium import (
    AIR_MIN_NM,
    CONVENTIONAL_AIR_RANGE_NM,
    _formula,
    conventional_wavelength,
    vacuum_to_air,
)
from .hyperfine_rows import hyperfine_arrays
from .names import line_labels, series_names

__all__ = ["build_catalogue", "parse_range", "cache_dir", "CATALOGUE_COLUMNS", "MEDIA"]

MEDIA = ("vacuum", "air", "conventional")
N_MAX = 2000
RYDBERG_MIN_N = 10
CATALOGUE_COLUMNS = ["species", "label", "series", "n_lower", "l_lower", "j_lower", "n_upper",
                     "l_upper", "j_upper", "wavelength_vacuum", "wavelength_air", "wavenumber",
                     "frequency", "energy", "a_ul", "f_lu", "g_lower", "g_upper"]
_CACHE_FORMAT = 2


def cache_dir():
    """Folder of the disk cache: ``$LINEFINDER_CACHE_DIR`` or the user cache folder."""
    env = os.environ.get("LINEFINDER_CACHE_DIR")
    if env:
        return Path(env)
    import platformdirs

    return Path(platformdirs.user_cache_dir("linefinder"))


def parse_range(value, what="n"):
    """An int, an inclusive (min, max) pair, or a string "N" / "N-M" -> (min, max)."""
    if isinstance(value, str):
        text = value.strip()
        try:
            if "-" in text[1:]:
                a, b = text.split("-", 1)
                lo, hi = int(a), int(b)
            else:
                lo = hi = int(text)
        except ValueError:
            raise QuantumNumberError(f"malformed {what} range {value!r}; use N or N-M") from None
    elif isinstance(value, (tuple, list)) and len(value) == 2:
        lo, hi = int(value[0]), int(value[1])
    else:
        try:
            lo = hi = int(value)
        except (TypeError, ValueError):
            raise QuantumNumberError(f"malformed {what} range {value!r}") from None
    if lo < 1 or hi < lo:
        raise QuantumNumberError(f"{what} range {lo}-{hi} must satisfy 1 <= min <= max")
    if hi > N_MAX:
        raise QuantumNumberError(f"{what} = {hi} exceeds the supported maximum n = {N_MAX}")
    return lo, hi


def _pairs(lower, upper):
    lo = np.arange(lower[0], lower[1] + 1)
    up = np.arange(upper[0], upper[1] + 1)
    nl, nu = np.meshgrid(lo, up, indexing="ij")
    keep = nu > nl
    if not np.any(keep):
        raise QuantumNumberError(f"no line has n_upper in {upper[0]}-{upper[1]} above "
                                 f"n_lower in {lower[0]}-{lower[1]} (need n_upper > n_lower)")
    return nl[keep], nu[keep]


def _rest_arrays(sp, lower, upper, fine):
    """Rest-frame arrays of one species: positions (Hz), atomic data, labels."""
    arrays = _atomic_arrays(sp, lower, upper, fine)
    if sp.Z == 1 or sp.kind == "rydberg":
        conv = np.zeros(len(arrays["frequency"]))   # hydrogen labels do not use the wavelength
    else:
        conv = conventional_wavelength(K.C / arrays["frequency"] * 1e10 * u.AA).to_value(u.AA)
    arrays["label"] = line_labels(sp, arrays["n_lower"], arrays["n_upper"], conv)
    arrays["series"] = series_names(arrays["n_lower"])
    return arrays


def _atomic_arrays(sp, lower, upper, fine):
    nl, nu = _pairs(lower, upper)
    if fine:
        c = fine_components(sp, nu, nl)
        p = c["pair"]
        return {"n_lower": nl[p], "n_upper": nu[p], "l_lower": c["l_lower"], "j_lower": c["j_lower"],
                "l_upper": c["l_upper"], "j_upper": c["j_upper"], "frequency": c["frequency"],
                "a_ul": c["A"], "f_lu": c["f"], "g_lower": c["g_lower"].astype(float),
                "g_upper": c["g_upper"].astype(float), "line_strength": c["S"]}
    m = multiplets(sp, nu, nl)
    return {"n_lower": nl, "n_upper": nu, "frequency": m["frequency"], "a_ul": m["A"],
            "f_lu": m["f"], "g_lower": m["g_lower"], "g_upper": m["g_upper"],
            "line_strength": m["S"]}


def _cache_key(sp, lower, upper, fine):
    text = json.dumps([_CACHE_FORMAT, __version__, K.CODATA_VERSION, sp.name, sp.core_mass_me,
                       sp.radius_m, list(lower), list(upper), bool(fine)])
    return hashlib.sha256(text.encode()).hexdigest()[:24]


def _cached_rest_arrays(sp, lower, upper, fine, cache):
    if not cache:
        return _rest_arrays(sp, lower, upper, fine)
    path = cache_dir() / f"lines-{_cache_key(sp, lower, upper, fine)}.npz"
    if path.exists():
        try:
            with np.load(path, allow_pickle=False) as data:
                return {k: data[k] for k in data.files}
        except (OSError, ValueError):
            pass  # unreadable cache entry: rebuild it below
    arrays = _rest_arrays(sp, lower, upper, fine)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_suffix(f".tmp{os.getpid()}.npz")
        np.savez(tmp, **arrays)
        os.replace(tmp, path)
    except OSError:
        pass  # a read-only cache folder only costs speed
    return arrays


def _merge_blends(arrays, wavelength_nm, resolution, fine):
    """Merge lines closer than lambda/R into blends (within one species)."""
    order = np.argsort(wavelength_nm)
    wl = wavelength_nm[order]
    gap = np.diff(wl) > (wl[1:] / resolution)
    group_sorted = np.concatenate([[0], np.cumsum(gap)])
    group = np.empty_like(group_sorted)
    group[order] = group_sorted
    ngroups = group_sorted[-1] + 1 if len(wl) else 0
    weight = arrays["g_upper"] * arrays["a_ul"]
    weight = np.where(weight > 0, weight, 1e-300)
    wsum = np.bincount(group, weights=weight, minlength=ngroups)
    out = {}
    strongest = np.full(ngroups, -1)
    best = np.full(ngroups, -np.inf)
    for i in np.argsort(weight):  # ascending: the last write per group is the strongest
        strongest[group[i]] = i
        best[group[i]] = weight[i]
    for key, val in arrays.items():
        if key == "frequency":
            out[key] = np.bincount(group, weights=weight * val, minlength=ngroups) / wsum
        elif key in ("a_ul", "line_strength"):
            num = np.bincount(group, weights=val * (arrays["g_upper"] if key == "a_ul" else 1.0),
                              minlength=ngroups)
            out[key] = num / (np.bincount(group, weights=arrays["g_upper"], minlength=ngroups)
                              if key == "a_ul" else 1.0)
        elif key in ("g_upper", "g_lower"):
            out[key] = np.bincount(group, weights=val, minlength=ngroups)
        elif key == "f_lu":
            out[key] = (np.bincount(group, weights=val * arrays["g_lower"], minlength=ngroups)
                        / np.bincount(group, weights=arrays["g_lower"], minlength=ngroups))
        else:
            out[key] = val[strongest]
    count = np.bincount(group, minlength=ngroups)
    # the highest upper level in each row: above n_upper when lines of several levels merged
    # (a series near its limit), not only fine-structure components of one
    n_max = np.zeros(ngroups, dtype=int)
    np.maximum.at(n_max, group, np.asarray(arrays["n_upper"], dtype=int))
    out["n_upper_max"] = n_max
    return out, count, group


def build_catalogue(species, lower, upper, *, fine=False, medium="vacuum", a_values=True,
                    air_formula="morton2000", air_conditions=None, z=None, velocity=None,
                    velocity_convention="optical", wavelength_range=None, min_a=None,
                    min_intensity=None, resolution=None, cache=True, hyperfine=False):
    """Compute a catalogue of hydrogenic lines.

    Parameters
    ----------
    species : str, Species or list of them
        ``"H"``, ``"D"``, ``"He II"``, ``"Fe XXVI"``, ``"C"`` (Rydberg C I) ...
    lower, upper : int, (min, max) or "N-M"
        Inclusive ranges of the lower and upper principal quantum numbers.
    fine : bool
        One row per fine-structure component (l and j filled) instead of one
        row per n -> n' multiplet.
    medium : {"vacuum", "air", "conventional"}
        Medium of the ``wavelength`` column ("conventional": air from 200 to 2000 nm,
        vacuum elsewhere).  ``wavelength_vacuum`` and ``wavelength_air`` are
        always both present.
    a_values : bool
        Include A, f, g and line strength (positions are always exact).
    air_formula : str
        morton2000 (IAU, default), edlen1966, edlen1953, peck-reeder1972, ciddor1996.
    air_conditions : dict, optional
        Laboratory air (temperature_c, pressure_pa, humidity 0..1, co2_ppm):
        the full Ciddor 1996 form.
    z, velocity, velocity_convention
        Shift to the observed frame by a redshift and/or a radial velocity
        (Quantity) in the optical, radio or relativistic convention.
    wavelength_range : (Quantity, Quantity), optional
        Observed-frame window in any spectral unit (vacuum).
    min_a : Quantity or float (s^-1), min_intensity : float
        Drop lines with smaller A or relative intensity (0..1, per species).
    resolution : float, optional
        Resolving power R: lines of one species closer than lambda/R merge.
    cache : bool
        Use the disk cache of rest-frame tables.
    hyperfine : bool
        Add the hyperfine lines of the 1s and 2s levels of every species whose nucleus has
        a spin (H I 21 cm, D I 92 cm, T I, 3He II 3.5 cm ...), whatever the n ranges; their
        positions are measured intervals where known (column ``position_source``).

    Returns
    -------
    `~astropy.table.QTable`
        One row per line (or per blend, with `resolution`): ``blend`` counts the components
        merged into a row and ``n_upper_max`` is the highest upper level among them (above
        ``n_upper``, the strongest component's, where lines of several levels merged).
    """
    names = [species] if isinstance(species, str) or not np.iterable(species) else list(species)
    lower = parse_range(lower, "lower n")
    upper = parse_range(upper, "upper n")
    if medium not in MEDIA:
        raise ValueError(f"medium must be one of {', '.join(MEDIA)}, not {medium!r}")
    formula = _formula(air_formula)
    if resolution is not None and not (resolution > 0):
        raise ValueError("resolving power R must be positive")
    factor = wavelength_factor(z=z, velocity=velocity, convention=velocity_convention)
    parts = []
    for name in names:
        sp = parse_species(name)
        if sp.kind == "rydberg" and lower[0] < RYDBERG_MIN_N:
            warnings.warn(f"{sp.name}: lines with n_lower < {RYDBERG_MIN_N} are computed as hydrogenic "
                          "but the real atom's quantum defects shift its low-l levels", AccuracyWarning)
        arrays = _cached_rest_arrays(sp, lower, upper, fine, cache)
        options = dict(fine=fine, factor=factor, formula=formula, air_conditions=air_conditions,
                       wavelength_range=wavelength_range, min_a=min_a,
                       min_intensity=min_intensity, resolution=resolution)
        part = _species_columns(sp, arrays, **options)
        if hyperfine:
            part["position_source"] = np.full(len(part["frequency"]), "theory", dtype="U64")
            parts.append(part)
            part = _hyperfine_part(sp, fine, options)
        parts.append(part)
    if not a_values:   # positions only: the atomic data are not carried into the table
        parts = [{k: v for k, v in part.items() if k not in _ATOMIC_COLUMNS} for part in parts]
    table = _assemble(_merged_columns(parts), fine=fine, a_values=a_values)
    if medium == "vacuum":
        table["wavelength"] = table["wavelength_vacuum"]
    elif medium == "air":
        table["wavelength"] = table["wavelength_air"]
    else:
        wv = table["wavelength_vacuum"].to_value(u.nm)
        use_air = (wv >= CONVENTIONAL_AIR_RANGE_NM[0]) & (wv <= CONVENTIONAL_AIR_RANGE_NM[1])
        table["wavelength"] = np.where(use_air, table["wavelength_air"].to_value(u.nm), wv) * u.nm
    table.meta.clear()
    table.meta.update({
        "species": [parse_species(n).name for n in names],
        "n_lower": list(lower), "n_upper": list(upper), "fine_structure": bool(fine),
        "medium": medium, "air_formula": "ciddor1996-full" if air_conditions else formula,
        "air_conditions": dict(air_conditions) if air_conditions else None,
        "air_validity": f"air wavelengths only at >= {AIR_MIN_NM:g} nm (vacuum)",
        "constants": K.CODATA_VERSION, "linefinder_version": __version__,
        "resolution": resolution, "positions": "multiplet: g_u A_u weighted mean frequency"
        if not fine else "fine-structure components",
        "rel_intensity": "g_u A_u h nu, equal sublevel populations, normalised per species",
        "hyperfine": bool(hyperfine),
        **describe_shift(z=z, velocity=velocity, convention=velocity_convention),
    })
    return table


def _hyperfine_part(sp, fine, options):
    """The columns of the hyperfine lines of one species (`hyperfine_rows`)."""
    options = dict(options, min_intensity=None)   # (they have no relative intensity)
    arrays = hyperfine_arrays(sp, fine)
    sources = dict(zip(arrays["label"], arrays["position_source"]))
    cols = _species_columns(sp, arrays, **options)
    cols["rel_intensity"] = np.full(len(cols["frequency"]), np.nan)
    cols["position_source"] = np.array([sources[str(lab)] for lab in cols["label"]], dtype="U64")
    if fine:
        f_of = {str(lab): (fu, fl) for lab, fu, fl in zip(arrays["label"], arrays["f_upper"],
                                                           arrays["f_lower"])}
        cols["transition"] = np.array(
            [f"{n}S(F={f_of[str(lab)][0]:g})-{n}S(F={f_of[str(lab)][1]:g})"
             for lab, n in zip(cols["label"], cols["n_upper"])], dtype=str)
    return cols


def _species_columns(sp, arrays, *, fine, factor, formula, air_conditions, wavelength_range,
                   min_a, min_intensity, resolution):
    arrays = dict(arrays)
    freq_obs = arrays["frequency"] / factor
    wl_nm = K.C / freq_obs * 1e9
    count = np.ones(len(wl_nm), dtype=int)
    if resolution is not None and len(wl_nm):
        arrays, count, _ = _merge_blends(arrays, wl_nm, resolution, fine)
        freq_obs = arrays["frequency"] / factor
        wl_nm = K.C / freq_obs * 1e9
    intensity = arrays["g_upper"] * arrays["a_ul"] * arrays["frequency"]
    rel = intensity / intensity.max() if len(intensity) and intensity.max() > 0 else intensity
    keep = np.ones(len(wl_nm), dtype=bool)
    if wavelength_range is not None:
        lo, hi = (u.Quantity(v).to_value(u.nm, equivalencies=u.spectral()) for v in wavelength_range)
        lo, hi = min(lo, hi), max(lo, hi)
        keep &= (wl_nm >= lo) & (wl_nm <= hi)
    if min_a is not None:
        a_min = u.Quantity(min_a, u.s ** -1).value
        keep &= arrays["a_ul"] >= a_min
    if min_intensity is not None:
        keep &= rel >= float(min_intensity)
    arrays = {k: v[keep] for k, v in arrays.items()}
    wl_nm, freq_obs, rel, count = wl_nm[keep], freq_obs[keep], rel[keep], count[keep]
    air = vacuum_to_air(wl_nm * u.nm, formula=formula, conditions=air_conditions).to_value(u.nm)
    n = len(wl_nm)
    cols = {"species": np.broadcast_to(np.array(sp.name), (n,)), "label": arrays["label"],
            "series": arrays["series"],
            "n_lower": arrays["n_lower"].astype(int), "n_upper": arrays["n_upper"].astype(int),
            "wavelength_vacuum": wl_nm, "wavelength_air": air, "frequency": freq_obs,
            "a_ul": arrays["a_ul"], "f_lu": arrays["f_lu"], "g_lower": arrays["g_lower"].astype(int),
            "g_upper": arrays["g_upper"].astype(int), "line_strength": arrays["line_strength"],
            "rel_intensity": rel, "rest_wavelength_vacuum": K.C / arrays["frequency"] * 1e9,
            "blend": count,
            "n_upper_max": arrays.get("n_upper_max", arrays["n_upper"]).astype(int)}
    if fine:
        for which in ("lower", "upper"):
            cols[f"l_{which}"] = arrays[f"l_{which}"].astype(int)
            cols[f"j_{which}"] = arrays[f"j_{which}"].astype(float)
        lab = []
        for i in range(n):
            if count[i] > 1:
                lab.append(f"{count[i]} components")
            else:
                lab.append(f"{level_label(cols['n_upper'][i], cols['l_upper'][i], cols['j_upper'][i])}"
                           f"-{level_label(cols['n_lower'][i], cols['l_lower'][i], cols['j_lower'][i])}")
        cols["transition"] = np.array(lab, dtype=str) if n else np.array([], dtype=str)
    return cols


_ATOMIC_COLUMNS = ("a_ul", "f_lu", "line_strength", "rel_intensity")


def _merged_columns(parts):
    """The per-species columns as one set, in wavelength order (stable).

    Each part is written straight to its sorted place: one new array per column
    instead of a concatenation and a reordering.
    """
    sizes = [len(part["wavelength_vacuum"]) for part in parts]
    ends = np.cumsum(sizes)
    order = np.argsort(np.concatenate([part["wavelength_vacuum"] for part in parts]), kind="stable")
    where = np.empty(len(order), dtype=np.intp)
    where[order] = np.arange(len(order))
    spans = [where[end - size:end] for size, end in zip(sizes, ends)]
    out = {}
    for key in parts[0]:
        vals = [part[key] for part in parts]
        col = np.empty(len(order), dtype=np.result_type(*vals))
        for span, val in zip(spans, vals):
            col[span] = val
        out[key] = col
    return out


def _assemble(c, *, fine, a_values):
    """One QTable from the merged columns, handed over without a further copy."""
    n = len(c["wavelength_vacuum"])
    out = {key: c[key] for key in ("species", "label", "series", "n_lower")}
    for which in ("lower", "upper"):
        if which == "upper":
            out["n_upper"] = c["n_upper"]
        if fine:
            mask = c["blend"] > 1
            out[f"l_{which}"] = MaskedColumn(c[f"l_{which}"], mask=mask, copy=False)
            out[f"j_{which}"] = MaskedColumn(c[f"j_{which}"], mask=mask, copy=False)
        else:
            out[f"l_{which}"] = MaskedColumn(np.zeros(n, dtype=int), mask=np.ones(n, bool),
                                             copy=False)
            out[f"j_{which}"] = MaskedColumn(np.zeros(n, dtype=float), mask=np.ones(n, bool),
                                             copy=False)
    freq = c["frequency"]

    def q(values, unit):
        return u.Quantity(values, unit, copy=False)

    out["wavelength_vacuum"] = q(c["wavelength_vacuum"], u.nm)
    out["wavelength_air"] = q(c["wavelength_air"], u.nm)
    out["wavenumber"] = q(freq / K.HZ_PER_CM, u.cm ** -1)
    out["frequency"] = q(freq, u.Hz)
    out["energy"] = q(freq / K.HZ_PER_EV, u.eV)
    if a_values:
        out["a_ul"] = q(c["a_ul"], u.s ** -1)
        out["f_lu"] = c["f_lu"]
    out["g_lower"] = c["g_lower"]
    out["g_upper"] = c["g_upper"]
    if a_values:
        out["line_strength"] = q(c["line_strength"], u.C ** 2 * u.m ** 2)
        out["rel_intensity"] = c["rel_intensity"]
    out["rest_wavelength_vacuum"] = q(c["rest_wavelength_vacuum"], u.nm)
    out["blend"] = c["blend"]
    out["n_upper_max"] = c["n_upper_max"]
    if fine:
        out["transition"] = c["transition"]
    if "position_source" in c:
        out["position_source"] = c["position_source"]
    return QTable(list(out.values()), names=list(out), copy=False)
