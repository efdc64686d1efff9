"""Round trips through every reader (written with astropy, read back) and bad inputs."""

import numpy as np
import pytest
from astropy import units as u
from astropy.io import fits
from astropy.table import QTable, Table

from linefinder.cli.main import main
from linefinder.errors import SpectrumFormatError
from linefinder.io.read import read_input
from linefinder.io.units import parse_flux_unit, parse_spectral_unit


def _image(path, data, **cards):
    hdr = fits.Header()
    for k, v in cards.items():
        hdr[k] = v
    fits.HDUList([fits.PrimaryHDU(np.asarray(data, np.float32), header=hdr)]).writeto(path)


def test_fits_linear_image_with_err_extension(tmp_path):
    p = tmp_path / "lin.fits"
    flux = np.linspace(1, 2, 50)
    hdr = fits.Header({"CTYPE1": "WAVE", "CUNIT1": "Angstrom", "CRVAL1": 5000.0, "CDELT1": 2.0,
                       "CRPIX1": 1.0, "BUNIT": "erg/s/cm2/A"})
    fits.HDUList([fits.PrimaryHDU(flux.astype(np.float32), header=hdr),
                  fits.ImageHDU(np.full(50, 0.1, np.float32), name="ERR")]).writeto(p)
    s = read_input(p)
    assert s.axis[0].to_value(u.AA) == pytest.approx(5000.0)
    assert s.axis[-1].to_value(u.AA) == pytest.approx(5098.0)
    assert s.uncertainty.value == pytest.approx(np.full(50, 0.1))
    # "A" in a flux unit is the Angstrom, never the ampere
    assert s.flux.unit.is_equivalent(u.erg / u.s / u.cm ** 2 / u.AA)
    assert s.medium == "vacuum"


def test_fits_awav_is_air_and_ivar_becomes_sigma(tmp_path):
    # CTYPE1 = AWAV means air wavelengths (FITS WCS Paper III, Greisen et al. 2006)
    p = tmp_path / "air.fits"
    hdr = fits.Header({"CTYPE1": "AWAV", "CUNIT1": "nm", "CRVAL1": 500.0, "CD1_1": 0.1,
                       "CRPIX1": 1.0})
    fits.HDUList([fits.PrimaryHDU(np.ones(40, np.float32), header=hdr),
                  fits.ImageHDU(np.full(40, 4.0, np.float32), name="IVAR")]).writeto(p)
    s = read_input(p)
    assert s.medium == "air"
    assert s.uncertainty.value == pytest.approx(np.full(40, 0.5))   # 1/sqrt(4)
    assert read_input(p, medium="vacuum").medium == "vacuum"        # --medium overrides


def test_fits_log_linear_and_dc_flag(tmp_path):
    # -LOG axis: lambda = CRVAL1 exp(CDELT1 (p - CRPIX1) / CRVAL1) (FITS WCS Paper III,
    # Greisen et al. 2006, A&A 446, 747); DC-FLAG = 1: log10(lambda) linear in the pixel
    # (IRAF convention, recalled from memory)
    p1, p2 = tmp_path / "log.fits", tmp_path / "dcflag.fits"
    _image(p1, np.ones(30), CTYPE1="WAVE-LOG", CUNIT1="Angstrom", CRVAL1=4000.0,
           CDELT1=4000.0 * 1e-4, CRPIX1=1.0)
    _image(p2, np.ones(30), CRVAL1=np.log10(4000.0), CDELT1=1e-4, CRPIX1=1.0, **{"DC-FLAG": 1})
    a = read_input(p1).axis.to_value(u.AA)
    b = read_input(p2).axis.to_value(u.AA)
    assert a[0] == pytest.approx(4000.0) and b[0] == pytest.approx(4000.0)
    assert np.diff(np.log(a)) == pytest.approx(np.full(29, 1e-4), rel=1e-6)
    assert b[-1] == pytest.approx(4000.0 * 10 ** (29e-4))


def test_fits_2d_image_index_and_list(tmp_path, capsys):
    p = tmp_path / "multi.fits"
    data = np.vstack([np.full(20, k + 1.0) for k in range(3)])
    _image(p, data, CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=6000.0, CDELT1=1.0, CRPIX1=1.0)
    assert read_input(p, index=2).flux.value == pytest.approx(np.full(20, 3.0))
    with pytest.raises(SpectrumFormatError, match="index"):
        read_input(p, index=7)
    assert main(["peaks", str(p), "--list"]) == 0
    assert "3" in capsys.readouterr().out


def test_fits_binary_table_case_insensitive_columns(tmp_path):
    p = tmp_path / "tab.fits"
    lam = np.linspace(3800, 4000, 60)
    cols = [fits.Column(name="Lambda", format="D", unit="ANGSTROMS", array=lam),
            fits.Column(name="flux", format="E", array=np.ones(60)),
            fits.Column(name="StatError", format="E", array=np.full(60, 0.2))]
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(p)
    s = read_input(p)
    assert s.axis.unit == u.AA and s.axis[0].value == pytest.approx(3800)
    assert s.uncertainty.value == pytest.approx(np.full(60, 0.2))


