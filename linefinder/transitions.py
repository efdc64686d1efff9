"""Electric-dipole transitions of one-electron atoms: A, f, S and g.

Fine-structure components (n l j -> n' l' j', with l' = l +/- 1) take their
radial integral from `linefinder.radial`, scaled to the species' reduced-mass
Bohr radius a0 (m_e/m_r) / Z, and their frequency from `linefinder.levels`.

* Line strength of a component: S = f(j, j') * 2 max(l, l') R^2 (e a)^2, where
  the doublet fractions f are (L+1)/(2L+1) for (L+1/2, L-1/2),
  1/((2L+1)(2L-1)) for (L-1/2, L-1/2) and (L-1)/(2L-1) for (L-1/2, L-3/2),
  L = max(l, l') (LS coupling with s = 1/2; they sum to one).
* The dipole operator of a two-body ion about its centre of mass carries the
  factor (M + q m_e)/(M + m_e) for core charge q (Bethe & Salpeter 1957, sec. 38);
  it is 1 for neutral hydrogen.
* A_ul = 16 pi^3 nu^3 S / (3 eps0 h c^3 g_u) and
  f_lu = (g_u / g_l) A_ul eps0 m_e c^3 / (2 pi e^2 nu^2).
* A multiplet n -> n' (fine=False) sums its components: A = sum(g_u A_u)/(2n^2),
  f = sum(g_l f_l)/(2n'^2), S = sum(S); its position is the g_u A_u weighted
  mean frequency (statistical population of the upper sublevels, optically
  thin emission).
"""

import numpy as np
import scipy.constants as sc

from . import constants as K
from .levels import binding_energy_hz
from .radial import dipole_radial_integrals
from .species import parse_species

__all__ = ["fine_components", "multiplets", "einstein_a", "oscillator_strength"]

_A_FACTOR = 16 * np.pi ** 3 / (3 * sc.epsilon_0 * sc.h * sc.c ** 3)
_F_FACTOR = sc.epsilon_0 * sc.m_e * sc.c ** 3 / (2 * np.pi * sc.e ** 2)


def einstein_a(nu_hz, s_si, g_upper):
    """Einstein A (s^-1) from frequency (Hz), line strength (C^2 m^2) and g_u."""
    return _A_FACTOR * nu_hz ** 3 * s_si / g_upper


def oscillator_strength(nu_hz, a_ul, g_upper, g_lower):
    """Absorption oscillator strength f_lu from A_ul."""
    return g_upper / g_lower * a_ul * _F_FACTOR / nu_hz ** 2


