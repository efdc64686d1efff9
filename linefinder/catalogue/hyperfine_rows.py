"""Catalogue rows of the hyperfine lines of the 1s and 2s levels (the 21-cm family).

`hyperfine_arrays` gives them in the rest-frame array form `build` uses for every
species, so that shifts, windows and selections apply to them alike.  Their positions
are the measured intervals where one is tabulated (`physics.hyperfine`); their
``rel_intensity`` is left undefined, since the strength of a hyperfine line in a source
(collisional level populations, optical depth) has nothing in common with that of a
recombination line.
"""

import numpy as np
import scipy.constants as _sc

from ..physics.hyperfine import has_hyperfine, hyperfine_lines

__all__ = ["HYPERFINE_SERIES", "HYPERFINE_N", "hyperfine_arrays"]

HYPERFINE_SERIES = "hyperfine"
_F_FROM_A = _sc.epsilon_0 * _sc.m_e * _sc.c ** 3 / (2 * np.pi * _sc.e ** 2)
#: the levels whose hyperfine lines the catalogue lists
HYPERFINE_N = (1, 2)


def hyperfine_arrays(sp, fine):
    """Rest-frame arrays of the hyperfine lines of species `sp` (empty where its nucleus has
    no tabulated spin and moment, or no spin at all)."""
    lines = hyperfine_lines(sp, HYPERFINE_N) if has_hyperfine(sp) else []
    n = np.array([ln.n for ln in lines], dtype=int)
    freq = np.array([ln.frequency_hz for ln in lines], dtype=float)
    a_ul = np.array([ln.a_ul for ln in lines], dtype=float)
    g_u = np.array([ln.g_upper for ln in lines], dtype=float)
    g_l = np.array([ln.g_lower for ln in lines], dtype=float)
    # absorption oscillator strength from A: f = g_u/g_l A eps0 m_e c^3 / (2 pi e^2 nu^2)
    f_lu = g_u / g_l * a_ul * _F_FROM_A / freq ** 2 if len(lines) else freq
    arrays = {"n_lower": n, "n_upper": n.copy(), "frequency": freq, "a_ul": a_ul, "f_lu": f_lu,
              "g_lower": g_l, "g_upper": g_u,
              # a magnetic-dipole line has no electric-dipole line strength
              "line_strength": np.full(len(lines), np.nan),
              "label": np.array([f"{ln.species} {ln.label}" for ln in lines], dtype=str),
              "series": np.full(len(lines), HYPERFINE_SERIES),
              "position_source": np.array([ln.source for ln in lines], dtype=str)}
    if fine:
        arrays.update({"l_lower": np.zeros(len(lines), int), "l_upper": np.zeros(len(lines), int),
                       "j_lower": np.full(len(lines), 0.5), "j_upper": np.full(len(lines), 0.5),
                       "f_lower": np.array([ln.f_lower for ln in lines]),
                       "f_upper": np.array([ln.f_upper for ln in lines])})
    return arrays
