"""Energy levels E(n, l, j) of one-electron atoms from theory.

The binding energy of a state (relative to the ionisation limit, hyperfine
structure averaged out) is the sum of

1. the Dirac energy with the reduced mass and the Barker-Glover recoil term,
2. the Salpeter relativistic recoil (Z alpha)^5 m/M and the (Z alpha)^6 m/M term,
3. the one-loop self-energy with Bethe logarithms and its remainder G_SE,
4. one-loop vacuum polarisation (electron loop, with Wichmann-Kroll terms;
   muon and hadron loops at leading order),
5. the two-loop corrections B40, B50, B62, B63,
6. the finite nuclear charge distribution (Shabaev 1993, J. Phys. B 26, 1103,
   for S states, which reduces to the CODATA leading term at low Z, and
   the (Z alpha)^2 (1 - 1/n^2)/4 share for p1/2 states).

Terms and notation follow the CODATA 2018 theory of hydrogen (Tiesinga et
al. 2021, Rev. Mod. Phys. 93, 025010).  Omitted are B61, B60, three-loop
and radiative-recoil terms: in hydrogen they are below 60 kHz for 1S and
fall as 1/n^3.  docs/physics.md gives the accuracy of each term.
"""

import numpy as np
from astropy import units as u
from astropy.table import QTable

from ..errors import QuantumNumberError
from . import constants as K
from .memo import Memo
from .qed import ZETA3, _se_without_g, bethe_log, g_se, g_vp, harmonic
from .species import parse_species

__all__ = ["binding_energy_hz", "level_energy", "level_table", "level_label",
           "enumerate_levels", "shift_terms_hz"]

_L_LETTERS = "SPDFGHIKLMNOQRTUVWXYZ"


def level_label(n, l, j):
    """Spectroscopic label such as ``2P3/2`` (letters beyond Z: ``[l=23]``)."""
    letter = _L_LETTERS[l] if l < len(_L_LETTERS) else f"[l={l}]"
    return f"{n}{letter}{int(round(2 * j))}/2"


def _check(n, l, twoj):
    if np.any(n < 1):
        raise QuantumNumberError("principal quantum number n must be >= 1")
    if np.any((l < 0) | (l >= n)):
        raise QuantumNumberError("orbital quantum number l must satisfy 0 <= l < n")
    if np.any((twoj != 2 * l + 1) & (twoj != 2 * l - 1)) or np.any(twoj < 1):
        raise QuantumNumberError("j must be l +/- 1/2 (and positive)")


def _dirac_f_minus_1(n, twoj, za):
    """f(n, j) - 1 of the Dirac energy, computed without cancellation."""
    jp = twoj / 2.0 + 0.5
    delta = za ** 2 / (jp + np.sqrt(jp ** 2 - za ** 2))
    x = za ** 2 / (n - delta) ** 2
    return np.expm1(-0.5 * np.log1p(x))


_CHARGE_MEMO = Memo(4)


