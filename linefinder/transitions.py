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
    return _A_FACTOR * (nu_hz * nu_hz * nu_hz) * s_si / g_upper


def oscillator_strength(nu_hz, a_ul, g_upper, g_lower):
    """Absorption oscillator strength f_lu from A_ul."""
    return g_upper / g_lower * a_ul * _F_FACTOR / nu_hz ** 2


class _LevelGrid:
    """Binding energies E[n, l, s] (Hz) of every state a set of lines needs (s: j = l -/+ 1/2)."""

    def __init__(self, sp, n_max, l_max):
        n = np.arange(1, n_max + 1)[:, None, None]
        l = np.arange(l_max + 1)[None, :, None]
        side = np.arange(2)[None, None, :]
        n, l, side = np.broadcast_arrays(n, l, side)
        valid = (l < n) & ((l > 0) | (side == 1))
        self.energy = np.full((n_max + 1, l_max + 1, 2), np.nan)
        twoj = 2 * l[valid] + np.where(side[valid] == 1, 1, -1)
        self.energy[n[valid], l[valid], side[valid]] = binding_energy_hz(sp, n[valid], l[valid],
                                                                         twoj / 2.0)

    def __call__(self, n, l, twoj):
        return self.energy[n, l, (twoj > 2 * l).astype(np.intp)]


_ROW_MEMO = {}


def _radial_rows(nu, nl):
    """One row per (pair, lower l, branch): pair index, l_upper, l_lower, radial integral.

    The integrals do not depend on the species (they are in units of a0/Z with
    infinite mass), so the last few results are kept for reuse by the next species.
    """
    key = (nu.tobytes(), nl.tobytes())
    hit = _ROW_MEMO.get(key)
    if hit is not None:
        return hit
    rows = _compute_radial_rows(nu, nl)
    if len(_ROW_MEMO) >= 8:
        _ROW_MEMO.pop(next(iter(_ROW_MEMO)))
    _ROW_MEMO[key] = rows
    return rows


def _compute_radial_rows(nu, nl):
    X, Y = dipole_radial_integrals(nu, nl)
    pair = np.repeat(np.arange(len(nu)), nl)
    starts = np.repeat(np.cumsum(nl) - nl, nl)
    l_lo = np.arange(len(pair)) - starts
    has = l_lo >= 1
    # upper l = l_lo + 1 uses X_{l_lo + 1}; upper l = l_lo - 1 uses Y_{l_lo}
    p = np.concatenate([pair, pair[has]])
    lu = np.concatenate([l_lo + 1, l_lo[has] - 1])
    ll = np.concatenate([l_lo, l_lo[has]])
    rad = np.concatenate([X[pair, l_lo + 1], Y[pair[has], l_lo[has]]])
    for arr in (p, lu, ll, rad):
        arr.flags.writeable = False
    return p, lu, ll, rad


def _multiplet_plan(nu, nl):
    """Species-independent part of `multiplets`: per doublet branch, the pair index,
    flat indices of the upper and lower states in a `_LevelGrid` and the line
    strength (atomic units).  Kept in the same memo as the radial rows."""
    key = ("plan", nu.tobytes(), nl.tobytes())
    hit = _ROW_MEMO.get(key)
    if hit is not None:
        return hit
    p, lu, ll, rad = _radial_rows(nu, nl)
    big, split = _doublet_split(lu, ll)
    shape = (int(nu.max()) + 1, int(lu.max()) + 1, 2)
    n_u = nu[p]
    n_l = nl[p]
    s_row = 2 * big * rad ** 2
    parts = []
    for tju, tjl, frac, ok in split:
        iu = np.ravel_multi_index((n_u[ok], lu[ok], (tju[ok] > 2 * lu[ok]).astype(np.intp)), shape)
        il = np.ravel_multi_index((n_l[ok], ll[ok], (tjl[ok] > 2 * ll[ok]).astype(np.intp)), shape)
        parts.append((p[ok], iu, il, (frac * s_row)[ok]))
    pp, iu, il, s_c = (np.concatenate([q[i] for q in parts]) for i in range(4))
    m = len(nu)
    plan = {"pair": pp, "upper": iu, "lower": il, "s": s_c,
            "sum_s": np.bincount(pp, weights=s_c, minlength=m),
            "count": np.bincount(pp, minlength=m)}
    for arr in plan.values():
        arr.flags.writeable = False
    if len(_ROW_MEMO) >= 8:
        _ROW_MEMO.pop(next(iter(_ROW_MEMO)))
    _ROW_MEMO[key] = (shape, plan)
    return shape, plan


