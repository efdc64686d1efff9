"""The main job: features -> redshift -> identifications -> what is left.

`identify` takes a spectrum (`SpectrumData`) or a peak list, measures the
features if needed, chooses a catalogue for the spectral regime (optical/IR:
H I and He II; X-ray: hydrogen-like C VI ... Ni XXVIII; radio: H, He and C
recombination lines) unless species are given, finds the shift from the
features alone (`redshift.search_shift`) or takes a fixed one, assigns
lines globally (`matching.assign`), matches what is left to a user's own
line list, and looks for a second system among the rest.  In optical/IR
emission spectra the strong nebular lines ([O III], [N II], C IV ...,
`companions`) are evidence for the redshift beside the hydrogen lines, and
the features they explain are reported in a column of their own
(``companion``), never as hydrogenic identifications.  Once the redshift is
secure (or fixed), the lines it predicts where no feature was found are
measured at their predicted positions (`forced`) and added as rows flagged
``at_z`` when they reach S/N 4.

Every position error used in the matching is the quadrature sum of the
measured centre error, a calibration term (default 2e-5 relative, 6 km/s)
and a fraction (default 0.1) of the resolution element; all three are
recorded in the result's metadata.
"""

import functools
from dataclasses import dataclass, field

import numpy as np
from astropy import units as u
from astropy.table import QTable

from ..catalogue.build import build_catalogue
from ..catalogue.companions import companion_lines
from ..catalogue.contaminants import sky_mask
from ..catalogue.strengths import (
    expected_strengths,
    is_primary,
    multiplet_codes,
    strength_assumption,
)
from ..features.flags import Flag, has_flag, join_flags
from ..features.scales import scan_scales
from ..io.line_lists import read_line_list
from ..physics import constants as K
from ..spectral.axis import observed_window, sorted_pixels, vacuum_ln
from ..spectral.doppler import C_KMS
from .hyperfine_line import read_hyperfine, with_hyperfine
from .lyman_break import break_reading
from .matching import assign, withdraw_unsupported
from .pixel_check import PixelReader, capped, support_status
from .redshift import _within, classify, refine, search_shift, solution_probability
from .single_line import reading_candidate, readings_of
from .table import append_at_z, fill, new_table, peaks_as_features

__all__ = ["identify", "Identification", "default_species", "read_line_list"]

# evidence of a companion match relative to a hydrogen line's: full weight gave more named lines
# at equal purity than half on the synthetic suite (benchmarks/); a rule of this tool
COMPANION_WEIGHT = 1.0
# H-D isotope shift of the Balmer and Lyman lines (about -82 km/s: the reduced-mass ratio,
# a textbook value) and the resolution elements it must span for D to be searched by default
D_SHIFT_KMS = 82.0
D_RESOLUTION_ELEMENTS = 5.0
# a secondary species' line on a primary line counts this much of its strength (`_shadowed`);
# a rule of this tool
SHADOW_WEIGHT = 0.1
BROAD_RESOLUTION = 3.0
# systematic shift, in FWHM, of the centre of a real line profile fitted as a Gaussian: a
# rule of thumb of this tool (asymmetric infill, Lorentzian wings and blends move a centre by
# a few per cent of the width)
PROFILE_SHIFT = 0.1
# the pixel check reads the RERANK_TOP best solutions; one of them within RERANK_NATS of the
# first's score that the pixels hold secure, where the first's are not, goes first (rules of
# this tool)
RERANK_TOP = 4
RERANK_NATS = 3.0
XRAY_IONS = ["C VI", "N VII", "O VIII", "Ne X", "Mg XII", "Si XIV", "S XVI", "Ar XVIII", "Ca XX",
             "Fe XXVI", "Ni XXVIII"]


@dataclass
class Identification:
    features: QTable
    status: str
    solutions: list
    lines: QTable
    z: float = None
    z_err: float = None
    velocity_kms: float = None
    velocity_err_kms: float = None
    velocity_convention: str = "optical"
    systems: list = field(default_factory=list)
    feature_result: object = None
    meta: dict = field(default_factory=dict)
    #: with status "none": what the strongest feature could be on its own (`single_line`)
    single_line_readings: list = field(default_factory=list)
    #: a lone emission line named Lyα by the continuum break at its foot (`lyman_break`)
    lyman_break: dict = None


def regime(lam_vac_m):
    lo, hi = float(np.min(lam_vac_m)), float(np.max(lam_vac_m))
    if hi < 2.5e-9:
        return "xray"
    if lo > 1e-4:
        return "radio"
    return "optical"


def default_species(reg, resolution=None):
    """Species searched when none are named.  Deuterium joins in the optical and
    ultraviolet where the resolving power parts its lines from hydrogen's cleanly (the
    isotope shift, -82 km/s, over D_RESOLUTION_ELEMENTS resolution elements): laboratory
    and echelle spectra."""
    names = {"xray": XRAY_IONS, "radio": ["H", "He", "C"], "optical": ["H", "He II"]}[reg]
    if reg == "optical" and resolution and resolution * D_SHIFT_KMS / C_KMS >= D_RESOLUTION_ELEMENTS:
        names = names + ["D"]
    return list(names)


