"""A solution checked on the pixels: does each series run down from its strongest member?

The redshift search works on detected features.  Features can be phantoms of
a search that is free to pick any of them: high members of a series laid on a
forest of metal lines, a line of one kind beside a line of the other, a member
whose stronger siblings are absent.  This check reads the spectrum itself at
the positions a solution predicts, from the scale-space scan (`features.scales`:
the signal-to-noise of a Gaussian of the solution's line width on a local
straight baseline, at every position and width):

* a series supports a solution with the run of its members, strongest
  expected first, that the pixels show at `SUPPORT_SNR` or more; the run stops
  at the first member the pixels do not show (where the scan can measure it:
  edges and gaps are skipped).  In emission the run must also be a
  decrement: fluxes fall from the lowest upper level upward (Case B, a
  textbook fact), so a member may not read much stronger than the one before
  it.  (Stellar absorption depths do not fall that way: Hgamma and Hdelta are
  often deeper than Halpha.)  A member beyond the gap
  is not evidence, however good its feature looked;
* a system is of one kind: members are read with the sign of the system
  (the strongest member of a series in an absorption system may show in
  emission: a nebular H-alpha over an old population);
* companion lines (`catalogue.companions`) each count once when shown.

The number of lines so supported sets the highest status a solution may
have: `secure` needs at least `SECURE_LINES` lines, `SECURE_HYDROGEN` of them
hydrogenic, and must beat the chance level by two lines: the support found
at `NULL_TRIALS` random shifts over the searched range (99th percentile), so
that a spectrum full of features, where any shift finds a few lines, does
not make a secure system of them; `tentative` needs at least two lines, one
hydrogenic, and two more than chance finds at a typical shift (the median).  Among the best
solutions of the search the one with most support is kept.  These counts are
rules of this tool (common practice: a redshift rests on independent lines).
"""

from dataclasses import dataclass, field

import numpy as np
from astropy import units as u
from scipy.ndimage import maximum_filter1d

from ..spectral.medium import vacuum_to_air

__all__ = ["Support", "PixelReader", "support_status", "capped", "SUPPORT_SNR", "SECURE_LINES",
           "SECURE_HYDROGEN"]

SUPPORT_SNR = 3.0
# a member may read up to this much stronger than the one before it (noise, blends; the
# saturated Balmer lines of A stars are nearly equal): rules of this tool
DECREMENT_SLACK = 1.5
DECREMENT_PLUS = 3.0
SECURE_LINES = 3
SECURE_HYDROGEN = 2
# random shifts for the chance level of the support (look-elsewhere), a rule of this tool
NULL_TRIALS = 100
# ... away from the solution's own shift by this many line widths
AVOID_FWHM = 5.0
STATUS_ORDER = {"none": 0, "tentative": 1, "secure": 2}


@dataclass
class Support:
    """The lines of a solution the pixels show."""
    hydrogen: list = field(default_factory=list)     #: catalogue indices, series runs
    companions: list = field(default_factory=list)   #: companion indices shown
    broken: list = field(default_factory=list)       #: catalogue indices beyond a gap of their series

    @property
    def n(self):
        return len(self.hydrogen) + len(self.companions)


def _axis_u(ln_vac_m, spec):
    """ln of the spectrum's own axis value at vacuum wavelengths exp(ln_vac_m) m."""
    lam = np.exp(ln_vac_m) * u.m
    if spec.is_wavelength and spec.medium == "air":
        lam = vacuum_to_air(lam)
    return np.log(lam.to_value(spec.axis.unit, equivalencies=u.spectral()))


