"""Species: parse names such as ``"He II"``, ``"Fe25+"``, ``"3He II"``, ``"D"``.

A species is one electron bound to a point-like (or finite) positive core:

* ``kind == "hydrogenic"``: H, D, T and every hydrogen-like ion from He II
  (Z = 2) to Og CXVIII (Z = 118); the core is a bare nucleus of charge Z.
* ``kind == "rydberg"``: a high-n Rydberg electron of a neutral atom other than
  hydrogen (``"He I"``, ``"C I"``, ``"C"``), treated as hydrogenic in the field
  of the singly charged core with the core's mass, as radio recombination line
  work does.  Quantum defects of low-l states are ignored, so these are valid
  only for high n (n >~ 30).

Masses
------
Proton, deuteron, triton, helion and alpha-particle masses are CODATA values
from ``scipy.constants``.  Every other nucleus is the AME2020 atomic mass
(Wang et al. 2021, Chin. Phys. C 45, 030003, as shipped by the
``periodictable`` package) less Z electron masses plus the total electron
binding energy B_e(Z) = 14.4381 Z^2.39 + 1.55468e-6 Z^5.35 eV (Lunney,
Pearson & Thibault 2003, Rev. Mod. Phys. 75, 1021, eq. A4).

Nuclear charge radii
--------------------
Proton and deuteron radii are CODATA values.  Others come from the table of
Angeli & Marinova 2013 (At. Data Nucl. Data Tables 99, 69) in
``linefinder/data/nuclear_radii.csv``; nuclei missing there use the empirical
R = 0.836 A^(1/3) + 0.570 fm (Johnson & Soff 1985, At. Data Nucl. Data
Tables 33, 405).
"""

import csv
import functools
import re
from dataclasses import dataclass
from importlib import resources

from ..errors import SpeciesError
from . import constants as K

__all__ = ["Species", "parse_species", "to_roman", "from_roman"]

Z_MAX = 118

_ROMAN = [(100, "C"), (90, "XC"), (50, "L"), (40, "XL"), (10, "X"), (9, "IX"),
          (5, "V"), (4, "IV"), (1, "I")]


def to_roman(number):
    """Roman numeral of a positive integer (as used for spectrum numbers)."""
    if number < 1:
        raise ValueError("spectrum numbers start at I")
    out = []
    for value, letters in _ROMAN:
        while number >= value:
            out.append(letters)
            number -= value
    return "".join(out)


def from_roman(text):
    """Integer of a Roman numeral; raises ValueError when it is not one."""
    text = text.upper()
    if not text or not re.fullmatch(r"C{0,3}(XC|XL|L?X{0,3})(IX|IV|V?I{0,3})", text):
        raise ValueError(f"{text!r} is not a Roman numeral")
    values = {"I": 1, "V": 5, "X": 10, "L": 50, "C": 100}
    total = 0
    for i, ch in enumerate(text):
        v = values[ch]
        if i + 1 < len(text) and values[text[i + 1]] > v:
            total -= v
        else:
            total += v
    return total


@dataclass(frozen=True)
class Species:
    """One hydrogenic species with the physical parameters the levels need."""

    name: str            #: spectroscopic name, e.g. "H I", "He II", "3He II", "C I"
    symbol: str          #: element or isotope symbol: "H", "D", "T", "He", "Fe"
    Z: int               #: atomic number of the element
    A: int               #: mass number of the nucleus
    charge: int          #: charge seen by the electron (Z, or 1 for a Rydberg atom)
    core_mass_me: float  #: mass of the core (nucleus or ion) in electron masses
    radius_m: float      #: rms charge radius of the nucleus in m (0 for Rydberg cores)
    kind: str            #: "hydrogenic" or "rydberg"
    mass_source: str     #: where the mass comes from

    @property
    def reduced_mass_ratio(self):
        """m_r / m_e = M / (M + m_e)."""
        return self.core_mass_me / (self.core_mass_me + 1.0)

    @property
    def radio_prefix(self):
        """Prefix of radio recombination line names: H, D, He, C, or "He II "."""
        if self.kind == "rydberg" or self.Z == 1:
            return self.symbol
        return self.name + " "

    def __str__(self):
        return self.name


@functools.lru_cache(maxsize=1)
def _radii():
    table = {}
    with resources.files("linefinder").joinpath("data/nuclear_radii.csv").open() as fh:
        for row in csv.DictReader(line for line in fh if not line.startswith("#")):
            table[(int(row["Z"]), int(row["A"]))] = float(row["radius_fm"]) * 1e-15
    return table


def _nuclear_radius(Z, A):
    if (Z, A) == (1, 1):
        return K.RP_M
    if (Z, A) == (1, 2):
        return K.RD_M
    found = _radii().get((Z, A))
    if found is not None:
        return found
    return (0.836 * A ** (1.0 / 3.0) + 0.570) * 1e-15


def _element(Z=None, symbol=None):
    import periodictable as pt

    if symbol is not None:
        try:
            return pt.elements.symbol(symbol)
        except ValueError:
            raise SpeciesError(f"unknown element symbol {symbol!r}") from None
    return pt.elements[Z]


def _default_isotope(el):
    best = max(el.isotopes, key=lambda a: (el[a].abundance, -abs(a - el.mass)))
    if el[best].abundance > 0:
        return best
    return min(el.isotopes, key=lambda a: abs(a - el.mass))


