"""Lines measured at the positions a known redshift predicts (`linefinder.identification.forced`)."""

import numpy as np
import pytest

from linefinder.features.continuum import fit_continuum
from linefinder.identification.forced import (
    BLOB_WIDTHS,
    N_BEYOND,
    bridge_crowded,
    choose_lines,
    fixed_profile_fit,
    gaussian_templates,
    measure_predicted,
)

W = 1e-4     # FWHM in ln wavelength (R = 10 000)


def _axis():
    return np.arange(-60, 60) * W / 4     # 4 pixels per FWHM


def test_gaussian_template_has_its_fwhm():
    # half maximum at +/- FWHM/2 (source: the definition of the FWHM)
    g = gaussian_templates(np.array([0.0, W / 2, -W / 2]), [0.0], [W])[:, 0]
    assert g == pytest.approx([1.0, 0.5, 0.5], rel=1e-12)


def test_fixed_profile_fit_is_unbiased_and_its_errors_are_honest(rng):
    # two overlapping lines (1 FWHM apart), constant noise: over many noise draws the mean
    # amplitude is the true one and the scatter is the error the fit reports (source: the
    # Gauss-Markov theorem; covariance (A^T W A)^-1 of general linear least squares, Press et
    # al., Numerical Recipes, 3rd ed., sec. 15.4)
    ax = _axis()
    truth = np.array([3.0, -1.5])
    model = gaussian_templates(ax, [0.0, W], [W, W]) @ truth
    sigma = np.full(len(ax), 0.5)
    draws = np.array([fixed_profile_fit(ax, model + rng.normal(0, 0.5, len(ax)), sigma,
                                        [0.0, W], [W, W])[0] for _ in range(3000)])
    _, err = fixed_profile_fit(ax, model, sigma, [0.0, W], [W, W])
    assert draws.mean(axis=0) == pytest.approx(truth, abs=4 * err.max() / np.sqrt(3000))
    assert draws.std(axis=0) == pytest.approx(err, rel=0.06)


def test_templates_on_top_of_each_other_are_not_measured():
    ax = _axis()
    r = gaussian_templates(ax, [0.0], [W])[:, 0]
    amp, err = fixed_profile_fit(ax, r, np.ones(len(ax)), [0.0, 0.0], [W, W])
    assert np.all(np.isinf(err)) and np.all(amp == 0)


def test_a_template_outside_the_data_is_not_measured():
    ax = _axis()
    r = gaussian_templates(ax, [0.0], [W])[:, 0]
    amp, err = fixed_profile_fit(ax, r, np.ones(len(ax)), [0.0, 1.0], [W, W])
    assert amp[0] == pytest.approx(1.0) and np.isfinite(err[0])
    assert np.isinf(err[1])


def test_lines_inside_a_blob_are_measured_in_place_of_it():
    # three predicted lines 1.2 FWHM apart, fitted as one broad feature (a series near its
    # limit): the blob is replaced by the lines, and the two missing ones are measured
    ax = _axis()
    centres = np.array([-1.2, 0.0, 1.2]) * W
    r = gaussian_templates(ax, centres, [W] * 3) @ np.array([-2.0, -1.5, -1.0])
    sigma = np.full(len(ax), 0.05)
    amp, err = measure_predicted(ax, r, sigma, centres[1:], [W, W], centres, [W] * 3,
                                 feat_x=[0.0], feat_w=[3.5 * W], blob=[True])
    assert amp == pytest.approx([-1.5, -1.0], rel=1e-6)
    assert np.all(err < 0.2)
    # had the broad feature been taken for one line (it sits on the n = 0 candidate, so
    # that one stands for it), the identified line inside it would be left out of the
    # model and its wing would bias the candidate next to it
    amp_kept, _ = measure_predicted(ax, r, sigma, centres[1:], [W, W], centres, [W] * 3,
                                    feat_x=[0.0], feat_w=[3.5 * W], blob=[False])
    assert abs(amp_kept[0] - (-1.5)) > 5 * err[0]


def _series(n_max=12):
    # a toy series in ln rest wavelength, lines closing in towards a limit; upper levels 3..n
    n = np.arange(3, n_max + 1)
    x = np.log(1.0 - 1.0 / n ** 2) * 0.2
    return x, n


def test_choose_lines_measures_the_missing_lines_of_an_identified_series():
    x, n = _series()
    primary = np.ones(len(x), bool)
    group = np.full(len(x), "H I|Balmer")
    s = 0.5
    matched = {0: 0, 1: 1, 2: 2}           # n = 3, 4, 5 identified
    feat_x = x[:3] + s
    feat_w = np.array([W, 1.2 * W, 0.8 * W])
    window = (x.min() + s - 0.01, x.max() + s + 0.01)
    cand, cand_w, width, blob = choose_lines(x, group, n, primary, matched, feat_x, feat_w,
                                             np.zeros(3, bool), s, window, 0.5 * W)
    # up to N_BEYOND levels above the highest identified one
    assert list(n[cand]) == list(range(6, 5 + N_BEYOND + 1))
    # the width of the identified lines nearest in level (all three here: their median)
    assert cand_w == pytest.approx(W)
    assert not blob.any()
    # a line outside the window is not tried
    cand2, *_ = choose_lines(x, group, n, primary, matched, feat_x, feat_w, np.zeros(3, bool),
                             s, (window[0], x[4] + s + 1.5 * W), 0.5 * W)
    assert list(n[cand2]) == [6]