class PixelReader:
    """The scan read at predicted positions for one line width and kind of system."""

    def __init__(self, scan, spec, fwhm_ln, kind):
        self.scan, self.spec = scan, spec
        self.rung = int(np.argmin(np.abs(np.log(scan.fwhm) - np.log(max(fwhm_ln, 1e-12)))))
        sign = 1.0 if kind == "emission" else -1.0
        self.kind = kind
        du = scan.u[1] - scan.u[0] if len(scan.u) > 1 else 1.0
        self.du = du
        rungs = range(max(self.rung - 1, 0), min(self.rung + 2, len(scan.fwhm)))
        snr = scan.snr
        # best over the rungs around the line width and the grid points within a quarter
        # FWHM; "both": either sign (lines of an absorption system may show in emission)
        self.own = np.full(len(scan.u), -np.inf)
        self.both = np.full(len(scan.u), -np.inf)
        measurable = np.zeros(len(scan.u), bool)
        for r in rungs:
            size = 2 * max(1, int(round(0.25 * scan.fwhm[r] / du))) + 1
            ok = np.isfinite(scan.err[r])
            v = np.where(ok, snr[r] * sign, -np.inf)
            self.own = np.maximum(self.own, maximum_filter1d(v, size, mode="nearest"))
            a = np.where(ok, np.abs(snr[r]), -np.inf)
            self.both = np.maximum(self.both, maximum_filter1d(a, size, mode="nearest"))
            measurable |= maximum_filter1d(ok.astype(np.uint8), size, mode="nearest").astype(bool)
        self.own[~measurable] = np.nan
        self.both[~measurable] = np.nan

    def evidence(self, ln_vac, both_signs=False):
        """Signal-to-noise with the system's sign at vacuum ln wavelengths (m); NaN where
        the scan cannot measure or outside it."""
        uu = _axis_u(ln_vac, self.spec)
        fin = np.isfinite(uu)
        i = np.rint((np.where(fin, uu, self.scan.u[0]) - self.scan.u[0]) / self.du).astype(int)
        inside = fin & (i >= 0) & (i < len(self.scan.u))
        arr = self.both if both_signs else self.own
        return np.where(inside, arr[np.clip(i, 0, len(arr) - 1)], np.nan)

    def support(self, s, x, strength, group, x_comp):
        """`Support` of the solution at shift `s` (ln(1+z)); `x`, `strength`, `group`: the
        hydrogenic catalogue (ln vacuum rest wavelength in m, expected strength, series
        group); `x_comp`: the companions' rest positions."""
        sup = Support()
        if len(x):
            e = self.evidence(np.asarray(x) + s)
            if self.kind == "absorption":
                # the strongest member of a series may show in emission (nebular H-alpha
                # over an old population, emission filling the line)
                e_both = self.evidence(np.asarray(x) + s, both_signs=True)
            group = np.asarray(group)
            strength = np.asarray(strength)
            seen = np.flatnonzero(np.isfinite(e))
            for g in np.unique(group[seen]):
                sel = seen[group[seen] == g]
                order = sel[np.argsort(-strength[sel], kind="stable")]
                first = e_both[order[0]] if self.kind == "absorption" else e[order[0]]
                ok = _run(e[order][None, :], np.array([first]), self.kind == "emission")[0]
                n_run = int(ok.sum())
                sup.hydrogen.extend(int(k) for k in order[:n_run])
                sup.broken.extend(int(k) for k in order[n_run:])
        if len(x_comp):
            e = self.evidence(np.asarray(x_comp) + s)
            sup.companions = [int(i) for i in np.flatnonzero(np.isfinite(e) & (e >= SUPPORT_SNR))]
        return sup

    def counts(self, shifts, x, strength, group, x_comp):
        """(lines supported, hydrogenic lines supported, their summed signal-to-noise) at
        every shift of `shifts`, as `support` counts them (gaps and edges skipped)."""
        shifts = np.asarray(shifts, float)
        n_h = np.zeros(len(shifts), int)
        total = np.zeros(len(shifts))
        x = np.asarray(x, float)
        if len(x):
            pos = (x[None, :] + shifts[:, None]).ravel()
            e = self.evidence(pos).reshape(len(shifts), len(x))
            if self.kind == "absorption":
                e_both = self.evidence(pos, both_signs=True).reshape(len(shifts), len(x))
            group = np.asarray(group)
            for g in np.unique(group):
                order = np.flatnonzero(group == g)
                order = order[np.argsort(-np.asarray(strength)[order], kind="stable")]
                E = e[:, order]
                first = e_both[:, order[0]] if self.kind == "absorption" else E[:, 0]
                run = _run(E, first, self.kind == "emission")
                n_h += run.sum(axis=1)
                total += np.where(run, np.abs(np.nan_to_num(E)), 0.0).sum(axis=1)
        n = n_h.copy()
        if len(x_comp):
            xc = np.asarray(x_comp, float)
            e = self.evidence((xc[None, :] + shifts[:, None]).ravel()).reshape(len(shifts), len(xc))
            ok = np.nan_to_num(e, nan=-np.inf) >= SUPPORT_SNR
            n += ok.sum(axis=1)
            total += np.where(ok, e, 0.0).sum(axis=1)
        return n, n_h, total

    def null_counts(self, s_range, x, strength, group, x_comp, *, avoid=None,
                    n_trials=NULL_TRIALS, seed=0):
        """Support counts at random shifts over `s_range` (none within `AVOID_FWHM` line
        widths of `avoid`, the solution's own shift): how many lines chance finds."""
        rng = np.random.default_rng(seed)
        shifts = rng.uniform(s_range[0], s_range[1], 4 * n_trials)
        if avoid is not None:
            width = AVOID_FWHM * self.scan.fwhm[self.rung]
            shifts = shifts[np.abs(shifts - avoid) > width]
        shifts = shifts[:n_trials]
        if not len(shifts):
            return np.zeros(0, int)
        return self.counts(shifts, x, strength, group, x_comp)[0]


def _run(E, first, decrement=True):
    """Members in the run of each row of E (signal-to-noise of a series' members, strongest
    expected first; NaN: not measurable, skipped): each shown at SUPPORT_SNR and not
    stronger than DECREMENT_SLACK times the member before it plus DECREMENT_PLUS (a series
    weakens upward; a forest of unrelated lines does not).  `first`: the first member's
    value, read with either sign in absorption systems."""
    E = np.array(E, float)
    E[:, 0] = np.where(np.isnan(E[:, 0]), np.nan, np.fmax(E[:, 0], first))
    rows, m = E.shape
    out = np.zeros((rows, m), bool)
    alive = np.ones(rows, bool)
    prev = np.full(rows, np.inf)
    for k in range(m):
        v = E[:, k]
        skip = np.isnan(v)
        ok = alive & ~skip & (v >= SUPPORT_SNR)
        if decrement:
            ok &= v <= DECREMENT_SLACK * prev + DECREMENT_PLUS
        out[:, k] = ok
        alive &= skip | ok
        prev = np.where(ok, v, prev)
    return out


def support_status(sup, null=None):
    """The highest status the pixel support allows; `null`: support counts at random
    shifts (`PixelReader.null_counts`), whose 99th percentile a `secure` solution must
    beat by two lines and whose median a `tentative` one must beat by two."""
    q99, q50 = (np.percentile(null, [99, 50]) if null is not None and len(null) else (0.0, 0.0))
    if sup.n >= max(SECURE_LINES, q99 + 2) and len(sup.hydrogen) >= SECURE_HYDROGEN:
        return "secure"
    if sup.n >= max(2, q50 + 2) and len(sup.hydrogen) >= 1:
        return "tentative"
    return "none"


def capped(status, cap):
    """The lower of two statuses."""
    return status if STATUS_ORDER[status] <= STATUS_ORDER[cap] else cap
