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

__all__ = ["single_line_readings", "READING_STRENGTH", "STRIKE_FACTOR"]

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