_SPECIAL_NUCLEI = {  # (Z, A): (mass in m_e, CODATA name)
    (1, 1): (K.MP_ME, "CODATA proton mass"),
    (1, 2): (K.MD_ME, "CODATA deuteron mass"),
    (1, 3): (K.MT_ME, "CODATA triton mass"),
    (2, 3): (K.MH_ME, "CODATA helion mass"),
    (2, 4): (K.MALPHA_ME, "CODATA alpha-particle mass"),
}


def _nuclear_mass_me(Z, A):
    if (Z, A) in _SPECIAL_NUCLEI:
        return _SPECIAL_NUCLEI[(Z, A)]
    el = _element(Z=Z)
    if A not in el.isotopes:
        raise SpeciesError(f"{el.symbol}-{A} is not a known isotope (AME2020)")
    atomic_u = el[A].mass
    binding_ev = 14.4381 * Z**2.39 + 1.55468e-6 * Z**5.35
    mass_me = atomic_u / K.ME_U - Z + binding_ev / K.ME_EV
    return mass_me, "AME2020 atomic mass less electrons (Lunney et al. 2003 binding)"


_PATTERN = re.compile(
    r"^\s*(?:(?P<iso>\d+)\s*-?\s*)?(?P<sym>[A-Z][a-z]?)\s*"
    r"(?:(?P<roman>[IVXLCivxlc]+)|\^?(?P<num1>\d+)?(?P<plus>\++)(?P<num2>\d+)?)?\s*$")


@functools.lru_cache(maxsize=512)
def parse_species(text):
    """Parse a species name into a `Species`.

    Accepted forms: spectroscopic notation (``"H I"``, ``"He II"``,
    ``"Fe XXVI"``), charge notation (``"He+"``, ``"Fe25+"``, ``"Fe+25"``,
    ``"O^7+"``), an isotope prefix (``"3He II"``, ``"2H"``, ``"13C VI"``),
    ``"D"`` and ``"T"``, ``"Z=26"`` for the hydrogen-like ion of element 26,
    and a bare neutral symbol other than H (``"He"``, ``"C"``) for the
    Rydberg states of that atom.
    """
    if isinstance(text, Species):
        return text
    if not isinstance(text, str) or not text.strip():
        raise SpeciesError(f"species must be a non-empty name, not {text!r}")
    raw = text.strip()
    zmatch = re.fullmatch(r"[Zz]\s*=\s*(\d+)", raw)
    if zmatch:
        Z = int(zmatch.group(1))
        if Z < 1 or Z > Z_MAX:
            raise SpeciesError(f"Z = {Z} is outside 1..{Z_MAX}: no such element")
        return _build(Z, None, Z - 1, raw)
    m = _PATTERN.match(raw)
    if not m:
        raise SpeciesError(f"cannot parse species {raw!r} (try 'H', 'D', 'He II', 'Fe XXVI', 'C6+')")
    sym = m.group("sym")
    iso = int(m.group("iso")) if m.group("iso") else None
    if sym in ("D", "T"):
        if iso is not None:
            raise SpeciesError(f"{raw!r}: {sym} already names an isotope")
        iso = 2 if sym == "D" else 3
        sym = "H"
    el = _element(symbol=sym)
    if m.group("roman"):
        try:
            spectrum = from_roman(m.group("roman"))
        except ValueError:
            raise SpeciesError(f"{raw!r}: {m.group('roman')!r} is not a spectrum number") from None
        charge = spectrum - 1
    elif m.group("plus"):
        pluses = m.group("plus")
        num = m.group("num1") or m.group("num2")
        if num and len(pluses) > 1:
            raise SpeciesError(f"cannot parse charge in {raw!r}")
        charge = int(num) if num else len(pluses)
    else:
        charge = 0
    return _build(el.number, iso, charge, raw)


def _build(Z, A, charge, raw):
    if Z > Z_MAX:
        raise SpeciesError(f"{raw!r}: Z = {Z} > {Z_MAX} is not supported")
    el = _element(Z=Z)
    default_A = 1 if Z == 1 else _default_isotope(el)
    if A is None:
        A = default_A
    if charge == Z - 1:
        kind = "hydrogenic"
        mass_me, source = _nuclear_mass_me(Z, A)
        radius = _nuclear_radius(Z, A)
        eff = Z
    elif charge == 0 and Z > 1:
        kind = "rydberg"
        nuc, source = _nuclear_mass_me(Z, A)
        mass_me = nuc + (Z - 1)          # singly charged core: nucleus + Z-1 electrons
        source += " + core electrons"
        radius = 0.0
        eff = 1
    elif charge >= Z:
        raise SpeciesError(f"{raw!r}: a {el.symbol} ion of charge {charge}+ has no electron left; "
                           f"the hydrogen-like ion is {el.symbol} {to_roman(Z)}")
    else:
        raise SpeciesError(f"{raw!r} is not hydrogen-like; the hydrogen-like ion of {el.symbol} "
                           f"is {el.symbol} {to_roman(Z)} ({el.symbol}{Z - 1}+)")
    if Z == 1:
        symbol = {1: "H", 2: "D", 3: "T"}.get(A, f"{A}H")
        name = f"{symbol} I"
    else:
        symbol = el.symbol
        prefix = "" if A == default_A else str(A)
        name = f"{prefix}{symbol} {to_roman(charge + 1)}"
    return Species(name=name, symbol=symbol, Z=Z, A=A, charge=eff, core_mass_me=mass_me,
                   radius_m=radius, kind=kind, mass_source=source)
