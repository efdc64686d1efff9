"""Candidate features: matched filtering of the residual at several widths.

The residual (data minus continuum) is correlated with Gaussian kernels of
1, 2, 4 ... 64 instrument FWHM (SNR = sum(g w r) / sqrt(sum(g^2 w)),
w = 1/sigma^2); candidates are the prominent local extrema above the
threshold, a wider kernel replacing the narrower ones it overlaps only when
it is clearly stronger.  Single-pixel spikes (cosmic rays) are found here too.
"""

import bisect

import numpy as np
from scipy.ndimage import correlate1d, maximum_filter1d
from scipy.signal import find_peaks, oaconvolve

from .profiles import GAUSS_FWHM

SCALES = (1, 2, 4, 8, 16, 32, 64)


def _smooth(v, k):
    if len(k) > 64 and len(v) > 4 * len(k):
        # long kernels: overlap-add FFT convolution (the kernel is symmetric, so this is the
        # same zero-padded correlation, at a cost that does not grow with the kernel)
        return oaconvolve(v, k, mode="same")
    return correlate1d(v, k, mode="constant")


def _matched_snr(r, w, fwhm_px, den_cache=None):
    sig = fwhm_px / GAUSS_FWHM
    half = int(np.ceil(3 * sig))
    k = np.exp(-0.5 * (np.arange(-half, half + 1) / sig) ** 2)
    num = _smooth(w * r, k)
    # the denominator depends on the weights only: reused while they stay the same
    key = (id(w), half)
    den = den_cache.get(key) if den_cache is not None else None
    if den is None:
        den = _smooth(w, k ** 2)
        if len(k) > 64 and len(r) > 4 * len(k):
            den[den < 1e-9 * max(float(den.max()), 1e-300)] = 0.0   # FFT round-off where w = 0
        if den_cache is not None:
            den_cache[key] = den
    with np.errstate(invalid="ignore", divide="ignore"):
        snr = np.where(den > 0, num / np.sqrt(den), 0.0)
        amp = np.where(den > 0, num / den, 0.0)
    return snr, amp


