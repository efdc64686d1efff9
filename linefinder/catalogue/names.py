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


_GREEK_TABLE = np.array([], dtype=str)


def _greek_table(top):
    """`_greek` of 1..top as an array (grown on demand, shared by all calls)."""
    global _GREEK_TABLE
    if len(_GREEK_TABLE) < top:
        _GREEK_TABLE = np.array([_greek(d) for d in range(1, max(top, 2 * len(_GREEK_TABLE)) + 1)])
    return _GREEK_TABLE


def _int_text(values):
    """Decimal text of non-negative integers; through a lookup table when the values are
    few distinct small numbers (quantum numbers), which is far cheaper than astype(str)."""
    values = np.asarray(values, dtype=np.int64)
    if not len(values):
        return np.array([], dtype=str)
    top = int(values.max())
    if values.min() >= 0 and top < 4 * len(values):
        return np.arange(top + 1).astype(str)[values]
    return values.astype(str)


def line_labels(species, n_lower, n_upper, wavelength_conv_angstrom):
    """Vectorised `line_label`: the same text, built with array string operations."""
    nl = np.asarray(n_lower, dtype=np.int64)
    nu = np.asarray(n_upper, dtype=np.int64)
    if not len(nl):
        return np.array([], dtype=str)
    conv = np.asarray(wavelength_conv_angstrom, dtype=float)
    dn = nu - nl
    greek = _greek_table(int(dn.max()))[dn - 1]
    radio = nl >= RADIO_FROM
    hydrogen = species.Z == 1 or species.kind == "rydberg"
    if hydrogen and species.kind == "rydberg" and species.symbol != "H":
        radio = np.ones(len(nl), dtype=bool)        # Rydberg atoms: radio style throughout
    out = np.char.add(np.char.add(species.radio_prefix, _int_text(nl)), greek)
    optical = ~radio
    if np.any(optical):
        opt = _optical_labels(species, nl[optical], nu[optical], greek[optical], conv[optical])
        out = out.astype(f"<U{max(out.dtype.itemsize, opt.dtype.itemsize) // 4}")
        out[optical] = opt
    return _tight(out)


def _optical_labels(species, nl, nu, greek, conv):
    """Labels of lines with n' < RADIO_FROM (Greek letters, upper level or wavelength)."""
    if species.Z == 1 or species.kind == "rydberg":     # H, D, T
        base = species.symbol if species.symbol != "H" else ""
        prefixes = {k: (base if (base and k == 2) else base + v) for k, v in _PREFIX.items()}
        prefix = np.array([prefixes.get(int(k), "") for k in range(RADIO_FROM)])
        return np.char.add(prefix[nl], np.where(nu - nl <= 5, greek, _int_text(nu)))
    pieces = {"lyman": nl == 1, "wave": (nl > 1) & np.isfinite(conv),
              "bare": (nl > 1) & ~np.isfinite(conv)}
    text = {"lyman": np.char.add(f"{species.name} Ly", greek[pieces["lyman"]]),
            "wave": np.char.add(f"{species.name} ", _int_text(np.rint(conv[pieces["wave"]]))),
            "bare": np.array([f"{species.name} {u}-{l}" for u, l in
                              zip(nu[pieces["bare"]], nl[pieces["bare"]])], dtype=str)}
    width = max(max(t.dtype.itemsize for t in text.values()) // 4, 1)
    out = np.empty(len(nl), dtype=f"<U{width}")
    for key, sel in pieces.items():
        out[sel] = text[key]
    return out


def _tight(text):
    """The same strings in the narrowest unicode dtype (table columns copy less)."""
    return text.astype(f"<U{max(int(np.char.str_len(text).max()), 1)}") if len(text) else text


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