def _n_ranges(reg, lam_rest_min, lam_rest_max):
    if reg == "xray":
        return (1, 2), (2, 12)
    if reg == "radio":
        nu_max = K.C / lam_rest_min
        nu_min = K.C / lam_rest_max
        lo = int(np.floor((2 * K.RYDBERG_HZ / nu_max) ** (1 / 3))) - 2
        hi = int(np.ceil((2 * 4 * K.RYDBERG_HZ / nu_min) ** (1 / 3))) + 2
        lo = max(lo, 20)
        hi = min(max(hi, lo), 1995)
        return (lo, hi), (lo + 1, hi + 4)
    return (1, 6), (2, 40)


@functools.lru_cache(maxsize=8)
def _catalogue(names, lower, upper, R, lam_min, lam_max, kind, series, fine=True):
    """The identification catalogue and its expected strengths and groups; the last few
    are kept for the next spectrum of a batch (callers must not modify them in place)."""
    # fine-structure components merged at the resolution: resolved doublets (X-ray
    # Lyman-alpha of heavy ions, H I at very high R) keep their own positions.  Radio
    # recombination lines (n ~ 40-300) are multiplets (`fine` False): their fine structure,
    # a few 1e-5 of the frequency, lies inside the thermal width of any ionised gas
    # (about 20 km/s for hydrogen at 10^4 K), and its components number n^2 per line
    cat = build_catalogue(list(names), lower, upper, fine=fine, resolution=R,
                          wavelength_range=(lam_min * u.m, lam_max * u.m))
    if series:
        wanted = {s.lower() for s in series}
        cat = cat[[str(s).lower() in wanted for s in cat["series"]]]
    strength, group = expected_strengths(cat, kind) if len(cat) else (np.zeros(0), np.zeros(0, dtype=str))
    for arr in (strength, group):
        arr.flags.writeable = False
    return cat, strength, group


def _observed(features, medium):
    """Vacuum wavelengths (m) and relative errors of feature centres."""
    c = u.Quantity(features["center"])
    err = u.Quantity(features["center_err"]).to_value(c.unit) if "center_err" in features.colnames \
        else np.full(len(c), np.nan)
    return np.exp(vacuum_ln(c, medium)), np.abs(err / c.value)


@dataclass
class _Evidence:
    """What the features of one spectrum say, as arrays over the feature table."""
    feats: QTable
    feature_result: object      #: the `FeatureResult` (None for a peak list)
    medium: str
    R: float                    #: resolving power in use
    y: np.ndarray               #: ln vacuum wavelength (m) of each feature
    sy: np.ndarray              #: position error used in matching (ln)
    sy_meas: np.ndarray         #: measured part of it
    w: np.ndarray               #: weight, ln(1 + S/N)
    snr: np.ndarray
    kinds: np.ndarray
    use: np.ndarray             #: evidence for the redshift (not on a masked sky line or band)
    sky: np.ndarray
    telluric: np.ndarray
    flux_abs: np.ndarray
    fwhm: np.ndarray            #: FWHM in ln
    blend: np.ndarray
    is_freq_axis: bool
    regime: str
    main_kind: str
    window: tuple               #: observed window in ln (None for a peak list)
    detector: str = "profiles"  #: which feature detector measured the features


@dataclass
class _LineSet:
    """The lines a solution can use: hydrogenic catalogue plus companions, with their priors."""
    cat: QTable
    x: np.ndarray               #: ln rest vacuum wavelength of the catalogue lines
    strength: np.ndarray
    group: np.ndarray
    group_codes: np.ndarray
    line_weight: np.ndarray
    multiplet: np.ndarray
    comp: list
    x_comp: np.ndarray
    st_comp: np.ndarray
    xs: np.ndarray              #: catalogue and companion positions together (the search's)
    st_s: np.ndarray
    search_kw: dict
    anchors: np.ndarray
    r_grid: float


