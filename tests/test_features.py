"""Profile fits and feature measurement on synthetic lines with known answers."""

import numpy as np
import pytest
from astropy import units as u
from helpers import suite_spectrum
from scipy.optimize import curve_fit
from scipy.special import voigt_profile

from linefinder.features.detect import find_features
from linefinder.features.profiles import GAUSS_FWHM, GroupProblem, fit_groups
from linefinder.identification.redshift import weighted_shift
from linefinder.spectral.spectrum import SpectrumData


def _two_gauss(x, a1, m1, s1, a2, m2, s2, c0, c1):
    return (a1 * np.exp(-0.5 * ((x - m1) / s1) ** 2) + a2 * np.exp(-0.5 * ((x - m2) / s2) ** 2)
            + c0 + c1 * (x - x.mean()))


def test_batched_fits_agree_with_scipy_curve_fit(rng):
    # source: scipy.optimize.curve_fit (MINPACK), a reference library, on the same data,
    # group by group
    problems, refs = [], []
    for _ in range(12):
        x = np.linspace(0, 60, int(rng.integers(50, 140)))
        truth = [rng.uniform(2, 8), rng.uniform(22, 28), rng.uniform(1.5, 3),
                 rng.uniform(-6, 6), rng.uniform(33, 40), rng.uniform(1.5, 3), 0.1, 0.0]
        y = _two_gauss(x, *truth) + rng.normal(0, 0.3, len(x))
        guess = [truth[0] * 0.8, truth[1] + 0.7, truth[2] * 1.2, truth[3] * 0.8, truth[4] - 0.7,
                 truth[5] * 1.2]
        problems.append(GroupProblem(x, y, np.full(len(x), 0.3), [guess[1], guess[4]],
                                     [guess[2], guess[5]], [guess[0], guess[3]], 0.1))
        p, cov = curve_fit(_two_gauss, x, y, p0=guess + [0.0, 0.0], sigma=np.full(len(x), 0.3),
                           absolute_sigma=True)
        refs.append((p, np.sqrt(np.diag(cov))))
    for comps, (p, perr) in zip(fit_groups(problems, try_voigt=False), refs):
        assert all(c["ok"] for c in comps)
        for k, c in enumerate(comps):
            assert c["center"] == pytest.approx(p[3 * k + 1], abs=1e-4 * perr[3 * k + 1] + 1e-7)
            assert c["amplitude"] == pytest.approx(p[3 * k], abs=1e-4 * perr[3 * k] + 1e-7)
            assert c["fwhm"] == pytest.approx(GAUSS_FWHM * abs(p[3 * k + 2]), rel=1e-5)
            # covariance (J^T J)^-1, scaled by chi2_red only when that exceeds 1
            scale = max(c["chi2_red"], 1.0) ** 0.5
            assert c["center_err"] == pytest.approx(perr[3 * k + 1] * scale, rel=1e-2)


def test_a_component_that_runs_off_leaves_the_others_measured(rng):
    # a line and a second component started far outside the window and wider than it (as a
    # dip beside a saturated neighbour can end up): such a component is a constant or a
    # slope over the data, degenerate with the linear term, and made the whole group's
    # covariance singular.  It is reported as failed and the line is measured as if alone,
    # which scipy.optimize.curve_fit (MINPACK), a reference library, checks
    x = np.linspace(0, 60, 240)
    one = lambda x_, a, m, s_, c0, c1: _two_gauss(x_, a, m, s_, 0.0, 0.0, 1.0, c0, c1)  # noqa: E731
    y = one(x, 5.0, 31.0, 2.0, 0.4, 0.01) + rng.normal(0, 0.3, len(x))
    pr = GroupProblem(x, y, np.full(len(x), 0.3), [30.5, 5e5], [2.2, 1e5], [4.0, 1.0], 0.1)
    line, gone = fit_groups([pr], try_voigt=False)[0]
    assert not gone["ok"] and not np.isfinite(gone["flux"])
    p, cov = curve_fit(one, x, y, p0=[4.0, 30.5, 2.2, 0.0, 0.0], sigma=np.full(len(x), 0.3),
                       absolute_sigma=True)
    assert line["ok"] and line["center"] == pytest.approx(p[1], abs=1e-3 * np.sqrt(cov[1, 1]))
    scale = max(line["chi2_red"], 1.0) ** 0.5
    assert line["center_err"] == pytest.approx(np.sqrt(cov[1, 1]) * scale, rel=1e-2)


