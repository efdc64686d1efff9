"""identify() on synthetic spectra with known answers and on the bundled samples."""

import json

import numpy as np
import pytest
from astropy import units as u
from helpers import suite_spectrum

from linefinder.catalogue.build import build_catalogue
from linefinder.identification.pipeline import identify
from linefinder.io.line_lists import read_line_list
from linefinder.io.read import read_input
from linefinder.simulate.scenarios import sample_path
from linefinder.simulate.suite import make_spectrum
from linefinder.spectral.spectrum import SpectrumData


def _correct(z, z0):
    return z is not None and abs(z - z0) < 5e-4 * (1 + z0)


def _suite_spectrum(seed, index):
    """Spectrum `index` of the benchmark suite's seed `seed` (invented data, frozen in
    tests/data/suite/), identified as benchmarks/bench_identify.py does; (result, truth)."""
    spec, truth = suite_spectrum(seed, index)
    return identify(spec, mask_sky=True), truth


# Exact aliases of hydrogenic spectra (Rydberg formula, 1/lambda = R Z^2 (1/n'^2 - 1/n^2)):
# H(2m) Balmer lines = 4 x Ly(m), and He II n -> 2 = 4 x H I Balmer (Z^2 = 4) up to the
# reduced-mass difference; the cases below must land on the true redshift, not the alias.
@pytest.mark.parametrize("z, R, kind, seed", [
    (0.2512, 3000.0, "emission", 4),     # Balmer + [O III], [N II] ... emitter
    (3.4846, 1410.0, "absorption", 60),  # Lyman series absorber: not the Balmer alias at z/4
    (0.0911, 720.0, "absorption", 102),  # Balmer absorption: not the He II alias at 4(1+z)-1
])
def test_synthetic_redshift_recovered(z, R, kind, seed):
    rng = np.random.default_rng(seed)
    spec, truth = make_spectrum(rng, z=z, snr=60.0, resolution=R, kind=kind,
                                velocity_fwhm_kms=60.0)
    # the window holds several clear lines: the test is about finding them, not luck
    obs = np.array([l["observed"] for l in truth["lines"]])
    resolved = [l for l in truth["lines"] if l["snr"] > 10 and np.sort(
        np.abs(np.log(obs / l["observed"])))[1] > 1.5 * l["fwhm_ln"]]
    assert len(resolved) >= 3
    res = identify(spec)
    assert _correct(res.z, z)
    assert res.status == "secure"
    labels = {str(x) for x in res.features["label"]}
    strong = {l["label"] for l in resolved}
    assert len(strong & labels) >= 0.8 * len(strong)


def test_fixed_redshift_labels_lines(rng):
    spec, truth = make_spectrum(rng, z=0.6, snr=30.0, resolution=2500.0, kind="emission",
                                velocity_fwhm_kms=50.0)
    res = identify(spec, z=0.6)
    assert res.z == pytest.approx(0.6) and res.meta["z_fixed"]
    found = {str(x) for x in res.features["label"] if x}
    assert found, "no line labelled at the fixed redshift"
    true_labels = {l["label"] for l in truth["lines"]}
    assert len(found - true_labels) <= 1      # at most one chance match to noise or a non-H line


def test_two_systems_in_one_spectrum(rng):
    # two Balmer emitters in one slit (invented): z = 0.12 and z = 0.31
    R = 4000.0
    dlog = 1 / (2.5 * R)
    lam = 3800.0 * np.exp(dlog * np.arange(int(np.log(9500 / 3800) / dlog)))
    flux = np.full(len(lam), 2.0)
    for z, amp in ((0.12, 60.0), (0.31, 35.0)):
        cat = build_catalogue("H", 2, (3, 9), z=z)
        case_b = {3: 2.86, 4: 1.0, 5: 0.47, 6: 0.26, 7: 0.16, 8: 0.105, 9: 0.073}
        for row in cat:
            c = row["wavelength_vacuum"].to_value(u.AA)
            s = c / R / 2.3548
            flux += amp * case_b[int(row["n_upper"])] * np.exp(-0.5 * ((lam - c) / s) ** 2)
    flux += rng.normal(0, 1.0, len(lam))
    spec = SpectrumData(lam * u.AA, flux * u.adu, np.ones(len(lam)) * u.adu,
                        meta={"source": "two systems", "medium": "vacuum", "resolution": R})
    res = identify(spec)
    zs = sorted([res.z] + [s.z for s in res.systems])
    assert len(zs) == 2
    assert _correct(zs[0], 0.12) and _correct(zs[1], 0.31)
    assert set(res.features["system"]) >= {1, 2}