def identify(data, *, species=None, z=None, zmin=None, zmax=None, series=None,
             kinds=("emission", "absorption"), snr=5.0, resolution=None, extra_lines=None,
             mask_sky=False, mask_telluric=False, calibration=2e-5, resolution_fraction=0.1,
             find_systems=True, companions=True, detector="auto"):
    """Identify the hydrogenic lines of a spectrum or a peak list; see the module docstring.

    The steps: measure the features (`_evidence`), choose the lines of the regime
    (`_line_set`), search the shift (`_search`), name a lone Lyα by its break
    (`_break_named`), assign lines to features (`_assign_all`), look for a second
    system (`_second_system`), measure the lines the solution predicts (`append_at_z`)
    and write the result (`_result`).
    """
    ev = _evidence(data, kinds, snr, resolution, calibration, resolution_fraction,
                   mask_sky, mask_telluric, detector)
    asked_z = (zmin, zmax)
    if zmin is None:
        zmin = -0.005 if ev.regime == "radio" else 0.0
    if zmax is None:
        zmax = 0.005 if ev.regime == "radio" else 7.0
    if z is not None:
        zmin = zmax = z
    names = list(species) if species else default_species(ev.regime, ev.R)
    ls = _line_set(ev, names, zmin, zmax, series, companions, extra_lines)
    s_range = (np.log1p(zmin), np.log1p(zmax))
    # measured fluxes should follow the expected strengths within a factor ~3 (emission) or
    # ~10 (absorption, where saturation flattens them): rules of thumb of this tool
    isig = np.log(3.0) if ev.main_kind == "emission" else np.log(10.0)
    sols = _search(ev, ls, z, s_range, isig, calibration)
    status = classify(sols)
    broken = None
    if ev.feature_result is not None and z is None and len(ls.cat) and len(ev.y):
        sols, status, broken = _pixels(ev, ls, sols, s_range)
    readings, lyman = [], None
    if status == "none" and z is None and len(ls.cat):
        sols, status, readings, lyman = _break_named(ev, ls, sols, status, snr, s_range)
    best_s = sols[0].s if sols else (np.log1p(z) if z is not None else None)
    out, res, pixels = _assign_all(ev, ls, sols, status, best_s, z, extra_lines, snr,
                                   (mask_sky, mask_telluric))
    systems = []
    if find_systems and z is None and status == "secure":
        systems = _second_system(ev, ls, out, sols, s_range, isig, calibration)
    if ev.feature_result is not None and best_s is not None and len(ls.cat) and len(ev.feats) and \
            (status == "secure" or z is not None):
        out = append_at_z(out, res.best, ls.cat, ls.x, ls.group, ls.line_weight >= 1, best_s,
                          sols[0].s_err if sols else 0.0, pixels, ev.y, ev.fwhm,
                          ev.main_kind, ev.window, ev.R, ev.medium, mask_sky and not ev.is_freq_axis,
                          1.0 if z is not None else solution_probability(sols))
    if broken:
        out = _drop_unsupported(out, broken)
    result = Identification(features=out, status=status, solutions=sols, lines=ls.cat,
                            feature_result=ev.feature_result, systems=systems,
                            single_line_readings=readings, lyman_break=lyman)
    _set_shift(result, ev, sols, best_s, status, z)
    cat = ls.cat
    result.meta = {"medium": ev.medium, "regime": ev.regime,
                   "species": [str(s) for s in sorted(set(cat["species"]))] if len(cat) else names,
                   "resolution": ev.R, "calibration_term": calibration,
                   "resolution_fraction": resolution_fraction, "z_range": [zmin, zmax],
                   "z_fixed": z is not None, "sky_masked": bool(mask_sky),
                   "telluric_masked": bool(mask_telluric),
                   "companions": [c["name"] for c in ls.comp],
                   "intensity_model": strength_assumption(ev.main_kind),
                   "constants": cat.meta.get("constants"), "catalogue": dict(cat.meta)}
    if ev.regime == "radio" and ev.feature_result is not None:
        # the 21-cm family: single lines, read on the pixels (`hyperfine_line`)
        reading = read_hyperfine(ev.feature_result, species, *asked_z, z=z, kinds=kinds)
        result = with_hyperfine(result, reading)
    return result


