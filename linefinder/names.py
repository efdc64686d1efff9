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
    """Vectorised `line_label`: the same text, built with array string operations."""
    nl = np.asarray(n_lower, dtype=np.int64)
    nu = np.asarray(n_upper, dtype=np.int64)
    if not len(nl):
        return np.array([], dtype=str)
    conv = np.asarray(wavelength_conv_angstrom, dtype=float)
    dn = nu - nl
    greek = np.array([_greek(d) for d in range(1, int(dn.max()) + 1)])[dn - 1]
    out = np.empty(len(nl), dtype=object)
    radio = nl >= RADIO_FROM
    if np.any(radio):
        out[radio] = np.char.add(np.char.add(species.radio_prefix, nl[radio].astype(str)),
                                 greek[radio])
    optical = ~radio
    hydrogen = species.Z == 1 or species.kind == "rydberg"
    if hydrogen and species.kind == "rydberg" and species.symbol != "H":
        sel = optical
        out[sel] = np.char.add(np.char.add(species.radio_prefix, nl[sel].astype(str)), greek[sel])
    elif hydrogen:
        base = species.symbol if species.symbol != "H" else ""
        prefixes = {k: (base if (base and k == 2) else base + v) for k, v in _PREFIX.items()}
        prefix = np.array([prefixes.get(int(k), "") for k in range(RADIO_FROM)])
        pre = prefix[np.where(optical, nl, 0)]
        tail = np.where(dn <= 5, greek, nu.astype(str))
        out[optical] = np.char.add(pre[optical], tail[optical])
    else:
        lyman = optical & (nl == 1)
        out[lyman] = np.char.add(f"{species.name} Ly", greek[lyman])
        rest = optical & (nl > 1)
        good = rest & np.isfinite(conv)
        out[good] = np.char.add(f"{species.name} ", np.rint(conv[good]).astype(np.int64).astype(str))
        bad = rest & ~np.isfinite(conv)
        if np.any(bad):
            out[bad] = [f"{species.name} {u}-{l}" for u, l in zip(nu[bad], nl[bad])]
    return out.astype(str)


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
