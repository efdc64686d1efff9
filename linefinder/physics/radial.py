"""Exact non-relativistic hydrogenic radial dipole integrals.

For an upper level n and a lower level n' < n (Z = 1, infinite nuclear mass,
atomic units) this module returns, for l = 1 .. n',

    X_l = <n, l   | r | n', l-1>     and     Y_l = <n, l-1 | r | n', l>.

Method
------
With the factorisation operators of the radial equation, D-_l = d/dr + l/r - 1/l
and D+_l = -d/dr + l/r - 1/l, which lower and raise l at fixed n by the factor
a_l(n) = sqrt(1/l^2 - 1/n^2) (Infeld & Hull 1951, Rev. Mod. Phys. 23, 21),
the overlaps P_l = <n, l | n', l-1> obey the three-term relation

    2l a_{l+1}(n) a_l(n') P_{l+1}
        = [(2l+1) a_l(n')^2 + (2l-1) a_l(n)^2] P_l - 2l a_l(n) a_{l-1}(n') P_{l-1},

the companion overlaps Q_l = <n, l-1 | n', l> follow from

    a_l(n) Q_l = 2l a_{l+1}(n) P_{l+1} - (2l+1) a_l(n') P_l,

and the commutator [H, r] turns overlaps into dipole integrals,
X_l = P_l / (l dE) and Y_l = -Q_l / (l dE) with dE = (1/n'^2 - 1/n^2)/2.
The recursion runs downwards from l = n', where P_{n'} has the closed form
of the nodeless lower state (docs/physics.md derives it), and P_{n'+1} = 0.
It is the downward direction of the classic Storey & Hummer 1991
(Comput. Phys. Commun. 66, 129) approach and is stable to n ~ 1000 and
beyond; values are kept with a running logarithmic scale so that nothing
overflows.  Tests compare it with direct numerical integration and with sum
rules.
"""

import numpy as np
from scipy.special import gammaln

__all__ = ["dipole_radial_integrals"]


def _a(l, m):
    return np.sqrt(np.maximum(1.0 / l ** 2 - 1.0 / m ** 2, 0.0))


def _log_start(n, k):
    """ln P_{k} = ln <n, k | k, k-1> for the nodeless lower state n' = k."""
    n = n.astype(float)
    k = k.astype(float)
    log_norm_upper = 1.5 * np.log(2 / n) + 0.5 * (gammaln(n - k) - np.log(2 * n) - gammaln(n + k + 1))
    log_norm_lower = (k + 0.5) * np.log(2 / k) - 0.5 * gammaln(2 * k + 1)
    p = (n + k) / (2 * k)
    log_j = gammaln(n + k + 1) - gammaln(n - k) + (n - k - 1) * np.log(p - 1) - (n + k + 1) * np.log(p)
    return (log_norm_upper + log_norm_lower + k * np.log(2 / n) + (2 * k + 2) * np.log(n / 2)
            + log_j)


def dipole_radial_integrals(n_upper, n_lower):
    """Radial integrals X_l, Y_l (in Bohr radii, Z = 1) for many (n, n') pairs.

    Parameters
    ----------
    n_upper, n_lower : int arrays of equal length, n_upper > n_lower >= 1.

    Returns
    -------
    X, Y : float arrays of shape (len, L + 1) with L = max(n_lower); column l
        holds X_l and Y_l (column 0 and columns l > n' are zero).
    """
    n = np.asarray(n_upper, dtype=np.int64)
    k = np.asarray(n_lower, dtype=np.int64)
    if n.shape != k.shape or n.ndim != 1:
        raise ValueError("n_upper and n_lower must be 1-D arrays of equal length")
    if np.any(k < 1) or np.any(n <= k):
        raise ValueError("need n_upper > n_lower >= 1")
    rows = len(n)
    L = int(k.max()) if rows else 0
    X = np.zeros((rows, L + 1))
    Y = np.zeros((rows, L + 1))
    if rows == 0:
        return X, Y
    nf = n.astype(float)
    kf = k.astype(float)
    de = 0.5 * (1 / kf ** 2 - 1 / nf ** 2)
    log0 = _log_start(n, k)
    # scaled values: true P = p_cur * exp(logscale)
    p_next = np.zeros(rows)     # P_{l+1}
    p_cur = np.zeros(rows)      # P_l
    logscale = log0.copy()
    for l in range(L, 0, -1):
        start = (k == l)
        if np.any(start):
            p_cur[start] = 1.0
            p_next[start] = 0.0
        rows_l = k >= l
        lf = float(l)
        al_n = _a(lf, nf)
        al_k = _a(lf, kf)
        al1_n = _a(lf + 1, nf)
        q = np.where(rows_l, (2 * lf * al1_n * p_next - (2 * lf + 1) * al_k * p_cur)
                     / np.where(al_n > 0, al_n, 1.0), 0.0)
        scale = np.exp(logscale)
        X[:, l] = np.where(rows_l, p_cur * scale / (lf * de), 0.0)
        Y[:, l] = np.where(rows_l, -q * scale / (lf * de), 0.0)
        if l == 1:
            break
        # P_{l-1} from P_l and P_{l+1}
        alm1_k = _a(lf - 1, kf)
        denom = 2 * lf * al_n * alm1_k
        p_prev = np.where(rows_l & (denom > 0),
                          (((2 * lf + 1) * al_k ** 2 + (2 * lf - 1) * al_n ** 2) * p_cur
                           - 2 * lf * al1_n * al_k * p_next) / np.where(denom > 0, denom, 1.0), 0.0)
        p_next, p_cur = p_cur, p_prev
        big = np.maximum(np.abs(p_cur), np.abs(p_next))
        renorm = rows_l & ((big > 1e150) | ((big < 1e-150) & (big > 0)))
        if np.any(renorm):
            f = big[renorm]
            p_cur[renorm] /= f
            p_next[renorm] /= f
            logscale[renorm] += np.log(f)
    return X, Y