def _state_energies(sp, n, l, twoj):
    """Binding energies (Hz) of many states, each distinct state computed once."""
    key = (n.astype(np.int64) * 8192 + l.astype(np.int64)) * 2 + (twoj > 2 * l)
    uniq, inverse = np.unique(key, return_inverse=True)
    nu = uniq // 2 // 8192
    lu = (uniq // 2) % 8192
    up = uniq % 2
    tj = 2 * lu + np.where(up == 1, 1, -1)
    e = binding_energy_hz(sp, nu, lu, tj / 2.0)
    return e[inverse]


def fine_components(species, n_upper, n_lower, *, sort=True):
    """All E1 fine-structure components of the given (n, n') pairs.

    Returns a dict of equal-length arrays: ``pair`` (index into the inputs),
    ``l_upper``, ``j_upper``, ``l_lower``, ``j_lower``, ``g_upper``,
    ``g_lower``, ``frequency`` (Hz), ``S`` (C^2 m^2), ``A`` (s^-1), ``f``.
    """
    sp = parse_species(species)
    nu = np.atleast_1d(np.asarray(n_upper, dtype=np.int64))
    nl = np.atleast_1d(np.asarray(n_lower, dtype=np.int64))
    X, Y = dipole_radial_integrals(nu, nl)
    # radial rows: one per (pair, lower l)
    pair = np.repeat(np.arange(len(nu)), nl)
    starts = np.repeat(np.cumsum(nl) - nl, nl)
    l_lo = np.arange(len(pair)) - starts
    rows = []
    # upper l = l_lo + 1 uses X_{l_lo + 1}; upper l = l_lo - 1 uses Y_{l_lo}
    r_up = X[pair, l_lo + 1]
    rows.append((pair, l_lo + 1, l_lo, r_up))
    has = l_lo >= 1
    r_dn = Y[pair[has], l_lo[has]]
    rows.append((pair[has], l_lo[has] - 1, l_lo[has], r_dn))
    p = np.concatenate([r[0] for r in rows])
    lu = np.concatenate([r[1] for r in rows])
    ll = np.concatenate([r[2] for r in rows])
    rad = np.concatenate([r[3] for r in rows])
    big = np.maximum(lu, ll)
    # fine-structure split: (j_big, j_small) with fractions of the multiplet
    combos = [(+1, -1, (big + 1) / (2 * big + 1)),
              (-1, -1, 1 / ((2 * big + 1) * (2 * big - 1))),
              (-1, -3, (big - 1) / (2 * big - 1))]
    parts = []
    for dj_big, dj_small, frac in combos:
        tj_big = 2 * big + dj_big          # 2j of the state with l = big
        tj_small = 2 * big + dj_small      # 2j of the state with l = big - 1
        ok = (frac > 0) & (tj_small >= 1)
        upper_is_big = lu == big
        tj_u = np.where(upper_is_big, tj_big, tj_small)
        tj_l = np.where(upper_is_big, tj_small, tj_big)
        parts.append((p[ok], lu[ok], tj_u[ok], ll[ok], tj_l[ok], (frac * 2 * big * rad ** 2)[ok]))
    p, lu, tju, ll, tjl, s_au = (np.concatenate([q[i] for q in parts]) for i in range(6))
    n_u = nu[p]
    n_l = nl[p]
    freq = _state_energies(sp, n_u, lu, tju) - _state_energies(sp, n_l, ll, tjl)
    a_mu = K.BOHR_M / (sp.reduced_mass_ratio * sp.charge)
    dip = (sp.core_mass_me + sp.charge) / (sp.core_mass_me + 1.0)
    s_si = s_au * (sc.e * a_mu * dip) ** 2
    g_u = tju + 1
    g_l = tjl + 1
    a_ul = einstein_a(freq, s_si, g_u)
    f_lu = oscillator_strength(freq, a_ul, g_u, g_l)
    out = {"pair": p, "l_upper": lu, "j_upper": tju / 2.0, "l_lower": ll, "j_lower": tjl / 2.0,
           "g_upper": g_u, "g_lower": g_l, "frequency": freq, "S": s_si, "A": a_ul, "f": f_lu}
    if not sort:
        return out
    order = np.lexsort((tjl, ll, tju, lu, p))
    return {key: val[order] for key, val in out.items()}


def multiplets(species, n_upper, n_lower):
    """n -> n' multiplet values: frequency (Hz, g_u A_u weighted), A, f, S, g_u, g_l."""
    nu = np.atleast_1d(np.asarray(n_upper, dtype=np.int64))
    nl = np.atleast_1d(np.asarray(n_lower, dtype=np.int64))
    comp = fine_components(species, nu, nl, sort=False)
    m = len(nu)
    w = comp["g_upper"] * comp["A"]
    wsum = np.bincount(comp["pair"], weights=w, minlength=m)
    freq = np.bincount(comp["pair"], weights=w * comp["frequency"], minlength=m) / wsum
    g_u = 2.0 * nu ** 2
    g_l = 2.0 * nl ** 2
    a_ul = wsum / g_u
    s_tot = np.bincount(comp["pair"], weights=comp["S"], minlength=m)
    f_lu = np.bincount(comp["pair"], weights=comp["g_lower"] * comp["f"], minlength=m) / g_l
    return {"frequency": freq, "A": a_ul, "f": f_lu, "S": s_tot, "g_upper": g_u, "g_lower": g_l,
            "components": np.bincount(comp["pair"], minlength=m)}
