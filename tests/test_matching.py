"""Global assignment and redshift search: exactness of the sparse assignment, aliases."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

from linefinder.identification.matching import NULL_LOG_LIKELIHOOD, TOL, assign
from linefinder.identification.redshift import classify, search_shift


def _dense_optimum(y, sy, x, strength, s):
    """Brute-force reference: the full (features x lines + none) assignment problem,
    solved by scipy's linear_sum_assignment (source: the reference library's optimum)."""
    d = (y[:, None] - s - x[None, :]) / sy[:, None]
    ll = np.where(np.abs(d) < TOL, -0.5 * d ** 2 + np.log(np.clip(strength, 1e-4, 1))[None, :],
                  -np.inf)
    nf, nl = ll.shape
    cost = np.hstack([np.where(np.isfinite(ll), -ll, 1e6), np.full((nf, nf), 1e6)])
    cost[np.arange(nf), nl + np.arange(nf)] = -NULL_LOG_LIKELIHOOD
    r, c = linear_sum_assignment(cost)
    return cost[r, c].sum()


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 2 ** 32 - 1), st.integers(1, 25), st.integers(1, 40))
def test_sparse_assignment_is_optimal(seed, nf, nl):
    # the sort/search assignment reaches the same total likelihood as the dense problem
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0, 0.02, nl))
    y = rng.uniform(0, 0.02, nf)
    y[: nf // 2] = x[rng.integers(0, nl, nf // 2)] + rng.normal(0, 1e-4, nf // 2)
    sy = np.full(nf, 2e-4)
    strength = rng.uniform(0.05, 1, nl)
    # unknown fluxes switch the intensity prior off, so the optimum is the dense one's
    res = assign(y, sy, np.full(nf, np.nan), np.zeros(nf, bool), x, strength, np.zeros(nl, int), 0.0)
    d = (y - x[np.maximum(res.best, 0)]) / sy
    chosen = np.where(res.best >= 0, 0.5 * d ** 2 - np.log(np.clip(strength[np.maximum(res.best, 0)],
                                                                    1e-4, 1)), -NULL_LOG_LIKELIHOOD)
    assert chosen.sum() == pytest.approx(_dense_optimum(y, sy, x, strength, 0.0), abs=1e-6)
    used = res.best[res.best >= 0]
    assert len(used) == len(set(used))          # a line explains at most one feature


def test_assignment_scores_and_alternatives():
    x = np.log([486.1e-9, 486.3e-9, 656.3e-9])
    y = np.log([486.13e-9, 656.28e-9])
    res = assign(y, np.full(2, 2e-4), np.ones(2), np.zeros(2, bool), x, np.ones(3),
                 np.zeros(3, int), 0.0)
    assert list(res.best) == [0, 2]
    assert 0 < res.score[0] < 1 and res.alternatives(0)[0][0] == 1
    assert res.alternatives(1) == []


def _balmer_log_rest(nu):
    # Rydberg formula with the hydrogen reduced mass (enough for a search test);
    # source: CODATA constants via scipy.constants
    from scipy import constants as sc

    r_h = sc.Rydberg / (1 + sc.m_e / sc.m_p)
    return np.log(1.0 / (r_h * (0.25 - 1.0 / np.asarray(nu, float) ** 2)))


def test_search_finds_balmer_redshift_and_is_secure():
    x = _balmer_log_rest(np.arange(3, 12))
    z = 0.3187
    y = x[:6] + np.log1p(z)
    sy = np.full(6, 3e-5)
    w = np.full(6, np.log1p(20.0))
    strength = np.array([1.0, 0.35, 0.16, 0.09, 0.055, 0.037, 0.026, 0.019, 0.014])
    sols = search_shift(y, sy, w, x, strength, smin=0.0, smax=np.log(8.0),
                        window=(y.min() - 0.05, y.max() + 0.05),
                        flux=strength[:6] * 100, fwhm_ln=1 / 2000)
    assert abs(sols[0].z - z) < 1e-6
    assert classify(sols) == "secure"


def test_one_line_is_no_redshift():
    x = _balmer_log_rest(np.arange(3, 8))
    y = np.array([np.log(6000e-10)])
    sols = search_shift(y, np.array([3e-5]), np.array([3.0]), x, np.ones(len(x)), smin=0.0,
                        smax=np.log(8.0))
    assert classify(sols) == "none"


def test_weak_line_predicted_well_above_detection_is_named():
    # three lines of one group: two strong ones set the flux scale (flux = 100 x strength);
    # the third is 0.01 as strong, so its plain prior (ln 0.01 = -4.6) is below the
    # "unidentified" hypothesis (-4.5) even at zero residual.  Its feature has S/N 20 at a
    # flux of 1.0, i.e. the scale predicts it at S/N 20, four times the detection limit:
    # given the S/N, it is named; without, it is not
    x = np.log([400e-9, 500e-9, 600e-9])
    strength = np.array([0.01, 0.5, 1.0])
    y = x.copy()
    sy = np.full(3, 1e-4)
    flux = np.array([1.0, 50.0, 100.0])
    args = (y, sy, flux, np.zeros(3, bool), x, strength, np.zeros(3, int), 0.0)
    assert list(assign(*args).best) == [-1, 1, 2]
    sure = assign(*args, snr=np.array([20.0, 200.0, 300.0]))
    assert list(sure.best) == [0, 1, 2]
    # predicted at S/N 2 only (a feature that noisy), its prior rises to 2/5, not to 1
    faint = assign(*args, snr=np.array([2.0, 200.0, 300.0]))
    assert faint.best[0] == 0 and faint.score[0] < sure.score[0]


def test_masked_feature_is_named_only_where_a_line_must_be():
    # four lines of one group, all at the feature positions; the last two features are
    # masked (on a sky line, say).  The unmasked pair sets the flux scale (flux = 100 x
    # strength).  Masked feature 2 sits on a line the scale predicts at S/N 20, four times
    # the detection limit: it is named.  Masked feature 3 sits on a line predicted at S/N
    # 2: the sky residual there is no evidence of it, and it stays unidentified, although
    # its residual is zero and unmasked it would be named
    x = np.log([400e-9, 500e-9, 600e-9, 700e-9])
    strength = np.array([1.0, 0.5, 0.2, 0.02])
    y = x.copy()
    sy = np.full(4, 1e-4)
    flux = np.array([100.0, 50.0, 20.0, 2.0])
    snr = np.array([300.0, 200.0, 20.0, 2.0])
    args = (y, sy, flux, np.zeros(4, bool), x, strength, np.zeros(4, int), 0.0)
    assert list(assign(*args, snr=snr).best) == [0, 1, 2, 3]
    masked = assign(*args, snr=snr, masked=np.array([False, False, True, True]))
    assert list(masked.best) == [0, 1, 2, -1]
    # without the S/N nothing predicts the masked lines: neither is named
    blind = assign(*args, masked=np.array([False, False, True, True]))
    assert list(blind.best) == [0, 1, -1, -1]


def _he_ii_balmer(n_up):
    # He II n -> 2 lines: the catalogue's vacuum wavelengths and absorption strengths
    # (flat curve of growth), the lines a Lyman absorber's He II would show
    from linefinder.catalogue.build import build_catalogue
    from linefinder.catalogue.strengths import expected_strengths

    cat = build_catalogue("He II", 2, (3, n_up), resolution=20000)
    strength, group = expected_strengths(cat, "absorption")
    return np.log(cat["wavelength_vacuum"].to_value("m")), strength, group, cat


@pytest.mark.parametrize("stronger_seen, claimed", [(False, False), (True, True)])
def test_secondary_species_is_named_only_with_its_stronger_lines(stronger_seen, claimed):
    # a feature on He II 917 (n = 21 -> 2) at S/N 7 in a window that also holds He II 958.7
    # and 992.4 (n = 9, 7 -> 2), which the catalogue's f-values on a flat curve of growth
    # predict at S/N 15 or more: with no feature there, the He II label is taken back
    from linefinder.identification.matching import withdraw_unsupported

    x, strength, group, cat = _he_ii_balmer(30)
    n_up = np.asarray(cat["n_upper"])
    s, fwhm = np.log(6.0), 1 / 20000
    target = int(np.flatnonzero(n_up == 21)[0])
    strong = [int(np.flatnonzero(n_up == n)[0]) for n in (7, 9)]
    # seen: the whole series from He II 1640 down to the claimed line
    below = [int(j) for j in np.flatnonzero(n_up < 21)]
    feats = [target] + (below if stronger_seen else [])
    y = x[feats] + s
    snr = np.array([7.0] + [7.0 * strength[j] / strength[target] for j in feats[1:]])
    assert snr[0] * strength[strong].min() / strength[target] >= 15     # (as stated)
    def matched():
        return assign(y, np.full(len(y), 1e-5), np.full(len(y), np.nan), np.zeros(len(y), bool),
                      x, strength, group, s)

    res = matched()
    assert res.best[0] == target                       # matched before the check
    window = (x.min() + s - 0.01, x.max() + s + 0.01)
    took = withdraw_unsupported(res, y, snr, x, strength, group, s, window, fwhm,
                                np.ones(len(x), bool))
    assert (res.best[0] == target) == claimed and (0 in took) != claimed
    # data covering only the claimed line's neighbourhood (the stronger lines in a gap
    # between windows): their absence says nothing, and the label stays
    pixels = np.arange(y[0] - 0.003, y[0] + 0.003, fwhm / 3)
    assert withdraw_unsupported(matched(), y, snr, x, strength, group, s, window, fwhm,
                                np.ones(len(x), bool), pixels=pixels) == []
    # lines of the primary species (not claimable) are never taken back
    assert withdraw_unsupported(matched(), y, snr, x, strength, group, s, window, fwhm,
                                np.zeros(len(x), bool)) == []
