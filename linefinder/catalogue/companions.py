"""Companion lines: the strong non-hydrogenic lines that come with hydrogen's.

In the emission spectra of H II regions, star-forming galaxies and active
nuclei the hydrogen lines come with forbidden and resonance lines of O, N, S,
Ne, C, Mg and He I at the same redshift: a lone H-alpha is named by the [N II]
and [S II] lines beside it, H-beta by the [O III] doublet, Ly-alpha by C IV
and N V.  identify uses these lines as evidence for the redshift (as much
as a hydrogen line's, but a solution needs a hydrogenic line of its own), and reports features they explain in a column of their own, apart from
the hydrogenic identifications.

Absorption spectra have theirs: the stellar lines of galaxies and stars
(`STELLAR_LINES`: Ca II H and K, Ca I 4227, the G band, Mg b, Fe 5270, Na D,
the Ca II infrared triplet; He I in hot stars), used the same way when the
spectrum's features are mainly absorption.  A Balmer line of a galaxy's
starlight is named by the K line, Mg b and Na D beside it, and high Balmer
members laid on a forest of metal lines are not taken for a series: the
metal lines have names of their own.

Rest wavelengths are vacuum Å, NIST ASD values recalled from memory to the
digits shown.  The typical fluxes (relative to H-beta for the optical lines,
to Ly-alpha for the ultraviolet ones) are round values of this tool for
star-forming galaxies and AGN, rules of thumb that set how much evidence a
match gives, not measurements: real ratios scatter by factors of several, so
the fluxes of companion lines never enter the intensity check of a solution.
"""

import numpy as np

__all__ = ["COMPANION_LINES", "STELLAR_LINES", "companion_lines"]

# name: (vacuum Å, "opt" relative to H-beta | "uv" relative to Ly-alpha, typical flux)
COMPANION_LINES = {
    "N V 1239": (1238.82, "uv", 0.10), "N V 1243": (1242.80, "uv", 0.05),
    "Si IV 1394": (1393.76, "uv", 0.05), "C IV 1548": (1548.19, "uv", 0.15),
    "C IV 1551": (1550.77, "uv", 0.08), "C III] 1909": (1908.73, "uv", 0.10),
    "Mg II 2796": (2796.35, "uv", 0.10), "Mg II 2804": (2803.53, "uv", 0.05),
    "[Ne V] 3427": (3426.86, "opt", 0.1), "[O II] 3727": (3727.09, "opt", 1.0),
    "[O II] 3730": (3729.88, "opt", 1.0), "[Ne III] 3869": (3869.86, "opt", 0.3),
    "[O III] 4364": (4364.44, "opt", 0.05), "He I 4473": (4472.73, "opt", 0.04), "[O III] 4960": (4960.30, "opt", 1.0),
    "[O III] 5008": (5008.24, "opt", 3.0), "He I 5877": (5877.25, "opt", 0.1),
    "[O I] 6302": (6302.05, "opt", 0.1), "[N II] 6550": (6549.86, "opt", 0.3),
    "[N II] 6585": (6585.27, "opt", 1.0), "[S II] 6718": (6718.29, "opt", 0.5),
    "[S II] 6733": (6732.67, "opt", 0.4), "[Ar III] 7138": (7137.77, "opt", 0.1),
    "[S III] 9071": (9071.1, "opt", 0.2), "[S III] 9533": (9533.2, "opt", 0.5),
}
# absorption: name: (vacuum Å, typical depth relative to H-alpha's, rule of thumb of this tool
# for the integrated light of galaxies and for stars; a line's absence costs nothing)
STELLAR_LINES = {
    "Ca II K": (3934.78, 0.8), "Ca II H": (3969.59, 0.6), "Ca I 4227": (4227.92, 0.2),
    "G band 4306": (4305.6, 0.3), "He I 4027": (4027.33, 0.1), "He I 4472": (4472.73, 0.15),
    "He I 4922": (4923.30, 0.1), "Mg b 5169": (5168.76, 0.3), "Mg b 5174": (5174.13, 0.35),
    "Mg b 5185": (5185.05, 0.4), "Fe 5270": (5270.9, 0.2), "Na D 5892": (5891.58, 0.3),
    "Na D 5898": (5897.56, 0.25), "He I 5877": (5877.25, 0.15), "He I 6680": (6679.99, 0.1),
    "Ca II 8500": (8500.36, 0.25), "Ca II 8544": (8544.44, 0.35), "Ca II 8665": (8664.52, 0.3),
}
# Case B H-alpha / H-beta (the Balmer strengths of identify are relative to H-alpha)
_HALPHA_HBETA = 2.86


def companion_lines(lam_min_m, lam_max_m, resolution, kind="emission"):
    """Companion lines with rest wavelength in [lam_min_m, lam_max_m] (vacuum, m).

    Lines closer than one resolution element (1/R in ln lambda) are merged into
    one at their flux-weighted mean position, named by both (``[O II]
    3727+3730``), as the spectrum shows them.  Returns a list of dicts with
    ``name``, ``rest_vacuum_m`` and ``strength`` (on the scale of identify's
    hydrogen strengths: H-alpha and Ly-alpha 1).  `kind`: "emission" (the lines of
    ionised gas) or "absorption" (`STELLAR_LINES`)."""
    if kind == "absorption":
        rows = sorted((aa * 1e-10, name, depth) for name, (aa, depth) in STELLAR_LINES.items())
    else:
        rows = sorted((aa * 1e-10, name, flux / _HALPHA_HBETA if band == "opt" else flux)
                      for name, (aa, band, flux) in COMPANION_LINES.items())
    merged = []
    for lam, name, st in rows:
        if merged and np.log(lam / merged[-1]["rest_vacuum_m"]) < 1.0 / resolution:
            m = merged[-1]
            total = m["strength"] + st
            m["rest_vacuum_m"] = (m["rest_vacuum_m"] * m["strength"] + lam * st) / total
            m["strength"] = total
            m["name"] = f"{m['name']}+{name.split()[-1]}"
            continue
        merged.append({"name": name, "rest_vacuum_m": lam, "strength": st})
    return [m for m in merged if lam_min_m <= m["rest_vacuum_m"] <= lam_max_m]
