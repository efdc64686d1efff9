"""Feature finding: speed, memory, completeness, false detections, centre accuracy.

Run:  python benchmarks/bench_features.py [--quick]

Invented data only (Gaussian lines on a continuum with white noise).  Prints
the measured figures next to the targets; asserts nothing.

Definitions
* line S/N: matched-filter S/N of a Gaussian of peak A and width s pixels on
  white noise sigma, A / sigma * sqrt(sqrt(pi) s) (the detection statistic).
* detected: a reported feature of the right kind within one FWHM of the line.
* Cramér-Rao bound of the centre: sigma / A * sqrt(2 s / sqrt(pi)) pixels.
"""

import argparse
import os
import tempfile
import time
import tracemalloc

import numpy as np
from astropy import units as u


def _lines_spectrum(rng, n_pix, n_lines, R, snr_range=(5, 100), absorption_fraction=0.3,
                    min_sep_fwhm=4.0):
    """A log-linear spectrum with isolated Gaussian lines of known S/N (invented)."""
    from linefinder.features.profiles import GAUSS_FWHM
    from linefinder.spectral.spectrum import SpectrumData

    dlog = 1 / (2.5 * R)
    lam = 4000.0 * np.exp(dlog * np.arange(n_pix))
    s_px = 2.5 / GAUSS_FWHM
    flux = np.full(n_pix, 50.0)
    truth = []
    sep = min_sep_fwhm * 2.5
    pos = np.sort(rng.uniform(20, n_pix - 20, n_lines))
    keep = np.concatenate([[True], np.diff(pos) > sep])
    pix = np.arange(n_pix)
    for p in pos[keep]:
        snr = float(np.exp(rng.uniform(np.log(snr_range[0]), np.log(snr_range[1]))))
        amp = snr / np.sqrt(np.sqrt(np.pi) * s_px)
        sign = -1.0 if rng.uniform() < absorption_fraction else 1.0
        lo, hi = int(p - 8 * s_px), int(p + 8 * s_px) + 2
        flux[lo:hi] += sign * amp * np.exp(-0.5 * ((pix[lo:hi] - p) / s_px) ** 2)
        truth.append({"px": float(p), "snr": snr, "kind": "emission" if sign > 0 else "absorption",
                      "crb_px": float(np.sqrt(2 * s_px / np.sqrt(np.pi)) / amp)})
    flux += rng.normal(0, 1.0, n_pix)
    spec = SpectrumData(lam * u.AA, flux * u.adu, np.ones(n_pix) * u.adu,
                        meta={"source": "bench", "medium": "vacuum", "resolution": R})
    return spec, truth, lam


def speed(rng):
    from astropy.io import fits

    from linefinder.features.detect import find_features
    from linefinder.io.read import read_input

    spec, truth, lam = _lines_spectrum(rng, 4000, 30, 3000.0)
    folder = tempfile.mkdtemp(prefix="linefinder-bench-")
    path = os.path.join(folder, "s4000.fits")
    hdr = fits.Header()
    hdr["CTYPE1"], hdr["CUNIT1"], hdr["CRPIX1"] = "WAVE-LOG", "Angstrom", 1.0
    hdr["CRVAL1"], hdr["CDELT1"] = lam[0], lam[0] * np.log(lam[1] / lam[0])
    hdr["SPEC_RES"] = 3000.0
    fits.HDUList([fits.PrimaryHDU(spec.flux.value.astype(np.float32), header=hdr),
                  fits.ImageHDU(np.ones(len(lam), np.float32), name="ERR")]).writeto(path)

    def job():
        return find_features(read_input(path))

    job()
    times = []
    for _ in range(5):
        t0 = time.perf_counter()
        res = job()
        times.append(time.perf_counter() - t0)
    t0 = time.perf_counter()
    read_input(path)
    t_read = time.perf_counter() - t0
    print(f"4000 pixels, {len(truth)} lines injected, {len(res.features)} found: read+detect+measure "
          f"best {min(times) * 1e3:.0f} ms, median {np.median(times) * 1e3:.0f} ms (target <= 50 ms); "
          f"reading alone {t_read * 1e3:.1f} ms")