def _evidence(data, kinds, snr, resolution, calibration, resolution_fraction, mask_sky,
              mask_telluric, detector="auto"):
    """Step 1: the features (measured here unless `data` is a peak list) and what they say."""
    from ..features.detect import find_features
    from ..io.read import is_peak_list

    feature_result = None
    if is_peak_list(data):
        feats = peaks_as_features(data)
        medium = data.meta.get("medium", "vacuum")
        R = resolution or data.meta.get("resolution")
    else:
        feature_result = find_features(data, snr=snr, resolution=resolution, kinds=kinds,
                                       detector=detector)
        feats = feature_result.features.copy()
        medium = feature_result.meta["medium"]
        detector = feature_result.meta.get("detector", detector)
        R = feature_result.meta.get("resolution")
    feats = feats[[k in kinds for k in feats["kind"]]] if len(feats) else feats
    lam, rel = _observed(feats, medium) if len(feats) else (np.array([]), np.array([]))
    if not R and len(feats):
        fw = u.Quantity(feats["fwhm"]).to_value(feats["center"].unit)
        rr = np.abs(u.Quantity(feats["center"]).value / fw)
        R = float(np.nanmedian(rr)) if np.any(np.isfinite(rr)) else 2000.0
    R = R or 2000.0
    sy_meas = np.nan_to_num(rel, nan=1.0 / R)
    # matching tolerance: the measured error, the calibration, a fraction of the resolution
    # element and, for the scale-space features (Gaussians of the ladder's widths),
    # PROFILE_SHIFT of the feature's own width (real profiles are not Gaussians: emission
    # filling, wings and blends move a broad line's fitted centre)
    shape = PROFILE_SHIFT if detector == "scales" else 0.0   # (the profile fits fit the shape)
    sy = np.sqrt(sy_meas ** 2 + calibration ** 2 + (resolution_fraction / R) ** 2
                 + (shape * _width_ln(feats)) ** 2)
    is_freq_axis = len(feats) > 0 and not u.Quantity(feats["center"]).unit.is_equivalent(u.m)
    sky = np.zeros(len(feats), bool)
    telluric = np.zeros(len(feats), bool)
    if len(feats) and not is_freq_axis:
        args = (feats["center"], feats["center_err"], feats["fwhm"])
        sky = sky_mask(*args, medium=medium, bands=False)
        telluric = sky_mask(*args, medium=medium, kind=feats["kind"], lines=False) & ~sky
    y = np.log(lam) if len(lam) else np.zeros(0)
    # features on masked sky lines or telluric bands are no evidence for the redshift, nor
    # for the kind of spectrum (sky residuals come with either sign)
    use = ~((sky & mask_sky) | (telluric & mask_telluric))
    snr_arr = np.asarray(feats["snr"], dtype=float) if len(feats) else np.zeros(0)
    kinds_arr = np.asarray(feats["kind"]).astype(str) if len(feats) else np.zeros(0, str)
    flux_abs = np.abs(np.asarray(u.Quantity(feats["flux"]).value, dtype=float)) if len(feats) \
        else np.zeros(0)
    window = observed_window(feature_result, y)
    # the regime of the spectrum's own window where there is one (a spectrum whose only
    # line is too faint to be detected as a feature still has a regime)
    reg = regime(np.exp(np.array(window))) if window is not None else \
        (regime(lam) if len(lam) else "optical")
    return _Evidence(
        feats=feats, feature_result=feature_result, medium=medium, R=R, y=y, sy=sy,
        sy_meas=sy_meas, w=np.log1p(np.clip(np.nan_to_num(snr_arr, nan=5.0), 0, 1e4)),
        snr=snr_arr, kinds=kinds_arr, use=use, sky=sky, telluric=telluric, flux_abs=flux_abs,
        fwhm=_width_ln(feats), blend=np.array([has_flag(f, Flag.BLEND) for f in feats["flags"]],
                                              dtype=bool),
        is_freq_axis=is_freq_axis, regime=reg,
        main_kind=_main_kind(snr_arr, kinds_arr, use), window=window,
        detector=detector)


def _line_set(ev, names, zmin, zmax, series, companions, extra_lines):
    """Step 2: the catalogue of the regime over the rest range the window and z range allow."""
    if len(ev.y):
        # the whole observed window, not just the features' span: a line expected beyond the
        # reddest (or bluest) feature and absent is evidence too
        lam = np.exp(ev.y)
        lo_obs, hi_obs = lam.min(), lam.max()
        if ev.window is not None:
            lo_obs, hi_obs = min(lo_obs, np.exp(ev.window[0])), max(hi_obs, np.exp(ev.window[1]))
        lam_rest_min = lo_obs / (1 + zmax) * (1 - 5e-3)
        lam_rest_max = hi_obs / (1 + zmin) * (1 + 5e-3)
    else:
        lam_rest_min, lam_rest_max = 1e-10, 1e-5
    lower, upper = _n_ranges(ev.regime, lam_rest_min, lam_rest_max)
    # a slightly wider range and R on coarse grids, so that spectra of one survey share it
    q = 0.05
    lmin = float(np.exp(np.floor(np.log(lam_rest_min) / q) * q))
    lmax = float(np.exp(np.ceil(np.log(lam_rest_max) / q) * q))
    r_grid = float(np.exp(np.round(np.log(ev.R) / 0.1) * 0.1))
    cat, strength, group = _catalogue(tuple(names), tuple(lower), tuple(upper), r_grid, lmin, lmax,
                                      ev.main_kind, tuple(series) if series else None,
                                      ev.regime != "radio")
    keep = strength >= 1e-3
    cat, strength, group = cat[keep], strength[keep], group[keep]
    if ev.detector == "scales":
        # (measured side by side: it helps the broad lines the scales detector finds, and
        # costs the profile-fit detector a synthetic Lyman/Balmer alias)
        strength = _shadowed(cat, strength, ev.fwhm[ev.use] if len(ev.fwhm) else np.zeros(0), ev.R)
    group_codes = np.unique(group, return_inverse=True)[1] if len(group) else np.zeros(0, int)
    line_weight = np.where(is_primary(cat), 1.0, 0.5) if len(cat) else np.zeros(0)
    multiplet = multiplet_codes(cat)
    x = np.log(cat["wavelength_vacuum"].to_value(u.m)) if len(cat) else np.zeros(0)
    comp = _companions(companions and ev.regime == "optical" and not ev.is_freq_axis
                       and len(cat) > 0, lmin, lmax, r_grid, extra_lines, ev.main_kind)
    # the search sees the hydrogenic lines and the companions (COMPANION_WEIGHT, own groups of
    # one, so that they predict no missing lines, and out of the intensity check)
    nc = len(comp)
    x_comp = np.log([c["rest_vacuum_m"] for c in comp]) if nc else np.zeros(0)
    st_comp = np.array([c["strength"] for c in comp], dtype=float)
    if nc and len(cat) and ev.detector == "scales":
        # a companion on a hydrogen line (Ca II H on Hepsilon) counts as a shadowed line does
        reach = _reach(ev.fwhm[ev.use] if len(ev.fwhm) else np.zeros(0), ev.R)
        on_h = _within(np.sort(x[is_primary(cat)]), x_comp, reach)
        st_comp = np.where(on_h, st_comp * SHADOW_WEIGHT, st_comp)
    search_kw = dict(group=_more_codes(group_codes, nc), multiplet=_more_codes(multiplet, nc),
                     line_weight=np.concatenate([line_weight, np.full(nc, COMPANION_WEIGHT)]),
                     intensity_strength=np.concatenate([strength, np.zeros(nc)]))
    return _LineSet(cat=cat, x=x, strength=strength, group=group, group_codes=group_codes,
                    line_weight=line_weight, multiplet=multiplet, comp=comp, x_comp=x_comp,
                    st_comp=st_comp, xs=np.concatenate([x, x_comp]),
                    st_s=np.concatenate([strength, st_comp]), search_kw=search_kw,
                    anchors=np.flatnonzero(strength >= 0.02), r_grid=r_grid)


