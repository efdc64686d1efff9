"""Unit strings as people actually write them in headers and column names.

``ANGSTROMS``, ``Angstrom``, ``A`` (Ångström, never ampere, in a spectral
or flux unit), ``nanometers``, ``um``/``microns``, ``FLAM`` (erg s^-1 cm^-2 Å^-1),
``FNU`` (erg s^-1 cm^-2 Hz^-1), ``Jy``, ``keV``, ``MHz``, ``cm-1`` ...
"""

import re
import warnings

from astropy import units as u

from ..errors import UnitsError

__all__ = ["parse_spectral_unit", "parse_flux_unit", "unit_from_label", "SPECTRAL_WORDS"]

_WORDS = {
    "angstrom": "Angstrom", "angstroms": "Angstrom", "angs": "Angstrom", "ang": "Angstrom",
    "a": "Angstrom", "aa": "Angstrom", "å": "Angstrom", "0.1nm": "Angstrom",
    "nanometer": "nm", "nanometers": "nm", "nanometre": "nm", "nanometres": "nm",
    "micron": "um", "microns": "um", "micrometer": "um", "micrometers": "um", "µm": "um",
    "mum": "um", "meter": "m", "meters": "m", "metre": "m",
    "hz": "Hz", "khz": "kHz", "mhz": "MHz", "ghz": "GHz", "thz": "THz",
    "ev": "eV", "kev": "keV", "mev": "MeV",
    "cm-1": "cm-1", "1/cm": "cm-1", "cm^-1": "cm-1", "kayser": "cm-1", "wavenumber": "cm-1",
    "pixel": "pix", "pixels": "pix",
}
_FLUX_WORDS = {"flam": "erg / (s cm2 Angstrom)", "fnu": "erg / (s cm2 Hz)", "jy": "Jy", "mjy": "mJy",
               "counts": "ct", "count": "ct", "cts": "ct", "adu": "adu", "k": "K",
               "e-": "electron", "electrons": "electron"}
SPECTRAL_WORDS = tuple(_WORDS)


def _astropy(text):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", u.UnitsWarning)
        return u.Unit(text)


def parse_spectral_unit(text, *, what="spectral axis"):
    """A spectral-axis unit (length, frequency, energy or wavenumber) from free text."""
    if text is None:
        raise UnitsError(f"no unit given for the {what}")
    raw = str(text).strip()
    key = raw.lower().replace(" ", "")
    name = _WORDS.get(key, raw)
    try:
        unit = _astropy(name)
    except (ValueError, TypeError):
        raise UnitsError(f"unknown unit {raw!r} for the {what}") from None
    if unit == u.A:  # ampere cannot be a spectral unit: it is Ångström
        unit = u.AA
    if not unit.is_equivalent(u.m, equivalencies=u.spectral()):
        raise UnitsError(f"unit {raw!r} is not a spectral unit for the {what}")
    return unit


def parse_flux_unit(text):
    """A flux unit from free text; ``A`` inside a flux unit is Ångström.  None -> dimensionless."""
    if text is None or not str(text).strip():
        return u.dimensionless_unscaled
    raw = str(text).strip()
    key = raw.lower().replace(" ", "")
    if key in _FLUX_WORDS:
        return _astropy(_FLUX_WORDS[key])
    fixed = re.sub(r"(?<![A-Za-z])(A|AA|Ang|Angs|Angstroms?)(?![A-Za-z])", "Angstrom", raw)
    fixed = re.sub(r"(?i)\bangstroms\b", "Angstrom", fixed)
    fixed = fixed.replace("**", "").replace("^", "")
    try:
        return _astropy(fixed)
    except (ValueError, TypeError):
        raise UnitsError(f"unknown flux unit {raw!r}") from None


_LABEL = re.compile(r"^\s*(?P<name>[^\[\(\{]*?)\s*[\[\(\{]\s*(?P<unit>[^\]\)\}]+)\s*[\]\)\}]\s*$")


def unit_from_label(label):
    """Split a column label into (name, unit text or None).

    ``"wavelength [Angstrom]"`` -> ("wavelength", "Angstrom"); ``"freq(MHz)"`` ->
    ("freq", "MHz"); ``"wave_nm"`` -> ("wave", "nm"); ``"flux"`` -> ("flux", None).
    """
    text = str(label).strip()
    m = _LABEL.match(text)
    if m:
        return m.group("name").strip(), m.group("unit").strip()
    for sep in ("_", " ", "-"):
        if sep in text:
            head, tail = text.rsplit(sep, 1)
            if tail.lower() == "a" and tail != "A":
                continue
            try:
                parse_spectral_unit(tail)
            except UnitsError:
                continue
            return head, tail
    return text, None
