"""Atomic theory of one-electron atoms and ions.

Species and their nuclei (`species`), bound-level energies from the Dirac
equation with reduced-mass, recoil, QED and nuclear-size terms (`levels`,
`qed`), exact non-relativistic dipole radial integrals (`radial`) and the
transition rates built from them (`transitions`).  CODATA constants come from
`scipy.constants` (`constants`); `memo` holds the in-process caches of
species-independent work.  Nothing here knows about spectra.
"""

from .levels import (
           binding_energy_hz,
           enumerate_levels,
           level_energy,
           level_label,
           level_table,
)
from .radial import dipole_radial_integrals
from .species import Species, from_roman, parse_species, to_roman
from .transitions import einstein_a, fine_components, multiplets, oscillator_strength

__all__ = ["Species", "parse_species", "to_roman", "from_roman", "binding_energy_hz",
           "level_energy", "level_table", "level_label", "enumerate_levels", "fine_components",
           "multiplets", "einstein_a", "oscillator_strength", "dipole_radial_integrals"]
