"""Coefficients of the QED level shifts of one-electron atoms.

The expansion and its coefficients follow the CODATA 2018 adjustment's
theory of hydrogen energy levels (Tiesinga, Mohr, Newell & Taylor 2021,
Rev. Mod. Phys. 93, 025010, section on H and D; the same terms appear in
Eides, Grotch & Shelyuto 2001, Phys. Rep. 342, 63).  Tabulated inputs:

* Bethe logarithms ln k0(n, l) for n <= 8 (Drake & Swainson 1990,
  Phys. Rev. A 41, 1243, as quoted in the CODATA tables).  Larger n use a
  c + d/n^2 extrapolation fitted to n = 7, 8; l >= 8 use ln k0(8, 7)(7/l)^4.
  Both extrapolations move levels by well under 1 kHz in hydrogen.
* The self-energy remainder G_SE at Z = 1 (Jentschura, Mohr & Soff 1999-2005,
  as quoted by CODATA) and the one-loop 1s self-energy function F(Z alpha) for
  Z >= 10 (Mohr 1992, Phys. Rev. A 46, 4421; Mohr & Kim 1992), from which a
  Z-dependent G_SE(1S) is obtained; other states shift G_SE by the same
  Z-dependence.  These tabulated values were recalled to the digits shown.
"""

import numpy as np
from scipy.special import digamma

__all__ = ["bethe_log", "g_se", "g_vp", "harmonic"]

EULER_GAMMA = 0.5772156649015329
ZETA3 = 1.2020569031595942

# ln k0(n, l): rows n = 1..8, columns l = 0..7 (nan where l >= n)
_BETHE = np.full((9, 8), np.nan)
_BETHE[1, 0] = 2.984128556
_BETHE[2, :2] = [2.811769893, -0.030016709]
_BETHE[3, :3] = [2.767663612, -0.038190229, -0.005232148]
_BETHE[4, :4] = [2.749811840, -0.041954895, -0.006740939, -0.001733661]
_BETHE[5, :5] = [2.740823727, -0.044034729, -0.007600400, -0.002202725, -0.000772098]
_BETHE[6, :6] = [2.735664207, -0.045312658, -0.008147210, -0.002502361, -0.000962797,
                 -0.000407926]
_BETHE[7, :7] = [2.732429129, -0.046155234, -0.008519466, -0.002709185, -0.001094237,
                 -0.000499669, -0.000240188]
_BETHE[8, :8] = [2.730267261, -0.046741352, -0.008785230, -0.002859869, -0.001190775,
                 -0.000566883, -0.000290932, -0.000153187]


def _bethe_extrapolation():
    d = (_BETHE[7, :7] - _BETHE[8, :7]) / (1 / 49 - 1 / 64)
    c = _BETHE[8, :7] - d / 64
    return np.append(c, _BETHE[8, 7]), np.append(d, 0.0)


_BETHE_C, _BETHE_D = _bethe_extrapolation()


def bethe_log(n, l):
    """Bethe logarithm ln k0(n, l) (arrays broadcast)."""
    n = np.asarray(n, dtype=np.int64)
    l = np.asarray(l, dtype=np.int64)
    n, l = np.broadcast_arrays(n, l)
    out = np.empty(n.shape, dtype=float)
    small = (n <= 8)
    out[small] = _BETHE[n[small], np.minimum(l[small], 7)]
    big = ~small
    lb = np.minimum(l[big], 7)
    out[big] = _BETHE_C[lb] + _BETHE_D[lb] / n[big].astype(float) ** 2
    high_l = l >= 8
    out[high_l] = _BETHE[8, 7] * (7.0 / l[high_l]) ** 4
    return out


def harmonic(n):
    """Harmonic number H_n = psi(n + 1) + gamma."""
    return digamma(np.asarray(n, dtype=float) + 1.0) + EULER_GAMMA


# G_SE(alpha) at Z = 1 by (n, l, 2j); states not listed use the nearest n of the same l, j
_G_SE_Z1 = {
    (1, 0, 1): -30.29024, (2, 0, 1): -31.18515, (3, 0, 1): -31.0477, (4, 0, 1): -30.9120,
    (6, 0, 1): -30.711, (8, 0, 1): -30.606,
    (2, 1, 1): -0.9735, (3, 1, 1): -1.1475, (4, 1, 1): -1.1954, (6, 1, 1): -1.233,
    (8, 1, 1): -1.24,
    (2, 1, 3): -0.4865, (3, 1, 3): -0.6115, (4, 1, 3): -0.6580, (6, 1, 3): -0.701,
    (8, 1, 3): -0.72,
    (3, 2, 3): 0.0050, (4, 2, 3): 0.0038, (3, 2, 5): -0.0492, (4, 2, 5): -0.0470,
}