def test_gaussian_line_measured(rng):
    # a known Gaussian emission line: centre, FWHM, flux and equivalent width within errors
    x = np.linspace(5000.0, 5100.0, 2001)
    a, mu, s, cont = 4.0, 5050.3, 0.6, 10.0
    y = cont + a * np.exp(-0.5 * ((x - mu) / s) ** 2) + rng.normal(0, 0.2, len(x))
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.2) * u.adu,
                        meta={"source": "synthetic", "resolution": 5050 / (GAUSS_FWHM * s)})
    t = find_features(spec).features
    assert len(t) == 1 and t["kind"][0] == "emission"
    row = t[0]
    flux = a * s * np.sqrt(2 * np.pi)
    assert abs(row["center"].value - mu) < 4 * row["center_err"].value
    assert abs(row["fwhm"].value - GAUSS_FWHM * s) < 4 * row["fwhm_err"].value
    assert abs(row["flux"].value - flux) < 4 * row["flux_err"].value
    # equivalent width convention: negative for emission, W = -flux / continuum
    assert row["equivalent_width"].value == pytest.approx(-flux / cont, rel=0.05)


def test_absorption_and_emission_both_found_and_restricted(rng):
    x = np.linspace(6000.0, 6100.0, 4001)
    y = (5 + 2.0 * np.exp(-0.5 * ((x - 6030) / 0.5) ** 2) - 1.5 * np.exp(-0.5 * ((x - 6070) / 0.5) ** 2)
         + rng.normal(0, 0.1, len(x)))
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.1) * u.adu,
                        meta={"source": "synthetic", "resolution": 6050 / (GAUSS_FWHM * 0.5)})
    t = find_features(spec).features
    assert sorted(t["kind"]) == ["absorption", "emission"]
    only = find_features(spec, kinds=("absorption",)).features
    assert list(only["kind"]) == ["absorption"]
    assert abs(only["center"][0].value - 6070) < 0.05


def test_close_pair_deblended(rng):
    # two lines 1.3 FWHM apart: two components, each flagged as part of a blend
    x = np.linspace(0.0, 400.0, 4001)
    s = 1.0
    y = (1 + 3 * np.exp(-0.5 * ((x - 200) / s) ** 2) + 2 * np.exp(-0.5 * ((x - 203.06) / s) ** 2)
         + rng.normal(0, 0.05, len(x)))
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.05) * u.adu,
                        meta={"source": "synthetic", "resolution": 200 / (GAUSS_FWHM * s)})
    t = find_features(spec).features
    c = np.sort(t["center"].value)
    assert len(c) == 2
    assert abs(c[0] - 200) < 0.1 and abs(c[1] - 203.06) < 0.1
    assert all("blend" in f for f in t["flags"])


def test_cosmic_ray_spike_rejected(rng):
    x = np.linspace(4000.0, 4100.0, 3001)
    y = 10 + 3 * np.exp(-0.5 * ((x - 4050) / 0.4) ** 2) + rng.normal(0, 0.1, len(x))
    y[700] += 8.0           # one hot pixel
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.1) * u.adu,
                        meta={"source": "synthetic", "resolution": 4050 / (GAUSS_FWHM * 0.4)})
    t = find_features(spec).features
    assert len(t) == 1
    assert abs(t["center"][0].value - 4050) < 0.02


def test_voigt_wings_detected(rng):
    # a line with strong Lorentzian wings (Stark-like) is refitted as a Voigt profile
    x = np.linspace(4800.0, 4920.0, 6001)
    sg, gl = 0.15, 0.8
    y = 2 + 40 * voigt_profile(x - 4861.3, sg, gl) + rng.normal(0, 0.02, len(x))
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.02) * u.adu,
                        meta={"source": "synthetic", "resolution": 4861 / (GAUSS_FWHM * sg)})
    t = find_features(spec).features
    k = int(np.argmin(np.abs(t["center"].value - 4861.3)))
    assert t["profile"][k] == "voigt"
    # FWHM of the Voigt profile, Olivero & Longbothum 1977 approximation (0.02 % accurate)
    fl, fg = 2 * gl, GAUSS_FWHM * sg
    fwhm = 0.5346 * fl + np.sqrt(0.2166 * fl ** 2 + fg ** 2)
    assert t["fwhm"][k].value == pytest.approx(fwhm, rel=0.03)
    assert t["flux"][k].value == pytest.approx(40.0, rel=0.03)


def test_weighted_shift_is_the_inverse_variance_mean_when_lines_agree(rng):
    sigma = rng.uniform(1e-5, 5e-5, 8)
    d = 0.3 + rng.normal(0, 1, 8) * sigma * 0.3      # scatter well inside the errors
    s, s_err, tau = weighted_shift(d, sigma)
    w = 1 / sigma ** 2
    assert tau == 0.0
    assert s == pytest.approx(np.sum(w * d) / np.sum(w), rel=1e-12)
    assert s_err == pytest.approx(1 / np.sqrt(np.sum(w)), rel=1e-12)


