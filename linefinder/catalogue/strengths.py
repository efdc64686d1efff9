"""Expected strengths of the lines of one species and series, for scoring matches.

Emission: Case B recombination ratios for H I and D I (Storey & Hummer 1995,
extended beyond the table along the optically thin intensities); the
catalogue's optically thin intensities for the other species.  Absorption:
a flat curve of growth, (f lambda)^(1/3) relative to the series' strongest
line.  Both are assumptions of the search, not measurements of the source;
`strength_assumption` states the one used, and identify records it in its
metadata (``intensity_model``, in the JSON summary and the ECSV table).
"""

import functools

import numpy as np
from astropy import units as u

from .build import build_catalogue

__all__ = ["CASE_B_HBETA", "expected_strengths", "strength_assumption", "group_keys", "multiplet_codes",
           "thin_intensity", "is_primary"]


# H I Case B line intensities relative to H-beta at T = 10^4 K, n_e = 100 cm^-3
# (Storey & Hummer 1995, MNRAS 272, 41; from memory, to the digits shown)
CASE_B_HBETA = {(2, 3): 2.863, (2, 4): 1.0, (2, 5): 0.468, (2, 6): 0.259, (2, 7): 0.159,
                (2, 8): 0.105, (2, 9): 0.0731, (2, 10): 0.0530, (2, 11): 0.0397, (2, 12): 0.0305,
                (3, 4): 0.332, (3, 5): 0.162, (3, 6): 0.0901, (3, 7): 0.0554, (4, 5): 0.0779,
                (4, 6): 0.0448, (4, 7): 0.0275}


# across species: hydrogen dominates; helium, carbon and isotopes are usually far weaker
# (He/H ~ 0.1 by number; a rule of thumb for the search, not a physical claim)
SECONDARY_WEIGHT = 0.25


def strength_assumption(kind):
    """In words: what the expected strengths of `expected_strengths(cat, kind)` assume."""
    if kind == "absorption":
        return ("absorption: flat curve of growth, strength (f lambda)^(1/3) relative to the "
                "strongest line of each species and series; species other than the primary "
                f"(H I when searched for) x {SECONDARY_WEIGHT}")
    return ("emission: Case B recombination ratios for H I and D I (T = 1e4 K, n_e = 100 cm^-3; "
            "beyond the table, optically thin g_u A / lambda scaled to the last tabulated line); "
            "optically thin intensities for other species; species other than the primary "
            f"(H I when searched for) x {SECONDARY_WEIGHT}")


def _joined(cat, *cols):
    """The columns `cols` of every line as one string key, '|'-separated."""
    key = np.asarray(cat[cols[0]]).astype(str)
    for c in cols[1:]:
        key = np.char.add(np.char.add(key, "|"), np.asarray(cat[c]).astype(str))
    return key


def group_keys(cat):
    """'species|series' of every line: the groups within which strengths are relative."""
    return _joined(cat, "species", "series")


def multiplet_codes(cat):
    """An integer per line naming its multiplet (species, n_lower, n_upper): the
    fine-structure components of one line share it."""
    if not len(cat):
        return np.zeros(0, dtype=int)
    return np.unique(_joined(cat, "species", "n_lower", "n_upper"), return_inverse=True)[1]


def thin_intensity(cat):
    """Optically thin g_u A / lambda of every line (proportional to g_u A h nu)."""
    return np.asarray(cat["g_upper"] * cat["a_ul"].to_value(u.s ** -1)
                      / cat["rest_wavelength_vacuum"].to_value(u.m), dtype=float)


def is_primary(cat):
    """True for lines of the primary species: H I when searched for, else the first one."""
    species = np.asarray(cat["species"]).astype(str)
    primary = "H I" if "H I" in set(species) else (species[0] if len(species) else "")
    return species == primary


def expected_strengths(cat, kind="emission"):
    """Expected strength of each line within its species and series (0..1).

    Emission: Case B ratios for H I and D I (extended beyond the table), the
    catalogue's optically thin intensities otherwise.  Absorption: optical
    depth goes as f lambda, and the lines people see are mostly saturated, so
    the strength is (f lambda / max)^(1/3): a flat curve of growth, a rule of
    thumb of this tool.
    """
    key = group_keys(cat)
    species_weight = np.where(is_primary(cat), 1.0, SECONDARY_WEIGHT)
    if kind == "absorption":
        return _absorption_strengths(cat, key) * species_weight, key
    strength = np.zeros(len(cat))
    base = np.asarray(cat["rel_intensity"], dtype=float)
    # optically thin g_u A h nu (absolute, so that series can be joined to the Case B table)
    thin = thin_intensity(cat)
    # share of each row (a component or a blend of them) in its n -> n' multiplet
    _, inv = np.unique(np.stack([np.unique(key, return_inverse=True)[1].ravel(),
                                 np.asarray(cat["n_lower"]), np.asarray(cat["n_upper"])]),
                       axis=1, return_inverse=True)
    inv = inv.ravel()
    share = thin / np.bincount(inv, weights=thin)[inv]
    for k in np.unique(key):
        sel = key == k
        vals = base[sel].copy()
        if k.startswith("H I|") or k.startswith("D I|"):
            nl = np.asarray(cat["n_lower"][sel])
            nu = np.asarray(cat["n_upper"][sel])
            vals = _case_b_extended(nl, nu, thin[sel] / share[sel]) * share[sel]
        m = np.nanmax(vals) if len(vals) else 1.0
        strength[sel] = vals / m if m > 0 else 0.0
    return strength * species_weight, key


def _absorption_strengths(cat, key):
    tau = np.asarray(cat["f_lu"], dtype=float) * cat["rest_wavelength_vacuum"].to_value(u.m)
    strength = np.zeros(len(cat))
    for k in np.unique(key):
        sel = key == k
        m = tau[sel].max()
        strength[sel] = (tau[sel] / m) ** (1 / 3) if m > 0 else 0.0
    return strength


@functools.lru_cache(maxsize=64)
def _thin_reference(n_lower, n_upper):
    """g_u A / lambda of one H I multiplet (the same measure as `expected_strengths` uses)."""
    return float(thin_intensity(build_catalogue("H", n_lower, n_upper))[0])


def _case_b_extended(nl, nu, thin):
    """Case B ratios where tabulated; beyond the table each series follows the catalogue's
    optically thin intensities, scaled to meet the last tabulated line (continuity, not a
    recombination calculation)."""
    out = np.array([CASE_B_HBETA.get((a, b), np.nan) for a, b in zip(nl, nu)])
    for lower in np.unique(nl):
        tab = [k for k in CASE_B_HBETA if k[0] == lower]
        sel = (nl == lower) & ~np.isfinite(out)
        if not np.any(sel):
            continue
        if not tab:
            out[sel] = thin[sel] / np.max(thin[nl == lower])
            continue
        last = max(tab, key=lambda k: k[1])
        out[sel] = CASE_B_HBETA[last] * thin[sel] / _thin_reference(int(lower), int(last[1]))
    return out
