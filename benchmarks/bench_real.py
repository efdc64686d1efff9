"""identify on the observed spectra of tests/data/real/, one row per file, beside the synthetic figure.

Run:  python benchmarks/bench_real.py [--timeout 60]

Prints for every file: loaded?, seconds, z (or velocity) found against the expected value
from tests/data/real/README.md (origin and source of each value there), status, hydrogen
lines named against those expected, hydrogen labels not expected, unidentified features,
and the robust width of (data - continuum) / noise over line-free pixels (about 1 when the
continuum follows the data and the noise is right).
Then the time of identify on a synthetic 4000-pixel spectrum in the same run.  Every
feature detector named in --detector gets its own table, in one run.  Times are after a
warm-up identification of a synthetic spectrum in the same process.  Nothing is
asserted; what was measured is printed.
"""

import argparse
import multiprocessing as mp
import time
from pathlib import Path

import numpy as np

C_KMS = 299792.458
REAL = Path(__file__).resolve().parent.parent / "tests" / "data" / "real"

# file -> (options, expected z or None for "no hydrogen", hydrogen lines expected); values and
# their sources are listed in tests/data/real/README.md ([file], [catalogue], [memory], [by eye])
EXPECTED = {
    "sdss_ngc3073.fits": ({}, 0.003763, ["Hβ", "Hγ", "Hδ", "Hα"]),
    "desi_coadd_sv3_dark_26065.fits": ({"index": 4}, 0.981, ["Hβ"]),
    "gd71_white_dwarf.csv": ({}, 0.0, ["Hα", "Hβ", "Hγ", "Hδ", "Hε", "H8", "H9"]),
    "hd93521_o_star.csv": ({}, 0.0, ["Hβ", "Hγ", "Hδ", "Hε", "H8", "H9"]),
    "quasar_composite.dat": ({"input_unit": "angstrom"}, 0.0, ["Lyα", "Hβ", "Hγ"]),
    "sn2014j_type_ia_nir.csv": ({}, None, []),
    "hi21cm_agc100051.fits": ({}, None, []),
    "ngc4550_ifu_hbeta.fits": ({}, 460.0 / C_KMS, ["Hβ"]),
}
TOL_KMS = 150.0


def _run(name, detector, queue):
    import linefinder as lf

    opts, _, _ = EXPECTED[name]
    _warm_up(lf, detector)
    t0 = time.perf_counter()
    try:
        res = lf.identify(REAL / name, **opts, detector=detector)
    except Exception as exc:  # a row per file whatever happens
        queue.put({"error": str(exc).splitlines()[0][:70], "seconds": time.perf_counter() - t0})
        return
    labels = [str(x) for x in res.features["label"] if str(x)] if len(res.features) else []
    queue_extra = {"resid_width": _residual_width(res.feature_result)}
    queue.put({**queue_extra, "seconds": time.perf_counter() - t0, "z": res.z, "status": res.status,
               "labels": labels, "n_unidentified": int(sum(1 for x in res.features["label"]
                                                           if not str(x))) if len(res.features) else 0})


def _residual_width(fr):
    """Robust width (1.4826 MAD) of (data - continuum) / noise over line-free pixels: those
    beyond 2 FWHM of every feature found.  Noise-like residuals give about 1."""
    if fr is None:
        return float("nan")
    x = fr.spectrum.axis.value
    y = fr.spectrum.flux.value
    free = ~np.asarray(fr.spectrum.mask, bool)
    for c, w in zip(fr.features["center"].value, fr.features["fwhm"].value):
        free &= np.abs(x - c) > 2 * abs(w)
    r = ((y - fr.continuum) / fr.noise)[free]
    r = r[np.isfinite(r)]
    return float(1.4826 * np.median(np.abs(r - np.median(r)))) if len(r) else float("nan")


def _one(name, detector, timeout):
    queue = mp.Queue()
    proc = mp.Process(target=_run, args=(name, detector, queue))
    proc.start()
    proc.join(timeout)
    if proc.is_alive():
        proc.kill()
        return {"error": f"no answer in {timeout:.0f} s", "seconds": timeout}
    return queue.get() if not queue.empty() else {"error": "crashed", "seconds": float("nan")}


def _synthetic(seed=7):
    from linefinder.simulate.suite import make_spectrum

    spec, _ = make_spectrum(np.random.default_rng(seed), z=1.3, resolution=2000, snr=30,
                            kind="emission", max_pixels=4000)
    return spec


def _warm_up(lf, detector):
    """Imports, caches and the catalogue of the optical regime, on a synthetic spectrum."""
    lf.identify(_synthetic(), detector=detector)


def _synthetic_ms(detector):
    import linefinder as lf

    spec = _synthetic()
    lf.identify(spec, detector=detector)
    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        lf.identify(spec, detector=detector)
        best = min(best, time.perf_counter() - t0)
    return best * 1e3


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--timeout", type=float, default=60.0, help="seconds per file (default 60)")
    ap.add_argument("--detector", default="scales,profiles",
                    help="feature detectors to compare, comma-separated (default scales,profiles)")
    args = ap.parse_args()
    for detector in args.detector.split(","):
        print(f"\n== detector: {detector}")
        _table(detector, args.timeout)


def _table(detector, timeout):
    print(f"{'file':32s} {'s':>6s} {'z found':>10s} {'expected':>9s} {'Δv km/s':>8s} {'status':9s} "
          f"{'H named/exp':>11s} {'extra H':>7s} {'unid':>4s} {'resid':>5s}  verdict")
    right = 0
    for name, (_, z_exp, lines_exp) in EXPECTED.items():
        r = _one(name, detector, timeout)
        if "error" in r:
            print(f"{name:32s} {r['seconds']:6.1f}  not analysed: {r['error']}")
            continue
        z = r["z"]
        found = [x for x in lines_exp if x in r["labels"]]
        extra = [x for x in r["labels"] if x not in lines_exp]
        if z_exp is None:
            dv = float("nan")
            ok = r["status"] != "secure" and not r["labels"]
        else:
            dv = (z - z_exp) / (1 + z_exp) * C_KMS if z is not None and np.isfinite(z) else float("nan")
            ok = abs(dv) <= TOL_KMS and len(found) == len(lines_exp)
        wrong_secure = r["status"] == "secure" and not ok
        right += ok
        zs = f"{z:10.5f}" if z is not None and np.isfinite(z) else f"{'-':>10s}"
        ze = f"{z_exp:9.5f}" if z_exp is not None else f"{'no H':>9s}"
        print(f"{name:32s} {r['seconds']:6.2f} {zs} {ze} {dv:8.0f} {r['status']:9s} "
              f"{len(found):>5d}/{len(lines_exp):<5d} {len(extra):7d} {r['n_unidentified']:4d} "
              f"{r['resid_width']:5.2f}  "
              f"{'right' if ok else 'WRONG SECURE' if wrong_secure else 'wrong'}")
    print(f"right: {right}/{len(EXPECTED)} (z within {TOL_KMS:.0f} km/s and every expected line named, "
          "or no hydrogen where none is expected)")
    print(f"synthetic 4000-pixel emission spectrum, same run: identify {_synthetic_ms(detector):.0f} ms best of 3")


if __name__ == "__main__":
    main()