def _shadowed(cat, strength, fwhm_ln, R):
    """Strengths with the lines of secondary species that fall on a primary line (He II
    Pickering members on the Balmer lines, within half the features' typical width)
    weighted down by SHADOW_WEIGHT, where the features are broad (half-width at least
    BROAD_RESOLUTION resolution elements) and their positions cannot tell the two apart:
    the primary line explains the feature, and the secondary species is named by its lines
    no primary line covers (He II 4686, 5412)."""
    if not len(cat):
        return strength
    primary = is_primary(cat)
    if primary.all() or not primary.any():
        return strength
    x = np.log(cat["wavelength_vacuum"].to_value(u.m))
    reach = _reach(fwhm_ln, R)
    if reach < BROAD_RESOLUTION / R:
        return strength         # resolved narrow lines: the positions tell them apart
    xp = np.sort(x[primary])
    shadowed = ~primary & _within(xp, x, reach)
    out = np.array(strength, float)
    out[shadowed] *= SHADOW_WEIGHT
    return out


def _reach(fwhm_ln, R):
    """Half the features' typical FWHM, at least one resolution element (ln units)."""
    return max(float(np.median(fwhm_ln)) / 2 if len(fwhm_ln) else 0.0, 1.0 / R)


def _search(ev, ls, z, s_range, isig, calibration):
    """Step 3: the solutions, best first (searched, or refined at a fixed z)."""
    use, R = ev.use, ev.R
    if z is None:
        sols = search_shift(ev.y[use], ev.sy[use], ev.w[use], ls.xs, ls.st_s, smin=s_range[0],
                            smax=s_range[1], anchors=ls.anchors if len(ls.anchors) else None,
                            window=ev.window, flux=ev.flux_abs[use], intensity_sigma=isig,
                            fwhm_ln=1.0 / R, sy_fit=ev.sy_meas[use], s_floor=calibration,
                            half_width=ev.fwhm[use] / 2, **ls.search_kw)
        return [_reindex(s, np.flatnonzero(use)) for s in sols]
    sol = refine(np.log1p(z), ev.y[use], ev.sy[use], ev.w[use], ls.xs, ls.st_s,
                 np.ones(len(ls.xs), bool), window=ev.window, fwhm_ln=1.0 / R,
                 half_width=ev.fwhm[use] / 2, **ls.search_kw)
    sol = _reindex(sol, np.flatnonzero(use))
    sol.s = float(np.log1p(z))
    return [sol] if sol.n_lines else []


