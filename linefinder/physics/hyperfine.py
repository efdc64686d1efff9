"""Hyperfine structure of the s levels of one-electron atoms: the 21-cm family.

The splitting of an ns level by the nuclear magnetic moment (Fermi contact term):

    nu_F = 4/3 alpha^2 Z^3 (mu/mu_N) (m_e/m_p) (2I+1)/I  c R_inf  (m_r/m_e)^3 / n^3

(Fermi 1930; e.g. Bethe & Salpeter 1957, eq. 22.22; Eides, Grotch & Shelyuto
2001, Phys. Rep. 342, 63, eq. 9.2), times these corrections:

* the electron's anomalous moment, (1 + a_e) (CODATA a_e from ``scipy.constants``);
* Breit's relativistic factor: exactly 1 / (gamma (2 gamma - 1)) for 1s, with
  gamma = sqrt(1 - (Z alpha)^2) (Breit 1930, Phys. Rev. 35, 1447), and for n >= 2 the
  expansion 1 + (Z alpha)^2 (11 n^2 + 9 n - 11) / (6 n^2) (which gives the textbook
  3/2 for 1s and 17/8 for 2s);
* the leading QED term, 1 + alpha (Z alpha) (ln 2 - 5/2) (Kroll & Pollock 1951,
  Phys. Rev. 84, 594; Karplus, Klein & Schwinger 1951);
* the nuclear-structure (Zemach) term, 1 - 2 Z alpha m_r c r_Z / hbar, with the Zemach
  radius r_Z of the proton 1.045 fm (Friar & Sick 2004, Phys. Lett. B 579, 285, recalled
  from memory); the triton and the helion use their rms charge radius as an estimate.
  The deuteron gets no structure term: its polarisability outweighs its Zemach term and
  has the opposite sign (the total is about +44 kHz, Khriplovich & Milstein 2004, recalled
  from memory), so the point-nucleus value is the better estimate.

What is left out (nuclear recoil beyond the reduced mass, nuclear polarisability,
higher-order QED) is a few ppm for hydrogen and of order 100 ppm for the deuteron and
the helion, whose structure theory does not reach.  Where a measured interval exists it
is the one used for line positions (`hyperfine_lines`, column ``source``); the theory
value is given beside it.  Measured intervals (recalled from memory, with their
papers):

* H 1s: 1 420 405 751.768(1) Hz, hydrogen maser (Hellwig et al. 1970, IEEE Trans.
  Instrum. Meas. 19, 200; Essen et al. 1971, Nature 229, 110)
* H 2s: 177 556 834.3(6.7) Hz (Kolachevsky et al. 2009, Phys. Rev. Lett. 102, 213002)
* D 1s: 327 384 352.522(2) Hz (Wineland & Ramsey 1972, Phys. Rev. A 5, 821)
* D 2s: 40 924 454(7) Hz (Kolachevsky et al. 2004, Phys. Rev. Lett. 92, 033003)
* T 1s: 1 516 701 470.773(8) Hz (Mathur, Crampton, Kleppner & Ramsey 1967, Phys. Rev.
  158, 14)
* 3He+ 1s: 8 665 649 867(10) Hz (Schuessler, Fortson & Dehmelt 1969, Phys. Rev. 187, 5)
* 3He+ 2s: 1 083 354 980.2(1.1) Hz (Prior & Wang 1977, Phys. Rev. A 16, 6)

Transition rates are magnetic-dipole (electron spin flip) rates,

    A = mu_0 omega^3 / (3 pi hbar c^3) (g_e mu_B + g_I mu_N)^2 S_F,

with S_F the sum over the lower sublevels of |<F_l m_l| s |F_u m_u>|^2 computed from
the angular-momentum algebra (1/4 for I = 1/2).  For the 21-cm line this gives
2.88e-15 s^-1, the textbook value (e.g. Gould 1994, ApJ 423, 522: 2.8843e-15 s^-1,
recalled from memory).  Nuclear spins and moments: CODATA (proton, deuteron, triton,
helion); other nuclei are not tabulated here, and their hyperfine lines are not offered.
"""

from dataclasses import dataclass

import numpy as np
import scipy.constants as _sc

from ..errors import SpeciesError
from . import constants as K
from .species import parse_species

__all__ = ["NUCLEI", "MEASURED", "HyperfineLine", "fermi_interval_hz", "hyperfine_interval",
           "hyperfine_lines", "has_hyperfine", "spin_flip_rate"]

