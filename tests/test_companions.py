"""Companion lines: their wavelengths, merging at low resolution, and their part in identify."""

import numpy as np
import pytest
from astropy import units as u

from linefinder.catalogue.build import build_catalogue
from linefinder.catalogue.companions import COMPANION_LINES, companion_lines
from linefinder.identification.pipeline import identify
from linefinder.report.summary import summary
from linefinder.spectral.medium import vacuum_to_air
from linefinder.spectral.spectrum import SpectrumData

# Standard air wavelengths (Å) of the strong nebular lines as tabulated for nebular work
# (Osterbrock & Ferland 2006, Astrophysics of Gaseous Nebulae and AGN; from memory, to the
# 0.01 Å quoted, [S III] to 0.1 Å).  The companion table holds vacuum values; both must agree
# through the standard air/vacuum conversion.
AIR_ANGSTROM = {"[O II] 3727": 3726.03, "[O II] 3730": 3728.82, "[Ne III] 3869": 3868.76,
                "[O III] 4364": 4363.21, "He I 4473": 4471.48, "[O III] 4960": 4958.91, "[O III] 5008": 5006.84,
                "He I 5877": 5875.62, "[O I] 6302": 6300.30, "[N II] 6550": 6548.05,
                "[N II] 6585": 6583.45, "[S II] 6718": 6716.44, "[S II] 6733": 6730.82,
                "[Ar III] 7138": 7135.79, "[S III] 9071": 9068.6, "[S III] 9533": 9530.6}
# vacuum ultraviolet wavelengths (Å; NIST ASD, from memory, to the 0.01 Å quoted): below
# 2000 Å there is no air value
UV_VACUUM_ANGSTROM = {"C IV 1548": 1548.19, "C IV 1551": 1550.77, "N V 1239": 1238.82,
                      "Mg II 2796": 2796.35, "C III] 1909": 1908.73}


@pytest.mark.parametrize("name", sorted(AIR_ANGSTROM))
def test_companion_wavelengths_match_standard_air_values(name):
    vac = COMPANION_LINES[name][0] * u.AA
    tol = 0.15 if name.startswith("[S III]") else 0.02
    assert vacuum_to_air(vac).to_value(u.AA) == pytest.approx(AIR_ANGSTROM[name], abs=tol)


@pytest.mark.parametrize("name", sorted(UV_VACUUM_ANGSTROM))
def test_companion_uv_wavelengths(name):
    assert COMPANION_LINES[name][0] == pytest.approx(UV_VACUUM_ANGSTROM[name], abs=0.02)


def test_doublets_merge_below_their_resolution():
    # [O II] 3727/3730 are 7.5e-4 apart in ln(lambda): resolved at R = 5000, one line at R = 800
    lo, hi = 3700e-10, 3760e-10
    sharp = companion_lines(lo, hi, 5000.0)
    assert [c["name"] for c in sharp] == ["[O II] 3727", "[O II] 3730"]
    blurred = companion_lines(lo, hi, 800.0)
    assert [c["name"] for c in blurred] == ["[O II] 3727+3730"]
    merged = blurred[0]
    # the flux-weighted mean lies between the two and the strengths add
    assert sharp[0]["rest_vacuum_m"] < merged["rest_vacuum_m"] < sharp[1]["rest_vacuum_m"]
    assert merged["strength"] == pytest.approx(sharp[0]["strength"] + sharp[1]["strength"])