def test_xray_sample_keV_axis():
    # the sample's ground truth (invented scenario): z = 0.0183, Fe XXVI Lyman-alpha doublet
    spec = read_input(sample_path("xray_cluster.fits"))
    truth = json.loads(sample_path("xray_cluster.fits.truth.json").read_text())
    res = identify(spec)
    assert res.meta["regime"] == "xray"
    assert _correct(res.z, truth["z"])
    assert any("Fe XXVI" in s for s in res.features["species"])


def test_user_lines_take_their_features():
    spec = read_input(sample_path("emission_galaxy.fits"))
    extra = read_line_list(sample_path("nebular_lines.csv"))
    res = identify(spec, extra_lines=extra, mask_sky=True)
    user = {str(x) for x in res.features["user_line"] if x}
    assert {"[O III] 5008", "[N II] 6585", "[O II] 3727"} <= user
    # a feature given to a user line carries no hydrogenic label
    both = [(a, b) for a, b in zip(res.features["label"], res.features["user_line"]) if a and b]
    assert not both


def test_featureless_identify_status_none(rng):
    lam = np.linspace(5000, 6000, 3000)
    spec = SpectrumData(lam * u.AA, (1 + rng.normal(0, 0.01, len(lam))) * u.adu,
                        np.full(len(lam), 0.01) * u.adu, meta={"source": "flat"})
    res = identify(spec)
    assert res.status == "none" and res.z is None


def test_sky_mask_bands_absorb_and_lines_mask_either_sign():
    # telluric bands make absorption, so only absorption features in them are masked; sky-line
    # residuals can have either sign (band edges and the 5577.34 A line: common sky atlases)
    from linefinder.catalogue.contaminants import sky_mask

    c = [7200.0, 7200.0, 5577.34, 5577.34] * u.AA
    err = [0.1] * 4 * u.AA
    fwhm = [2.0] * 4 * u.AA
    kind = ["emission", "absorption", "emission", "absorption"]
    assert list(sky_mask(c, err, fwhm, medium="air", kind=kind)) == [False, True, True, True]


def test_feature_flags_keep_what_identify_adds():
    # identify appends "blend" (and the sky/telluric flags) to the measured flags; the column
    # must hold them whole, not cut to the width of the longest measured flag
    from astropy.table import QTable

    from linefinder.identification.table import new_table as _feature_table

    feats = QTable({"center": [5000.0, 5010.0] * u.AA, "center_err": [0.1, 0.1] * u.AA,
                    "fwhm": [2.0, 2.0] * u.AA, "flux": [1.0, 2.0], "snr": [8.0, 9.0],
                    "kind": ["emission", "emission"], "flags": ["poor_fit", ""]})
    out = _feature_table(feats, np.array([True, False]), np.zeros(2, bool), True, False)
    out["flags"][0] = out["flags"][0] + ",blend"
    assert out["flags"][0] == "poor_fit,sky,blend"


