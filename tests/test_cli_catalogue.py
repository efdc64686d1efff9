"""``linefinder lines`` and ``levels``: the output contract and bad input."""

import csv
import io

import pytest
from astropy.table import Table

from linefinder.cli.main import main

LINES_COLUMNS = ("species,label,series,n_lower,l_lower,j_lower,n_upper,l_upper,j_upper,"
                 "wavelength_vacuum_nm,wavelength_air_nm,wavenumber_cm-1,frequency_hz,energy_ev,"
                 "a_ul_s-1,f_lu,g_lower,g_upper").split(",")


def _csv(capsys, argv):
    assert main(argv) == 0
    out = capsys.readouterr().out
    return list(csv.DictReader(io.StringIO(out)))


def test_lines_contract(capsys):
    rows = _csv(capsys, ["lines", "--species", "H", "--lower", "4", "--upper", "5-20", "--fine",
                         "--medium", "vacuum", "--unit", "nm", "--format", "csv"])
    assert list(rows[0].keys())[:len(LINES_COLUMNS)] == LINES_COLUMNS
    assert all(r["l_lower"].isdigit() for r in rows)
    assert {r["j_upper"] for r in rows} >= {"0.5", "1.5", "2.5"}
    brackett_alpha = [r for r in rows if r["label"] == "Brα"]
    assert brackett_alpha and all(r["series"] == "Brackett" for r in brackett_alpha)


def test_lines_multiplet_rows_have_empty_l_j(capsys):
    rows = _csv(capsys, ["lines", "--species", "H", "D", "--lower", "2", "--upper", "3-5",
                         "--unit", "angstrom", "--format", "csv"])
    assert "wavelength_vacuum_angstrom" in rows[0]
    assert all(r["l_lower"] == "" and r["j_upper"] == "" for r in rows)
    assert {r["species"] for r in rows} == {"H I", "D I"}


def test_levels_contract(capsys):
    rows = _csv(capsys, ["levels", "--species", "H", "--n-max", "20", "--format", "csv"])
    assert list(rows[0].keys())[:7] == ["species", "n", "l", "j", "g", "label", "energy_cm-1"]
    assert len(rows) == sum(2 * n - 1 for n in range(1, 21))
    assert float(rows[0]["energy_cm-1"]) == 0.0


def test_terminal_table(capsys):
    assert main(["lines", "--lower", "2", "--upper", "3-4", "--z", "0.1"]) == 0
    out = capsys.readouterr().out
    assert "Hα" in out and "frame observed" in out


@pytest.mark.parametrize("suffix", [".csv", ".ecsv", ".fits", ".parquet", ".json"])
def test_output_files_and_no_overwrite(tmp_path, capsys, suffix):
    path = tmp_path / f"lines{suffix}"
    argv = ["lines", "--lower", "2", "--upper", "3-6", "-o", str(path)]
    assert main(argv) == 0
    assert path.stat().st_size > 0
    if suffix in (".ecsv", ".fits"):
        t = Table.read(path)
        assert "wavelength_vacuum_nm" in t.colnames
        assert (t.meta.get("medium") or t.meta.get("MEDIUM")) == "vacuum"
    before = path.read_bytes()
    capsys.readouterr()
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "exists" in err[0] and str(path) in err[0]
    assert path.read_bytes() == before
    assert main(argv + ["--force"]) == 0


@pytest.mark.parametrize("argv", [
    ["lines", "--species", "Xx"],
    ["lines", "--lower", "5", "--upper", "3"],
    ["lines", "--species", "Z=120"],
    ["lines", "--lower", "2-x"],
    ["lines", "--unit", "furlong"],
    ["lines", "--unit", "parsec"],
    ["lines", "--range", "700-400"],
    ["lines", "--bogus"],
    ["levels", "--n-max", "0"],
])
def test_bad_input_exit_2(capsys, argv):
    assert main(argv) == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("linefinder: error:")
    assert "Traceback" not in captured.err