def test_weighted_shift_estimates_extra_scatter(rng):
    # lines that scatter by tau = 1e-4 beyond errors of 1e-5: tau is recovered, and the
    # error of the shift reflects the real scatter (std / sqrt(n)), not the tiny errors
    n = 400
    sigma = np.full(n, 1e-5)
    d = 0.2 + rng.normal(0, 1e-4, n) + rng.normal(0, 1, n) * sigma
    s, s_err, tau = weighted_shift(d, sigma)
    assert tau == pytest.approx(1e-4, rel=0.1)
    assert s_err == pytest.approx(np.std(d) / np.sqrt(n), rel=0.1)
    assert abs(s - 0.2) < 4 * s_err


def test_spike_on_a_line_is_masked_and_the_line_kept(rng):
    # a cosmic ray landing on a weak line: the pixel is masked, the line still measured
    x = np.linspace(4000.0, 4100.0, 2001)
    s = 0.12                                   # FWHM 0.28 A = 5.7 pixels
    y = 10 + 1.0 * np.exp(-0.5 * ((x - 4050.0) / s) ** 2) + rng.normal(0, 0.1, len(x))
    k = int(np.argmin(np.abs(x - 4050.0)))
    y[k] += 6.0
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.1) * u.adu,
                        meta={"source": "synthetic", "resolution": 4050 / (GAUSS_FWHM * s)})
    t = find_features(spec).features
    assert len(t) == 1
    assert "masked" in t["flags"][0]
    assert abs(t["center"][0].value - 4050.0) < 4 * t["center_err"][0].value
    assert t["amplitude"][0].value == pytest.approx(1.0, abs=5 * 0.1 / np.sqrt(3))


def test_lines_found_again_after_voigt_lines_are_held_fixed():
    # an invented Lyman absorber (z = 3.84, R = 1600): the saturated trough below the series
    # limit is fitted as Voigt and held fixed; every strong isolated Lyman line must still be
    # detected afterwards (the residual weights must not hide the not-yet-fitted lines)
    spec, truth = suite_spectrum(2, 140)
    fr = find_features(spec)
    centres = fr.features["center"].to_value(u.AA)
    strong = [l for l in truth["lines"] if l["label"] in ("Lyα", "Lyβ", "Lyγ", "Lyδ", "Lyε")]
    assert len(strong) == 5
    for line in strong:
        assert np.min(np.abs(centres - line["observed"])) < 1.0, line["label"]


def test_row_of_resolved_absorption_lines_is_not_one_broad_trough(rng):
    # twelve narrow absorption lines four FWHM apart, as below a series limit at high R: a
    # wide matched-filter kernel over the row scores more than any one line, but the lines
    # together score more still, so each is found and measured on its own
    x = np.arange(7150.0, 7400.0, 0.22)
    s = 0.3
    centres = 7255.0 + 3.0 * np.arange(12)
    y = 67.0 - sum(22.0 * np.exp(-0.5 * ((x - c) / s) ** 2) for c in centres)
    y = y + rng.normal(0, 1.0, len(x))
    spec = SpectrumData(x * u.AA, y * u.adu, np.ones(len(x)) * u.adu,
                        meta={"source": "synthetic", "resolution": 7300 / (GAUSS_FWHM * s)})
    t = find_features(spec).features
    found = np.sort(t["center"].value)
    assert len(found) == len(centres)
    assert np.max(np.abs(found - centres)) < 0.05
    # each width within 4.5 of its own reported sigmas (12 lines: the largest is ~3 sigma)
    assert np.all(np.abs(t["fwhm"].value - GAUSS_FWHM * s) < 4.5 * t["fwhm_err"].value)



@pytest.mark.parametrize("index, first, last", [(163, 19, 25), (269, 8, 14)])
def test_resolved_members_beside_the_merged_series_limit_are_found(index, first, last):
    # two absorption spectra of the benchmark suite (invented data, seed 2): Balmer series
    # whose highest members merge into one trough below the limit, while H19-H25 (R 6900,
    # lines 1.6-3 FWHM apart) and H8-H14 (R 7200, lines 2-5 of their saturated FWHM apart)
    # stand clear; each of them must be found on its own, neither swallowed by the trough
    # nor split into a pair that loses it
    from linefinder.catalogue.build import build_catalogue
    spec, truth = suite_spectrum(2, index)
    t = find_features(spec).features
    found = t["center"].to_value(u.AA)
    cat = build_catalogue("H", (2, 2), (first, last), z=truth["z"])
    for c in cat["wavelength_vacuum"].to_value(u.AA):
        assert np.min(np.abs(found - c)) < 0.5 * c / truth["resolution"], c