def test_one_line_gets_readings_not_a_redshift(rng):
    # one emission line at 6000 Å (vacuum), R = 1000, window 4000-9000 Å: no redshift, but
    # the possible readings.  Lyα at z = 6000/1215.67 - 1 stays (Rydberg-formula line: the
    # catalogue's own position); Hβ is struck out, as Hα would then stand at 8100 Å at 2.86
    # times its S/N (Case B, Storey & Hummer 1995); so is [O III] 4960, whose 5008 partner
    # would stand 48 Å redward at three times its flux (the transition-probability ratio, a
    # fact of the trade); [O III] 5008 stays, its partner predicted too faint to be missed
    from linefinder.features.profiles import GAUSS_FWHM

    R = 1000.0
    x = np.exp(np.arange(np.log(4000.0), np.log(9000.0), 1 / (2.5 * R)))
    s = 6000.0 / R / GAUSS_FWHM
    y = 10.0 + 6.0 * np.exp(-0.5 * ((x - 6000.0) / s) ** 2) + rng.normal(0, 0.3, len(x))
    spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.3) * u.adu,
                        meta={"source": "synthetic", "resolution": R, "medium": "vacuum"})
    res = identify(spec)
    assert res.status == "none" and res.z is None
    read = {r["label"]: r for r in res.single_line_readings}
    lya = build_catalogue("H", (1, 1), (2, 2), resolution=R)["wavelength_vacuum"].to_value(u.AA)
    assert read["Lyα"]["z"] == pytest.approx(6000.0 / lya[0] - 1, abs=4 * read["Lyα"]["z_err"])
    assert "Hβ" not in read and "[O III] 4960" not in read and "[O III] 5008" in read
    assert np.all(np.diff([r["z"] for r in res.single_line_readings]) >= 0)
    # a spectrum with a redshift has no readings
    spec2, _ = make_spectrum(rng, z=0.2, snr=40, resolution=2000, contaminants=False)
    res2 = identify(spec2)
    assert res2.status == "secure" and res2.single_line_readings == []


def test_main_kind_weighs_features_by_their_evidence():
    from linefinder.identification.pipeline import _main_kind

    # one clear emission line (S/N 8) against five dips at the detection limit (S/N 3):
    # 64 against 45 in S/N squared; counted by plain S/N sums the dips would win (15 > 8)
    kinds = np.array(["emission"] + ["absorption"] * 5)
    snr = np.array([8.0, 3.0, 3.0, 3.0, 3.0, 3.0])
    use = np.ones(6, bool)
    assert _main_kind(snr, kinds, use) == "emission"
    assert _main_kind(np.array([4.0, 3.0, 3.0, 3.0, 3.0, 3.0]), kinds, use) == "absorption"
    # masked features (sky) do not vote
    use[0] = False
    assert _main_kind(snr, kinds, use) == "absorption"


def test_lone_lya_with_a_break_beside_weak_dips_is_named():
    # a spectrum of the benchmark suite (invented data, seed 1): Lyα alone at z = 5.66
    # (R 27700), the continuum blueward of it at ~5 % of the red side, and a handful of
    # continuum dips at the detection limit; the break names the line
    res, truth = _suite_spectrum(1, 21)
    assert res.lyman_break is not None
    assert res.status == "tentative"
    assert abs(res.z - truth["z"]) < 5e-4 * (1 + truth["z"])
    assert "Lyα" in list(res.features["label"])


def test_break_named_lya_below_the_fitted_detection_limit():
    # a spectrum of the benchmark suite (invented data, seed 1): Lyα alone at z = 2.16
    # (R 2900), detected by the matched filter but at a fitted S/N of 4.3 (a free width and
    # baseline take a third of it); the forest takes 16 % of the continuum blueward, and the
    # break still names the line
    res, truth = _suite_spectrum(1, 187)
    assert res.lyman_break is not None
    k = res.lyman_break["feature"]
    assert 4.0 < res.features["snr"][k] < 5.0
    assert res.features["label"][k] == "Lyα"
    assert abs(res.z - truth["z"]) < 5e-4 * (1 + truth["z"])


def _balmer_emitter(gen, z, hdelta_snr, R=3000.0, hdelta=True):
    """Hα ... Hδ emission at z with Case B ratios (Hδ set to `hdelta_snr`, the S/N a fit of
    its known centre and width gives; left out unless `hdelta`), unit noise, 2.5 pixels per
    FWHM."""
    dlog = 1 / (2.5 * R)
    lam = 4300.0 * np.exp(dlog * np.arange(int(np.log(8400 / 4300) / dlog)))
    flux = np.full(len(lam), 5.0)
    case_b = {3: 2.86, 4: 1.0, 5: 0.47, 6: 0.26}     # Hummer & Storey 1987, 10^4 K, 10^2 cm^-3
    cat = build_catalogue("H", 2, (3, 6), z=z)
    hd = cat[np.asarray(cat["n_upper"]) == 6]["wavelength_vacuum"][0].to_value(u.AA)
    g = np.exp(-0.5 * ((lam - hd) / (hd / R / 2.3548)) ** 2)
    amp_hbeta = hdelta_snr / np.sqrt(np.sum(g ** 2)) / case_b[6]
    for row in cat:
        n = int(row["n_upper"])
        if n == 6 and not hdelta:
            continue
        c = row["wavelength_vacuum"].to_value(u.AA)
        flux += amp_hbeta * case_b[n] * np.exp(-0.5 * ((lam - c) / (c / R / 2.3548)) ** 2)
    flux += gen.normal(0, 1.0, len(lam))
    return SpectrumData(lam * u.AA, flux * u.adu, np.ones(len(lam)) * u.adu,
                        meta={"source": "Balmer emitter", "medium": "vacuum", "resolution": R})