#: (Z, A): (nuclear spin I, magnetic moment in nuclear magnetons, Zemach radius in m or
#: None, source)
NUCLEI = {
    (1, 1): (0.5, _sc.physical_constants["proton mag. mom. to nuclear magneton ratio"][0],
             1.045e-15, "CODATA proton moment; Zemach radius Friar & Sick 2004"),
    (1, 2): (1.0, _sc.physical_constants["deuteron mag. mom. to nuclear magneton ratio"][0],
             0.0, "CODATA deuteron moment; no structure term (see the module docstring)"),
    (1, 3): (0.5, _sc.physical_constants["triton mag. mom. to nuclear magneton ratio"][0],
             None, "CODATA triton moment"),
    (2, 3): (0.5, _sc.physical_constants["helion mag. mom. to nuclear magneton ratio"][0],
             None, "CODATA helion moment"),
}

#: (Z, A, n): (interval in Hz, its 1-sigma uncertainty in Hz, source); recalled from memory
MEASURED = {
    (1, 1, 1): (1420405751.768, 0.001, "hydrogen maser, Hellwig et al. 1970"),
    (1, 1, 2): (177556834.3, 6.7, "Kolachevsky et al. 2009"),
    (1, 2, 1): (327384352.522, 0.002, "Wineland & Ramsey 1972"),
    (1, 2, 2): (40924454.0, 7.0, "Kolachevsky et al. 2004"),
    (1, 3, 1): (1516701470.773, 0.008, "Mathur et al. 1967"),
    (2, 3, 1): (8665649867.0, 10.0, "Schuessler, Fortson & Dehmelt 1969"),
    (2, 3, 2): (1083354980.2, 1.1, "Prior & Wang 1977"),
}

HBAR_C_M = _sc.hbar * _sc.c                 # J m
ME_C2_J = _sc.m_e * _sc.c ** 2
A_E = -_sc.physical_constants["electron g factor"][0] / 2.0 - 1.0
G_E = -_sc.physical_constants["electron g factor"][0]
MU_B = _sc.physical_constants["Bohr magneton"][0]
MU_N = _sc.physical_constants["nuclear magneton"][0]


@dataclass(frozen=True)
class HyperfineLine:
    """One hyperfine transition F_upper -> F_lower of the ns level of a species."""
    species: str
    n: int
    f_upper: float
    f_lower: float
    frequency_hz: float         #: the interval used (measured where one exists)
    frequency_err_hz: float     #: its 1-sigma uncertainty (theory: the terms left out)
    source: str                 #: "measured: <paper>" or "theory"
    theory_hz: float            #: the interval computed here
    a_ul: float                 #: magnetic-dipole transition rate, s^-1
    g_upper: int
    g_lower: int

    @property
    def label(self):
        lam_cm = K.C / self.frequency_hz * 100.0
        size = f"{lam_cm:.0f} cm" if lam_cm >= 10 else f"{lam_cm:.2g} cm"
        return size if self.n == 1 else f"{self.n}s {size}"


def _nucleus(sp):
    found = NUCLEI.get((sp.Z, sp.A))
    if found is None or sp.kind != "hydrogenic":
        raise SpeciesError(f"{sp.name}: no nuclear spin and moment tabulated for hyperfine lines "
                           "(available: H I, D I, T I, 3He II)")
    return found


def has_hyperfine(species):
    """True where the species' nucleus has a tabulated spin and moment."""
    sp = parse_species(species)
    return sp.kind == "hydrogenic" and (sp.Z, sp.A) in NUCLEI


def _breit(n, za):
    if n == 1:
        gamma = np.sqrt(1.0 - za ** 2)
        return 1.0 / (gamma * (2.0 * gamma - 1.0))
    return 1.0 + za ** 2 * (11 * n ** 2 + 9 * n - 11) / (6.0 * n ** 2)


def fermi_interval_hz(species, n=1):
    """The hyperfine interval of the ns level in Hz from theory (see the module docstring);
    positive where the state of larger F lies higher (a positive nuclear moment)."""
    sp = parse_species(species)
    spin, moment, r_zemach, _ = _nucleus(sp)
    if n < 1:
        raise ValueError("n starts at 1")
    Z = sp.Z
    za = Z * K.ALPHA
    mr = sp.reduced_mass_ratio
    me_mp = 1.0 / K.MP_ME
    nu = (4.0 / 3.0) * K.ALPHA ** 2 * Z ** 3 * moment * me_mp * (2 * spin + 1) / spin \
        * K.RYDBERG_HZ * mr ** 3 / n ** 3
    radius = r_zemach if r_zemach is not None else sp.radius_m
    zemach = 1.0 - 2.0 * za * mr * ME_C2_J * radius / HBAR_C_M
    qed = 1.0 + K.ALPHA * za * (np.log(2.0) - 2.5)
    return nu * (1.0 + A_E) * _breit(n, za) * qed * zemach