def _charge_terms(n, l, twoj, Z):
    """The parts of the level shifts that depend on n, l, j and the nuclear charge only
    (not on the nuclear mass or size), as dimensionless arrays.

    The last few results are kept, so that the isotopes of one element (H, D, T)
    share them within a catalogue build.
    """
    key = (Z, n.tobytes(), l.tobytes(), twoj.tobytes())
    hit = _CHARGE_MEMO.get(key)
    if hit is not None:
        return hit
    a = K.ALPHA
    za = Z * a
    nf = n.astype(float)
    s = (l == 0).astype(float)
    kappa = np.where(twoj > 2 * l, -(l + 1), l).astype(float)
    an = np.where(l == 0, -2 * (np.log(2 / nf) + harmonic(nf) + 1 - 1 / (2 * nf)),
                  1.0 / np.maximum(l * (l + 1) * (2 * l + 1), 1))
    lnk0 = bethe_log(n, l)
    lf = l.astype(float)
    d60 = np.where(l == 0, 4 * np.log(2) - 3.5,
                   (3 - lf * (lf + 1) / nf ** 2) * 2
                   / np.maximum((4 * lf ** 2 - 1) * (2 * lf + 3), 1))
    ln = np.log(za ** -2)
    h_vp = (-4 / 15 * s + 5 * np.pi / 48 * za * s - 2 / 15 * za ** 2 * ln * s
            + g_vp(n, l) * za ** 2
            + ((19 / 45 - np.pi ** 2 / 27) + (1 / 16 - 31 * np.pi ** 2 / 2880) * np.pi * za)
            * s * za ** 2)
    b40 = np.where(l == 0,
                   1.5 * np.pi ** 2 * np.log(2) - 10 * np.pi ** 2 / 27 - 2179 / 648 - 9 / 4 * ZETA3,
                   0.0)
    b62 = np.where(l == 0, 16 / 9 * (71 / 60 - np.log(2) + harmonic(nf - 1) - np.log(nf) - 1 / nf
                                     + 1 / (4 * nf ** 2)),
                   np.where(l == 1, 4 / 27 * (nf ** 2 - 1) / nf ** 2, 0.0))
    out = {
        "nf": nf, "nf3": nf * nf * nf,   # array ** 3 is a slow general power in numpy
        "s": s, "kappa": kappa,
        "fm1": _dirac_f_minus_1(nf, twoj, za),
        # Salpeter recoil bracket without its mass-dependent last term
        "salpeter": 1 / 3 * s * np.log(za ** -2) - 8 / 3 * lnk0 - s / 9 - 7 / 3 * an,
        "d60": d60,
        "f_se": _se_without_g(n, l, twoj, za) + g_se(n, l, twoj, Z, a) * za ** 2,
        "magnetic": np.where(l == 0, 0.0, -1.0 / (2 * kappa * (2 * l + 1))),
        "h_vp": h_vp,
        "f4": b40 - 21.55447 * s * za - 8 / 27 * s * za ** 2 * ln ** 3 + b62 * za ** 2 * ln ** 2,
        "b40_mag": np.where(l == 0, 0.0, (np.pi ** 2 / 2 * np.log(2) - np.pi ** 2 / 12 - 197 / 144
                                          - 0.75 * ZETA3) / (kappa * (2 * l + 1))),
    }
    out = {k: np.asarray(v, dtype=float) for k, v in out.items()}
    for arr in out.values():
        arr.flags.writeable = False
    return _CHARGE_MEMO.put(key, out)


