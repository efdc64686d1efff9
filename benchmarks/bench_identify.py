"""Accuracy of identify/redshift on a synthetic suite, and its speed.

Run:  python benchmarks/bench_identify.py [--n 600] [--noise 100] [--jobs 2] [--seed 1]
      python benchmarks/bench_identify.py --speed-only

identify runs with its defaults (companion lines on) plus the sky mask
(--mask-sky), as for ground-based data.  The suite (linefinder.simulate.suite, invented data): z uniform in 0-7, peak S/N
log-uniform 3-100, R log-uniform 500-50 000, 70 % emission / 30 % absorption,
each spectrum covering a factor 2.8 in wavelength (3500-9800 Å say: a survey
spectrograph or a merged echelle; --max-pixels 6000 narrows high-R windows),
non-hydrogen lines, sky residuals and cosmic-ray spikes, emitters' continua
blueward of Lyα at the mean Lyα-forest transmission; plus pure-noise spectra.  Prints what it measured against the targets; asserts nothing.

Definitions
* correct z: |z - z_true| < 5e-4 (1 + z_true).
* eligible: >= 3 hydrogen lines with matched-filter S/N >= 5.
* z scatter vs CRB: robust sigma (1.4826 MAD) of (z - z_true) / ((1 + z) sigma_CRB)
  over correct eligible answers, sigma_CRB the Cramér-Rao bound of ln(1+z) for
  the spectrum (`synthetic._crb_shift`: common shift, free amplitudes and
  widths, overlapping lines included); also printed against the isolated-line
  bounds (S/N >= 3) combined in inverse variance, which ignore overlaps.
* identification: a true line (S/N >= 6, resolved: no other hydrogen line of
  the spectrum within 1.5 FWHM as seen, i.e. of the depth profile for saturated
  absorption, so that it can be measured on its own; at least one FWHM inside the
  spectrum's ends, so that its profile is in the data) is
  recovered when a feature within
  max(3 sigma, FWHM/2) of it carries its label; a hydrogenic label on a feature
  is correct when a true line with that label lies there.
"""

import argparse
import json
import multiprocessing as mp
import time
from collections import Counter

import numpy as np


def _run_one(args):
    seed, index, noise, max_pixels, detector = args
    from linefinder.identification.pipeline import identify
    from linefinder.simulate.suite import (
        make_noise_spectrum,
        make_spectrum,
        random_parameters,
    )

    rng = np.random.default_rng([seed, index, int(noise)])
    if noise:
        p = {"resolution": float(np.exp(rng.uniform(np.log(500), np.log(50000))))}
        spec, truth = make_noise_spectrum(rng, **p, max_pixels=max_pixels)
    else:
        p = random_parameters(rng)
        spec, truth = make_spectrum(rng, **p, max_pixels=max_pixels)
    t0 = time.perf_counter()
    try:
        # ground-based spectra: sky residuals masked
        res = identify(spec, mask_sky=True, detector=detector)
    except Exception as exc:  # a crash is a result too: count it, keep going
        return {"truth": truth, "error": f"{type(exc).__name__}: {exc}", "seconds": 0.0}
    dt = time.perf_counter() - t0
    f = res.features
    feats = [{"center": float(f["center"][i].value), "err": float(f["center_err"][i].value),
              "fwhm": float(f["fwhm"][i].value), "label": str(f["label"][i]),
              "species": str(f["species"][i]), "snr": float(f["snr"][i])} for i in range(len(f))]
    sols = res.solutions
    margin = (sols[0].score - max((x.score for x in sols[1:]), default=0.0)) if sols else None
    return {"index": index, "truth": truth, "status": res.status, "z": res.z, "z_err": res.z_err,
            "score": sols[0].score if sols else None, "margin": margin,
            "n_lines": sols[0].n_lines if sols else 0,
            "z_best": sols[0].z if sols else None,
            "features": feats, "seconds": dt, "n_pixels": len(spec),
            "readings": [r["z"] for r in res.single_line_readings],
            "lyman_break": res.lyman_break is not None}


def _near(feat, obs):
    tol = max(3 * feat["err"] if np.isfinite(feat["err"]) else 0.0,
              0.5 * feat["fwhm"] if np.isfinite(feat["fwhm"]) else 0.0, 1e-6 * obs)
    return abs(feat["center"] - obs) < tol


