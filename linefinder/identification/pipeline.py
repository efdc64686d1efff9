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

from ..physics import constants as K
from ..catalogue.build import build_catalogue
from ..catalogue.companions import companion_lines
from ..catalogue.contaminants import sky_mask
from ..spectral.doppler import C_KMS
from ..catalogue.strengths import (expected_strengths, is_primary, multiplet_codes,
                                 strength_assumption)
from .table import append_at_z, fill, new_table, peaks_as_features
from ..io.line_lists import read_line_list
from .lyman_break import GAP_FWHM, WINDOW_LN, continuum_step, is_break, mean_transmission
from .matching import assign, withdraw_unsupported
from ..spectral.medium import air_to_vacuum
from .redshift import _within, classify, refine, search_shift, solution_probability
from .single_line import READING_STRENGTH, single_line_readings
from ..features.flags import Flag, has_flag, join_flags

__all__ = ["identify", "Identification", "default_species", "read_line_list"]

# evidence of a companion match relative to a hydrogen line's: full weight gave more named lines
# at equal purity than half on the synthetic suite (benchmarks/); a rule of this tool
COMPANION_WEIGHT = 1.0
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


def default_species(reg):
    return {"xray": XRAY_IONS, "radio": ["H", "He", "C"], "optical": ["H", "He II"]}[reg]


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
def _catalogue(names, lower, upper, R, lam_min, lam_max, kind, series):
    """The identification catalogue and its expected strengths and groups; the last few
    are kept for the next spectrum of a batch (callers must not modify them in place)."""
    # fine-structure components merged at the resolution: resolved doublets (X-ray
    # Lyman-alpha of heavy ions, H I at very high R) keep their own positions
    cat = build_catalogue(list(names), lower, upper, fine=True, resolution=R,
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
    lam = c.to(u.m, equivalencies=u.spectral()).value
    if c.unit.is_equivalent(u.m) and medium == "air":
        lam = air_to_vacuum(lam * u.m).to_value(u.m)
    rel = np.abs(err / c.value)
    return lam, rel


def identify(data, *, species=None, z=None, zmin=None, zmax=None, series=None,
             kinds=("emission", "absorption"), snr=5.0, resolution=None, extra_lines=None,
             mask_sky=False, mask_telluric=False, calibration=2e-5, resolution_fraction=0.1,
             find_systems=True, companions=True):
    """Identify the hydrogenic lines of a spectrum or a peak list; see the module docstring."""
    from ..features.detect import find_features
    from ..io.read import is_peak_list

    feature_result = None
    if is_peak_list(data):
        feats = peaks_as_features(data)
        medium = data.meta.get("medium", "vacuum")
        R = resolution or data.meta.get("resolution")
    else:
        feature_result = find_features(data, snr=snr, resolution=resolution, kinds=kinds)
        feats = feature_result.features.copy()
        medium = feature_result.meta["medium"]
        R = feature_result.meta.get("resolution")
    feats = feats[[k in kinds for k in feats["kind"]]] if len(feats) else feats
    lam, rel = _observed(feats, medium) if len(feats) else (np.array([]), np.array([]))
    if not R and len(feats):
        fw = u.Quantity(feats["fwhm"]).to_value(feats["center"].unit)
        rr = np.abs(u.Quantity(feats["center"]).value / fw)
        R = float(np.nanmedian(rr)) if np.any(np.isfinite(rr)) else 2000.0
    R = R or 2000.0
    sy_meas = np.nan_to_num(rel, nan=1.0 / R)
    sy = np.sqrt(sy_meas ** 2 + calibration ** 2 + (resolution_fraction / R) ** 2)
    is_freq_axis = len(feats) > 0 and not u.Quantity(feats["center"]).unit.is_equivalent(u.m)
    sky = np.zeros(len(feats), bool)
    telluric = np.zeros(len(feats), bool)
    if len(feats) and not is_freq_axis:
        args = (feats["center"], feats["center_err"], feats["fwhm"])
        sky = sky_mask(*args, medium=medium, bands=False)
        telluric = sky_mask(*args, medium=medium, kind=feats["kind"], lines=False) & ~sky
    reg = regime(lam) if len(lam) else "optical"
    if zmin is None:
        zmin = -0.005 if reg == "radio" else 0.0
    if zmax is None:
        zmax = 0.005 if reg == "radio" else 7.0
    if z is not None:
        zmin = zmax = z
    names = list(species) if species else default_species(reg)
    y = np.log(lam) if len(lam) else np.zeros(0)
    window = _observed_window(feature_result, y)
    if len(lam):
        # the whole observed window, not just the features' span: a line expected beyond the
        # reddest (or bluest) feature and absent is evidence too
        lo_obs, hi_obs = lam.min(), lam.max()
        if window is not None:
            lo_obs, hi_obs = min(lo_obs, np.exp(window[0])), max(hi_obs, np.exp(window[1]))
        lam_rest_min = lo_obs / (1 + zmax) * (1 - 5e-3)
        lam_rest_max = hi_obs / (1 + zmin) * (1 + 5e-3)
    else:
        lam_rest_min, lam_rest_max = 1e-10, 1e-5
    lower, upper = _n_ranges(reg, lam_rest_min, lam_rest_max)
    # features on masked sky lines or telluric bands are no evidence for the redshift, nor
    # for the kind of spectrum (sky residuals come with either sign)
    use = ~((sky & mask_sky) | (telluric & mask_telluric))
    snr_arr = np.asarray(feats["snr"], dtype=float) if len(feats) else np.zeros(0)
    kinds_arr = np.asarray(feats["kind"]).astype(str) if len(feats) else np.zeros(0, str)
    main_kind = _main_kind(snr_arr, kinds_arr, use)
    # a slightly wider range and R on coarse grids, so that spectra of one survey share it
    q = 0.05
    lmin = float(np.exp(np.floor(np.log(lam_rest_min) / q) * q))
    lmax = float(np.exp(np.ceil(np.log(lam_rest_max) / q) * q))
    r_grid = float(np.exp(np.round(np.log(R) / 0.1) * 0.1))
    cat, strength, group = _catalogue(tuple(names), tuple(lower), tuple(upper), r_grid, lmin, lmax,
                                      main_kind, tuple(series) if series else None)
    keep = strength >= 1e-3
    cat, strength, group = cat[keep], strength[keep], group[keep]
    group_codes = np.unique(group, return_inverse=True)[1] if len(group) else np.zeros(0, int)
    line_weight = np.where(is_primary(cat), 1.0, 0.5) if len(cat) else np.zeros(0)
    multiplet = multiplet_codes(cat)
    x = np.log(cat["wavelength_vacuum"].to_value(u.m)) if len(cat) else np.zeros(0)
    comp = _companions(companions and main_kind == "emission" and reg == "optical"
                       and not is_freq_axis and len(cat) > 0, lmin, lmax, r_grid, extra_lines)
    # the search sees the hydrogenic lines and the companions (COMPANION_WEIGHT, own groups of
    # one, so that they predict no missing lines, and out of the intensity check)
    nc = len(comp)
    x_comp = np.log([c["rest_vacuum_m"] for c in comp]) if nc else np.zeros(0)
    st_comp = np.array([c["strength"] for c in comp], dtype=float)
    xs, st_s = np.concatenate([x, x_comp]), np.concatenate([strength, st_comp])
    search_kw = dict(group=_more_codes(group_codes, nc), multiplet=_more_codes(multiplet, nc),
                     line_weight=np.concatenate([line_weight, np.full(nc, COMPANION_WEIGHT)]),
                     intensity_strength=np.concatenate([strength, np.zeros(nc)]))
    w = np.log1p(np.clip(np.nan_to_num(snr_arr, nan=5.0), 0, 1e4))
    fwhm_feat = _width_ln(feats)
    s_lo, s_hi = np.log1p(zmin), np.log1p(zmax)
    anchors = np.flatnonzero(strength >= 0.02)
    flux_abs = np.abs(np.asarray(u.Quantity(feats["flux"]).value, dtype=float)) if len(feats) \
        else np.zeros(0)
    # measured fluxes should follow the expected strengths within a factor ~3 (emission) or
    # ~10 (absorption, where saturation flattens them): rules of thumb of this tool
    isig = np.log(3.0) if main_kind == "emission" else np.log(10.0)
    if z is None:
        sols = search_shift(y[use], sy[use], w[use], xs, st_s, smin=s_lo, smax=s_hi,
                            anchors=anchors if len(anchors) else None, window=window,
                            flux=flux_abs[use], intensity_sigma=isig, fwhm_ln=1.0 / R,
                            sy_fit=sy_meas[use], s_floor=calibration,
                            half_width=fwhm_feat[use] / 2, **search_kw)
        sols = [_reindex(s, np.flatnonzero(use)) for s in sols]
    else:
        sol = refine(np.log1p(z), y[use], sy[use], w[use], xs, st_s, np.ones(len(xs), bool),
                     window=window, fwhm_ln=1.0 / R, half_width=fwhm_feat[use] / 2, **search_kw)
        sol = _reindex(sol, np.flatnonzero(use))
        sol.s = float(np.log1p(z))
        sols = [sol] if sol.n_lines else []
    status = classify(sols)
    readings, lyman = [], None
    if status == "none" and z is None and len(cat):
        cand = _reading_candidate(use, kinds_arr, main_kind, snr_arr, snr)
        readings = _readings(cand, use, snr_arr, snr, y, sy, x, strength, group, cat, comp,
                             x_comp, s_lo, s_hi, window, main_kind) if cand is not None else []
        if feature_result is not None and main_kind == "emission" and reg == "optical" \
                and not is_freq_axis:
            # the break is evidence of its own: the strongest few emission features are
            # tried, not only the one clear enough to be read alone, down to a fitted S/N of
            # 0.8 times the detection limit (a free width and baseline take 20-35 % of the
            # matched-filter S/N the features were detected by)
            em_ok = np.flatnonzero(use & (kinds_arr == "emission")
                                   & (np.nan_to_num(snr_arr) >= 0.8 * snr))
            pixels = _sorted_pixels(feature_result) if len(em_ok) else None
            for c in em_ok[np.argsort(-snr_arr[em_ok])][:3]:
                rd = readings if c == cand else _readings(
                    c, use, snr_arr, snr, y, sy, x, strength, group, cat, comp, x_comp, s_lo,
                    s_hi, window, main_kind)
                lyman = _lyman_break(pixels, R, int(c), rd, y, fwhm_feat)
                if lyman is not None:
                    break
        if lyman is not None:
            # Lyα named by the continuum break at its foot: the z of that one line, refined
            # with whatever else (companions, Lyβ) the catalogue puts in the window there
            # (emission features only: a residual dip on the line's flank is not it)
            em = use & (kinds_arr == "emission")
            # the break names Lyα itself: He II 1215 (n = 4 -> 2), 0.4 Å away, is left out
            lya_x = x[np.asarray(cat["label"]) == "Lyα"]
            twin = np.zeros(len(xs), bool)
            if len(lya_x):
                twin[:len(x)] = (np.asarray(cat["label"]) != "Lyα") & \
                    (np.min(np.abs(x[:, None] - lya_x[None, :]), axis=1) < 2e-3)
            sol = refine(np.log1p(lyman["z"]), y[em], sy[em], w[em], xs, st_s,
                         ~twin, window=window, fwhm_ln=1.0 / R,
                         half_width=fwhm_feat[em] / 2, **search_kw)
            sol = _reindex(sol, np.flatnonzero(em))
            if any(i == lyman["feature"] and str(cat["label"][j]) == "Lyα"
                   for i, j, _ in sol.matches if j < len(cat)):
                sols, status, readings = [sol], "tentative", []
                sol.status = status
            else:
                lyman = None
    best_s = sols[0].s if sols else (np.log1p(z) if z is not None else None)
    out = new_table(feats, sky, telluric, mask_sky, mask_telluric)
    # companions (their typical strengths) and user lines (strength 1: the user expects them)
    # compete in the same assignment, so a weak hydrogenic line cannot take a feature that
    # one of them explains better
    other = comp + [dict(line, source="user") for line in (extra_lines or [])]
    x_user = np.log([line["rest_vacuum_m"] for line in extra_lines]) if extra_lines else np.zeros(0)
    x_all = np.concatenate([x, x_comp, x_user])
    strength_assign = _defer_to_primary(x, strength, line_weight < 1, 1.0 / R)
    strength_all = np.concatenate([strength_assign, st_comp, np.ones(len(x_user))])
    blend = np.array([has_flag(f, Flag.BLEND) for f in feats["flags"]], dtype=bool)
    group_all = np.concatenate([np.asarray(group, dtype=str),
                                np.array([f"companion|{k}" for k in range(nc)], dtype=str),
                                np.array([f"user|{k}" for k in range(len(x_user))], dtype=str)])
    s_user = best_s if best_s is not None else 0.0
    if best_s is not None and status != "none" or (z is not None and best_s is not None):
        # masked features take part too: one may be named where the solution's other lines
        # predict a line above the detection limit (its sky or telluric flag stays)
        idx = np.arange(len(feats))
        res = assign(y[idx], sy[idx], flux_abs[idx], blend[idx], x_all, strength_all, group_all,
                     best_s, snr=snr_arr[idx], masked=~use[idx])
        # a label is as likely as its line at this z times this z itself (1 when fixed)
        res.score = res.score * (1.0 if z is not None else solution_probability(sols))
        _primary_in_blends(out, idx, res, y[idx], sy[idx], fwhm_feat[idx], best_s, x,
                           line_weight < 1)
        # a secondary species is named only where its stronger lines are not missing
        pixels = _sorted_pixels(feature_result) if feature_result is not None else None
        withdraw_unsupported(res, y[idx], snr_arr[idx], x_all,
                             np.concatenate([strength, st_comp, np.ones(len(x_user))]), group_all,
                             best_s, window, 1.0 / R,
                             np.concatenate([line_weight < 1, np.zeros(nc + len(x_user), bool)]),
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
    systems = []
    if find_systems and z is None and status == "secure":
        rest = np.flatnonzero(use & (np.asarray(out["label"]) == "")
                              & (np.asarray(out["user_line"]) == "")
                              & (np.asarray(out["companion"]) == ""))
        if len(rest) >= 3:
            more = search_shift(y[rest], sy[rest], w[rest], x, strength, smin=s_lo, smax=s_hi,
                                anchors=anchors if len(anchors) else None, n_solutions=3,
                                window=window, flux=flux_abs[rest], intensity_sigma=isig,
                                fwhm_ln=1.0 / R, group=group_codes, line_weight=line_weight,
                                sy_fit=sy_meas[rest], s_floor=calibration, multiplet=multiplet,
                                half_width=fwhm_feat[rest] / 2)
            more = [_reindex(s, rest) for s in more]
            # a second system must stand on its own: secure by the same rules, 4 lines or more,
            # and not the first one again
            if more and classify(more) == "secure" and more[0].n_lines >= 4 and \
                    abs(more[0].s - sols[0].s) > 10 * max(sols[0].s_err, 1e-6):
                systems.append(more[0])
                res2 = assign(y[rest], sy[rest], flux_abs[rest], blend[rest], x, strength_assign,
                              group, more[0].s, snr=snr_arr[rest])
                _primary_in_blends(out, rest, res2, y[rest], sy[rest], fwhm_feat[rest],
                                   more[0].s, x, line_weight < 1)
                fill(out, rest, res2, cat, y[rest], more[0].s, None, system=2)
    if feature_result is not None and best_s is not None and len(cat) and len(feats) and \
            (status == "secure" or z is not None):
        out = append_at_z(out, res.best, cat, x, group, line_weight >= 1, best_s,
                          sols[0].s_err if sols else 0.0, pixels, y, fwhm_feat,
                           main_kind, window, R, medium, mask_sky and not is_freq_axis,
                           1.0 if z is not None else solution_probability(sols))
    result = Identification(features=out, status=status, solutions=sols, lines=cat,
                            feature_result=feature_result, systems=systems,
                            single_line_readings=readings, lyman_break=lyman)
    if best_s is not None and (status != "none" or z is not None):
        zz = float(np.expm1(best_s))
        zerr = sols[0].z_err if sols else 0.0
        result.z, result.z_err = zz, float(zerr)
        if is_freq_axis and reg == "radio":
            result.velocity_convention = "radio"
            result.velocity_kms = float(C_KMS * zz / (1 + zz))
            result.velocity_err_kms = float(C_KMS * zerr / (1 + zz) ** 2)
        else:
            result.velocity_convention = "optical"
            result.velocity_kms = float(C_KMS * zz)
            result.velocity_err_kms = float(C_KMS * zerr)
    result.meta = {"medium": medium, "regime": reg, "species": [str(s) for s in sorted(set(cat["species"]))]
                   if len(cat) else names, "resolution": R, "calibration_term": calibration,
                   "resolution_fraction": resolution_fraction, "z_range": [zmin, zmax],
                   "z_fixed": z is not None, "sky_masked": bool(mask_sky),
                   "telluric_masked": bool(mask_telluric),
                   "companions": [c["name"] for c in comp],
                   "intensity_model": strength_assumption(main_kind),
                   "constants": cat.meta.get("constants"), "catalogue": dict(cat.meta)}
    return result


def _companions(wanted, lam_min, lam_max, R, extra_lines):
    """The companion lines of the rest range, less those a user's line stands for
    (within one resolution element): the user's list takes precedence."""
    if not wanted:
        return []
    comp = [dict(c, source="companion") for c in companion_lines(lam_min, lam_max, R)]
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


def _reading_candidate(use, kinds_arr, main_kind, snr_arr, snr):
    """The strongest clear feature (S/N 1.5 times the detection limit, above what noise
    gives) of the main kind, or None."""
    ok = use & (kinds_arr == main_kind) & (np.nan_to_num(snr_arr) >= 1.5 * snr)
    if not np.any(ok):
        return None
    return int(np.flatnonzero(ok)[np.argmax(snr_arr[ok])])


def _sorted_pixels(feature_result):
    """The spectrum's pixels by ln(vacuum wavelength): (ln lambda, flux with masked pixels
    NaN, noise, continuum), for `_lyman_break` and `feature_table.append_at_z`."""
    spec = feature_result.spectrum
    ln_axis = _vacuum_ln_axis(spec)
    order = np.argsort(ln_axis)
    flux = np.where(np.asarray(spec.mask, bool), np.nan, np.asarray(spec.flux.value, float))
    return (ln_axis[order], flux[order], np.asarray(feature_result.noise, dtype=float)[order],
            np.asarray(feature_result.continuum, dtype=float)[order])


def _lyman_break(pixels, R, cand, readings, y, fwhm_ln):
    """The continuum step at feature `cand` when it may be Lyα (a single-line reading) and
    the continuum drops blueward of it (`lyman_break.is_break`); a dict for the result's
    ``lyman_break`` (with the reading's ``z``), else None.  `pixels`: `_sorted_pixels`."""
    lya = [r for r in readings if r["label"] == "Lyα" and r["species"] == "H I"]
    if cand is None or not lya:
        return None
    ax, flux, sigma = pixels[:3]
    # (features much broader than the windows are left in: the trace of a continuum that
    # did not follow the step, not lines)
    others = fwhm_ln < WINDOW_LN / 3
    others[cand] = False
    # other features' pixels left out (+/- 2 FWHM; unknown widths: 3 resolution elements)
    half = 2.0 * np.where(fwhm_ln[others] > 0, fwhm_ln[others], 1.5 / R)
    yo = y[others]
    exclude = np.zeros(len(ax), bool)
    for a, b in zip(np.searchsorted(ax, yo - half), np.searchsorted(ax, yo + half)):
        exclude[a:b] = True
    width = float(fwhm_ln[cand]) or 1.0 / R
    step = continuum_step(ax, flux, sigma, float(y[cand]), width, exclude=exclude)
    if not is_break(step):
        return None
    zz = lya[0]["z"]
    gap = GAP_FWHM * width
    return {"z": zz, "ratio": step["ratio"], "ratio_err": step["ratio_err"],
            "continuum_snr": step["red_snr"], "blue_mean": step["blue_mean"],
            "red_mean": step["red_mean"],
            # the windows as ratios to the line's position: blue (lo, hi), red (lo, hi)
            "windows": [[float(np.exp(-gap - WINDOW_LN)), float(np.exp(-gap))],
                        [float(np.exp(gap)), float(np.exp(gap + WINDOW_LN))]],
            "expected_transmission": float(mean_transmission(zz)), "feature": int(cand)}


def _readings(i, use, snr_arr, snr, y, sy, x, strength, group, cat, comp, x_comp, s_lo, s_hi,
              window, main_kind):
    """Single-line readings of feature `i` (`_reading_candidate`) against the strong
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


def _vacuum_ln_axis(spec):
    """ln of the vacuum wavelength (m) of every pixel of a prepared spectrum."""
    lam = spec.axis.to_value(u.m, equivalencies=u.spectral())
    if spec.is_wavelength and spec.medium == "air":
        lam = air_to_vacuum(lam * u.m).to_value(u.m)
    return np.log(lam)


def _observed_window(feature_result, y):
    """ln(lambda) range searched for features: the spectrum's, else the features' span."""
    if feature_result is not None:
        spec = feature_result.spectrum
        ln_lam = _vacuum_ln_axis(spec)[~spec.mask]
        return float(ln_lam.min()), float(ln_lam.max())
    if len(y):
        return float(y.min() - 0.01), float(y.max() + 0.01)
    return None


def _reindex(sol, idx):
    sol.matches = [(int(idx[i]), j, r) for i, j, r in sol.matches]
    return sol
