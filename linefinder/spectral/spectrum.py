"""One spectrum type for everything the readers return, and its preparation.

`SpectrumData` holds a 1-D spectrum as Quantities: ``axis`` (wavelength,
frequency, energy or wavenumber, ascending after `prepare`), ``flux``,
``uncertainty`` (1-sigma, same unit as flux, or None), a boolean ``mask``
(True = bad pixel) and ``meta`` (medium and where it was read from, units'
provenance, resolution, noise source ...).  `to_specutils` hands it over as a
``specutils.Spectrum``; `from_specutils` takes one back.
"""

from dataclasses import dataclass, field, replace

import numpy as np
from astropy import units as u

from ..errors import SpectrumFormatError

__all__ = ["SpectrumData", "prepare", "segments", "from_specutils", "MIN_PIXELS"]

MIN_PIXELS = 8


@dataclass
class SpectrumData:
    axis: u.Quantity
    flux: u.Quantity
    uncertainty: u.Quantity = None
    mask: np.ndarray = None
    meta: dict = field(default_factory=dict)

    def __post_init__(self):
        self.axis = u.Quantity(self.axis)
        self.flux = u.Quantity(self.flux)
        if self.axis.shape != self.flux.shape or self.axis.ndim != 1:
            raise SpectrumFormatError(f"{self.source}: spectral axis and flux must be 1-D and of "
                                      f"equal length ({self.axis.shape} vs {self.flux.shape})")
        if self.uncertainty is not None:
            self.uncertainty = u.Quantity(self.uncertainty)
            if self.uncertainty.shape != self.flux.shape:
                raise SpectrumFormatError(f"{self.source}: uncertainty and flux differ in length")
            if self.uncertainty.unit != self.flux.unit:
                self.uncertainty = self.uncertainty.to(self.flux.unit)
        if self.mask is None:
            self.mask = np.zeros(self.flux.shape, dtype=bool)
        self.mask = np.asarray(self.mask, dtype=bool)

    @property
    def source(self):
        return self.meta.get("source", "spectrum")

    @property
    def medium(self):
        return self.meta.get("medium", "vacuum")

    @property
    def is_wavelength(self):
        return self.axis.unit.is_equivalent(u.m)

    def __len__(self):
        return len(self.flux)

    def to_specutils(self):
        """The same data as a ``specutils.Spectrum`` (uncertainty as StdDevUncertainty)."""
        from astropy.nddata import StdDevUncertainty
        from specutils import Spectrum

        unc = StdDevUncertainty(self.uncertainty) if self.uncertainty is not None else None
        return Spectrum(spectral_axis=self.axis, flux=self.flux, uncertainty=unc, mask=self.mask,
                        meta=dict(self.meta))


def from_specutils(spec, *, source="spectrum", meta=None):
    """Convert a 1-D ``specutils.Spectrum`` (or Spectrum1D)."""
    flux = u.Quantity(spec.flux)
    if flux.ndim != 1:
        raise SpectrumFormatError(f"{source}: holds {flux.shape[0]} spectra; choose one with --index")
    unc = None
    if spec.uncertainty is not None:
        kind = type(spec.uncertainty).__name__
        arr = np.asarray(spec.uncertainty.array, dtype=float)
        if kind.startswith("InverseVariance"):
            with np.errstate(divide="ignore"):
                arr = np.where(arr > 0, 1 / np.sqrt(np.where(arr > 0, arr, 1)), np.inf)
        elif kind.startswith("Variance"):
            arr = np.sqrt(np.abs(arr))
        unc = arr * flux.unit
    m = dict(spec.meta or {})
    m.update(meta or {})
    m.setdefault("source", source)
    mask = None if spec.mask is None else np.asarray(spec.mask, dtype=bool)
    return SpectrumData(axis=u.Quantity(spec.spectral_axis), flux=flux, uncertainty=unc, mask=mask,
                        meta=m)


def prepare(spec):
    """Mask bad pixels, sort the axis ascending and validate.

    Masked: NaN or infinite flux, NaN/inf/zero/negative uncertainty (zero
    inverse variance arrives here as infinite sigma), and pixels the file
    flagged.  Raises `SpectrumFormatError` when fewer than `MIN_PIXELS` good
    pixels remain or the axis repeats values.
    """
    axis = spec.axis.value.astype(float)
    flux = spec.flux.value.astype(float)
    unc = None if spec.uncertainty is None else spec.uncertainty.value.astype(float)
    bad = spec.mask.copy() | ~np.isfinite(flux) | ~np.isfinite(axis)
    if unc is not None:
        bad |= ~np.isfinite(unc) | (unc <= 0)
    order = np.argsort(axis, kind="stable")
    if not np.all(order == np.arange(len(order))):
        axis, flux, bad = axis[order], flux[order], bad[order]
        unc = None if unc is None else unc[order]
    finite = np.isfinite(axis)
    if np.any(np.diff(axis[finite]) == 0):
        raise SpectrumFormatError(f"{spec.source}: the spectral axis repeats values")
    ngood = int((~bad).sum())
    if ngood == 0:
        raise SpectrumFormatError(f"{spec.source}: no valid pixels (all NaN, masked or zero weight)")
    if ngood < MIN_PIXELS:
        raise SpectrumFormatError(f"{spec.source}: only {ngood} valid pixels; need at least {MIN_PIXELS}")
    meta = dict(spec.meta)
    meta["n_masked"] = int(bad.sum())
    new = replace(spec, axis=axis * spec.axis.unit, flux=flux * spec.flux.unit,
                  uncertainty=None if unc is None else np.where(bad, np.inf, unc) * spec.flux.unit,
                  mask=bad, meta=meta)
    return new


def segments(spec, *, gap_factor=5.0, min_pixels=MIN_PIXELS, max_masked_run=5):
    """Index ranges [start, stop) of contiguous valid data, split at axis gaps.

    A gap is a step larger than `gap_factor` times the local median step, or a
    run of more than `max_masked_run` masked pixels (shorter runs stay inside a
    segment and are simply given no weight).
    """
    axis = spec.axis.value
    good = ~spec.mask
    idx = np.flatnonzero(good)
    if len(idx) < 2:
        return []
    steps = np.diff(axis[idx])
    from scipy.ndimage import median_filter

    local = median_filter(steps, size=min(len(steps), 51), mode="nearest")
    breaks = np.flatnonzero((steps > gap_factor * local) | (np.diff(idx) > max_masked_run + 1))
    starts = np.concatenate([[0], breaks + 1])
    stops = np.concatenate([breaks + 1, [len(idx)]])
    out = []
    for a, b in zip(starts, stops):
        if b - a >= min_pixels:
            out.append((int(idx[a]), int(idx[b - 1]) + 1))
    return out