def _break_named(ev, ls, sols, status, snr, s_range):
    """Step 4 (no solution): readings of the clearest line, and Lyα named by its break."""
    use, kinds_arr, snr_arr, main_kind = ev.use, ev.kinds, ev.snr, ev.main_kind
    y, sy, x, cat = ev.y, ev.sy, ls.x, ls.cat
    s_lo, s_hi = s_range
    lyman = None
    cand = reading_candidate(use, kinds_arr, main_kind, snr_arr, snr)
    readings = readings_of(cand, use, snr_arr, snr, y, sy, x, ls.strength, ls.group, cat, ls.comp,
                         ls.x_comp, s_lo, s_hi, ev.window, main_kind) if cand is not None else []
    if ev.feature_result is not None and main_kind == "emission" and ev.regime == "optical" \
            and not ev.is_freq_axis:
        # the break is evidence of its own: the strongest few emission features are
        # tried, not only the one clear enough to be read alone, down to a fitted S/N of
        # 0.8 times the detection limit (a free width and baseline take 20-35 % of the
        # matched-filter S/N the features were detected by)
        em_ok = np.flatnonzero(use & (kinds_arr == "emission")
                               & (np.nan_to_num(snr_arr) >= 0.8 * snr))
        pixels = sorted_pixels(ev.feature_result) if len(em_ok) else None
        for c in em_ok[np.argsort(-snr_arr[em_ok])][:3]:
            rd = readings if c == cand else readings_of(
                c, use, snr_arr, snr, y, sy, x, ls.strength, ls.group, cat, ls.comp, ls.x_comp,
                s_lo, s_hi, ev.window, main_kind)
            lyman = break_reading(pixels, ev.R, int(c), rd, y, ev.fwhm)
            if lyman is not None:
                break
    if lyman is None:
        return sols, status, readings, None
    # Lyα named by the continuum break at its foot: the z of that one line, refined
    # with whatever else (companions, Lyβ) the catalogue puts in the window there
    # (emission features only: a residual dip on the line's flank is not it)
    em = use & (kinds_arr == "emission")
    # the break names Lyα itself: He II 1215 (n = 4 -> 2), 0.4 Å away, is left out
    lya_x = x[np.asarray(cat["label"]) == "Lyα"]
    twin = np.zeros(len(ls.xs), bool)
    if len(lya_x):
        twin[:len(x)] = (np.asarray(cat["label"]) != "Lyα") & \
            (np.min(np.abs(x[:, None] - lya_x[None, :]), axis=1) < 2e-3)
    sol = refine(np.log1p(lyman["z"]), y[em], sy[em], ev.w[em], ls.xs, ls.st_s,
                 ~twin, window=ev.window, fwhm_ln=1.0 / ev.R,
                 half_width=ev.fwhm[em] / 2, **ls.search_kw)
    sol = _reindex(sol, np.flatnonzero(em))
    if any(i == lyman["feature"] and str(cat["label"][j]) == "Lyα"
           for i, j, _ in sol.matches if j < len(cat)):
        sol.status = "tentative"
        return [sol], "tentative", [], lyman
    return sols, status, readings, None


def _assign_all(ev, ls, sols, status, best_s, z, extra_lines, snr, masks):
    """Step 5: the identification table, every feature assigned a line or none."""
    feats, y, sy, x, cat, R = ev.feats, ev.y, ev.sy, ls.x, ls.cat, ev.R
    nc = len(ls.comp)
    out = new_table(feats, ev.sky, ev.telluric, *masks)
    # companions (their typical strengths) and user lines (strength 1: the user expects them)
    # compete in the same assignment, so a weak hydrogenic line cannot take a feature that
    # one of them explains better
    other = ls.comp + [dict(line, source="user") for line in (extra_lines or [])]
    x_user = np.log([line["rest_vacuum_m"] for line in extra_lines]) if extra_lines else np.zeros(0)
    x_all = np.concatenate([x, ls.x_comp, x_user])
    strength_assign = _defer_to_primary(x, ls.strength, ls.line_weight < 1, 1.0 / R)
    strength_all = np.concatenate([strength_assign, ls.st_comp, np.ones(len(x_user))])
    group_all = np.concatenate([np.asarray(ls.group, dtype=str),
                                np.array([f"companion|{k}" for k in range(nc)], dtype=str),
                                np.array([f"user|{k}" for k in range(len(x_user))], dtype=str)])
    s_user = best_s if best_s is not None else 0.0
    res, pixels = None, None
    if best_s is not None and status != "none" or (z is not None and best_s is not None):
        # masked features take part too: one may be named where the solution's other lines
        # predict a line above the detection limit (its sky or telluric flag stays)
        idx = np.arange(len(feats))
        res = assign(y[idx], sy[idx], ev.flux_abs[idx], ev.blend[idx], x_all, strength_all,
                     group_all, best_s, snr=ev.snr[idx], masked=~ev.use[idx])
        # a label is as likely as its line at this z times this z itself (1 when fixed)
        res.score = res.score * (1.0 if z is not None else solution_probability(sols))
        _primary_in_blends(out, idx, res, y[idx], sy[idx], ev.fwhm[idx], best_s, x,
                           ls.line_weight < 1)
        # a secondary species is named only where its stronger lines are not missing
        pixels = sorted_pixels(ev.feature_result) if ev.feature_result is not None else None
        withdraw_unsupported(res, y[idx], ev.snr[idx], x_all,
                             np.concatenate([ls.strength, ls.st_comp, np.ones(len(x_user))]),
                             group_all, best_s, ev.window, 1.0 / R,
                             np.concatenate([ls.line_weight < 1, np.zeros(nc + len(x_user), bool)]),
                             detection_snr=snr,
                             pixels=None if pixels is None else pixels[0][np.isfinite(pixels[1])])
        fill(out, idx, res, cat, y[idx], best_s, other)
    elif extra_lines and len(feats):
        # no hydrogenic solution: the user's lines are still matched at the rest frame (or z)
        idx = np.arange(len(feats))
        res = assign(y, sy, np.ones(len(y)), np.zeros(len(y), bool), x_user, np.ones(len(x_user)),
                     group_all[len(x) + nc:], s_user)
        res.best = np.where(res.best >= 0, res.best + len(x) + nc, -1)
        res.alt_index[:] = -1
        fill(out, idx, res, cat, y, s_user, other)
    return out, res, pixels