def _lone_hbeta_with_oiii(rng, z=0.8, R=4000.0):
    """H-beta with the [O III] doublet (invented emitter): the only hydrogen line in the
    window is H-beta, so hydrogen alone gives no redshift."""
    dlog = 1 / (2.5 * R)
    lam = 4700.0 * (1 + z) * np.exp(dlog * np.arange(int(np.log(5300 / 4700) / dlog)))
    flux = np.full(len(lam), 3.0)
    hb = build_catalogue("H", 2, 4)["wavelength_vacuum"].to_value(u.AA)[0]
    lines = {"Hβ": (hb, 25.0), "[O III] 4960": (COMPANION_LINES["[O III] 4960"][0], 25.0),
             "[O III] 5008": (COMPANION_LINES["[O III] 5008"][0], 75.0)}
    for rest, amp in lines.values():
        c = rest * (1 + z)
        s = c / R / 2.3548
        flux += amp * np.exp(-0.5 * ((lam - c) / s) ** 2)
    flux += rng.normal(0, 1.0, len(lam))
    return SpectrumData(lam * u.AA, flux * u.adu, np.ones(len(lam)) * u.adu,
                        meta={"source": "Hβ + [O III]", "medium": "vacuum", "resolution": R})


def test_companions_give_the_redshift_of_a_lone_balmer_line(rng):
    spec = _lone_hbeta_with_oiii(rng)
    res = identify(spec)
    assert res.z == pytest.approx(0.8, abs=5e-4 * 1.8)
    assert res.status in ("secure", "tentative")
    labels = [str(x) for x in res.features["label"] if x]
    assert labels == ["Hβ"]
    comp = {str(x) for x in res.features["companion"] if x}
    assert comp == {"[O III] 4960", "[O III] 5008"}
    # kept apart from the hydrogenic identifications, and not counted as unexplained
    s = summary(res)
    assert all(r["label"] is None for r in s["features"] if r["companion"])
    assert s["unit"] == "Angstrom"
    oiii = COMPANION_LINES["[O III] 5008"][0] * 1.8
    assert not any(abs(f["center"] - oiii) < 2.0 for f in s["unidentified"])
    assert "[O III] 5008" in res.meta["companions"]


def test_without_companions_a_lone_balmer_line_gives_no_redshift(rng):
    res = identify(_lone_hbeta_with_oiii(rng), companions=False)
    assert not any(str(x) == "Hβ" for x in res.features["label"])
    assert not any(res.features["companion"])
    assert res.meta["companions"] == []


def test_companions_alone_give_no_redshift(rng):
    # the [O III] doublet without any hydrogen line: a companion needs hydrogen beside it
    R, z = 4000.0, 0.8
    dlog = 1 / (2.5 * R)
    lam = 4900.0 * (1 + z) * np.exp(dlog * np.arange(int(np.log(5100 / 4900) / dlog)))
    flux = np.full(len(lam), 3.0)
    for name, amp in (("[O III] 4960", 25.0), ("[O III] 5008", 75.0)):
        c = COMPANION_LINES[name][0] * (1 + z)
        flux += amp * np.exp(-0.5 * ((lam - c) / (c / R / 2.3548)) ** 2)
    flux += rng.normal(0, 1.0, len(lam))
    spec = SpectrumData(lam * u.AA, flux * u.adu, np.ones(len(lam)) * u.adu,
                        meta={"source": "[O III] only", "medium": "vacuum", "resolution": R})
    res = identify(spec)
    assert res.status == "none"
    assert not any(res.features["label"])


def test_redshift_command_names_companions_and_turns_them_off(rng, tmp_path, capsys):
    import json

    from linefinder.cli.main import main

    spec = _lone_hbeta_with_oiii(rng)
    path = tmp_path / "hbeta_oiii.csv"
    path.write_text("wavelength [Angstrom],flux,err\n" + "\n".join(
        f"{a:.4f},{b:.5f},1.0" for a, b in zip(spec.axis.value, spec.flux.value)))
    assert main(["redshift", str(path), "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["lines"] == ["Hβ"]
    assert set(res["companion_lines"]) == {"[O III] 4960", "[O III] 5008"}
    assert main(["redshift", str(path), "--format", "json", "--no-companions"]) == 0
    off = json.loads(capsys.readouterr().out)
    assert off["companion_lines"] == [] and "Hβ" not in off["lines"]
