"""Readings of a spectrum with one line: which strong lines it could be, and at what z.

One line gives no redshift: its position fits Lyα at one z, Hα at another,
Hβ at a third.  When the search finds none, the strongest unexplained
feature is read against every strong line of the catalogue (strength 0.3 or
more of its group's strongest, e.g. Lyα, Hα, Hβ, Paα, Paβ, Brα) whose
implied z lies in the range searched.  A reading is struck out when it
predicts another line of the same group inside the observed window at an
S/N of twice the detection limit or more (from the expected strength ratio
and the feature's own S/N) where no feature lies: Hβ is not Hβ if Hα should
stand beside it at three times its S/N and does not.  What is left is a list
of possibilities for the user to settle (with another spectrum, a
continuum break, a line profile); it is never an identification, and no
feature is labelled from it.
"""

import numpy as np

from .redshift import _nearest

__all__ = ["reading_candidate", "readings_of", "single_line_readings", "READING_STRENGTH", "STRIKE_FACTOR"]

READING_STRENGTH = 0.3   # strong lines only: the usual single-line readings
STRIKE_FACTOR = 2.0      # an absent line predicted at this many times the detection limit


def single_line_readings(y, sy, snr, candidate, x, strength, group, labels, species, *,
                         smin, smax, window, detection_snr=5.0, tol=4.0, readable=None):
    """Possible readings of feature `candidate` as a single strong line.

    Parameters: feature log-positions `y` (ln m, vacuum) with sigmas `sy` and
    S/N; the index of the feature to read; catalogue log rest positions `x`,
    strengths relative to the strongest of their group, group keys, labels and
    species; the ln(1+z) range; the observed ln(lambda) window.  `readable`
    (default: strength >= READING_STRENGTH) says which lines a reading may be.

    Returns a list of dicts (``label``, ``species`` (None for a companion line), ``z``,
    ``z_err``), by z.
    """
    x = np.asarray(x, dtype=float)
    strength = np.asarray(strength, dtype=float)
    group = np.asarray(group).astype(str)
    y = np.asarray(y, dtype=float)
    sy = np.asarray(sy, dtype=float)
    yc, syc, snr_c = float(y[candidate]), float(sy[candidate]), float(snr[candidate])
    found = np.sort(y)
    out = []
    readable = strength >= READING_STRENGTH if readable is None else np.asarray(readable, bool)
    for j in np.flatnonzero(readable):
        s = yc - x[j]
        if not (smin - tol * syc <= s <= smax + tol * syc):
            continue
        mates = np.flatnonzero((group == group[j]) & (np.arange(len(x)) != j))
        pos = x[mates] + s
        inside = (pos > window[0]) & (pos < window[1]) if window else np.ones(len(mates), bool)
        predicted = snr_c * strength[mates] / strength[j]
        loud = inside & (predicted >= STRIKE_FACTOR * detection_snr)
        if np.any(loud):
            miss = np.abs(found[_nearest(found, pos[loud])] - pos[loud])
            if np.any(miss > tol * max(syc, 1e-7)):
                continue   # a line it predicts loud and clear is not there
        z = float(np.expm1(s))
        out.append({"label": str(labels[j]), "species": str(species[j]) or None, "z": z,
                    "z_err": float((1 + z) * syc)})
    # one reading per label and z (fine-structure components of one line)
    uniq = {}
    for r in out:
        uniq.setdefault((r["label"], r["species"], round(r["z"], 3)), r)
    return sorted(uniq.values(), key=lambda r: r["z"])


def reading_candidate(use, kinds_arr, main_kind, snr_arr, snr):
    """The strongest clear feature (S/N 1.5 times the detection limit, above what noise
    gives) of the main kind, or None."""
    ok = use & (kinds_arr == main_kind) & (np.nan_to_num(snr_arr) >= 1.5 * snr)
    if not np.any(ok):
        return None
    return int(np.flatnonzero(ok)[np.argmax(snr_arr[ok])])


def readings_of(i, use, snr_arr, snr, y, sy, x, strength, group, cat, comp, x_comp, s_lo, s_hi,
              window, main_kind):
    """Single-line readings of feature `i` (`reading_candidate`) against the strong
    hydrogenic and companion lines."""
    nc = len(comp)
    xs = np.concatenate([x, x_comp])
    # companions of one ion form a group ([O III] 4960 predicts 5008 at three times its
    # flux); their typical fluxes set the ratios
    ion = [c["name"].rsplit(" ", 1)[0] for c in comp]
    top = {}
    for c, name in zip(comp, ion):
        top[name] = max(top.get(name, 0.0), c["strength"])
    h_st = np.asarray(strength, dtype=float)
    if main_kind == "emission":
        # Lyβ and higher seen in emission are weak: converted to Balmer lines and Lyα in
        # Case B, and beyond z ~ 2 absorbed by the Lyα forest; they neither strike a Lyα
        # reading out nor are read themselves
        high_lyman = (np.asarray(cat["n_lower"]) == 1) & (np.asarray(cat["n_upper"]) > 2)
        h_st = np.where(high_lyman, 0.0, h_st)
    st = np.concatenate([h_st, [c["strength"] / top[name] if top[name] > 0 else 0.0
                                for c, name in zip(comp, ion)]])
    gr = np.concatenate([np.asarray(group, dtype=str), [f"companion|{name}" for name in ion]])
    # read as the strong ones only: strong in their group, and (companions) strong beside H
    readable = (st >= READING_STRENGTH) & np.concatenate(
        [np.ones(len(x), bool), np.array([c["strength"] >= READING_STRENGTH for c in comp], bool)])
    labels = np.concatenate([np.asarray(cat["label"], dtype=str), [c["name"] for c in comp]])
    spc = np.concatenate([np.asarray(cat["species"], dtype=str), [""] * nc])
    found = np.flatnonzero(use)
    loc = int(np.searchsorted(found, i))
    return single_line_readings(y[found], sy[found], snr_arr[found], loc, xs, st, gr, labels,
                                spc, smin=s_lo, smax=s_hi, window=window, detection_snr=snr,
                                readable=readable)
