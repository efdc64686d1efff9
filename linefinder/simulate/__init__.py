"""Spectra with known answers.

`suite` draws the synthetic identification suite (redshift, resolution,
S/N, non-hydrogen lines, sky residuals, spikes) used by the benchmarks and
tests; `scenarios` makes the bundled sample spectra of the demo and their
truth files.
"""

from .scenarios import SAMPLES, sample_path, write_samples
from .suite import make_noise_spectrum, make_spectrum, random_parameters

__all__ = ["write_samples", "SAMPLES", "sample_path", "make_spectrum", "make_noise_spectrum",
           "random_parameters"]