def evaluate(results):
    lines = []
    errors = [r for r in results if "error" in r]
    good = [r for r in results if "error" not in r]
    signal = [r for r in good if r["truth"]["kind"] != "noise"]
    noise = [r for r in good if r["truth"]["kind"] == "noise"]

    def correct(r):
        z0 = r["truth"]["z"]
        return r["z"] is not None and abs(r["z"] - z0) < 5e-4 * (1 + z0)

    eligible = [r for r in signal if sum(l["snr"] >= 5 for l in r["truth"]["lines"]) >= 3]
    ok_elig = [r for r in eligible if correct(r)]
    secure = [r for r in signal if r["status"] == "secure"]
    secure_ok = [r for r in secure if correct(r)]
    noise_secure = [r for r in noise if r["status"] == "secure"]
    lines.append(f"spectra: {len(signal)} with lines, {len(noise)} pure noise, {len(errors)} crashed")
    lines.append(f"correct z on eligible spectra (>= 3 H lines at S/N >= 5): {len(ok_elig)}/{len(eligible)}"
                 f" = {100 * len(ok_elig) / max(len(eligible), 1):.1f} % (target >= 98 %)")
    lines.append(f"'secure' answers correct: {len(secure_ok)}/{len(secure)} = "
                 f"{100 * len(secure_ok) / max(len(secure), 1):.1f} % (target >= 99 %)")
    lines.append(f"'secure' on pure noise: {len(noise_secure)}/{len(noise)} (target 0)")
    status_counts = Counter((r["status"], "correct" if correct(r) else "wrong") for r in signal)
    # single-line readings (status none): is the true z among them, and how many are there
    read = [r for r in signal if r.get("readings")]
    hit = [r for r in read if any(abs(zz - r["truth"]["z"]) < 5e-4 * (1 + r["truth"]["z"])
                                  for zz in r["readings"])]
    lines.append(f"single-line readings (status none): {len(read)} spectra, true z among them in "
                 f"{len(hit)} ({100 * len(hit) / max(len(read), 1):.0f} %), "
                 f"{np.mean([len(r['readings']) for r in read]) if read else 0:.1f} readings each; "
                 f"on pure noise: {sum(bool(r.get('readings')) for r in noise)}/{len(noise)} spectra")
    # lone lines named Lyα by the continuum break at their foot
    brk = [r for r in good if r.get("lyman_break")]
    lines.append(f"named Lyα by the continuum break: {len(brk)} spectra, z right in "
                 f"{sum(correct(r) for r in brk if r['truth']['kind'] != 'noise')}; on pure noise: "
                 f"{sum(r['truth']['kind'] == 'noise' for r in brk)}/{len(noise)}")
    lines.append("status x outcome (all spectra with lines): " +
                 ", ".join(f"{a}/{b}: {n}" for (a, b), n in sorted(status_counts.items())))
    # z scatter against the Cramer-Rao bound: of the whole spectrum (overlaps included, the
    # target), and the inverse-variance sum of the isolated-line bounds (optimistic where
    # lines overlap), for comparison
    pulls, pulls_iso = [], []
    for r in ok_elig:
        crb = [l["crb"] for l in r["truth"]["lines"] if l["snr"] >= 3]
        if not crb:
            continue
        z0 = r["truth"]["z"]
        dz = (r["z"] - z0) / (1 + z0)
        pulls_iso.append(dz / (1 / np.sqrt(np.sum(1 / np.square(crb)))))
        if np.isfinite(r["truth"].get("crb_shift", np.nan)):
            pulls.append(dz / r["truth"]["crb_shift"])
    if pulls:
        pulls, pulls_iso = np.asarray(pulls), np.asarray(pulls_iso)
        rs = lambda v: 1.4826 * np.median(np.abs(v - np.median(v)))  # noqa: E731
        lines.append(f"z scatter / Cramér-Rao bound of the spectrum: {rs(pulls):.2f} over {len(pulls)} "
                     f"spectra (target <= 1.5); median offset {np.median(pulls):+.2f} CRB; "
                     f"against the isolated-line bounds: {rs(pulls_iso):.2f}")
    # identifications of lines with S/N >= 6
    conf = Counter()
    n_true = n_rec = n_lab = n_lab_ok = 0
    sec_lab = sec_ok = 0
    zok_true = zok_rec = 0
    el_true = el_rec = 0
    alone_true = alone_rec = 0
    for r in signal:
        z_right = correct(r)
        is_eligible = sum(l["snr"] >= 5 for l in r["truth"]["lines"]) >= 3
        # a lone line: nothing else in its spectrum, hydrogenic or not, at S/N >= 5
        alone = sum(l["snr"] >= 5 for l in r["truth"]["lines"]) + \
            sum(o["snr"] >= 5 for o in r["truth"]["other"]) <= 1
        feats = r["features"]
        truth_lines = r["truth"]["lines"]
        obs = np.sort([l["observed"] for l in truth_lines])
        for l in truth_lines:
            if l["snr"] < 6:
                continue
            others = obs[obs != l["observed"]]
            width = l.get("fwhm_obs_ln", l["fwhm_ln"])     # saturated absorption is broader
            if len(others) and np.min(np.abs(np.log(others / l["observed"]))) < 1.5 * width:
                conf["H line unresolved from a neighbour (not counted)"] += 1
                continue
            ends = r["truth"].get("window")
            if ends and min(np.log(l["observed"] / ends[0]), np.log(ends[1] / l["observed"])) < width:
                conf["H line within one FWHM of the spectrum's end (not counted)"] += 1
                continue
            n_true += 1
            zok_true += z_right
            el_true += is_eligible
            alone_true += alone
            near = [f for f in feats if _near(f, l["observed"])]
            if any(f["label"] == l["label"] for f in near):
                n_rec += 1
                zok_rec += z_right
                el_rec += is_eligible
                alone_rec += alone
                conf["H line -> right label"] += 1
            elif not near:
                conf["H line -> not detected"] += 1
            elif any(f["label"] for f in near):
                conf["H line -> wrong label"] += 1
            else:
                conf["H line -> unidentified"] += 1
        for f in feats:
            if not f["label"] or f["snr"] < 6 * 0.4:
                continue
            match = [l for l in truth_lines if _near(f, l["observed"])]
            if not match and f["snr"] < 3:
                continue
            n_lab += 1
            sec_lab += r["status"] == "secure"
            if any(l["label"] == f["label"] for l in match):
                n_lab_ok += 1
                sec_ok += r["status"] == "secure"
            elif match:
                conf["labelled: wrong H line"] += 1
            elif any(_near(f, o["observed"]) for o in r["truth"]["other"]):
                conf["labelled: a non-H line"] += 1
            elif any(_near(f, s["observed"]) for s in r["truth"]["sky"]):
                conf["labelled: a sky residual"] += 1
            else:
                conf["labelled: noise or spike"] += 1
    lines.append(f"identification recall (resolved H lines S/N >= 6): {n_rec}/{n_true} = "
                 f"{100 * n_rec / max(n_true, 1):.1f} % (target >= 95 %)")
    lines.append(f"  of which in eligible spectra (>= 3 H lines at S/N >= 5, as for the z target): "
                 f"{el_rec}/{el_true} = {100 * el_rec / max(el_true, 1):.1f} %")
    lines.append(f"  lone lines (nothing else at S/N >= 5 in their spectrum): {alone_rec}/{alone_true}; "
                 f"recall over the others: {n_rec - alone_rec}/{n_true - alone_true} = "
                 f"{100 * (n_rec - alone_rec) / max(n_true - alone_true, 1):.1f} %")
    lines.append(f"  of which in spectra whose z is right: {zok_rec}/{zok_true} = "
                 f"{100 * zok_rec / max(zok_true, 1):.1f} % (without a redshift no line is named)")
    lines.append(f"identification precision (hydrogenic labels): {n_lab_ok}/{n_lab} = "
                 f"{100 * n_lab_ok / max(n_lab, 1):.1f} % (target >= 99 %)")
    lines.append(f"  of which in spectra with a 'secure' z: {sec_ok}/{sec_lab} = "
                 f"{100 * sec_ok / max(sec_lab, 1):.1f} %")
    lines.append("confusion summary: " + ", ".join(f"{k}: {v}" for k, v in sorted(conf.items())))
    for r in errors[:5]:
        lines.append(f"  crash: {r['error']}")
    return lines