def shift_terms_hz(species, n, l, j):
    """Every contribution to the binding energy, in Hz, as a dict of arrays."""
    sp = parse_species(species)
    n = np.asarray(n, dtype=np.int64)
    l = np.asarray(l, dtype=np.int64)
    twoj = np.rint(2 * np.asarray(j, dtype=float)).astype(np.int64)
    n, l, twoj = np.broadcast_arrays(n, l, twoj)
    _check(n, l, twoj)
    a = K.ALPHA
    Z = sp.charge
    za = Z * a
    M = sp.core_mass_me
    r = sp.reduced_mass_ratio
    mc2 = K.ME_C2_HZ
    c = _charge_terms(n, l, twoj, Z)
    nf, nf3, s, kappa, fm1 = c["nf"], c["nf3"], c["s"], c["kappa"], c["fm1"]
    terms = {}
    terms["dirac_reduced_mass"] = mc2 * (r * fm1 - r ** 2 * fm1 ** 2 / (2 * M)
                                         + (1 - s) / (kappa * (2 * l + 1)) * za ** 4 * r ** 3
                                         / (2 * nf3 * M ** 2))

    salpeter = c["salpeter"] - s * 2 / (M ** 2 - 1) * (M ** 2 * np.log(1 / r) - np.log(M / r))
    terms["recoil"] = mc2 * r ** 3 / M * (za ** 5 / (np.pi * nf3) * salpeter
                                          + za ** 6 / nf3 * c["d60"])

    # self-energy: reduced-mass scaling r^3, log argument (m_e/m_r)(Z alpha)^-2 in A41,
    # the magnetic-moment part of A40 scaled by r^2 instead of r^3
    base = a / np.pi * za ** 4 / nf3 * mc2
    f_se = c["f_se"] + 4 / 3 * s * np.log(1 / r)
    terms["self_energy"] = base * (r ** 3 * f_se + (r ** 2 - r ** 3) * c["magnetic"])

    muon = -4 / 15 * s / K.MMU_ME ** 2 * (1 + 0.671)   # muon loop plus hadronic (0.671 x muon)
    terms["vacuum_polarisation"] = base * r ** 3 * (c["h_vp"] + muon)

    terms["two_loop"] = (a / np.pi) ** 2 * za ** 4 / nf3 * mc2 * (r ** 3 * c["f4"]
                                                                  + r ** 2 * c["b40_mag"])

    rn = sp.radius_m
    if rn > 0:
        lam_c = K.C / mc2 / (2 * np.pi)            # reduced Compton wavelength, m
        gam = np.sqrt(1 - za ** 2)
        rsph = np.sqrt(5 / 3) * rn
        f_ns = np.where(n == 1, 1.380 - 0.162 * za + 1.612 * za ** 2,
                        1.793 - 0.263 * za + 1.812 * za ** 2)
        p12 = ((l == 1) & (twoj == 1)).astype(float) * za ** 2 * (1 - 1 / nf ** 2) / 4
        share = s + p12              # only S and p1/2 states shift: the power only for them
        hit = share != 0
        size = np.zeros(n.shape)
        nh = nf[hit]
        size[hit] = (za ** 2 / (10 * nh) * (1 + za ** 2 * f_ns[hit])
                     * (2 * za * rsph / (nh * lam_c)) ** (2 * gam) * mc2 * r ** 3) * share[hit]
        terms["nuclear_size"] = size
    else:
        terms["nuclear_size"] = np.zeros(n.shape)
    return terms


def binding_energy_hz(species, n, l, j):
    """Binding energy (negative, below the ionisation limit) in Hz; arrays broadcast."""
    return sum(shift_terms_hz(species, n, l, j).values())


def enumerate_levels(n_min, n_max):
    """All (n, l, j) with n_min <= n <= n_max, as three arrays (j as float)."""
    if n_min < 1 or n_max < n_min:
        raise QuantumNumberError(f"need 1 <= n_min <= n_max, got {n_min}..{n_max}")
    ns, ls, js = [], [], []
    for n in range(n_min, n_max + 1):
        l = np.repeat(np.arange(n), 2)
        j = l + np.tile([-0.5, 0.5], n)
        keep = j > 0
        ns.append(np.full(keep.sum(), n))
        ls.append(l[keep])
        js.append(j[keep])
    return np.concatenate(ns), np.concatenate(ls), np.concatenate(js)


def level_energy(species, n, l, j):
    """Binding energy of level(s) as an astropy Quantity in cm^-1 (negative)."""
    return (binding_energy_hz(species, n, l, j) / K.HZ_PER_CM) * u.cm ** -1


def level_table(species, n_max, *, n_min=1):
    """QTable of fine-structure levels: energy above the ground level and binding energy.

    Columns: species, n, l, j, g, label, energy (cm^-1 above 1S1/2), binding
    (cm^-1, negative).  Metadata records the CODATA release and the theory.
    """
    sp = parse_species(species)
    n, l, j = enumerate_levels(n_min, n_max)
    e = binding_energy_hz(sp, n, l, j)
    ground = binding_energy_hz(sp, 1, 0, 0.5)
    t = QTable()
    t["species"] = np.full(len(n), sp.name)
    t["n"] = n
    t["l"] = l
    t["j"] = j
    t["g"] = (2 * j + 1).astype(int)
    t["label"] = [level_label(a, b, c) for a, b, c in zip(n, l, j)]
    t["energy"] = (e - ground) / K.HZ_PER_CM * u.cm ** -1
    t["binding"] = e / K.HZ_PER_CM * u.cm ** -1
    t.meta.update({"species": sp.name, "constants": K.CODATA_VERSION,
                   "theory": "Dirac + reduced mass + recoil + QED + nuclear size",
                   "nuclear_mass_source": sp.mass_source})
    return t