def test_fits_table_with_vector_cells_and_loglam(tmp_path):
    # one row holding arrays (a common survey layout); LOGLAM is log10 of vacuum Angstrom
    p = tmp_path / "vec.fits"
    loglam = np.log10(np.linspace(5000, 5100, 25))
    cols = [fits.Column(name="LOGLAM", format="25D", array=loglam[None, :]),
            fits.Column(name="FLUX", format="25E", array=np.ones((1, 25))),
            fits.Column(name="IVAR", format="25E", array=np.full((1, 25), 25.0))]
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(p)
    s = read_input(p)
    assert s.axis.to_value(u.AA)[0] == pytest.approx(5000.0)
    assert s.uncertainty.value == pytest.approx(np.full(25, 0.2))


def test_text_header_units_and_comments(tmp_path):
    p = tmp_path / "s.csv"
    rows = "\n".join(f"{500 + 0.1 * k:.1f},{1 + 0.01 * k},0.05" for k in range(30))
    p.write_text("# medium: air\nwave_nm,flux,err\n" + rows + "\n")
    s = read_input(p)
    assert s.axis.unit == u.nm and s.medium == "air"
    assert s.uncertainty.value == pytest.approx(np.full(30, 0.05))


def test_text_without_header_needs_unit_and_columns(tmp_path):
    p = tmp_path / "bare.txt"
    p.write_text("\n".join(f"{k} {1000 + k} {2.0}" for k in range(30)) + "\n")
    with pytest.raises(SpectrumFormatError):
        read_input(p)
    s = read_input(p, columns="1,2", input_unit="MHz")
    assert s.axis.unit == u.MHz and s.axis[0].value == pytest.approx(1000)
    assert s.flux.value == pytest.approx(np.full(30, 2.0))


def test_frequency_axis_in_header_and_descending_axis(tmp_path):
    p = tmp_path / "radio.csv"
    f = np.linspace(5010, 5000, 40)      # descending
    p.write_text("freq(MHz),T\n" + "\n".join(f"{a},{1.0}" for a in f) + "\n")
    s = read_input(p)
    assert s.axis.unit == u.MHz and len(s) == 40


def test_ecsv_round_trip_with_units(tmp_path):
    p = tmp_path / "s.ecsv"
    t = QTable({"wavelength": np.linspace(1, 2, 20) * u.um, "flux": np.ones(20) * u.Jy,
                "uncertainty": np.full(20, 0.1) * u.Jy})
    t.write(p)
    s = read_input(p)
    assert s.axis.unit == u.um and s.flux.unit == u.Jy


def test_peak_list_is_read_as_peaks(tmp_path):
    p = tmp_path / "peaks.csv"
    Table({"center": [6563.0, 4861.0], "center_err": [0.1, 0.1]}).write(p, format="ascii.csv")
    out = read_input(p, input_unit="Angstrom")
    assert "center" in out.colnames and len(out) == 2


@pytest.mark.parametrize("text, unit", [("ANGSTROMS", u.AA), ("Angstrom", u.AA), ("A", u.AA),
                                        ("nanometers", u.nm), ("um", u.um), ("keV", u.keV),
                                        ("MHz", u.MHz)])
def test_spectral_unit_spellings(text, unit):
    assert parse_spectral_unit(text) == unit


FLAM = u.erg / u.s / u.cm ** 2 / u.AA
FNU = u.erg / u.s / u.cm ** 2 / u.Hz


# FLAM / FNU: the HST/IRAF names of the per-Angstrom and per-Hz flux densities (common practice)
@pytest.mark.parametrize("text, unit", [("erg/s/cm2/A", FLAM), ("FLAM", FLAM), ("FNU", FNU),
                                        ("Jy", u.Jy), ("1e-17 erg/s/cm2/A", 1e-17 * FLAM)])
def test_flux_unit_spellings(text, unit):
    got = parse_flux_unit(text)
    assert got.is_equivalent(unit)             # "A" is the Angstrom: never ampere
    assert (1 * got).to_value(unit) == pytest.approx(1.0)


def _bad_inputs(tmp_path):
    trunc = tmp_path / "trunc.fits"
    _image(tmp_path / "ok.fits", np.ones(2000), CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=5000.0,
           CDELT1=1.0, CRPIX1=1.0)
    trunc.write_bytes((tmp_path / "ok.fits").read_bytes()[:4000])
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    nan = tmp_path / "nan.csv"
    nan.write_text("wavelength [Angstrom],flux\n" + "\n".join(f"{5000 + k},nan" for k in range(20)))
    text = tmp_path / "words.csv"
    text.write_text("wavelength [Angstrom],flux\n" + "\n".join(f"{5000 + k},abc" for k in range(20)))
    unit = tmp_path / "unit.csv"
    unit.write_text("wavelength [bananas],flux\n" + "\n".join(f"{5000 + k},1" for k in range(20)))
    return {"truncated FITS": [str(trunc)], "empty": [str(empty)], "all NaN": [str(nan)],
            "non-numeric": [str(text)], "unknown unit": [str(unit)],
            "wrong index": [str(tmp_path / "ok.fits"), "--index", "3"]}


def test_bad_inputs_exit_2_with_one_line(tmp_path, capsys):
    for what, argv in _bad_inputs(tmp_path).items():
        assert main(["peaks", *argv]) == 2, what
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1, (what, err)
        assert argv[0].split("/")[-1] in err[0], (what, err)
        assert "Traceback" not in err[0]
