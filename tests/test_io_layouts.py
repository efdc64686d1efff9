"""Readers on the layouts observed spectra come in.

Source: the observed files of tests/data/real/ (origin of each in its README); the values
checked are the files' own header and table contents.
"""

from pathlib import Path

import numpy as np
import pytest
from astropy import units as u
from astropy.io import fits

import linefinder as lf
from linefinder.errors import SpectrumFormatError

REAL = Path(__file__).parent / "data" / "real"


def test_survey_file_with_per_arm_wavelength_extensions():
    # DESI Early Data Release coadd, healpix 26065: B/R/Z arms in separate HDUs, 5 rows
    path = REAL / "desi_coadd_sv3_dark_26065.fits"
    spec = lf.read_spectrum(path, index=4)
    assert spec.meta["arms"] == ["B", "R", "Z"]
    ax = spec.axis.to_value(u.AA)
    assert np.all(np.diff(ax) > 0)
    with fits.open(path) as h:
        bw, rw = h["B_WAVELENGTH"].data, h["R_WAVELENGTH"].data
        assert ax[0] == pytest.approx(bw[0]) and ax[-1] == pytest.approx(h["Z_WAVELENGTH"].data[-1])
        # a pixel both arms share: flux combined by inverse variance
        w = rw[np.searchsorted(rw, bw[-1]) - 3]
        ib, ir = np.argmin(abs(bw - w)), np.argmin(abs(rw - w))
        fb, vb = h["B_FLUX"].data[4, ib], h["B_IVAR"].data[4, ib]
        fr, vr = h["R_FLUX"].data[4, ir], h["R_IVAR"].data[4, ir]
    k = np.argmin(abs(ax - w))
    assert spec.flux.value[k] == pytest.approx((fb * vb + fr * vr) / (vb + vr), rel=1e-6)
    assert spec.uncertainty.value[k] == pytest.approx(1 / np.sqrt(vb + vr), rel=1e-6)
    assert "TARGETID" in spec.meta["object"]
    with pytest.raises(SpectrumFormatError, match="holds 5 spectra"):
        lf.read_spectrum(path)


def test_arms_on_different_grids_are_split_in_the_overlap(tmp_path):
    # written the same way as the survey file above, with arm grids that do not coincide
    hdus = [fits.PrimaryHDU()]
    for arm, (a, b) in {"B": (4000.0, 5100.0), "R": (5000.3, 6000.3)}.items():
        w = np.arange(a, b, 1.0)
        hdus += [fits.ImageHDU(w, name=f"{arm}_WAVELENGTH"),
                 fits.ImageHDU(np.ones((1, len(w))) * (1 if arm == "B" else 2), name=f"{arm}_FLUX"),
                 fits.ImageHDU(np.ones((1, len(w))), name=f"{arm}_IVAR")]
    path = tmp_path / "arms.fits"
    fits.HDUList(hdus).writeto(path)
    spec = lf.read_spectrum(path)
    ax = spec.axis.to_value(u.AA)
    assert np.all(np.diff(ax) > 0)
    assert np.all(spec.flux.value[ax < 5050] == 1) and np.all(spec.flux.value[ax > 5051] == 2)


def test_coadd_is_the_default_beside_single_exposures():
    # SDSS DR18 spectrum file of NGC 3073: COADD + SPECOBJ + SPZLINE + 8 exposures, 3796-9204 Å
    spec = lf.read_spectrum(REAL / "sdss_ngc3073.fits")
    assert spec.meta["hdu"] == 1
    assert spec.axis.to_value(u.AA)[[0, -1]] == pytest.approx([3796, 9204], abs=2)
    assert spec.medium == "vacuum"


def test_identical_tables_are_one_spectrum():
    # ALFALFA 21-cm spectrum of AGC 100051: two identical table HDUs, 1340-1365 MHz
    spec = lf.read_spectrum(REAL / "hi21cm_agc100051.fits")
    assert len(spec) == 1024
    assert spec.axis.to_value(u.MHz).min() == pytest.approx(1340.3, abs=0.1)


