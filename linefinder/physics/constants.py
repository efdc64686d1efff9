"""Physical constants used inside linefinder, all from ``scipy.constants``.

Nothing here is retyped: every value is read from the CODATA release that the
installed SciPy ships, and `CODATA_VERSION` names that release so that tables
can record it in their metadata.
"""

import scipy.constants as _sc

__all__ = ["CODATA_VERSION", "C", "ALPHA", "RYDBERG_HZ", "ME_C2_HZ", "ME_U",
           "MP_ME", "MD_ME", "MT_ME", "MH_ME", "MALPHA_ME", "MMU_ME",
           "HZ_PER_EV", "HZ_PER_CM", "BOHR_M", "RP_M", "RD_M", "ME_EV", "U_EV"]


def _value(name):
    return _sc.physical_constants[name][0]


def _codata_version():
    # SciPy documents its release in the module docstring ("CODATA Recommended
    # Values of the Fundamental Physical Constants 2022"); fall back to the year
    # of the Rydberg-constant table if that wording ever changes.
    import re

    text = _sc.__doc__ or ""
    match = re.search(r"CODATA[^0-9]{0,80}(20[0-9]{2})", text)
    return f"CODATA {match.group(1)}" if match else "CODATA (SciPy)"


CODATA_VERSION = _codata_version()
C = _sc.c                                   # m/s, exact
ALPHA = _sc.fine_structure
RYDBERG_HZ = _value("Rydberg constant times c in Hz")
ME_C2_HZ = 2.0 * RYDBERG_HZ / ALPHA**2      # electron rest energy / h
ME_U = _value("electron mass in u")
MP_ME = _value("proton-electron mass ratio")
MD_ME = _value("deuteron-electron mass ratio")
MT_ME = _value("triton-electron mass ratio")
MH_ME = _value("helion-electron mass ratio")
MALPHA_ME = _value("alpha particle-electron mass ratio")
MMU_ME = _value("muon-electron mass ratio")
HZ_PER_EV = _sc.e / _sc.h
HZ_PER_CM = 100.0 * _sc.c                   # 1 cm^-1 in Hz
BOHR_M = _value("Bohr radius")
RP_M = _value("proton rms charge radius")
RD_M = _value("deuteron rms charge radius")
ME_EV = _value("electron mass energy equivalent in MeV") * 1e6
U_EV = _value("atomic mass constant energy equivalent in MeV") * 1e6