def _second_system(ev, ls, out, sols, s_range, isig, calibration):
    """Step 6: a second secure system among the features the first left unexplained."""
    y, sy, x, cat = ev.y, ev.sy, ls.x, ls.cat
    rest = np.flatnonzero(ev.use & (np.asarray(out["label"]) == "")
                          & (np.asarray(out["user_line"]) == "")
                          & (np.asarray(out["companion"]) == ""))
    if len(rest) < 3:
        return []
    more = search_shift(y[rest], sy[rest], ev.w[rest], x, ls.strength, smin=s_range[0],
                        smax=s_range[1], anchors=ls.anchors if len(ls.anchors) else None,
                        n_solutions=3, window=ev.window, flux=ev.flux_abs[rest],
                        intensity_sigma=isig, fwhm_ln=1.0 / ev.R, group=ls.group_codes,
                        line_weight=ls.line_weight, sy_fit=ev.sy_meas[rest], s_floor=calibration,
                        multiplet=ls.multiplet, half_width=ev.fwhm[rest] / 2)
    more = [_reindex(s, rest) for s in more]
    # a second system must stand on its own: secure by the same rules, 4 lines or more,
    # and not the first one again
    if not (more and classify(more) == "secure" and more[0].n_lines >= 4 and
            abs(more[0].s - sols[0].s) > 10 * max(sols[0].s_err, 1e-6)):
        return []
    strength_assign = _defer_to_primary(x, ls.strength, ls.line_weight < 1, 1.0 / ev.R)
    res2 = assign(y[rest], sy[rest], ev.flux_abs[rest], ev.blend[rest], x, strength_assign,
                  ls.group, more[0].s, snr=ev.snr[rest])
    _primary_in_blends(out, rest, res2, y[rest], sy[rest], ev.fwhm[rest], more[0].s, x,
                       ls.line_weight < 1)
    fill(out, rest, res2, cat, y[rest], more[0].s, None, system=2)
    return [more[0]]


def _pixels(ev, ls, sols, s_range):
    """Step 3b: the search's best solution checked on the pixels (`pixel_check`): its
    status capped by the support the pixels give it.  Returns the solutions, the status
    and the hydrogenic lines beyond the gap of their series (their labels are withdrawn)."""
    if not sols:
        return sols, "none", None
    fr = ev.feature_result
    scan = fr.scan if fr.scan is not None else _scan(fr, ev.R)
    # radio recombination lines: one run per species over all its lines, strongest (the
    # alpha lines) first; their "series" (the lower level) holds a line or two each
    group = np.asarray(ls.cat["species"]).astype(str) if ev.regime == "radio" else ls.group
    lines = (ls.x, ls.strength, group, ls.x_comp)
    verdicts = []
    for sol in sols[:RERANK_TOP]:
        feats = [m[0] for m in sol.matches]
        fw = float(np.median(ev.fwhm[feats])) if feats else 1.0 / ev.R
        reader = PixelReader(scan, fr.spectrum, fw, ev.main_kind)
        null = reader.null_counts(s_range, *lines, avoid=sol.s, seed=len(ev.y))
        sup = reader.support(sol.s, *lines)
        verdicts.append((sup, support_status(sup, null), fw))
    # a solution close behind on the features that the pixels hold secure, where the first
    # is not, goes first
    k = 0
    if verdicts[0][1] != "secure":
        for i, (_, cap, _) in enumerate(verdicts[1:], 1):
            if cap == "secure" and sols[i].score >= sols[0].score - RERANK_NATS:
                k = i
                break
    if k:
        sols = [sols[k]] + sols[:k] + sols[k + 1:]
        verdicts = [verdicts[k]] + verdicts[:k] + verdicts[k + 1:]
    sup, cap, fw = verdicts[0]
    # solutions within a line width of the first are the same system displaced (broad
    # lines), not alternatives to it
    distinct = [sols[0]] + [x for x in sols[1:] if abs(x.s - sols[0].s) > fw]
    status = capped(classify(distinct), cap)
    for x in sols[1:]:
        x.status = "alternative"
    sols[0].status = status
    cat = ls.cat
    broken = {(str(cat["species"][j]), int(cat["n_lower"][j]), int(cat["n_upper"][j]))
              for j in sup.broken}
    return sols, status, broken


def _scan(feature_result, R):
    """The scale-space scan of a spectrum measured by another detector."""
    spec = feature_result.spectrum
    x = spec.axis.value.astype(float)
    sig = np.asarray(feature_result.noise, float)
    good = ~spec.mask & np.isfinite(sig) & (sig > 0) & np.isfinite(spec.flux.value)
    u_ax = np.log(x)
    return scan_scales(u_ax, spec.flux.value.astype(float), sig, good, fwhm_min=1.0 / R)


def _drop_unsupported(out, broken):
    """Hydrogenic labels of members beyond the gap of their series (`pixel_check`) are
    withdrawn; the features stay, unidentified.  Lines measured at z (flag at_z) are
    measurements at a predicted place, not claims of detection: they stay."""
    for i in range(len(out)):
        if not out["label"][i] or has_flag(out["flags"][i], Flag.AT_Z):
            continue
        if (str(out["species"][i]), int(out["n_lower"][i]), int(out["n_upper"][i])) not in broken:
            continue
        for col, empty in (("label", ""), ("species", ""), ("series", ""), ("n_lower", 0),
                           ("n_upper", 0), ("system", 0)):
            out[col][i] = empty
    return out


