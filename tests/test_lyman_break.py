"""The Lyman break: mean forest transmission, continuum steps, lone Lyα named by its break."""

import json

import numpy as np
import pytest
from astropy import units as u

from linefinder.catalogue.build import build_catalogue
from linefinder.cli.main import main
from linefinder.features.continuum import find_steps, fit_continuum
from linefinder.features.profiles import GAUSS_FWHM
from linefinder.identification.lyman_break import (
    continuum_step,
    is_break,
    mean_transmission,
)
from linefinder.identification.pipeline import identify
from linefinder.spectral.spectrum import SpectrumData


def test_mean_transmission_follows_the_measured_forest():
    # mean Lyα-forest flux: about 0.8 at z = 2.4 and 0.65-0.7 at z = 3 (Faucher-Giguère et al.
    # 2008; Becker et al. 2013, values recalled from memory, ranges wide enough for both),
    # and a Gunn-Peterson trough with under ~1-2 % transmitted beyond z = 6 (Fan et al. 2006,
    # recalled); no absorption in front of z = 0
    assert 0.74 < mean_transmission(2.4) < 0.88
    assert 0.60 < mean_transmission(3.0) < 0.75
    assert mean_transmission(6.2) < 0.02
    assert mean_transmission(0.0) == 1.0 and mean_transmission(-0.1) == 1.0
    t = mean_transmission(np.linspace(0, 7, 50))
    assert np.all(np.diff(t) < 0)


def _lya_spectrum(rng, *, z, step, R=3000.0, amp=15.0, cont=5.0, slope=-1.0, noise=1.0,
                  lo=None, hi=None):
    """One Lyα line of peak `amp` on a power-law continuum of `cont`, times `step`
    blueward of the line (1: no break); vacuum Å, white noise."""
    lya = build_catalogue("H", (1, 1), (2, 2), resolution=R)["wavelength_vacuum"].to_value(u.AA)
    c = float(np.mean(lya)) * (1 + z)
    lo, hi = lo or c / 1.6, hi or c * 1.6
    x = np.exp(np.arange(np.log(lo), np.log(hi), 1 / (2.5 * R)))
    s = c / R / GAUSS_FWHM
    f = cont * (x / c) ** slope
    f = np.where(x < c, f * step, f) + amp * np.exp(-0.5 * ((x - c) / s) ** 2)
    f = f + rng.normal(0, noise, len(x))
    spec = SpectrumData(x * u.AA, f * u.adu, np.full(len(x), noise) * u.adu,
                        meta={"source": "synthetic", "resolution": R, "medium": "vacuum"})
    return spec, c


def test_continuum_step_measures_the_ratio_with_an_honest_error(rng):
    pulls = []
    for _ in range(60):
        spec, c = _lya_spectrum(rng, z=4.0, step=0.3, slope=0.0)
        x = np.log(spec.axis.value)
        st = continuum_step(x, spec.flux.value, spec.uncertainty.value, np.log(c), 1 / 3000.0)
        pulls.append((st["ratio"] - 0.3) / st["ratio_err"])
        assert is_break(st)
    # the scatter of the measured ratio matches its 1-sigma error within 25 %
    assert 0.75 < np.std(pulls) < 1.25 and abs(np.mean(pulls)) < 0.5


def test_no_break_on_a_sloped_continuum(rng):
    # a steep power law (f_lambda ~ lambda^-2, blue galaxies) is not a break
    for slope in (-2.0, 1.0):
        spec, c = _lya_spectrum(rng, z=3.0, step=1.0, slope=slope, cont=20.0)
        st = continuum_step(np.log(spec.axis.value), spec.flux.value, spec.uncertainty.value,
                            np.log(c), 1 / 3000.0)
        assert not is_break(st)


def test_find_steps_places_a_step_and_ignores_noise_and_troughs(rng):
    n = 3000
    y = np.where(np.arange(n) >= 1700, 10.0, 4.0) + rng.normal(0, 1.0, n)
    good = np.ones(n, bool)
    st = find_steps(y, np.ones(n), good)
    assert len(st) == 1 and abs(st[0] - 1700) <= 3
    # the continuum fitted with the step follows both levels right up to it
    cont, _ = fit_continuum(y, np.ones(n), good, knot_px=200, steps=st)
    assert abs(np.median(cont[1500:1690]) - 4.0) < 0.3 and abs(np.median(cont[1710:1900]) - 10) < 0.3
    assert len(find_steps(rng.normal(5.0, 1.0, n), np.ones(n), good)) == 0
    # a trough with the continuum back on both sides (a series limit's merged lines) is
    # not a step: its levels are not flat
    trough = 10.0 - 6.0 * np.exp(-0.5 * ((np.arange(n) - 1500) / 60.0) ** 2)
    assert len(find_steps(trough + rng.normal(0, 0.3, n), np.full(n, 0.3), good)) == 0


