"""Hyperfine lines of the 1s and 2s levels: intervals, rates and catalogue rows.

Measured intervals (recalled from memory, cited in `linefinder.physics.hyperfine`) are
the references for the theory; its stated uncertainty (the terms it leaves out) is the
tolerance.
"""

import numpy as np
import pytest
from astropy import units as u

import linefinder as lf
from linefinder.cli.main import main
from linefinder.errors import SpeciesError
from linefinder.physics.hyperfine import (
    fermi_interval_hz,
    has_hyperfine,
    hyperfine_interval,
    hyperfine_lines,
)

# (species, n, measured interval in Hz, relative tolerance of the theory): the measured
# values are those of the module (hydrogen maser, Hellwig et al. 1970; Kolachevsky et al.
# 2009; Wineland & Ramsey 1972; Mathur et al. 1967; Schuessler, Fortson & Dehmelt 1969;
# Prior & Wang 1977), recalled from memory.  Tolerances: hydrogen's theory leaves out
# proton recoil and polarisability (about 7 ppm together); the heavier nuclei's structure
# (polarisability, Zemach radius) is of order 1e-4 of the interval.
REFERENCE = [
    ("H", 1, 1420405751.768, 1e-5),
    ("H", 2, 177556834.3, 1e-5),
    ("D", 1, 327384352.522, 3e-4),
    ("T", 1, 1516701470.773, 3e-4),
    ("3He II", 1, 8665649867.0, 3e-4),
    ("3He II", 2, 1083354980.2, 3e-4),
]


@pytest.mark.parametrize("species, n, measured, rtol", REFERENCE)
def test_theory_interval_agrees_with_measurement(species, n, measured, rtol):
    assert abs(fermi_interval_hz(species, n)) == pytest.approx(measured, rel=rtol)


def test_helion_moment_is_negative_so_f0_lies_above():
    """3He has a negative magnetic moment: its F = 0 level lies above F = 1 (textbook)."""
    line, = hyperfine_lines("3He II", (1,))
    assert fermi_interval_hz("3He II") < 0
    assert (line.f_upper, line.f_lower) == (0.0, 1.0)
    assert (line.g_upper, line.g_lower) == (1, 3)


def test_21cm_rate_and_oscillator_strength():
    """A = 2.8843e-15 s^-1 (Gould 1994, ApJ 423, 522, recalled from memory); f = 5.75e-12
    (textbook value, recalled from memory)."""
    line, = hyperfine_lines("H", (1,))
    assert line.a_ul == pytest.approx(2.8843e-15, rel=1e-3)
    cat = lf.build_catalogue("H", 1, 2, hyperfine=True)
    row = cat[cat["series"] == "hyperfine"][0]
    assert row["f_lu"] == pytest.approx(5.75e-12, rel=0.01)


def test_measured_interval_is_used_and_said():
    nu, err, source, theory = hyperfine_interval("H", 1)
    assert nu == 1420405751.768 and err < 0.01
    assert source.startswith("measured")
    nu_t, err_t, source_t, _ = hyperfine_interval("T", 2)       # not measured here
    assert source_t == "theory" and err_t > 0


def test_catalogue_rows():
    cat = lf.build_catalogue(["H", "D", "He II"], 2, 3, hyperfine=True)
    hf = cat[cat["series"] == "hyperfine"]
    assert set(hf["label"]) == {"H I 21 cm", "H I 2s 169 cm", "D I 92 cm", "D I 2s 733 cm"}
    # 4He has no nuclear spin: no hyperfine line
    assert not has_hyperfine("He II")
    h21 = hf[hf["label"] == "H I 21 cm"][0]
    assert h21["frequency"].to_value(u.Hz) == pytest.approx(1420405751.768, abs=1e-3)
    assert np.isnan(h21["rel_intensity"])
    assert set(cat["position_source"][cat["series"] != "hyperfine"]) == {"theory"}
    assert cat.meta["hyperfine"] is True


def test_catalogue_rows_shift_and_window():
    z = 0.0455
    cat = lf.build_catalogue("H", 1, 2, hyperfine=True, z=z,
                             wavelength_range=(1300 * u.MHz, 1400 * u.MHz))
    assert list(cat["label"]) == ["H I 21 cm"]
    assert cat["frequency"][0].to_value(u.Hz) == pytest.approx(1420405751.768 / (1 + z), rel=1e-12)


def test_no_moment_tabulated_is_refused_clearly():
    with pytest.raises(SpeciesError, match="no nuclear spin"):
        hyperfine_lines("Fe XXVI")


def test_lines_command_lists_the_21cm_line(capsys):
    assert main(["lines", "--species", "H", "--hyperfine", "--unit", "MHz",
                 "--range", "1000-2000MHz", "--format", "csv"]) == 0
    from astropy.table import Table

    t = Table.read(capsys.readouterr().out, format="ascii.csv")
    row = t[t["label"] == "H I 21 cm"]
    assert len(row) == 1
    assert row["position_mhz"][0] == pytest.approx(1420.405751768, abs=1e-9)
    assert row["position_source"][0].startswith("measured")