def _set_shift(result, ev, sols, best_s, status, z):
    """Step 8: z, its error and the velocity in the convention of the regime."""
    if best_s is None or (status == "none" and z is None):
        return
    zz = float(np.expm1(best_s))
    zerr = sols[0].z_err if sols else 0.0
    result.z, result.z_err = zz, float(zerr)
    if ev.is_freq_axis and ev.regime == "radio":
        result.velocity_convention = "radio"
        result.velocity_kms = float(C_KMS * zz / (1 + zz))
        result.velocity_err_kms = float(C_KMS * zerr / (1 + zz) ** 2)
    else:
        result.velocity_convention = "optical"
        result.velocity_kms = float(C_KMS * zz)
        result.velocity_err_kms = float(C_KMS * zerr)


def _companions(wanted, lam_min, lam_max, R, extra_lines, kind="emission"):
    """The companion lines of the rest range, less those a user's line stands for
    (within one resolution element): the user's list takes precedence."""
    if not wanted:
        return []
    comp = [dict(c, source="companion") for c in companion_lines(lam_min, lam_max, R, kind)]
    if extra_lines:
        xu = np.sort(np.log([line["rest_vacuum_m"] for line in extra_lines]))
        near = _within(xu, np.log([c["rest_vacuum_m"] for c in comp]), 1.0 / R)
        comp = [c for c, n in zip(comp, near) if not n]
    return comp


def _more_codes(codes, n):
    """Integer codes followed by n new ones of their own (groups of one)."""
    start = int(codes.max()) + 1 if len(codes) else 0
    return np.concatenate([codes, start + np.arange(n)])


def _width_ln(feats):
    """Feature FWHM in ln(axis) units (|FWHM / centre|), 0 where unknown."""
    if not len(feats):
        return np.zeros(0)
    c = np.abs(np.asarray(u.Quantity(feats["center"]).value, dtype=float))
    w = np.abs(np.asarray(u.Quantity(feats["fwhm"]).to_value(feats["center"].unit), dtype=float))
    return np.nan_to_num(np.divide(w, c, out=np.zeros_like(w), where=c > 0), nan=0.0)


def _primary_in_blends(out, idx, res, y, sy, fwhm_ln, s, x, secondary):
    """A feature given a secondary-species line although primary-species lines lie
    within its half width is a blend of the primary series (the crowded Lyman or
    Balmer lines below a series limit, which the one-line-one-feature rule has used
    up): it takes the nearest primary line and the flag ``blend``."""
    if not len(x) or not np.any(secondary):
        return
    prim = np.flatnonzero(~secondary)
    order = prim[np.argsort(x[prim])]
    xs = x[order]
    for k in range(len(idx)):
        j = int(res.best[k])
        if j < 0 or j >= len(x) or not secondary[j]:
            continue
        rest = y[k] - s
        lo, hi = np.searchsorted(xs, [rest - fwhm_ln[k] / 2, rest + fwhm_ln[k] / 2])
        if hi <= lo:
            continue
        near = order[lo:hi]
        jj = int(near[np.argmin(np.abs(x[near] - rest))])
        res.best[k] = jj
        res.resid[k] = (rest - x[jj]) / sy[k] if sy[k] > 0 else np.nan
        i = idx[k]
        out["flags"][i] = join_flags(out["flags"][i], Flag.BLEND)


def _defer_to_primary(x, strength, secondary, fwhm_ln, factor=0.1):
    """Strengths for the assignment: a secondary-species line that falls within one
    resolution element of a primary-species line (He II Pickering lines on the Balmer
    lines, D I beside H I at low R) gets `factor` of its strength, so the primary
    line explains the feature unless the position clearly says otherwise."""
    out = np.array(strength, dtype=float)
    prim = np.sort(x[~secondary])
    if not len(prim) or not np.any(secondary):
        return out
    xs = x[secondary]
    k = np.clip(np.searchsorted(prim, xs), 1, max(len(prim) - 1, 1))
    dist = np.minimum(np.abs(prim[k - 1] - xs), np.abs(prim[np.minimum(k, len(prim) - 1)] - xs))
    idx = np.flatnonzero(secondary)
    out[idx[dist < fwhm_ln]] *= factor
    return out


def _main_kind(snr, kinds, use):
    """"emission" or "absorption": the kind with more evidence among the features in use,
    the sum of S/N squared (the chi-squared they carry), so that a clear emission line
    outweighs a few dips at the detection limit."""
    power = np.nan_to_num(np.asarray(snr, dtype=float)) ** 2
    kinds = np.asarray(kinds).astype(str)
    return "absorption" if power[use & (kinds == "absorption")].sum() > \
        power[use & (kinds == "emission")].sum() else "emission"






def _reindex(sol, idx):
    sol.matches = [(int(idx[i]), j, r) for i, j, r in sol.matches]
    return sol
