"""Batch throughput: `linefinder.batch` on a local Dask cluster of 1 and 2 workers against
identify in a plain loop, on the same spectra, measured in one run.

Run:  python benchmarks/bench_batch.py [--n 200] [--seed 7] [--workers 1,2]

Spectra: --n synthetic spectra of the identify suite (linefinder.simulate.suite, invented
data; at most 4000 pixels each) written as ECSV files, plus the observed spectra of
tests/data/real/ (every spectrum of each file).  Prints spectra per second, the scaling
efficiency from 1 to 2 workers (goal >= 0.85 on 2 cores), and the batch's overhead per
spectrum against the plain loop (goal <= 10 %).  Asserts nothing.
"""

import argparse
import shutil
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

REAL = Path(__file__).resolve().parent.parent / "tests" / "data" / "real"


def _write_suite(folder, n, seed):
    from astropy.table import QTable

    from linefinder.simulate.suite import make_spectrum, random_parameters

    rng = np.random.default_rng(seed)
    for i in range(n):
        spec, _ = make_spectrum(rng, **random_parameters(rng), max_pixels=4000)
        t = QTable([spec.axis, spec.flux, spec.uncertainty],
                   names=["wavelength", "flux", "uncertainty"])
        t.meta["resolution"] = spec.meta.get("resolution")
        t.write(folder / f"suite_{i:04d}.ecsv")
    for p in REAL.iterdir():
        if p.suffix in (".fits", ".csv", ".dat"):
            shutil.copy(p, folder / p.name)


def _loop(folder):
    """identify on every spectrum, one after another, in this process."""
    from linefinder.identification.pipeline import identify
    from linefinder.io.read import count_spectra, read_input
    from linefinder.parallel.inputs import expand_inputs

    n, t0 = 0, time.perf_counter()
    for p in expand_inputs([folder]):
        try:
            count = count_spectra(p)
        except ValueError:
            count = 1
        for i in range(count):
            n += 1
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    identify(read_input(p, index=i))
            except (ValueError, OSError):
                pass
    return n, time.perf_counter() - t0


def _batch(folder, out, workers):
    import linefinder as lf

    t0 = time.perf_counter()
    outcome = lf.batch([folder], out, workers=workers, progress=False)
    return outcome, time.perf_counter() - t0


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=200)
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--workers", default="1,2")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "spectra"
        folder.mkdir()
        _write_suite(folder, args.n, args.seed)
        _loop(folder)                                   # warm-up: imports, catalogue caches
        n, t_loop = _loop(folder)
        print(f"{n} spectra ({args.n} synthetic + the observed files)")
        print(f"plain loop, 1 process:   {t_loop:7.1f} s   {n / t_loop:6.2f} spectra/s")
        rates = {}
        for w in (int(x) for x in args.workers.split(",")):
            outcome, t = _batch(folder, Path(tmp) / f"out{w}", w)
            rates[w] = (n / t, t)
            print(f"batch, {w} worker(s):     {t:7.1f} s   {n / t:6.2f} spectra/s   "
                  f"({outcome.counts_line()})")
        if 1 in rates:
            overhead = (rates[1][1] - t_loop) / t_loop
            print(f"batch overhead per spectrum vs the loop (1 worker): {overhead:+.1%} "
                  f"(goal <= 10 %; includes starting the cluster)")
        if 1 in rates and 2 in rates:
            eff = rates[2][0] / (2 * rates[1][0])
            print(f"scaling efficiency 1 -> 2 workers: {eff:.2f} (goal >= 0.85)")


if __name__ == "__main__":
    main()
