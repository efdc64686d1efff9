"""The identification table: one row per feature with its identification columns.

`new_table` makes it from the measured features, `fill` writes an assignment
(`matching.assign`) into it, and `append_at_z` adds the lines a solution
predicts where no feature was found, measured at their predicted positions
(`forced`) and flagged ``at_z``.  `peaks_as_features` turns a user's peak list
into the measured-feature form.
"""

import numpy as np
from astropy import units as u
from astropy.table import QTable
from scipy.special import erf

from ..catalogue.contaminants import sky_mask
from ..features.flags import Flag, has_flag
from ..spectral.doppler import C_KMS
from ..spectral.medium import vacuum_to_air
from .forced import bridge_crowded, choose_lines, measure_predicted

__all__ = ["new_table", "fill", "append_at_z", "peaks_as_features", "AT_Z_SNR"]

# lines the solution predicts and the blind search missed are claimed when measured at their
# predicted position at this S/N (one-sided false-alarm probability 3e-5 per line tried): a
# rule of this tool, stricter than the 3 sigma often quoted for a line at a known redshift,
# since many lines are tried in each spectrum
AT_Z_SNR = 4.0


def peaks_as_features(peaks):
    """A peak list as a feature table (missing columns: NaN errors and widths, S/N 10,
    emission)."""
    t = QTable()
    c = u.Quantity(peaks["center"])
    t["center"] = c
    if "center_err" in peaks.colnames:
        t["center_err"] = u.Quantity(peaks["center_err"], c.unit)
    else:
        t["center_err"] = np.full(len(c), np.nan) * c.unit
    if "fwhm" in peaks.colnames:
        t["fwhm"] = u.Quantity(peaks["fwhm"], c.unit)
    else:
        t["fwhm"] = np.full(len(c), np.nan) * c.unit
    t["flux"] = np.asarray(peaks["flux"], float) if "flux" in peaks.colnames else \
        (np.asarray(peaks["amplitude"], float) if "amplitude" in peaks.colnames else np.ones(len(c)))
    t["snr"] = np.asarray(peaks["snr"], float) if "snr" in peaks.colnames else np.full(len(c), 10.0)
    t["kind"] = np.asarray(peaks["kind"]).astype(str) if "kind" in peaks.colnames else \
        np.full(len(c), "emission")
    t["flags"] = np.full(len(c), "")
    return t


def new_table(feats, sky, telluric, mask_sky, mask_telluric):
    """The identification table of `feats`, its identification columns empty; `sky`,
    `telluric`: flags of features on a night-sky line or in a telluric band."""
    out = QTable()
    for col in ("center", "center_err", "fwhm", "flux", "snr", "kind"):
        out[col] = feats[col]
    flags = [str(f) for f in feats["flags"]] if len(feats) else []
    flags = [",".join([p for p in (f, "sky" if s else "", "telluric" if t else "") if p])
             for f, s, t in zip(flags, sky, telluric)]
    # wide enough for the flags identify adds later ("blend" on a primary in a blend)
    out["flags"] = np.array(flags, dtype="U96")
    n = len(feats)
    out["label"] = np.full(n, "", dtype=object).astype("U32")
    out["species"] = np.full(n, "", dtype="U16")
    out["series"] = np.full(n, "", dtype="U16")
    out["n_lower"] = np.zeros(n, dtype=int)
    out["n_upper"] = np.zeros(n, dtype=int)
    out["rest_wavelength_vacuum"] = np.full(n, np.nan) * u.nm
    out["residual_kms"] = np.full(n, np.nan)
    out["residual"] = np.full(n, np.nan) * feats["center"].unit if n else [] * u.nm
    out["residual_sigma"] = np.full(n, np.nan)
    out["score"] = np.zeros(n)
    out["system"] = np.zeros(n, dtype=int)
    out["alternatives"] = np.full(n, "", dtype="U200")
    out["user_line"] = np.full(n, "", dtype="U40")
    out["companion"] = np.full(n, "", dtype="U40")
    out.meta["sky_mask_applied"] = bool(mask_sky)
    out.meta["telluric_mask_applied"] = bool(mask_telluric)
    return out


def fill(out, idx, res, cat, y, s, extra, system=1):
    """Write an `Assignment` into the feature table (line indices past the catalogue are
    those of `extra`: companions and the user's lines)."""
    ncat = len(cat)
    lam_cat = cat["wavelength_vacuum"].to_value(u.m) if ncat else np.zeros(0)
    # plain arrays, read and written element by element (a table column's item access
    # costs more than the work done with the item)
    label, species, series = (np.asarray(cat[c]).astype(str) if ncat else np.zeros(0, str)
                              for c in ("label", "species", "series"))
    n_lo, n_up = (np.asarray(cat[c], dtype=int) if ncat else np.zeros(0, int)
                  for c in ("n_lower", "n_upper"))
    unit = out["center"].unit
    centre = u.Quantity(out["center"]).value
    on_wavelength = unit.is_equivalent(u.m)
    rest_nm, resid_val = out["rest_wavelength_vacuum"].value, out["residual"].value
    out.meta.setdefault("alternatives_detail", {})
    for k, i in enumerate(idx):
        j = int(res.best[k])
        alts = [(a, p) for a, p in res.alternatives(k) if a < ncat]
        out.meta["alternatives_detail"][int(i)] = [
            {"label": label[a], "species": species[a], "n_lower": int(n_lo[a]),
             "n_upper": int(n_up[a]), "score": float(p)} for a, p in alts]
        if j < 0:
            continue
        if j >= ncat:
            line = extra[j - ncat]
            out["companion" if line.get("source") == "companion" else "user_line"][i] = line["name"]
            out["score"][i] = float(res.score[k])
            continue
        out["label"][i] = label[j]
        out["species"][i] = species[j]
        out["series"][i] = series[j]
        out["n_lower"][i] = n_lo[j]
        out["n_upper"][i] = n_up[j]
        rest_nm[i] = lam_cat[j] * 1e9
        dln = y[k] - s - np.log(lam_cat[j])
        out["residual_kms"][i] = float(C_KMS * dln)
        if on_wavelength:
            resid_val[i] = float(centre[i] * (1 - np.exp(-dln)))
        else:
            pred = (np.exp(s) * lam_cat[j] * u.m).to_value(unit, equivalencies=u.spectral())
            resid_val[i] = centre[i] - pred
        out["residual_sigma"][i] = float(res.resid[k])
        out["score"][i] = float(res.score[k])
        out["system"][i] = system
        out["alternatives"][i] = "; ".join(f"{species[a]} {label[a]} ({p:.2f})" for a, p in alts)