def test_a_line_below_the_detection_limit_is_measured_where_z_puts_it(rng):
    # Hδ at S/N 4.6 (below the 5-sigma search, often missed by it) beside Hα, Hβ, Hγ: once
    # z is secure it is measured at its predicted position and named (flag at_z) when the
    # measurement reaches S/N 4; Hε and H8, tried too, are absent and never named
    named, at_z = 0, 0
    for _ in range(20):
        res = identify(_balmer_emitter(rng, 0.2, 4.6))
        assert res.status == "secure" and _correct(res.z, 0.2)
        f = res.features
        labels = [str(x) for x in f["label"] if x]
        assert set(labels) <= {"Hα", "Hβ", "Hγ", "Hδ"}
        hd = [k for k in range(len(f)) if f["label"][k] == "Hδ"]
        named += bool(hd)
        for k in hd:
            if "at_z" in f["flags"][k]:
                at_z += 1
                assert f["snr"][k] >= 4.0 and f["residual_kms"][k] == 0.0
    # P(measured S/N >= 4 | expected 4.6) = 73 %, and some are found by the search itself
    assert named >= 12 and at_z >= 5


def test_no_line_is_measured_where_z_puts_none(rng):
    # the same emitter without Hδ: the lines tried at the solution (Hδ, Hε, H8) are noise
    # alone, and a claim at S/N 4 has a false-alarm probability of 3e-5 per line
    for _ in range(20):
        res = identify(_balmer_emitter(rng, 0.2, 4.6, hdelta=False))
        assert _correct(res.z, 0.2)
        labels = {str(x) for x in res.features["label"] if x}
        assert labels <= {"Hα", "Hβ", "Hγ"}
        assert not any("at_z" in str(fl) for fl in res.features["flags"])


# spectra of the benchmark suite (invented data): Lyman-series absorbers whose members next
# to the merged trough below the series limit (about 2 FWHM apart) the search leaves out;
# seed 2 #310: z = 5.12, R 1100, lines at S/N ~60; seed 2 #6: z = 6.20, R 3100, S/N ~7
@pytest.mark.parametrize("seed, missed", [((2, 310), ("Ly10", "Ly11")),
                                          ((2, 6), ("Ly13", "Ly14", "Ly15"))])
def test_series_members_the_search_missed_are_measured_at_z(seed, missed):
    res, truth = _suite_spectrum(*seed)
    assert res.status == "secure" and _correct(res.z, truth["z"])
    f = res.features
    true = {l["label"]: l for l in truth["lines"]}
    for name in missed:
        rows = [k for k in range(len(f)) if f["label"][k] == name]
        assert len(rows) == 1 and "at_z" in f["flags"][rows[0]]
        k, line = rows[0], true[name]
        # at the true position (well inside a FWHM) and at about the true S/N (the fit's own
        # error is 1 in S/N; neighbours sharing the flux add to it)
        assert abs(np.log(f["center"][k].to_value(u.AA) / line["observed"])) < 0.2 * line["fwhm_ln"]
        assert abs(f["snr"][k] - line["snr"]) < max(2.5, 0.1 * line["snr"])


