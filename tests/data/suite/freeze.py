"""Freeze the synthetic suite spectra that tests examine one by one.

    python tests/data/suite/freeze.py

Each listed (seed, index) of the identify suite (`linefinder.simulate.suite`, invented
data, as benchmarks/bench_identify.py draws it) is written here once as a compressed
NumPy archive (axis, flux, uncertainty, mask, meta) and its truth as JSON, so that the tests
read a fixed spectrum and a change in the generator's draw order cannot swap the spectrum
under test.  Rerun only to add a case; the files are not rewritten unless --force is given.
"""

import json
import sys
from pathlib import Path

import numpy as np

from linefinder.simulate.suite import make_spectrum, random_parameters

HERE = Path(__file__).resolve().parent
CASES = [(1, 21), (1, 116), (1, 187), (2, 6), (2, 140), (2, 163), (2, 269), (2, 310), (3, 65),
         (3, 121), (3, 253), (4, 337)]


def freeze(seed, index, force=False):
    path = HERE / f"suite_s{seed}_i{index}.npz"
    if path.exists() and not force:
        return None
    gen = np.random.default_rng([seed, index, 0])
    spec, truth = make_spectrum(gen, **random_parameters(gen), max_pixels=150_000)
    np.savez_compressed(path, axis=spec.axis.value, flux=spec.flux.value,
                        uncertainty=spec.uncertainty.value, mask=spec.mask,
                        units=np.array([str(spec.axis.unit), str(spec.flux.unit)]),
                        meta=np.array(json.dumps(spec.meta, default=str)))
    path.with_suffix(".truth.json").write_text(json.dumps(truth, default=float))
    return path


if __name__ == "__main__":
    for case in CASES:
        out = freeze(*case, force="--force" in sys.argv)
        if out:
            print(f"wrote {out.name} ({out.stat().st_size / 1024:.0f} KiB)")