def _doublet_split(lu, ll):
    """The (2j_upper, 2j_lower, fraction) of each LS doublet component, per row."""
    big = np.maximum(lu, ll)
    upper_is_big = lu == big
    out = []
    for dj_big, dj_small, frac in ((+1, -1, (big + 1) / (2 * big + 1)),
                                   (-1, -1, 1 / ((2 * big + 1) * (2 * big - 1))),
                                   (-1, -3, (big - 1) / (2 * big - 1))):
        tj_big = 2 * big + dj_big
        tj_small = 2 * big + dj_small
        ok = (frac > 0) & (tj_small >= 1)
        out.append((np.where(upper_is_big, tj_big, tj_small), np.where(upper_is_big, tj_small, tj_big),
                    frac, ok))
    return big, out


def _dipole_unit_si(sp):
    """(e a_mu x dipole factor)^2 in C^2 m^2: converts line strengths from atomic units."""
    a_mu = K.BOHR_M / (sp.reduced_mass_ratio * sp.charge)
    dip = (sp.core_mass_me + sp.charge) / (sp.core_mass_me + 1.0)
    return (sc.e * a_mu * dip) ** 2


def fine_components(species, n_upper, n_lower, *, sort=True):
    """All E1 fine-structure components of the given (n, n') pairs.

    Returns a dict of equal-length arrays: ``pair`` (index into the inputs),
    ``l_upper``, ``j_upper``, ``l_lower``, ``j_lower``, ``g_upper``,
    ``g_lower``, ``frequency`` (Hz), ``S`` (C^2 m^2), ``A`` (s^-1), ``f``.
    """
    sp = parse_species(species)
    nu = np.atleast_1d(np.asarray(n_upper, dtype=np.int64))
    nl = np.atleast_1d(np.asarray(n_lower, dtype=np.int64))
    p, lu, ll, rad = _radial_rows(nu, nl)
    big, split = _doublet_split(lu, ll)
    parts = [(p[ok], lu[ok], tju[ok], ll[ok], tjl[ok], (frac * 2 * big * rad ** 2)[ok])
             for tju, tjl, frac, ok in split]
    p, lu, tju, ll, tjl, s_au = (np.concatenate([q[i] for q in parts]) for i in range(6))
    n_u = nu[p]
    n_l = nl[p]
    grid = _LevelGrid(sp, int(nu.max()), int(lu.max()))
    freq = grid(n_u, lu, tju) - grid(n_l, ll, tjl)
    s_si = s_au * _dipole_unit_si(sp)
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
    """n -> n' multiplet values: frequency (Hz, g_u A_u weighted), A, f, S, g_u, g_l.

    Sums over the same fine-structure components as `fine_components`, without
    materialising them.
    """
    sp = parse_species(species)
    nu = np.atleast_1d(np.asarray(n_upper, dtype=np.int64))
    nl = np.atleast_1d(np.asarray(n_lower, dtype=np.int64))
    m = len(nu)
    shape, plan = _multiplet_plan(nu, nl)
    grid = _LevelGrid(sp, shape[0] - 1, shape[1] - 1).energy.ravel()
    pp, s_c = plan["pair"], plan["s"]
    freq = grid[plan["upper"]] - grid[plan["lower"]]
    nu3s = freq * freq * freq * s_c   # not freq ** 3: numpy's general power is slow
    sum_s, count = plan["sum_s"], plan["count"]
    sum_nu3s = np.bincount(pp, weights=nu3s, minlength=m)          # proportional to sum g_u A_u
    sum_nu4s = np.bincount(pp, weights=nu3s * freq, minlength=m)   # for the weighted mean frequency
    sum_nus = np.bincount(pp, weights=freq * s_c, minlength=m)     # proportional to sum g_l f_l
    unit = _dipole_unit_si(sp)
    g_u = 2.0 * nu ** 2
    g_l = 2.0 * nl ** 2
    a_ul = _A_FACTOR * sum_nu3s * unit / g_u
    f_lu = _F_FACTOR * _A_FACTOR * sum_nus * unit / g_l
    return {"frequency": sum_nu4s / sum_nu3s, "A": a_ul, "f": f_lu, "S": sum_s * unit,
            "g_upper": g_u, "g_lower": g_l, "components": count}
