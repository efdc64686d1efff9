"""Names of series and lines, as practitioners write them.

* Series by lower level: Lyman, Balmer, Paschen, Brackett, Pfund, Humphreys,
  then "series 7", "series 8", ...
* Lines of H, D, T: Greek letters by Δn up to ε (Lyα, Hα, Paβ, Brγ, Pfδ,
  Huε), then the upper level (H8, H9, Pa9, Br10, ...).  For lower levels
  n' >= 7 the radio style is used: H109α, D110β, He109α (Rydberg He), C109α.
* Hydrogen-like ions: Lyman lines as "Fe XXVI Lyα"; other lines by their
  wavelength in Å rounded to an integer in the medium of the reference-database
  convention (air from 2000 Å to 20000 Å, vacuum otherwise), e.g. "He II 4686",
  "He II 1640", "C VI 182"; radio style for n' >= 7 ("He II 218α").
"""

import numpy as np

__all__ = ["series_name", "GREEK", "line_label", "line_labels", "series_names", "ascii_label"]

GREEK = "αβγδεζηθικλμνξοπρστυφχψω"
_SERIES = {1: "Lyman", 2: "Balmer", 3: "Paschen", 4: "Brackett", 5: "Pfund", 6: "Humphreys"}
_PREFIX = {1: "Ly", 2: "H", 3: "Pa", 4: "Br", 5: "Pf", 6: "Hu"}
RADIO_FROM = 7


def series_name(n_lower):
    """Series name for a lower level."""
    return _SERIES.get(int(n_lower), f"series {int(n_lower)}")


def _greek(dn):
    return GREEK[dn - 1] if dn <= len(GREEK) else f"[Δn={dn}]"


def line_label(species, n_lower, n_upper, wavelength_conv_angstrom=None):
    """Label of one line; ``species`` is a `~linefinder.species.Species`."""
    nl, nu = int(n_lower), int(n_upper)
    dn = nu - nl
    if nl >= RADIO_FROM:
        return f"{species.radio_prefix}{nl}{_greek(dn)}"
    hydrogen = species.Z == 1 or species.kind == "rydberg"
    if hydrogen:
        base = species.symbol if species.symbol != "H" else ""
        prefix = _PREFIX[nl]
        if base:
            # D and T: Dα, Dβ (Balmer), DLyα, DPaα ...; Rydberg atoms use radio style
            if species.kind == "rydberg":
                return f"{species.radio_prefix}{nl}{_greek(dn)}"
            prefix = base if nl == 2 else base + prefix
        if dn <= 5:
            return f"{prefix}{_greek(dn)}"
        return f"{prefix}{nu}"
    if nl == 1:
        return f"{species.name} Ly{_greek(dn)}"
    if wavelength_conv_angstrom is None or not np.isfinite(wavelength_conv_angstrom):
        return f"{species.name} {nu}-{nl}"
    return f"{species.name} {int(round(float(wavelength_conv_angstrom)))}"


def line_labels(species, n_lower, n_upper, wavelength_conv_angstrom):
    """Vectorised `line_label` (hydrogen labels depend only on n, so each is made once)."""
    nl = np.asarray(n_lower, dtype=np.int64)
    nu = np.asarray(n_upper, dtype=np.int64)
    conv = np.asarray(wavelength_conv_angstrom, dtype=float)
    wl_key = np.zeros(len(nl)) if (species.Z == 1 or species.kind == "rydberg") else np.rint(conv)
    keys = (nl * 4096 + nu) * 1.0e7 + np.where(np.isfinite(wl_key), wl_key, -1)
    uniq, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    made = np.array([line_label(species, nl[i], nu[i], conv[i]) for i in first], dtype=str)
    return made[inverse] if len(made) else np.array([], dtype=str)


def series_names(n_lower):
    """Vectorised `series_name`."""
    nl = np.asarray(n_lower, dtype=np.int64)
    uniq, inverse = np.unique(nl, return_inverse=True)
    return np.array([series_name(v) for v in uniq], dtype=str)[inverse] if len(nl) else \
        np.array([], dtype=str)


_GREEK_NAMES = ["alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota",
                "kappa", "lambda", "mu", "nu", "xi", "omicron", "pi", "rho", "sigma", "tau",
                "upsilon", "phi", "chi", "psi", "omega"]
_ASCII = {g: name for g, name in zip(GREEK, _GREEK_NAMES)}
_ASCII.update({"Δ": "D", "–": "-", "Å": "A", "µ": "u"})


def ascii_label(text):
    """ASCII form of a label for formats that allow no other text (FITS): Hα -> Halpha."""
    return "".join(_ASCII.get(ch, ch) for ch in str(text))