def test_choose_lines_leaves_a_position_a_feature_covers_alone():
    x, n = _series()
    primary = np.ones(len(x), bool)
    group = np.full(len(x), "H I|Balmer")
    s = 0.5
    matched = {0: 0, 1: 1, 2: 2}
    # a fourth feature, unidentified, right at the n = 6 position; a blob over n = 7 and 8
    feat_x = np.concatenate([x[:3] + s, [x[3] + s + 0.2 * W, 0.5 * (x[4] + x[5]) + s]])
    span = abs(x[5] - x[4]) + 2 * W
    feat_w = np.array([W, W, W, W, span])
    assert span > BLOB_WIDTHS * W
    window = (x.min() + s - 0.01, x.max() + s + 0.01)
    cand, _, _, blob = choose_lines(x, group, n, primary, matched, feat_x, feat_w,
                                    np.zeros(5, bool), s, window, 0.5 * W)
    assert 6 not in n[cand]
    assert {7, 8} <= set(n[cand])
    assert list(blob) == [False, False, False, False, True]


def test_choose_lines_needs_an_identified_line_in_the_series():
    x, n = _series()
    group = np.array(["H I|Balmer"] * 5 + ["H I|Paschen"] * (len(x) - 5))
    cand, *_ = choose_lines(x, group, n, np.ones(len(x), bool), {0: 0}, [x[0] + 0.5], [W],
                            [False], 0.5, (x.min() + 0.49, x.max() + 0.51), 0.5 * W)
    assert set(group[cand]) == {"H I|Balmer"}


def _balmer_ln(n):
    # ln rest wavelength of H n -> 2 from the Rydberg formula with the reduced-mass
    # Rydberg constant of hydrogen, R_H = 10 967 758.3 m^-1 (recalled from memory; NIST
    # CODATA R_inf times m_p / (m_p + m_e)); fine structure does not matter here
    return -np.log(10_967_758.3 * (0.25 - 1.0 / np.asarray(n, float) ** 2))


def test_bridge_crowded_undoes_the_bend_of_a_spline_into_a_series_limit():
    # a flat continuum with the Balmer series from H12 on in absorption at R = 5000: a spline
    # fitted without knowing the lines (knots 12 FWHM apart, as before any line is found)
    # bends into the crowd near the limit; refitted with the predicted lines left out, it
    # is back at the truth there, within the noise of a continuum estimate
    w = 2e-4
    lx = _balmer_ln(np.arange(12, 41))
    lw = np.full(len(lx), w)
    ax = np.arange(lx.min() - 0.03, lx.max() + 0.03, w / 3)
    truth = 10.0
    clean = truth - 1.5 * gaussian_templates(ax, lx, lw).sum(axis=1)
    sigma = np.full(len(ax), 0.3)
    bent, off = [], []
    for seed in range(6):
        flux = clean + np.random.default_rng(seed).normal(0, 0.3, len(ax))
        cont, _ = fit_continuum(flux, sigma, np.ones(len(ax), bool), knot_px=36)
        bridged, where = bridge_crowded(ax, flux, sigma, cont, lx, lw)
        # the crowd: from where neighbours stand closer than 3 FWHM (H24) to the limit
        assert where[(ax > _balmer_ln(40)) & (ax < _balmer_ln(24))].all()
        assert not where[ax > _balmer_ln(20)].any()
        assert np.array_equal(bridged[~where], cont[~where])
        bent.append(truth - cont[where].mean())
        off.append(bridged[where].mean() - truth)
    assert np.mean(bent) > 0.5                 # the spline did bend (else the test is moot)
    assert np.max(np.abs(off)) < 0.25
    assert np.sqrt(np.mean(np.square(off))) < 0.15


def test_bridge_crowded_leaves_resolved_lines_and_spectrum_ends_alone():
    w = 2e-4
    ax = np.arange(0, 0.05, w / 3)
    cont = 5.0 + np.sin(ax * 300)
    flux, sigma = cont.copy(), np.ones(len(ax))
    # lines 5 FWHM apart: no crowd
    sparse = np.arange(0.01, 0.04, 5 * w)
    out, where = bridge_crowded(ax, flux, sigma, cont, sparse, np.full(len(sparse), w))
    assert not where.any() and np.array_equal(out, cont)
    # a crowd running off the blue end of the data: no continuum beyond it to bridge from
    crowd = np.arange(-0.002, 0.004, 0.5 * w)
    out, where = bridge_crowded(ax, flux, sigma, cont, crowd, np.full(len(crowd), w))
    assert not where.any() and np.array_equal(out, cont)
    # a crowd wholly beyond the red end (predicted lines past the data)
    crowd = np.arange(0.06, 0.07, 0.5 * w)
    out, where = bridge_crowded(ax, flux, sigma, cont, crowd, np.full(len(crowd), w))
    assert not where.any() and np.array_equal(out, cont)
