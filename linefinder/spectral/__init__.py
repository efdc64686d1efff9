"""Spectra and their spectral axes.

`spectrum` holds the spectrum type used inside linefinder (`SpectrumData`:
axis, flux, uncertainty, mask, medium, resolving power) and its preparation;
`medium` converts between air and vacuum (Edlén, Ciddor, and the conventional
split by wavelength); `doppler` converts between redshift, velocity and
wavelength factors in the usual conventions; `axis` turns any observed axis
into ln(vacuum wavelength), the one scale on which features meet lines.
"""

from .axis import vacuum_ln, vacuum_ln_axis
from .doppler import (
           VELOCITY_CONVENTIONS,
           describe_shift,
           velocity_from_factor,
           wavelength_factor,
)
from .medium import (
           AIR_FORMULAS,
           air_to_vacuum,
           conventional_wavelength,
           refractive_index,
           vacuum_to_air,
)
from .spectrum import SpectrumData, from_specutils, prepare, segments

__all__ = ["vacuum_ln", "vacuum_ln_axis", "SpectrumData", "prepare", "segments", "from_specutils", "AIR_FORMULAS", "vacuum_to_air",
           "air_to_vacuum", "refractive_index", "conventional_wavelength", "VELOCITY_CONVENTIONS",
           "wavelength_factor", "velocity_from_factor", "describe_shift"]