def test_lone_lyman_alpha_named_by_its_break(rng):
    # an invented Lyα emitter at z = 4.6: one line, the continuum blueward at the mean forest
    # transmission there; it is named Lyα, tentatively, at the right z
    z = 4.6
    spec, c = _lya_spectrum(rng, z=z, step=float(mean_transmission(z)))
    res = identify(spec)
    assert res.status == "tentative" and res.lyman_break is not None
    assert abs(res.z - z) < 5e-4 * (1 + z)
    assert "Lyα" in [str(x) for x in res.features["label"]]
    assert res.lyman_break["ratio"] == pytest.approx(float(mean_transmission(z)),
                                                     abs=4 * res.lyman_break["ratio_err"])
    assert res.single_line_readings == []
    # the same line on an unbroken continuum has no redshift, only readings
    flat, _ = _lya_spectrum(np.random.default_rng(5), z=z, step=1.0)
    res2 = identify(flat)
    assert res2.status == "none" and res2.lyman_break is None
    assert "Lyα" in [r["label"] for r in res2.single_line_readings]


def test_lyman_break_in_json_and_text(rng, tmp_path, capsys):
    spec, c = _lya_spectrum(rng, z=5.2, step=float(mean_transmission(5.2)))
    path = tmp_path / "lae.csv"
    path.write_text("wavelength [Angstrom],flux,err\n" + "\n".join(
        f"{a},{b},1.0" for a, b in zip(spec.axis.value, spec.flux.value)))
    assert main(["redshift", str(path), "--format", "json", "--medium", "vacuum"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] == "tentative" and out["lines"] == ["Lyα"]
    assert out["lyman_break"]["ratio"] < 0.5
    assert main(["identify", str(path), "--medium", "vacuum", "-o", str(tmp_path / "rep")]) == 0
    assert "continuum break" in capsys.readouterr().out
    summ = json.loads((tmp_path / "rep" / "summary.json").read_text())
    blue, red = summ["lyman_break"]["windows"]
    assert blue[1] < 1 < red[0] and summ["lyman_break"]["blue_mean"] < summ["lyman_break"]["red_mean"]
    assert "continuum break" in (tmp_path / "rep" / "report.html").read_text()


def test_a_balmer_break_beside_a_line_is_not_a_lyman_break(rng):
    # an invented [O II]-like emitter: one line at 5000 Å with the continuum halved from
    # 3646/3727 of its wavelength blueward (the Balmer jump sits 2.2 % blueward of [O II]
    # 3727, a drop of up to ~2 in young populations: facts of the trade); the step is not at
    # the line, so no Lyα is named
    R = 3000.0
    x = np.exp(np.arange(np.log(3500.0), np.log(7000.0), 1 / (2.5 * R)))
    s = 5000.0 / R / GAUSS_FWHM
    f = np.where(x < 5000.0 * 3646.0 / 3727.0, 2.5, 5.0) + 15 * np.exp(-0.5 * ((x - 5000) / s) ** 2)
    spec = SpectrumData(x * u.AA, (f + rng.normal(0, 1, len(x))) * u.adu, np.ones(len(x)) * u.adu,
                        meta={"source": "synthetic", "resolution": R, "medium": "vacuum"})
    res = identify(spec)
    assert res.status == "none" and res.lyman_break is None
    assert not any(str(x) for x in res.features["label"])


def test_missing_lyman_beta_does_not_strike_a_lyman_alpha_reading(rng):
    # a bright lone line at the Lyα position of z = 5; Lyβ would fall inside the window, but in
    # emission it is weak (Case B turns it into Hα and Lyα; Osterbrock & Ferland 2006) and
    # the forest absorbs it: its absence must not rule Lyα out
    spec, c = _lya_spectrum(rng, z=5.0, step=1.0, amp=80.0)
    res = identify(spec)
    assert res.status == "none"
    assert "Lyα" in [r["label"] for r in res.single_line_readings]
    assert "Lyβ" not in [r["label"] for r in res.single_line_readings]