def test_units_stated_only_in_a_free_text_comment():
    # SN 2014J export: "# units: wavelength in Angstrom (...), flux in erg/s/cm2/Angstrom"
    spec = lf.read_spectrum(REAL / "sn2014j_type_ia_nir.csv")
    assert spec.axis.unit == u.AA
    assert spec.flux.unit.is_equivalent(u.erg / u.s / u.cm ** 2 / u.AA)
    assert spec.meta["axis_unit_source"] == "comment"


@pytest.mark.parametrize("command", ["peaks", "identify", "redshift"])
def test_list_works_on_every_command_before_any_selection(command, capsys):
    from linefinder.cli.main import main

    assert main([command, str(REAL / "desi_coadd_sv3_dark_26065.fits"), "--list"]) == 0
    out = capsys.readouterr().out
    assert "5 spectra, arms B, R, Z joined" in out and "--index 3: TARGETID=616088619186127404 OBJTYPE=SKY" in out
    assert main([command, str(REAL / "sdss_ngc3073.fits"), "--list"]) == 0
    assert "default: HDU 1 'COADD' (the coadd" in capsys.readouterr().out


def _standard_star_table(path, *, tnull=None, err=None, quality=None, quality_doc=None,
                         ucd=None):
    """A FITS binary table written the way some standard-star archives write theirs."""
    lam = np.linspace(4000.0, 7000.0, 400)
    flux = 1e-13 * (lam / 5000.0) ** -2
    cols = [fits.Column(name="WAVELENGTH", format="D", unit="Angstrom", array=lam),
            fits.Column(name="FLUX", format="E", unit="erg/(s cm2 Angstrom)", array=flux)]
    if err is not None:
        cols.append(fits.Column(name="ERROR", format="E", unit="erg/(s cm2 Angstrom)", array=err))
    if quality is not None:
        cols.append(fits.Column(name=quality[0], format="J", array=quality[1]))
    hdu = fits.BinTableHDU.from_columns(cols)
    if tnull is not None:
        # a float column with a TNULL: the standard allows TNULLn for integer columns only
        hdu.header["TNULL2"] = tnull
        hdu.data["FLUX"][10:13] = tnull
    if quality_doc is not None:
        k = 3 + (err is not None)
        hdu.header[f"TTYPE{k}"] = (quality[0], quality_doc)
    if ucd is not None:
        hdu.header["TUCD1"] = ucd
    fits.HDUList([fits.PrimaryHDU(), hdu]).writeto(path)
    return lam, flux


def test_float_tnull_is_read_as_missing_and_said_once(tmp_path):
    path = tmp_path / "star_tnull.fits"
    _standard_star_table(path, tnull=-999.0)
    spec = lf.read_spectrum(path)
    missing = spec.mask | ~np.isfinite(spec.flux.value)
    assert missing[10:13].all() and not missing[:10].any()
    notes = spec.meta["read_notes"]
    assert sum("TNULL" in n for n in notes) == 1


def test_an_error_column_of_nulls_is_dropped(tmp_path):
    path = tmp_path / "star_nullerr.fits"
    _standard_star_table(path, err=np.full(400, np.nan))
    spec = lf.read_spectrum(path)
    assert spec.uncertainty is None
    assert any("only null values" in n for n in spec.meta["read_notes"])


@pytest.mark.parametrize("name,doc,bad_when", [("QUALITY", None, 1), ("GOOD", None, 0),
                                               ("QUALITY", "1 = good pixel", 0)])
def test_quality_columns_of_either_sense(tmp_path, name, doc, bad_when):
    q = np.zeros(400, int) if bad_when == 1 else np.ones(400, int)
    q[50:55] = bad_when
    path = tmp_path / "star_quality.fits"
    _standard_star_table(path, quality=(name, q), quality_doc=doc)
    spec = lf.read_spectrum(path)
    assert spec.mask[50:55].all() and spec.mask.sum() == 5


def test_air_wavelengths_from_the_ucd(tmp_path):
    # IVOA UCD1+ vocabulary: em.wl;obs.atmos marks wavelengths measured in air
    path = tmp_path / "star_ucd.fits"
    _standard_star_table(path, ucd="em.wl;obs.atmos")
    spec = lf.read_spectrum(path)
    assert spec.medium == "air" and "UCD" in spec.meta["medium_source"]