def append_at_z(out, best, cat, x, group, primary, s, s_err, pixels, y, fwhm_ln, kind,
                window, R, medium, mask_sky, probability):
    """The feature table with rows added for the lines the solution predicts where no
    feature was found, measured there (`forced`) at S/N >= AT_Z_SNR with the sign of the
    spectrum's kind; flagged ``at_z``.  Their centre is the prediction (residual 0), its
    error that of the redshift; their score the solution's probability times the
    two-sided Gaussian confidence of the measured amplitude.  `pixels`: (ln vacuum
    wavelength, flux, noise, continuum) of the spectrum, sorted by wavelength."""
    ncat = len(cat)
    matched = {int(j): i for i, j in enumerate(best) if 0 <= j < ncat and out["system"][i] == 1}
    if not matched:
        return out
    blend = np.array([has_flag(f, Flag.BLEND) for f in out["flags"]], dtype=bool)
    n_up = np.asarray(cat["n_upper"], dtype=int)
    # a row merging lines of several levels (a series past its resolution limit) is no
    # line to measure on its own; it still stands in the fit beside the others
    single = np.asarray(cat["n_upper_max"], dtype=int) == n_up
    cand, cand_w, width, blob = choose_lines(x, np.asarray(group, dtype=str), n_up,
                                             primary & single, matched, y, fwhm_ln, blend, s,
                                             window, 1.0 / R)
    if not len(cand):
        return out
    ax, flux, sigma, cont = pixels
    lines = np.flatnonzero(primary & np.isfinite(width))
    sign = 1.0 if kind == "emission" else -1.0
    cont, _ = bridge_crowded(ax, flux, sigma, cont, x[lines] + s, width[lines], y, fwhm_ln)
    amp, err = measure_predicted(ax, flux - cont, sigma, x[cand] + s, cand_w, x[lines] + s,
                                 width[lines], y, fwhm_ln, blob)
    with np.errstate(divide="ignore", invalid="ignore"):
        snr = sign * amp / err
    ok = np.isfinite(snr) & (snr >= AT_Z_SNR)
    if not ok.any():
        return out
    cand, cand_w, amp, snr = cand[ok], cand_w[ok], amp[ok], snr[ok]
    unit = out["center"].unit
    lam = np.exp(x[cand] + s) * u.m
    if unit.is_equivalent(u.m) and medium == "air":
        lam = vacuum_to_air(lam)
    centre = lam.to(unit, equivalencies=u.spectral())
    fwhm = np.abs(centre) * cand_w
    if mask_sky:
        on_sky = sky_mask(centre, np.abs(centre) * s_err, fwhm, medium=medium, bands=False)
        cand, cand_w, amp, snr, centre, fwhm = (v[~on_sky] for v in
                                                (cand, cand_w, amp, snr, centre, fwhm))
        if not len(cand):
            return out
    new = QTable()
    new["center"] = centre
    new["center_err"] = np.abs(centre) * s_err
    new["fwhm"] = fwhm
    new["flux"] = amp * fwhm.value * np.sqrt(np.pi / (4 * np.log(2))) * out["flux"].unit
    new["snr"] = snr
    new["kind"] = np.full(len(cand), kind)
    new["flags"] = np.full(len(cand), Flag.AT_Z.value)
    new = new_table(new, np.zeros(len(cand), bool), np.zeros(len(cand), bool), False, False)
    for col in ("label", "species", "series", "n_lower", "n_upper"):
        new[col] = np.asarray(cat[col][cand]).astype(new[col].dtype)
    new["rest_wavelength_vacuum"] = cat["wavelength_vacuum"][cand].to(u.nm)
    new["residual_kms"] = 0.0
    new["residual"] = np.zeros(len(cand)) * unit
    new["residual_sigma"] = 0.0
    new["score"] = probability * erf(snr / np.sqrt(2.0))
    new["system"] = 1
    # (one table of the same columns appended: column by column, without vstack's checks)
    both = QTable([np.concatenate([out[c], new[c]]) for c in out.colnames], names=out.colnames)
    both.meta = dict(out.meta)
    both.meta["at_z_snr"] = AT_Z_SNR
    return both