def test_lines_near_a_series_limit_are_measured_on_a_bridged_continuum():
    # a spectrum of the benchmark suite (invented data, seed 3 #121): a Balmer absorber at
    # z = 0.387, R 3000, H20-H25 at true S/N 6-7 each, a FWHM or two apart and too weak to
    # be found one by one.  The continuum fitted before z was known bent into them (by up
    # to 1.6 sigma), and measured at z they fell below S/N 4.  With the continuum bridged
    # over the crowd of predicted lines they are measured at about their true S/N
    res, truth = _suite_spectrum(3, 121)
    assert res.status == "secure" and _correct(res.z, truth["z"])
    f = res.features
    true = {l["label"]: l for l in truth["lines"]}
    for name in ("H21", "H22", "H23", "H24"):
        rows = [k for k in range(len(f)) if f["label"][k] == name]
        assert len(rows) == 1, name
        k, line = rows[0], true[name]
        assert abs(np.log(f["center"][k].to_value(u.AA) / line["observed"])) < 0.2 * line["fwhm_ln"]
        # the fit's own error is 1 in S/N; the bridged continuum's adds a little
        assert abs(f["snr"][k] - line["snr"]) < 2.0, name


def test_lines_beside_a_series_limit_trough_survive_a_failed_group_fit():
    # a spectrum of the benchmark suite (invented data, seed 3 #65): a Lyman-series absorber
    # at z = 5.74, R 34 000, S/N ~50 in its lines.  The merged members below the series
    # limit make a deep trough; a residual candidate added late beside it drove the group
    # fit of Ly10-Ly12 off, the lines vanished with it, and the solution, missing its
    # members there, was lost.  They are now reported with their last converged fit
    # (flagged poor_fit), and the redshift is found
    res, truth = _suite_spectrum(3, 65)
    assert res.status == "secure" and _correct(res.z, truth["z"])
    labels = {str(x) for x in res.features["label"]}
    assert {"Ly10", "Ly11", "Ly12", "Lyα", "Lyβ"} <= labels


def test_saturated_lines_split_in_two_are_measured_as_one():
    # a spectrum of the benchmark suite (invented data, seed 1 #116): a Balmer absorber at
    # z = 0.877, R 48 000, lines saturated (Gaussian optical depth, flat-bottomed at S/N
    # ~55).  The profile fit split H15-H18 each into two components about a FWHM apart;
    # each part's flux error was then large (a nearly degenerate pair), neither passed the
    # S/N cut, the four lines were lost and the solution, missing its members, with them.
    # Such pairs are now refitted as one line
    res, truth = _suite_spectrum(1, 116)
    assert res.status == "secure" and _correct(res.z, truth["z"])
    f = res.features
    found = {str(x) for x, flags in zip(f["label"], f["flags"]) if "at_z" not in str(flags)}
    assert {"H15", "H16", "H17", "H18", "Hα", "Hβ"} <= found
    # one feature per line, not a pair
    assert sum(str(x) == "H16" for x in f["label"]) == 1


def test_balmer_lines_are_not_carried_over_to_their_he_ii_twins():
    # a spectrum of the benchmark suite (invented data, seed 3 #253): a galaxy at z = 1.264,
    # R 680, with Hα, Hβ and [O II] 3727 detected.  He II 6560 and 4859 (n = 6, 8 -> 4) lie
    # 4e-4 in ln from Hα and Hβ, three position errors at this resolution.  The trial shift
    # of the Balmer pattern was merged into that of the twin pattern before refinement, and
    # the refinement, pulled by the [O II] blend, hopped from Hα/Hβ to the twins: the answer
    # was a He II system with its strong lines missing, and no redshift
    res, truth = _suite_spectrum(3, 253)
    assert res.status in ("tentative", "secure") and _correct(res.z, truth["z"])
    labels = {str(x) for x in res.features["label"]}
    assert {"Hα", "Hβ"} <= labels and not any(x.startswith("He II") for x in labels)


def test_a_merged_pair_leaves_its_neighbours_measured():
    # a spectrum of the benchmark suite (invented data, seed 4 #337): a Balmer absorber at
    # z = 0.501, R 38 500, S/N ~60.  H17 and H18 were each fitted as near-degenerate pairs;
    # merging one pair and refitting left the next too uncertain, and a broad trough's
    # component chained the merge along the series limit: both lines and the redshift were
    # lost.  Merging is now limited to components of comparable width and repeated
    res, truth = _suite_spectrum(4, 337)
    assert res.status == "secure" and _correct(res.z, truth["z"])
    f = res.features
    found = {str(x) for x, flags in zip(f["label"], f["flags"]) if "at_z" not in str(flags)}
    assert {"H15", "H16", "H18", "Hα"} <= found