def _theory_uncertainty(sp, nu):
    # the terms left out: recoil and polarisability of the proton (about 7 ppm of the
    # 21-cm interval); nuclear structure of the heavier nuclei (of order 1e-4)
    return abs(nu) * (1e-5 if (sp.Z, sp.A) == (1, 1) else 3e-4)


def hyperfine_interval(species, n=1):
    """(interval in Hz, 1-sigma uncertainty in Hz, source, theory value in Hz) of the ns
    level: the measured interval where one is tabulated, else the theory value."""
    sp = parse_species(species)
    theory = fermi_interval_hz(sp, n)
    found = MEASURED.get((sp.Z, sp.A, n))
    if found is not None:
        return found[0], found[1], f"measured: {found[2]}", theory
    return abs(theory), _theory_uncertainty(sp, theory), "theory", theory


def _spin_sum(spin):
    """Sum over m_l and the three components of |<F_l m_l| s |F_u m_u>|^2 for one upper
    sublevel, F_u = I + 1/2 and F_l = I - 1/2 (the value is the same for either order)."""
    def ops(j):
        m = np.arange(j, -j - 1, -1)
        jp = np.diag(np.sqrt(j * (j + 1) - m[1:] * (m[1:] + 1)), 1)
        return (jp + jp.T) / 2, (jp - jp.T) / 2j, np.diag(m)
    ii = [np.kron(o, np.eye(2)) for o in ops(spin)]
    ss = [np.kron(np.eye(int(round(2 * spin + 1))), o) for o in ops(0.5)]
    f2 = sum((a + b) @ (a + b) for a, b in zip(ii, ss))
    fz = ii[2] + ss[2]
    # eigenstates of F^2 (degenerate within F) resolved by F_z
    vals, vecs = np.linalg.eigh(f2 + 1e-3 * fz)
    f_of = 0.5 * (np.sqrt(1.0 + 4.0 * vals) - 1.0)
    upper = vecs[:, np.isclose(f_of, spin + 0.5, atol=0.05)]
    lower = vecs[:, np.isclose(f_of, spin - 0.5, atol=0.05)]
    total = sum(np.sum(np.abs(lower.conj().T @ s @ upper) ** 2) for s in ss)
    return float(total) / upper.shape[1]


def spin_flip_rate(frequency_hz, spin, moment):
    """Magnetic-dipole rate (s^-1) of the hyperfine transition F = I + 1/2 <-> I - 1/2 from
    its upper level, at a frequency in Hz, for a nucleus of spin I and moment (mu_N)."""
    omega = 2.0 * np.pi * frequency_hz
    g_nuc = moment / spin
    mu = G_E * MU_B + g_nuc * MU_N
    s_sum = _spin_sum(spin)
    if moment < 0:      # the upper level is F = I - 1/2: the sum runs over its sublevels
        s_sum *= (2 * spin + 2) / (2 * spin)
    return _sc.mu_0 * omega ** 3 / (3.0 * np.pi * _sc.hbar * _sc.c ** 3) * mu ** 2 * s_sum


def hyperfine_lines(species, n_values=(1, 2)):
    """The hyperfine transitions of the ns levels of a species (`HyperfineLine` list)."""
    sp = parse_species(species)
    spin, moment, _, _ = _nucleus(sp)
    out = []
    for n in n_values:
        nu, err, source, theory = hyperfine_interval(sp, n)
        f_hi, f_lo = (spin + 0.5, spin - 0.5) if moment > 0 else (spin - 0.5, spin + 0.5)
        out.append(HyperfineLine(species=sp.name, n=int(n), f_upper=f_hi, f_lower=f_lo,
                                 frequency_hz=float(nu), frequency_err_hz=float(err),
                                 source=source, theory_hz=float(abs(theory)),
                                 a_ul=float(spin_flip_rate(nu, spin, moment)),
                                 g_upper=int(round(2 * f_hi + 1)),
                                 g_lower=int(round(2 * f_lo + 1))))
    return out