def _find_peaks(s, height, prominence, distance):
    """`scipy.signal.find_peaks` on the stretches of s above height - prominence only.

    A peak whose saddle towards every higher peak lies below that floor passes
    the prominence test whatever the exact saddle, so pixels below the floor
    can be replaced by zeros and long runs of them shortened to
    `distance` + 1 pixels: the peaks found, their order and the distance rule
    are unchanged, and a long noise spectrum costs a fraction of the time.
    """
    floor = max(height - prominence, 0.0)
    above = s > floor
    if above.mean() > 0.3:
        return find_peaks(np.where(above, s, 0.0), height=height, prominence=prominence,
                          distance=distance)[0]
    sep = int(np.ceil(distance)) + 1
    keep = maximum_filter1d(above.view(np.uint8), size=2 * (sep // 2 + 1) + 1).astype(bool)
    idx = np.flatnonzero(keep)
    sub = np.where(above[idx], s[idx], 0.0)
    peaks = find_peaks(sub, height=height, prominence=prominence, distance=distance)[0]
    return idx[peaks]


def _narrow_snr(near):
    """SNR of the narrower candidates a wide one would replace: the strongest, and in
    quadrature with it each further one that stands clear of all those already counted
    (gap over twice the wider kernel of the two), strongest first.  Peaks on one
    blended profile are not independent evidence; resolved lines below a series limit
    are, even beside a merged clump of the highest members."""
    counted = []
    for d in sorted(near, key=lambda d: -d[2]):
        if all(abs(d[0] - e[0]) > 2 * max(d[1], e[1]) for e in counted):
            counted.append(d)
    return float(np.sqrt(sum(d[2] ** 2 for d in counted)))


def find_candidates(r, w, fwhm_px, threshold, kinds, n, den_cache=None):
    """Peaks of the matched-filter SNR at each kernel width, narrowest first.

    A peak at a wider kernel replaces the narrower ones it overlaps only when
    its SNR is 1.3 times theirs or more (a truly broad feature; narrow ones that
    stand clear of each other count together, in quadrature, so that a row of
    resolved lines below a series limit is not taken for one broad trough); otherwise
    neighbouring narrow lines keep their own identity (a Gaussian line up to
    about four kernel widths broad is still found at the narrow kernel, with
    >= 70 % of the optimal SNR, and the profile fit finds its real width).
    """
    accepted = []
    for scale in SCALES:
        f = fwhm_px * scale
        if f > n / 8 and scale > 1:
            break
        snr, amp = _matched_snr(r, w, f, den_cache)
        found = []
        for sign, kind in ((1, "emission"), (-1, "absorption")):
            if kind not in kinds:
                continue
            # prominence, not just height: a noise wiggle on the wing of a strong line is
            # high but not prominent; a real neighbour stands out of the saddle between them
            peaks = _find_peaks(sign * snr, threshold, max(3.0, 0.6 * threshold), max(1, f / 2))
            found.extend((int(p), f, abs(float(snr[p])), float(amp[p])) for p in peaks)
        found.sort(key=lambda c: -c[2])
        # accepted candidates kept sorted by pixel: the neighbours of a new one are found by
        # binary search within the widest possible reach (linear, not quadratic, in lines)
        pos = sorted((d[0], id(d), d) for d in accepted)
        widest = max((d[1] for d in accepted), default=0.0)
        for c in found:
            reach = 0.75 * max(c[1], widest)
            lo = bisect.bisect_left(pos, (c[0] - reach, -1))
            hi = bisect.bisect_right(pos, (c[0] + reach, float("inf")))
            near = [e[2] for e in pos[lo:hi] if abs(c[0] - e[2][0]) < 0.75 * max(c[1], e[2][1])]
            if not near:
                bisect.insort(pos, (c[0], id(c), c))
                widest = max(widest, c[1])
            elif all(np.sign(d[3]) == np.sign(c[3]) and d[1] < c[1] for d in near) and \
                    c[2] > 1.3 * _narrow_snr(near):
                gone = {id(d) for d in near}
                pos = [e for e in pos if e[1] not in gone]
                bisect.insort(pos, (c[0], id(c), c))
                widest = max(widest, c[1])
        accepted = [e[2] for e in pos]
    accepted.sort(key=lambda c: -c[2])
    return accepted


def inflated_weights(r, model, sig, good, w, feats):
    """Weights for detection on the residual after the model.

    Where the model leaves structure (a profile that is not Gaussian), the
    local RMS of the normalised residual exceeds 1 and weights drop by its
    square: a new feature must stand out of what the model already fails to
    explain, not just out of the photon noise.
    """
    z = np.where(good & np.isfinite(sig) & (sig > 0), (r - model) / np.where(sig > 0, sig, 1), 0.0)
    widths = [f["fwhm_px"] for f in feats] or [5.0]
    win = int(max(5, 4 * np.median(widths)))
    from scipy.ndimage import uniform_filter1d

    rms = np.sqrt(uniform_filter1d(z ** 2, size=win, mode="nearest"))
    return w / np.maximum(rms, 1.0) ** 2


def exclusion(feats, n, fallback, half_widths=2.5, use_reach=True):
    """Pixels to keep out of the continuum fit: +/- `half_widths` FWHM of every feature
    (or its reach, where that is wider and `use_reach`)."""
    exclude = np.zeros(n, dtype=bool)
    longest = 0
    for f in feats:
        fit = f.get("fit")
        width = f["fwhm_px"] if not (fit and np.isfinite(fit.get("fwhm", np.nan))) else \
            max(f["fwhm_px"], 1.0)
        reach = f.get("reach_px", 0.0) if use_reach else 0.0
        half = max(half_widths * width, reach) if fit else 1.5 * fallback(f)
        a, b = max(0, int(f["px"] - half)), min(n, int(f["px"] + half) + 1)
        exclude[a:b] = True
        longest = max(longest, b - a)
    return exclude, longest


def new_features(cands, feats):
    """Candidates not already represented by a feature (within 0.7 of the narrower width)."""
    known = sorted((g["px"], g["fwhm_px"]) for g in feats)
    widest = max((w_ for _, w_ in known), default=0.0)
    added = []
    for px, f, s, amp in cands:
        reach = 0.7 * max(f, widest)
        lo = bisect.bisect_left(known, (px - reach, -np.inf))
        hi = bisect.bisect_right(known, (px + reach, np.inf))
        if any(abs(px - p) < 0.7 * min(f, w_) for p, w_ in known[lo:hi]):
            continue
        added.append({"px": px, "fwhm_px": f, "snr_det": s, "amp0": amp, "fit": None, "group": 1})
        bisect.insort(known, (px, f))
        widest = max(widest, f)
    return added


SPIKE_SIGMA = 5.0


def find_spikes(y, cont, sig, good, fwhm_px):
    """Single-pixel spikes (cosmic rays, hot or dead pixels), to be masked before the search.

    A pixel is a spike when it stands more than SPIKE_SIGMA sigma above (or
    below) both neighbours and its neighbours carry less than half of the
    share of its excess over the continuum that a line of the instrument's
    width would give them (exp(-1/2 s^2) of the peak, s the Gaussian sigma in
    pixels).  A line on which a spike lands keeps its other pixels.  Only on
    grids that sample the resolution element with 1.5 pixels or more: on
    coarser ones a narrow line and a spike look alike, and the fitted width
    decides afterwards (see `_segment`).
    """
    n = len(y)
    out = np.zeros(n, dtype=bool)
    if fwhm_px < 1.5 or n < 3:
        return out
    share = 0.5 * np.exp(-0.5 * (GAUSS_FWHM / fwhm_px) ** 2)
    e = np.where(good, y - cont, np.nan)
    with np.errstate(invalid="ignore"):
        for sign in (1.0, -1.0):
            v = sign * e
            left = np.concatenate([[np.nan], v[:-1]])
            right = np.concatenate([v[1:], [np.nan]])
            nb = np.fmax(left, right)           # the higher good neighbour
            out |= good & (v - nb > SPIKE_SIGMA * sig) & (nb < share * v) & np.isfinite(nb)
    return out
