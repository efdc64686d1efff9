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
from .memo import Memo
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
        n, l, twoj, flat = _grid_states(n_max, l_max)
        self.energy = np.full((n_max + 1, l_max + 1, 2), np.nan)
        self.energy.ravel()[flat] = binding_energy_hz(sp, n, l, twoj / 2.0)

    def __call__(self, n, l, twoj):
        return self.energy[n, l, (twoj > 2 * l).astype(np.intp)]


_ROW_MEMO = Memo(8)


def _grid_states(n_max, l_max):
    """The states of a `_LevelGrid` (n, l, 2j and flat index), the same for every species."""
    key = ("states", n_max, l_max)
    hit = _ROW_MEMO.get(key)
    if hit is not None:
        return hit
    n = np.arange(1, n_max + 1)[:, None, None]
    l = np.arange(l_max + 1)[None, :, None]
    side = np.arange(2)[None, None, :]
    n, l, side = np.broadcast_arrays(n, l, side)
    valid = (l < n) & ((l > 0) | (side == 1))
    n, l, side = n[valid], l[valid], side[valid]
    out = (n, l, 2 * l + np.where(side == 1, 1, -1), (n * (l_max + 1) + l) * 2 + side)
    for arr in out:
        arr.flags.writeable = False
    return _ROW_MEMO.put(key, out)


def _radial_rows(nu, nl):
    """One row per (pair, lower l, branch): pair index, l_upper, l_lower, radial integral.

    The integrals do not depend on the species (they are in units of a0/Z with
    infinite mass), so the last few results are kept for reuse by the next species.
    """
    key = (nu.tobytes(), nl.tobytes())
    hit = _ROW_MEMO.get(key)
    if hit is not None:
        return hit
    return _ROW_MEMO.put(key, _compute_radial_rows(nu, nl))


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
    """Species-independent part of `multiplets`: per fine-structure component, the pair
    index, flat indices of the upper and lower states in a `_LevelGrid` and the line
    strength (atomic units).  Kept in the same memo as the radial rows.

    Built on the dense (pair, l) grid of radial integrals: column l holds the
    channel upper l -> lower l - 1 (X_l) and upper l - 1 -> lower l (Y_l), each
    split into its LS doublet components (`_doublet_fractions`).
    """
    key = ("plan", nu.tobytes(), nl.tobytes())
    hit = _ROW_MEMO.get(key)
    if hit is not None:
        return hit
    X, Y = dipole_radial_integrals(nu, nl)
    m, width = X.shape
    L = width - 1
    big = np.arange(1, L + 1)[None, :]
    k = nl[:, None]
    stride = 2 * (L + 1)             # flat index of (n, l, side) is n * stride + 2 l + side
    # The six components of column l, in the order (pair, l, component) so that each
    # pair's components are contiguous.  X_l: upper l -> lower l - 1; Y_l: upper l - 1
    # -> lower l; the doublet fractions are `_doublet_fractions` with big = l;
    # side 1 is j = l + 1/2.  Per component: channel, fraction kind, upper (dl, side),
    # lower (dl, side).
    chan = np.array([0, 0, 0, 1, 1, 1])
    kind = np.array([0, 1, 2, 0, 1, 2])
    du, su = np.array([0, 0, 0, -1, -1, -1]), np.array([1, 0, 0, 1, 1, 0])
    dl, sl = np.array([-1, -1, -1, 0, 0, 0]), np.array([1, 1, 0, 1, 0, 0])
    ok = np.empty((m, L, 6), dtype=bool)
    two = big >= 2                   # j = l - 3/2 on the small side needs l_small >= 1
    ok[..., 0] = ok[..., 1] = big <= k          # the lower l must exist below n'
    ok[..., 2] = ok[..., 0] & two
    ok[..., 3] = ok[..., 4] = big <= k - 1
    ok[..., 5] = ok[..., 3] & two
    pp, col, comp = np.nonzero(ok)
    pp = pp.astype(np.int32)
    l = col + 1
    frac = np.array(_doublet_fractions(np.arange(L + 1, dtype=float)))
    rad = np.stack([X, Y])[chan[comp], pp, l]
    s_c = frac[kind[comp], l] * (2.0 * l) * rad * rad
    iu = nu[pp] * stride + 2 * (l + du[comp]) + su[comp]
    il = nl[pp] * stride + 2 * (l + dl[comp]) + sl[comp]
    starts = np.flatnonzero(np.diff(pp, prepend=-1))
    if len(starts) != m:
        raise AssertionError("every n -> n' pair has an s -> p component")
    shape = (int(nu.max()) + 1, L + 1, 2)
    plan = {"pair": pp, "upper": iu, "lower": il, "s": s_c, "starts": starts,
            "sum_s": np.add.reduceat(s_c, starts),
            "count": np.diff(np.append(starts, len(pp)))}
    for arr in plan.values():
        arr.flags.writeable = False
    return _ROW_MEMO.put(key, (shape, plan))


def _doublet_fractions(big):
    """Shares of an l <-> l - 1 line strength (big = the larger l) in its three LS
    doublet components: (j_big, j_small) = (big + 1/2, big - 1/2), (big - 1/2,
    big - 1/2), (big - 1/2, big - 3/2)."""
    return ((big + 1) / (2 * big + 1), 1 / ((2 * big + 1) * (2 * big - 1)),
            (big - 1) / (2 * big - 1))


def _doublet_split(lu, ll):
    """The (2j_upper, 2j_lower, fraction) of each LS doublet component, per row."""
    big = np.maximum(lu, ll)
    upper_is_big = lu == big
    out = []
    for (dj_big, dj_small), frac in zip(((+1, -1), (-1, -1), (-1, -3)), _doublet_fractions(big)):
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
    shape, plan = _multiplet_plan(nu, nl)
    grid = _LevelGrid(sp, shape[0] - 1, shape[1] - 1).energy.ravel()
    s_c = plan["s"]
    # two work arrays, updated in place (a long chain of temporaries costs more than the sums)
    freq = np.take(grid, plan["upper"])
    work = np.take(grid, plan["lower"])
    np.subtract(freq, work, out=freq)
    starts = plan["starts"]          # each pair's components are contiguous
    np.multiply(freq, s_c, out=work)
    sum_nus = np.add.reduceat(work, starts)     # proportional to sum g_l f_l
    np.multiply(work, freq, out=work)
    np.multiply(work, freq, out=work)           # nu^3 S (not freq ** 3: slow)
    sum_nu3s = np.add.reduceat(work, starts)    # proportional to sum g_u A_u
    np.multiply(work, freq, out=work)
    sum_nu4s = np.add.reduceat(work, starts)    # for the weighted mean frequency
    sum_s, count = plan["sum_s"], plan["count"]
    unit = _dipole_unit_si(sp)
    g_u = 2.0 * nu ** 2
    g_l = 2.0 * nl ** 2
    a_ul = _A_FACTOR * sum_nu3s * unit / g_u
    f_lu = _F_FACTOR * _A_FACTOR * sum_nus * unit / g_l
    return {"frequency": sum_nu4s / sum_nu3s, "A": a_ul, "f": f_lu, "S": sum_s * unit,
            "g_upper": g_u, "g_lower": g_l, "components": count}