def speed():
    """identify on a 4000-pixel spectrum; matching 1e5 features against 1e6 lines."""
    from linefinder.identification.matching import assign
    from linefinder.identification.pipeline import identify
    from linefinder.simulate.suite import make_spectrum

    rng = np.random.default_rng(7)
    # R chosen so that the window holds ~4000 pixels
    spec, truth = make_spectrum(rng, z=0.35, snr=60, resolution=2000, kind="emission",
                                velocity_fwhm_kms=80)
    spec.axis, spec.flux, spec.uncertainty = spec.axis[:4000], spec.flux[:4000], \
        spec.uncertainty[:4000]
    spec.mask = spec.mask[:4000]
    identify(spec)   # warm-up: imports, catalogue cache
    times = []
    for _ in range(5):
        t0 = time.perf_counter()
        res = identify(spec)
        times.append(time.perf_counter() - t0)
    from linefinder.features.detect import find_features

    ftimes = []
    for _ in range(5):
        t0 = time.perf_counter()
        find_features(spec)
        ftimes.append(time.perf_counter() - t0)
    n_feat = len(res.features)
    print(f"identify, {len(spec)} pixels, {n_feat} features: best {min(times) * 1e3:.0f} ms, median "
          f"{np.median(times) * 1e3:.0f} ms (target <= 100 ms); of which feature finding best "
          f"{min(ftimes) * 1e3:.0f} ms")
    nl, nf = 10 ** 6, 10 ** 5
    x = np.sort(rng.uniform(np.log(1e-10), np.log(1e-2), nl))   # 1e6 lines over 8 decades
    pick = rng.choice(nl, nf, replace=False)
    sy = np.full(nf, 2e-6)
    y = x[pick] + rng.normal(0, 2e-6, nf)
    y[::10] += 0.3          # one feature in ten explained by nothing
    strength = rng.uniform(0.01, 1.0, nl)
    group = np.zeros(nl, dtype=int)
    t0 = time.perf_counter()
    out = assign(y, sy, np.ones(nf), np.zeros(nf, bool), x, strength, group, 0.0)
    dt = time.perf_counter() - t0
    # baseline in the same run: one binary search of every feature (the least any method does)
    t1 = time.perf_counter()
    np.searchsorted(x, y)
    base = time.perf_counter() - t1
    right = np.mean(out.best[np.arange(nf) % 10 != 0] == pick[np.arange(nf) % 10 != 0])
    print(f"assign 1e5 features x 1e6 lines: {dt:.2f} s (target <= 1 s); a bare searchsorted of the "
          f"same features: {base * 1e3:.1f} ms (ratio {dt / base:.0f}); right line for "
          f"{100 * right:.1f} % of the matchable features")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=600, help="spectra with lines")
    ap.add_argument("--noise", type=int, default=100, help="pure-noise spectra")
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--max-pixels", type=int, default=150_000,
                    help="pixels per spectrum at most: the default lets every spectrum cover a "
                         "factor 2.8 in wavelength; 6000 gives the narrow windows of the tests")
    ap.add_argument("--speed-only", action="store_true")
    ap.add_argument("--detector", default="scales,profiles",
                    help="feature detectors to compare on the same spectra, comma-separated")
    ap.add_argument("--dump", help="write the per-spectrum results to this JSON file")
    a = ap.parse_args()
    speed()
    if a.speed_only:
        return
    for detector in a.detector.split(","):
        print(f"\n== detector: {detector}")
        _suite(a, detector)


def _suite(a, detector):
    tasks = [(a.seed, i, False, a.max_pixels, detector) for i in range(a.n)] + \
        [(a.seed, i, True, a.max_pixels, detector) for i in range(a.noise)]
    t0 = time.perf_counter()
    with mp.Pool(a.jobs) as pool:
        results = []
        for k, r in enumerate(pool.imap_unordered(_run_one, tasks, chunksize=4), 1):
            results.append(r)
            if k % 50 == 0:
                print(f"  {k}/{len(tasks)} spectra, {time.perf_counter() - t0:.0f} s", flush=True)
    secs = [r["seconds"] for r in results if "error" not in r]
    print(f"suite: {len(results)} spectra in {time.perf_counter() - t0:.0f} s wall, identify median "
          f"{np.median(secs):.2f} s, max {np.max(secs):.1f} s per spectrum; pixels per spectrum "
          f"median {np.median([r['truth']['n_pixels'] for r in results]):.0f}, max "
          f"{np.max([r['truth']['n_pixels'] for r in results])}")
    for line in evaluate(results):
        print(line)
    if a.dump:
        with open(a.dump, "w") as fh:
            json.dump(results, fh, default=float)


if __name__ == "__main__":
    main()
