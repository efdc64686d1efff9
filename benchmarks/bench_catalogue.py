"""Catalogue build speed: cold, from the disk cache, and against reading a CSV.

Run:  python benchmarks/bench_catalogue.py
Prints the measured figures and the ratios against the targets; nothing is
asserted, nothing is hard-coded.
"""

import os
import statistics
import tempfile
import time


def _best(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times), statistics.median(times)


def main():
    tmp = tempfile.mkdtemp(prefix="linefinder-bench-")
    os.environ["LINEFINDER_CACHE_DIR"] = tmp
    t0 = time.perf_counter()
    import astropy.units as u
    import pandas as pd

    import linefinder.spectral.medium as medium
    from linefinder import build_catalogue

    medium.refractive_index([500.0] * u.nm)   # pulls in specutils once
    print(f"import (linefinder + specutils + pandas): {time.perf_counter() - t0:.3f} s")

    from linefinder.physics.memo import clear_all

    species = ["H", "D", "T", "He II"]
    args = (species, (1, 10), (2, 1000))

    def cold(**kw):
        clear_all()   # no in-process reuse either: truly cold
        return build_catalogue(*args, cache=False, **kw)

    t0 = time.perf_counter()
    table = cold()
    first = time.perf_counter() - t0
    cold_best, cold_med = _best(cold, repeat=3)
    print(f"lines: {len(table)} multiplets with A-values (n_lower <= 10, n_upper <= 1000, {species})")
    print(f"cold build (no cache), first call: {first:.3f} s; best of 3: {cold_best:.3f} s "
          f"(target < 1 s: {'met' if cold_best < 1 else 'NOT met'})")

    build_catalogue(*args)  # fill the cache
    cached_best, cached_med = _best(lambda: build_catalogue(*args))
    print(f"from disk cache: best {cached_best * 1e3:.1f} ms, median {cached_med * 1e3:.1f} ms "
          f"(target < 50 ms: {'met' if cached_best < 0.05 else 'NOT met'})")

    pos_best, _ = _best(lambda: cold(a_values=False))   # best of 5, as the CSV read
    csv_path = os.path.join(tmp, "lines.csv")
    from linefinder.cli.catalogue import flatten_lines

    flatten_lines(table, u.nm).to_pandas().to_csv(csv_path, index=False)
    csv_best, _ = _best(lambda: pd.read_csv(csv_path))
    ratio = pos_best / csv_best
    print(f"positions only (a_values=False, cold): {pos_best * 1e3:.1f} ms; pandas read_csv of the same "
          f"lines: {csv_best * 1e3:.1f} ms; ratio {ratio:.2f} (target <= 3: "
          f"{'met' if ratio <= 3 else 'NOT met'})")


if __name__ == "__main__":
    main()