# One-loop self-energy F(Z alpha) of the 1s state (Mohr 1992), Z = 10..110
_F1S_Z = np.array([10, 20, 30, 40, 50, 60, 70, 80, 90, 100, 110], dtype=float)
_F1S = np.array([4.6542, 3.2463, 2.5520, 2.1399, 1.8727, 1.6924, 1.5783, 1.5137,
                 1.4888, 1.5252, 1.6607])


def _se_without_g(n, l, twoj, za):
    """Self-energy F(Z alpha) of the expansion, without the G_SE remainder (m_r = m_e)."""
    ln = np.log(za ** -2)
    s = (l == 0)
    kappa = np.where(twoj > 2 * l, -(l + 1), l)
    a41 = 4.0 / 3.0 * s
    a40 = -4.0 / 3.0 * bethe_log(n, l) + 10.0 / 9.0 * s
    a40 = a40 - np.where(s, 0.0, 1.0 / (2.0 * kappa * (2 * l + 1)))
    a50 = (139.0 / 32.0 - 2.0 * np.log(2.0)) * np.pi * s
    a62 = -1.0 * s
    a61 = np.where(s, 4.0 * harmonic(n) + 28.0 / 3.0 * np.log(2.0) - 4.0 * np.log(n)
                   - 601.0 / 180.0 - 77.0 / (45.0 * n ** 2), 0.0)
    a61 = a61 + np.where(l == 1, (1.0 - 1.0 / n ** 2) * (2.0 / 15.0 + np.where(twoj == 1, 1 / 3, 0)), 0)
    lf = l.astype(float)
    a61 = a61 + np.where(l >= 1, (96.0 * n ** 2 - 32.0 * lf * (lf + 1))
                         / (3.0 * n ** 2 * np.maximum((2 * lf - 1) * 2 * lf * (2 * lf + 1)
                                                       * (2 * lf + 2) * (2 * lf + 3), 1e-300)), 0)
    return a41 * ln + a40 + a50 * za + a62 * za ** 2 * ln ** 2 + a61 * za ** 2 * ln


def _g1s_shift(Z, alpha):
    """G_SE(1S, Z) - G_SE(1S, 1): how the remainder changes with Z."""
    Z = float(Z)
    if Z <= 1:
        return 0.0
    one = np.array([1])

    def implied(zz):
        za = zz * alpha
        f_tab = np.interp(zz, _F1S_Z, _F1S)
        return (f_tab - _se_without_g(one, 0 * one, one, za)[0]) / za ** 2

    g1 = _G_SE_Z1[(1, 0, 1)]
    if Z < 10:
        return (Z - 1.0) / 9.0 * (implied(10.0) - g1)
    return implied(min(Z, 110.0)) - g1


def g_se(n, l, twoj, Z, alpha):
    """Self-energy remainder G_SE(Z alpha) for each state."""
    n, l, twoj = np.broadcast_arrays(np.asarray(n), np.asarray(l), np.asarray(twoj))
    out = np.zeros(n.shape)
    for (ll, jj) in {(k[1], k[2]) for k in _G_SE_Z1}:
        keys = sorted(k[0] for k in _G_SE_Z1 if k[1:] == (ll, jj))
        ns = np.array(keys, dtype=float)
        vals = np.array([_G_SE_Z1[(k, ll, jj)] for k in keys])
        sel = (l == ll) & (twoj == jj)
        if np.any(sel):
            pos = np.abs(n[sel][:, None] - ns[None, :]).argmin(axis=1)
            out[sel] = vals[pos]
    return out + np.where(l == 0, _g1s_shift(Z, alpha), 0.0)


def g_vp(n, l):
    """One-loop vacuum-polarisation remainder G_VP(alpha) (S states; P states are < 0.07)."""
    n = np.asarray(n)
    return np.where(np.asarray(l) == 0, np.where(n == 1, -0.618724, -0.81), 0.0)
