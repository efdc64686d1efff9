"""`linefinder batch` and `linefinder.batch`: every spectrum gets a row, failures carry
their message, results resume without recomputing or duplicating, Parquet reads back.
Spectra: invented galaxies (Gaussian Balmer and [O III] lines, scenarios of these tests)
and the bundled sample."""

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from astropy.io import fits

import linefinder as lf
from linefinder.cli.main import main
from linefinder.simulate.scenarios import sample_path

distributed = pytest.importorskip("distributed")

# rest vacuum wavelengths (Å) of Hδ, Hγ, Hβ, [O III] 5008, Hα: NIST ASD values, recalled
# from memory; amplitudes roughly as Case B and a star-forming galaxy's [O III]
LINES = [(4102.89, 0.26), (4341.69, 0.47), (4862.68, 1.0), (5008.24, 2.0), (6564.61, 2.9)]


def _galaxies(path, redshifts, seed=0):
    """A FITS image whose rows are galaxy spectra at `redshifts` (linear axis, 1.5 Å/px)."""
    rng = np.random.default_rng(seed)
    lam = 3800.0 + 1.5 * np.arange(3000)
    rows = []
    for z in redshifts:
        y = 1.0 + rng.normal(0, 0.05, lam.size)
        for rest, amp in LINES:
            y += amp * np.exp(-0.5 * ((lam - rest * (1 + z)) / 2.5) ** 2)
        rows.append(y)
    hdu = fits.PrimaryHDU(np.array(rows, dtype="f4"))
    hdu.header.update(CRVAL1=lam[0], CDELT1=1.5, CRPIX1=1.0, CUNIT1="Angstrom", CTYPE1="WAVE",
                      BUNIT="1e-17 erg/(s cm2 Angstrom)")
    hdu.writeto(path)
    return path


@pytest.fixture(scope="module")
def client():
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=":0") as cluster, \
            distributed.Client(cluster) as c:
        yield c


@pytest.fixture
def folder(tmp_path):
    d = tmp_path / "in"
    d.mkdir()
    shutil.copy(sample_path("emission_galaxy.fits"), d / "sample.fits")
    _galaxies(d / "three.fits", [0.05, 0.10, 0.15])
    (d / "broken.fits").write_bytes(b"SIMPLE  =                    T" + b"\x00" * 50)
    (d / "empty.csv").write_text("")
    (d / "notes.md").write_text("not a spectrum: not searched")
    return d


def test_every_spectrum_gets_a_row(folder, tmp_path, client):
    out = tmp_path / "out"
    outcome = lf.batch([folder], out, client=client, progress=False)
    s = pd.read_parquet(out / "summary.parquet")
    assert len(s) == 6 and outcome.n_spectra == 6
    for col in ("source", "index", "z", "z_err", "status", "velocity_kms", "n_lines", "lines",
                "seconds", "error"):
        assert col in s.columns
    by = {(Path(r.source).name, r.index): r for r in s.itertuples()}
    for i, z in enumerate([0.05, 0.10, 0.15]):
        r = by[("three.fits", i)]
        assert r.status in ("secure", "tentative") and abs(r.z - z) < 1e-3
        assert "Hα" in r.lines.split(";")
    for name in ("broken.fits", "empty.csv"):
        r = by[(name, 0)]
        assert r.status == "failed" and name in r.error and "\n" not in r.error
    assert outcome.counts["failed"] == 2
    assert outcome.counts_line().startswith("6 spectra: ")
    lines = pd.read_parquet(out / "lines.parquet")
    assert {"source", "index", "center", "label", "species", "residual_kms"} <= set(lines.columns)
    assert (lines["source"].str.endswith("three.fits")).sum() >= 9
    page = (out / "summary.html").read_text()
    assert "Failures (2)" in page and "broken.fits" in page and "data:image/png" in page


def test_existing_folder_refused_then_resumed_without_recomputing(folder, tmp_path, client):
    out = tmp_path / "out"
    lf.batch([folder / "three.fits"], out, client=client, progress=False)
    with pytest.raises(FileExistsError):
        lf.batch([folder / "three.fits"], out, client=client, progress=False)
    again = lf.batch([folder], out, client=client, progress=False, resume=True)
    assert again.n_reused == 3 and again.n_run == 3
    s = pd.read_parquet(out / "summary.parquet")
    assert len(s) == 6 and s["key"].is_unique
    # changed options are a different result: nothing reused
    other = lf.batch([folder / "three.fits"], out, client=client, progress=False, resume=True,
                     snr=6.0)
    assert other.n_reused == 0


# (a client closing its connection to a scheduler of this process may leave a socket to the
# garbage collector: the library's, not a fault of the batch)
@pytest.mark.filterwarnings("ignore::ResourceWarning",
                            "ignore::pytest.PytestUnraisableExceptionWarning")
def test_scheduler_address(folder, tmp_path):
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=":0") as cluster:
        outcome = lf.batch([folder / "three.fits"], tmp_path / "o", progress=False,
                           scheduler=cluster.scheduler_address)
    assert sum(outcome.counts.values()) == 3 and "failed" not in outcome.counts


def test_list_file_and_glob(folder, tmp_path, client):
    listing = tmp_path / "list.txt"
    listing.write_text(f"# spectra\n{folder / 'three.fits'}\nsample.fits\n")
    shutil.copy(folder / "sample.fits", tmp_path / "sample.fits")
    outcome = lf.batch([f"@{listing}", str(folder / "thr*.fits")], tmp_path / "o", client=client,
                       progress=False)
    assert outcome.n_spectra == 4            # three.fits once, though named twice


def test_cli_bad_arguments_exit_2(tmp_path, capsys):
    assert main(["batch", str(tmp_path / "nothing*.fits"), "-o", str(tmp_path / "o")]) == 2
    assert "matches no file" in capsys.readouterr().err
    assert main(["batch", str(tmp_path), "-o", str(tmp_path / "o"), "--workers", "0"]) == 2
    assert main(["batch", str(tmp_path), "-o", str(tmp_path / "o"), "--zmin", "2",
                 "--zmax", "1"]) == 2


def test_sigterm_keeps_finished_results_and_resume_completes(tmp_path, client):
    src = _galaxies(tmp_path / "many.fits", np.linspace(0.02, 0.2, 24), seed=3)
    out = tmp_path / "out"
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    proc = subprocess.Popen([sys.executable, "-m", "linefinder", "batch", str(src), "-o", str(out),
                             "--workers", "1", "--quiet"], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if list((out / "summary.parquet").glob("part-*.parquet")):
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the batch ended before it could be interrupted"
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err
    assert "--resume" in err.strip().splitlines()[-1]
    assert not list(out.rglob(".tmp-*"))
    before = pd.read_parquet(out / "summary.parquet")
    assert 0 < len(before) < 24 and before["key"].is_unique
    again = lf.batch([src], out, client=client, progress=False, resume=True)
    assert again.n_reused == len(before) and again.n_run == 24 - len(before)
    after = pd.read_parquet(out / "summary.parquet")
    assert len(after) == 24 and after["key"].is_unique