def big(rng, n_pix):
    from linefinder.features.detect import find_features

    spec, truth, lam = _lines_spectrum(rng, n_pix, n_pix // 500, 40000.0)
    data_bytes = spec.axis.nbytes + spec.flux.nbytes + spec.uncertainty.nbytes
    # time and memory in separate runs: tracemalloc's bookkeeping slows every allocation
    t0 = time.perf_counter()
    res = find_features(spec)
    dt = time.perf_counter() - t0
    tracemalloc.start()
    find_features(spec)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"{n_pix:.0e} pixels (merged echelle-like, R = 40 000, {len(truth)} lines): {dt:.1f} s "
          f"(target <= 5 s for 1e6); peak memory {peak / 2 ** 20:.0f} MiB = {peak / data_bytes:.1f}x "
          f"the data (target <= 20x); {len(res.features)} features")


def accuracy(rng, n_spectra):
    from linefinder.features.detect import find_features

    rows = []
    pulls = []
    for k in range(n_spectra):
        R = float(np.exp(rng.uniform(np.log(500), np.log(50000))))
        spec, truth, lam = _lines_spectrum(rng, 3000, 25, R, snr_range=(3, 100))
        feats = find_features(spec).features
        lnl = np.log(feats["center"].to_value(u.AA)) if len(feats) else np.zeros(0)
        px = (lnl - np.log(lam[0])) / np.log(lam[1] / lam[0])
        err_px = feats["center_err"].to_value(u.AA) / feats["center"].to_value(u.AA) \
            / np.log(lam[1] / lam[0]) if len(feats) else np.zeros(0)
        for t in truth:
            d = np.abs(px - t["px"]) if len(px) else np.array([np.inf])
            j = int(np.argmin(d))
            hit = d[j] < 2.5 and str(feats["kind"][j]) == t["kind"]
            rows.append((t["snr"], hit))
            if hit and t["snr"] >= 10:
                pulls.append((abs(px[j] - t["px"]) / t["crb_px"], (px[j] - t["px"]) / err_px[j]))
    snr = np.array([r[0] for r in rows])
    hit = np.array([r[1] for r in rows])
    sel = snr >= 6
    print(f"completeness, lines with S/N >= 6: {hit[sel].sum()}/{sel.sum()} = "
          f"{100 * hit[sel].mean():.1f} % (target >= 95 %); S/N 5-6: {100 * hit[(snr >= 5) & ~sel].mean():.0f} %; "
          f"S/N 3-5: {100 * hit[snr < 5].mean():.0f} %")
    p = np.array(pulls)
    # |error| of a normal variable has median 0.674 sigma: compare like with like
    print(f"centre error (S/N >= 10, {len(p)} lines): median |error| / (0.674 x CRB) = "
          f"{np.median(p[:, 0]) / 0.674:.2f} (target <= 1.2); scatter of error / reported sigma = "
          f"{1.4826 * np.median(np.abs(p[:, 1] - np.median(p[:, 1]))):.2f} (ideal 1)")


def noise(rng, total_pix):
    from linefinder.features.detect import find_features
    from linefinder.spectral.spectrum import SpectrumData

    n_det = 0
    done = 0
    while done < total_pix:
        n = 20000
        R = float(np.exp(rng.uniform(np.log(500), np.log(50000))))
        lam = 4000.0 * np.exp(np.arange(n) / (2.5 * R))
        spec = SpectrumData(lam * u.AA, (50 + rng.normal(0, 1, n)) * u.adu, np.ones(n) * u.adu,
                            meta={"source": "noise", "resolution": R})
        n_det += len(find_features(spec).features)
        done += n
    print(f"pure noise: {n_det} detections in {done:.0e} pixels = {n_det / done * 1e5:.2f} per 1e5 "
          f"pixels at the default 5-sigma threshold (target <= 1)")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller suite and a 2e5-pixel spectrum")
    a = ap.parse_args()
    rng = np.random.default_rng(11)
    speed(rng)
    big(rng, 200_000 if a.quick else 1_000_000)
    accuracy(rng, 20 if a.quick else 80)
    noise(rng, 200_000 if a.quick else 1_000_000)


if __name__ == "__main__":
    main()
