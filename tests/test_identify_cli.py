"""End-to-end: readers, features, redshift and identification on bundled and synthetic data."""

import json

import numpy as np
import pytest
from astropy import units as u

from linefinder.cli.main import main
from linefinder.features.detect import find_features
from linefinder.io.read import read_input
from linefinder.simulate.scenarios import sample_path
from linefinder.spectral.doppler import C_KMS
from linefinder.spectral.spectrum import SpectrumData


def test_demo_recovers_truth(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out)]) == 0
    summary = json.loads((out / "summary.json").read_text())
    truth = json.loads(sample_path("emission_galaxy.fits.truth.json").read_text())
    assert summary["status"] == "secure"
    assert abs(summary["z"] - truth["z"]) < 5e-4 * (1 + truth["z"])
    assert {"Hα", "Hβ", "Hγ"} <= set(summary["lines"])
    for name in ("report.html", "spectrum.png", "spectrum.svg", "features.csv", "features.ecsv"):
        assert (out / name).stat().st_size > 0
    assert main(["demo", "-o", str(out)]) == 2     # nothing is overwritten without --force


def test_radio_velocity(capsys):
    assert main(["redshift", str(sample_path("radio_rrl.csv")), "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    for key in ("z", "z_err", "status", "velocity_kms", "lines", "alternatives"):
        assert key in res
    # injected: v_LSR = +42.5 km/s, radio convention (sample ground truth)
    assert res["velocity_kms"] == pytest.approx(42.5, abs=3 * res["velocity_err_kms"] + 0.5)
    assert "H109α" in res["lines"]


def test_identify_json_contract(capsys):
    assert main(["identify", str(sample_path("emission_galaxy.fits")), "--mask-sky",
                 "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    f = res["features"][0]
    for key in ("center", "center_err", "kind", "snr", "label", "species", "n_lower", "n_upper",
                "residual_kms", "score", "alternatives"):
        assert key in f
    assert "unidentified" in res
    ha = [r for r in res["features"] if r["label"] == "Hα"][0]
    assert ha["species"] == "H I" and (ha["n_lower"], ha["n_upper"]) == (2, 3)
    # the intensity assumption behind the scores is stated: an emission spectrum is scored
    # against Case B recombination ratios
    assert res["meta"]["intensity_model"].startswith("emission: Case B")


def test_featureless_spectrum_status_none(rng, capsys, tmp_path):
    x = np.linspace(4000, 7000, 3000)
    path = tmp_path / "flat.csv"
    path.write_text("wavelength [Angstrom],flux,err\n" + "\n".join(
        f"{a},{b},0.1" for a, b in zip(x, 1 + rng.normal(0, 0.1, len(x)))))
    assert main(["redshift", str(path), "--format", "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] == "none" and out["single_line_readings"] == []


def test_one_line_readings_printed_and_in_json(rng, capsys, tmp_path):
    # one clear emission line at 6000 Å: no redshift; the JSON and the text list readings
    x = np.exp(np.arange(np.log(4000.0), np.log(9000.0), 1 / 2500.0))
    y = 10 + 6 * np.exp(-0.5 * ((x - 6000.0) / 2.55) ** 2) + rng.normal(0, 0.3, len(x))
    path = tmp_path / "one.csv"
    path.write_text("wavelength [Angstrom],flux,err\n" + "\n".join(
        f"{a},{b},0.3" for a, b in zip(x, y)))
    assert main(["redshift", str(path), "--format", "json", "--medium", "vacuum"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["status"] == "none" and out["z"] is None
    assert "Lyα" in [r["label"] for r in out["single_line_readings"]]
    assert main(["identify", str(path), "--medium", "vacuum"]) == 0
    assert "one clear line only" in capsys.readouterr().out


def test_centre_errors_are_honest(rng):
    # scatter of measured centres matches the reported 1-sigma within 20 % (injected lines)
    x = np.arange(3000.0)
    centres, errs = [], []
    for _ in range(150):
        y = 1 + 0.8 * np.exp(-0.5 * ((x - 1500.3) / 2.0) ** 2) + rng.normal(0, 0.1, len(x))
        spec = SpectrumData(x * u.AA, y * u.adu, np.full(len(x), 0.1) * u.adu,
                            meta={"resolution": 1500 / (2.0 * 2.3548), "source": "synthetic"})
        t = find_features(spec, kinds=("emission",)).features
        k = np.argmin(np.abs(t["center"].value - 1500.3))
        centres.append(t["center"][k].value)
        errs.append(t["center_err"][k].value)
    ratio = np.std(centres) / np.median(errs)
    assert 0.8 < ratio < 1.2


def test_noise_only_no_detections(rng):
    x = np.arange(20000.0)
    spec = SpectrumData(x * u.AA, (1 + rng.normal(0, 0.05, len(x))) * u.adu, meta={"source": "noise"})
    assert len(find_features(spec).features) <= 1


@pytest.mark.parametrize("name", ["emission_galaxy.fits", "hot_star.fits", "hd_discharge.csv",
                                  "xray_cluster.fits", "radio_rrl.csv"])
def test_samples_read(name):
    spec = read_input(sample_path(name))
    assert len(spec) > 500 and spec.meta["medium"] in ("air", "vacuum")


@pytest.mark.parametrize("argv", [["peaks", "missing.fits"], ["identify", "missing.csv"]])
def test_bad_files_exit_2(argv, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "missing" in err[0]


def test_corrupt_fits(tmp_path, capsys):
    p = tmp_path / "broken.fits"
    p.write_bytes(sample_path("emission_galaxy.fits").read_bytes()[:5000])
    assert main(["peaks", str(p)]) == 2
    assert str(p) in capsys.readouterr().err


def test_telluric_mask_is_separate_from_sky_mask(capsys):
    # a star's H-alpha absorption inside the 7160-7340 A water band (z ~ 0.1): flagged
    # "telluric"; left out only with --mask-telluric
    import numpy as np
    from astropy import units as u

    from linefinder.identification.pipeline import identify
    from linefinder.simulate.suite import make_spectrum

    rng = np.random.default_rng(7)
    spec, truth = make_spectrum(rng, z=0.1, snr=60, resolution=3000, kind="absorption",
                                contaminants=False)
    res = identify(spec, mask_sky=True)
    ha = [i for i, c in enumerate(res.features["center"].to_value(u.AA)) if abs(c - 7219.2) < 3]
    assert ha and "telluric" in res.features["flags"][ha[0]]
    assert res.features["label"][ha[0]] == "Hα"
    # masked, it is no evidence for the redshift; it is still named, as the Balmer lines
    # found elsewhere predict H-alpha far above the detection limit, and keeps its flag
    masked = identify(spec, mask_sky=True, mask_telluric=True)
    assert ha[0] in [m[0] for m in res.solutions[0].matches]
    assert ha[0] not in [m[0] for m in masked.solutions[0].matches]
    assert masked.features["label"][ha[0]] == "Hα"
    assert "telluric" in masked.features["flags"][ha[0]]


def test_report_label_spread_and_spike_record():
    from linefinder.report.summary import _spread

    # labels closer than their separation move apart symmetrically about their mean; one that
    # stands alone stays where its feature is; the order is kept and no gap is below sep
    xs = [500.0, 101.0, 100.0, 100.5]
    pos = _spread(xs, 10.0, 0.0, 1000.0)
    assert pos[0] == 500.0
    assert np.mean(pos[1:]) == pytest.approx(np.mean(xs[1:]))
    assert list(np.argsort(pos)) == list(np.argsort(xs))
    assert np.min(np.diff(np.sort(pos))) >= 10.0 - 1e-9
    # at the edge of the axis the row is pushed inside it
    edge = _spread([0.0, 1.0, 2.0], 10.0, 0.0, 1000.0)
    assert edge.min() >= 0.0 and np.min(np.diff(np.sort(edge))) >= 10.0 - 1e-9
    # the bundled galaxy's cosmic-ray pixel is masked before the search and recorded
    truth = json.loads(sample_path("emission_galaxy.fits.truth.json").read_text())
    res = find_features(read_input(sample_path("emission_galaxy.fits")))
    assert truth["cosmic_ray_pixel"] in res.meta["spike_pixels"]


def test_lines_measured_at_z_are_marked_in_the_report(tmp_path, capsys):
    # a spectrum of the benchmark suite (invented data, seed 2 #6): a Lyman-series absorber
    # at z = 6.20 whose Ly13-Ly15 the search misses and the solution measures where z puts them
    from linefinder.simulate.suite import make_spectrum, random_parameters

    gen = np.random.default_rng([2, 6, 0])
    spec, truth = make_spectrum(gen, **random_parameters(gen), max_pixels=150_000)
    path = tmp_path / "absorber.csv"
    path.write_text("wavelength [Angstrom],flux,err\n" + "\n".join(
        f"{a:.10g},{b:.10g},{c:.10g}" for a, b, c in zip(spec.axis.to_value(u.AA),
                                                         spec.flux.value, spec.uncertainty.value)))
    out = tmp_path / "report"
    assert main(["identify", str(path), "--medium", "vacuum", "--mask-sky", "--resolution",
                 str(truth["resolution"]), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    summary = json.loads((out / "summary.json").read_text())
    at_z = [f for f in summary["features"] if "at_z" in f["flags"].split(",")]
    assert {"Ly13", "Ly14", "Ly15"} <= {f["label"] for f in at_z}
    # no position of their own: no residual, and the text says where they were measured
    assert all(f["residual_kms"] is None and f["snr"] >= 4 for f in at_z)
    assert all(f["label"] in summary["lines"] for f in at_z)
    assert text.count("at z") >= len(at_z)
    assert "at_z" in (out / "report.html").read_text()


def _truth(name):
    return json.loads(sample_path(name + ".truth.json").read_text())


def _labelled_at(features, line, tol):
    """Is the truth `line` labelled with its name by a feature within `tol` of it?"""
    return any(f["label"] == line["label"] and abs(f["center"] - line["observed"]) < tol
               for f in features)


def test_hot_star_sample_velocity_and_balmer_lines(capsys):
    # the sample's ground truth (invented scenario): a hot star at +37.5 km/s (optical
    # convention), Stark-broadened Balmer absorption H11 ... Hβ at R 5000, in air
    truth = _truth("hot_star.fits")
    assert main(["identify", str(sample_path("hot_star.fits")), "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["status"] == "secure"
    v_err = C_KMS * res["z_err"]
    assert res["velocity_kms"] == pytest.approx(truth["velocity_kms"], abs=3 * v_err)
    # H8 ... Hβ stand clear of the spectrum's blue end (H9-H11 crowd it, in their wings)
    for line in truth["lines"]:
        if line["species"] == "H I" and line["n_upper"] <= 8:
            assert _labelled_at(res["features"], line, 1.0), line["label"]


@pytest.mark.parametrize("options", [["--species", "H", "D", "--zmax", "0.001"], []])
def test_hd_discharge_sample_names_both_isotopes(capsys, options):
    # the sample's ground truth (invented scenario): an H/D discharge at rest, Hα/Dα and
    # Hβ/Dβ resolved (isotope shift 0.18 and 0.13 nm), and a C II 657.8 nm impurity line
    # that must stay unidentified among the hydrogenic lines; without options too (R 70 000
    # parts D from H: deuterium is searched by default)
    truth = _truth("hd_discharge.csv")
    assert main(["identify", str(sample_path("hd_discharge.csv")), *options,
                 "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["status"] == "secure" and abs(res["z"]) < 3 * res["z_err"] + 1e-6
    for line in truth["lines"]:
        if line["species"] in ("H I", "D I"):
            assert _labelled_at(res["features"], line, 0.01), line["label"]
    other = [l for l in truth["lines"] if l["species"] == "other"]
    assert other and all(any(abs(u["center"] - l["observed"]) < 0.01 for u in res["unidentified"])
                         for l in other)