def test_continuum_steps_are_read_the_same_on_either_axis_direction():
    # a continuum stepping up redward (a Lyman break, seen on a wavelength axis) and the
    # same spectrum on a frequency axis (pixels in the opposite order): the step is kept on
    # both; the mirrored step (lower on the red side) is kept on neither
    from linefinder.features.continuum import snap_steps

    n, p, reach = 400, 200, 25
    y = np.where(np.arange(n) < p, 1.0, 2.0)
    assert list(snap_steps([p], [], reach, y)) == [p]
    assert list(snap_steps([n - p], [], reach, y[::-1], blue_first=False)) == [n - p]
    assert len(snap_steps([n - p], [], reach, y[::-1])) == 0
    assert len(snap_steps([p], [], reach, y, blue_first=False)) == 0
    # absorption lines crowding the red side (merged members below a series limit) keep the
    # level change as lines, whichever way the axis runs
    crowd = [{"amp0": -1.0, "px": p + 10}, {"amp0": -1.0, "px": p + 30}]
    assert len(snap_steps([p], crowd, reach, y)) == 0
    mirrored = [{"amp0": -1.0, "px": n - f["px"]} for f in crowd]
    assert len(snap_steps([n - p], mirrored, reach, y[::-1], blue_first=False)) == 0



def _saturated_line(rng, tau0=6.0, s=1.0, noise=0.02):
    """A saturated absorption line (Gaussian optical depth tau0, continuum 1, flat-bottomed),
    continuum-subtracted, on a 0.25-pixel-per-sigma grid; (x, r, sig, dx, exact flux)."""
    x = np.arange(-30.0, 30.0, 0.25)
    depth = np.exp(-tau0 * np.exp(-0.5 * (x / s) ** 2)) - 1.0
    r = depth + rng.normal(0, noise, len(x))
    return x, r, np.full(len(x), noise), np.gradient(x), float(np.sum(depth) * 0.25)


def _component(x, centre, fwhm, flux, flux_err):
    """A feature as the search leaves it, with a given (too uncertain or failed) fit."""
    amp = flux / (fwhm / GAUSS_FWHM * np.sqrt(2 * np.pi))
    px = int(np.searchsorted(x, centre))
    fit = {"center": centre, "center_err": np.nan, "fwhm": fwhm, "fwhm_err": np.nan,
           "amplitude": amp, "amplitude_err": np.nan, "flux": flux, "flux_err": flux_err,
           "profile": "gaussian", "chi2_red": 2.0, "ok": False, "at_bound": False}
    return {"px": px, "fwhm_px": fwhm / 0.25, "snr_det": 20.0, "amp0": amp, "fit": fit,
            "group": 2}


@pytest.mark.parametrize("pair", [
    # a flat-bottomed line split into two dips a FWHM apart, each too uncertain to keep
    [(-1.2, 2.4, -2.0, 5.0), (1.2, 2.4, -2.0, 5.0)],
    # two dips on one spot: the fit's covariance is singular (NaN errors)
    [(-0.05, 3.0, -2.0, np.nan), (0.05, 3.0, -2.0, np.nan)],
    # a deep dip and a bump on one spot, their difference shaping the flat bottom
    [(0.0, 3.2, -6.0, 40.0), (0.1, 2.6, 2.0, 40.0)],
])
def test_degenerate_components_of_one_line_are_measured_as_one(rng, pair):
    from linefinder.features.deblend import merge_weak_blends

    x, r, sig, dx, flux = _saturated_line(rng)
    feats = [_component(x, *p) for p in pair]
    model = merge_weak_blends(feats, x, r, sig, np.ones(len(x), bool), dx, len(x),
                               fwhm_px=GAUSS_FWHM / 0.25, threshold=5.0)
    assert model is not None and len(feats) == 1
    fit = feats[0]["fit"]
    assert fit["ok"] and abs(fit["center"]) < 0.1
    assert abs(fit["flux"]) / fit["flux_err"] > 20
    # one Gaussian for a flat-bottomed profile (tau0 = 6): its flux overshoots the line's
    # by 6-7 % in the fit window on the noiseless profile (the misfit is systematic)
    assert fit["flux"] == pytest.approx(flux, rel=0.1)


def test_resolved_weak_neighbours_are_not_merged(rng):
    # two weak absorption lines three FWHM apart are two lines, however uncertain each is
    from linefinder.features.deblend import merge_weak_blends

    x, r, sig, dx, _ = _saturated_line(rng, tau0=0.0)
    feats = [_component(x, -3.5, 2.4, -0.02, 0.02), _component(x, 3.5, 2.4, -0.02, 0.02)]
    assert merge_weak_blends(feats, x, r, sig, np.ones(len(x), bool), dx, len(x),
                              fwhm_px=GAUSS_FWHM / 0.25, threshold=5.0) is None
    assert len(feats) == 2
