"""Reports: feature table (CSV, ECSV), JSON summary, annotated plot (PNG, SVG), one HTML page."""

import base64
import json
from pathlib import Path

import numpy as np
from astropy import units as u

from ..errors import OutputExistsError
from ..features.flags import Flag, has_flag
from ..io.tables import json_default
from ..spectral.doppler import C_KMS

__all__ = ["summary", "write_report", "lyman_break_text"]


def _alternatives(result):
    out = []
    best = result.solutions[0] if result.solutions else None
    for s in result.solutions[1:]:
        out.append({"z": s.z, "z_err": s.z_err, "n_lines": s.n_lines, "score": s.score,
                    "delta_score": (best.score - s.score) if best else None, "chi2": s.chi2})
    return out


def _companion(f, i):
    return (str(f["companion"][i]) or None) if "companion" in f.colnames else None


def _at_z(f, i):
    """Whether row i is a line measured at the position the solution predicts."""
    return has_flag(f["flags"][i], Flag.AT_Z)


def _other_name(f, i):
    """The non-hydrogenic name of feature i: its user line or companion line, else ''."""
    return str(f["user_line"][i]) or (_companion(f, i) or "")


def summary(result, *, unit=None):
    """The JSON summary of an identification (keys of the command-line contract first)."""
    f = result.features
    cu = unit or (f["center"].unit if len(f) else u.nm)
    feats = []
    unid = []
    detail = f.meta.get("alternatives_detail", {})
    for i in range(len(f)):
        c = f["center"][i].to_value(cu, equivalencies=u.spectral())
        ce = abs((f["center"][i] + f["center_err"][i]).to_value(cu, equivalencies=u.spectral()) - c) \
            if np.isfinite(f["center_err"][i].value) else None
        label = str(f["label"][i]) or None
        at_z = _at_z(f, i)
        row = {"index": i, "center": c, "center_err": ce, "kind": str(f["kind"][i]),
               "snr": float(f["snr"][i]),
               "label": label, "species": str(f["species"][i]) or None,
               "n_lower": int(f["n_lower"][i]) if label else None,
               "n_upper": int(f["n_upper"][i]) if label else None,
               # a line measured at its predicted position has no position of its own
               "residual_kms": float(f["residual_kms"][i]) if label and not at_z else None,
               "score": float(f["score"][i]) if label else 0.0,
               "alternatives": detail.get(i, []), "flags": str(f["flags"][i]),
               "system": int(f["system"][i]), "user_line": str(f["user_line"][i]) or None,
               "companion": _companion(f, i)}
        feats.append(row)
        # explained by nothing: no hydrogenic label, no user line, no companion line
        if not (label or row["user_line"] or row["companion"]):
            unid.append({"center": c, "center_err": ce, "kind": row["kind"], "snr": row["snr"],
                         "flags": row["flags"]})
    # in order along the axis (lines measured at z follow the detected features in the
    # table); "index" is the row of the feature table, which `lyman_break` refers to
    feats.sort(key=lambda r: r["center"])
    unid.sort(key=lambda r: r["center"])
    best = result.solutions[0] if result.solutions else None
    return {"z": result.z, "z_err": result.z_err, "status": result.status,
            "velocity_kms": result.velocity_kms, "velocity_err_kms": result.velocity_err_kms,
            "velocity_convention": result.velocity_convention,
            "lines": [r["label"] for r in feats if r["label"] and r["system"] == 1],
            "companion_lines": [r["companion"] for r in feats if r["companion"]],
            "n_lines": best.n_lines if best else 0,
            "alternatives": _alternatives(result),
            "systems": [{"z": s.z, "z_err": s.z_err, "n_lines": s.n_lines} for s in result.systems],
            "single_line_readings": list(result.single_line_readings),
            "lyman_break": dict(result.lyman_break) if result.lyman_break else None,
            "features": feats, "unidentified": unid, "unit": str(cu),
            "medium": result.meta.get("medium"), "meta": {k: v for k, v in result.meta.items()
                                                           if k != "catalogue"}}


def lyman_break_text(b):
    """One sentence on a Lyα named by its continuum break (summary's ``lyman_break``)."""
    return (f"One clear line, named Lyα by the continuum break at its blue foot: blue/red "
            f"continuum ratio {b['ratio']:.2f} ± {b['ratio_err']:.2f} (mean Lyα-forest "
            f"transmission at z = {b['z']:.3f}: {b['expected_transmission']:.2f}). Lyα emission "
            f"usually sits a few hundred km/s redward of the systemic redshift.")


def _zoom(axz, result, sel, unit, title, max_lines=8):
    """Velocity stack of one identified series: each line's neighbourhood, continuum
    subtracted and scaled to its own peak (emission up, absorption down), offset, against
    velocity from its position at the solution.  (Subtracted, not divided: a line on a
    continuum step, Lyα at a Lyman break, keeps its shape.)"""
    fr, f = result.feature_result, result.features
    sp = fr.spectrum
    x, y, good = sp.axis.value, sp.flux.value, ~sp.mask
    sel = sorted(sel, key=lambda i: -float(f["snr"][i]))[:max_lines]
    sel = sorted(sel, key=lambda i: f["center"][i].value)
    fwhm_kms = [abs(float((f["fwhm"][i] / f["center"][i]).to_value(u.one))) * C_KMS for i in sel]
    span = max(300.0, 5 * float(np.nanmax(fwhm_kms))) if fwhm_kms else 300.0
    with np.errstate(invalid="ignore", divide="ignore"):
        resid = np.where(good, y - fr.continuum, np.nan)
    for k, i in enumerate(sel):
        c = f["center"][i].to_value(unit, equivalencies=u.spectral())
        # the line's predicted position: observed centre less its residual
        c0 = c / (1 + float(f["residual_kms"][i]) / C_KMS)
        v = (x / c0 - 1) * C_KMS if unit.is_equivalent(u.m) else (c0 / x - 1) * C_KMS
        m = np.abs(v) < span
        core = np.abs(v) < max(fwhm_kms[k], 1e-6)
        peak = np.nanmax(np.abs(resid[core])) if np.any(core & np.isfinite(resid)) else 1.0
        peak = peak if np.isfinite(peak) and peak > 0 else 1.0
        axz.plot(v[m], resid[m] / peak * 0.8 + k, lw=0.7, color="k")
        axz.axhline(k, color="tab:orange", lw=0.5)
        axz.annotate(str(f["label"][i]), (span * 0.97, k + 0.1), fontsize=6.5, ha="right",
                     color="tab:blue")
    axz.axvline(0, color="tab:blue", lw=0.6, alpha=0.6)
    axz.set_xlim(-span, span)
    axz.set_xlabel("velocity from the solution [km/s]", fontsize=7)
    axz.set_ylabel("flux − continuum\n(scaled to each peak)", fontsize=7)
    axz.set_title(f"{title}: velocity stack", fontsize=8)
    axz.tick_params(labelsize=7)


def _spread(xs, sep, lo, hi):
    """Label positions as near as possible to `xs` (least squares) with gaps of at
    least `sep`, inside [lo, hi]: neighbours that would overlap are pooled into a
    run of evenly spaced labels centred on the mean of their positions, and runs
    that then touch are pooled again.  Returns the positions in the input order."""
    xs = np.asarray(xs, dtype=float)
    order = np.argsort(xs, kind="stable")
    runs = []   # [first label's position, number of labels, sum of (x_k - k sep)]
    for x in xs[order]:
        runs.append([x, 1, x])
        while len(runs) > 1 and runs[-2][0] + runs[-2][1] * sep > runs[-1][0]:
            b = runs.pop()
            a = runs[-1]
            total = a[2] + b[2] - b[1] * a[1] * sep   # offsets of b's labels shift by a's count
            a[1] += b[1]
            a[2] = total
            a[0] = total / a[1]
    pos = np.concatenate([r[0] + sep * np.arange(r[1]) for r in runs]) if runs else np.zeros(0)
    # keep the whole row inside the axis: shift from the edges, squeezing only if it must
    if len(pos) > 1 and pos[-1] - pos[0] > hi - lo:
        pos = lo + (pos - pos[0]) * (hi - lo) / (pos[-1] - pos[0])
    elif len(pos):
        pos = pos + max(lo - pos[0], 0.0) - max(pos[-1] - hi, 0.0)
    out = np.empty(len(xs))
    out[order] = pos
    return out


def _label_row(axl, ax, centres, names, colors, fontsize=7):
    """Feature labels in their own strip above the spectrum, spread so that none
    overlaps another, each joined to its feature by a leader line."""
    lo, hi = ax.get_xlim()
    fig = ax.figure
    width_in = ax.get_position().width * fig.get_figwidth()
    sep = 1.35 * fontsize / 72 / width_in * (hi - lo)    # one rotated line of text, and a gap
    xs = _spread(centres, sep, lo + 0.5 * sep, hi - 0.5 * sep)
    axl.set_xlim(lo, hi)
    axl.set_ylim(0, 1)
    axl.axis("off")
    for c, xl, name, color in zip(centres, xs, names, colors):
        axl.plot([c, c, xl], [0.0, 0.08, 0.2], color=color, lw=0.6, alpha=0.7)
        axl.text(xl, 0.22, name, rotation=90, fontsize=fontsize, ha="center", va="bottom",
                 color=color)


# a continuum spanning more than this factor is drawn on a log flux scale
LOG_FLUX_RANGE = 20.0


def _plot(result, path_png, path_svg):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fr = result.feature_result
    f = result.features
    series = sorted({(str(s), str(r)) for s, r, l in zip(f["species"], f["series"], f["label"]) if l})[:4]
    nz = max(len(series), 1)
    fig = plt.figure(figsize=(12, 11))
    gs = fig.add_gridspec(4, nz, height_ratios=[4, 1, 2, 1.6], hspace=0.45)
    # the labels get a strip of their own right above the spectrum
    top_gs = gs[0, :].subgridspec(2, 1, height_ratios=[1, 3], hspace=0.0)
    axl = fig.add_subplot(top_gs[0])
    ax = fig.add_subplot(top_gs[1])
    axr = fig.add_subplot(gs[1, :], sharex=ax)
    unit = f["center"].unit if len(f) else u.AA
    if fr is not None:
        sp = fr.spectrum
        x = sp.axis.value
        y = sp.flux.value
        good = ~sp.mask
        sig = fr.noise
        ax.plot(x, np.where(good, y, np.nan), lw=0.7, color="k", label="spectrum")
        ax.fill_between(x, y - sig, y + sig, where=good, color="0.7", alpha=0.6, lw=0,
                        label="1σ uncertainty")
        ax.plot(x, fr.continuum, color="tab:orange", lw=1, label="continuum")
        pad = 0.01 * (np.nanmax(x) - np.nanmin(x))
        ax.set_xlim(np.nanmin(x) - pad, np.nanmax(x) + pad)     # the data's range, not more
        with np.errstate(invalid="ignore", divide="ignore"):
            axr.plot(x, np.where(good, (y - fr.continuum) / sig, np.nan), lw=0.6, color="k")
        axr.axhline(0, color="tab:orange", lw=0.8)
        axr.set_ylabel("(data − cont.)/σ")
        unit = sp.axis.unit
    if fr is not None:
        spikes = np.asarray(fr.meta.get("spike_pixels", []), dtype=int)
        if len(spikes):
            ax.plot(x[spikes], y[spikes], "x", color="tab:red", ms=6,
                    label="masked spike (cosmic ray)")
        brk = result.lyman_break
        if brk and brk.get("windows") and brk["feature"] < len(f):
            # the continuum levels compared either side of the Lyα named by its break
            c = f["center"][brk["feature"]].to_value(unit, equivalencies=u.spectral())
            for (a, b), level, lab in zip(brk["windows"], (brk["blue_mean"], brk["red_mean"]),
                                          ("Lyman break: mean flux blueward / redward", None)):
                ax.plot([c * a, c * b], [level, level], color="tab:cyan", lw=3, alpha=0.9,
                        label=lab, solid_capstyle="butt")
        top = np.nanmax(np.where(good, y + sig, np.nan)) if good.any() else 1.0
        bottom = np.nanmin(np.where(good, y - sig, np.nan)) if good.any() else 0.0
        cont = np.asarray(fr.continuum, float)[good]
        if len(cont) and np.nanmin(cont) > 0 and np.nanmax(cont) > LOG_FLUX_RANGE * np.nanmin(cont):
            # a flux spanning decades (a hot star's UV rise) is drawn on a log scale
            ax.set_yscale("log")
            ax.set_ylim(0.5 * np.nanmin(cont), 1.5 * top)
        else:
            ax.set_ylim(bottom - 0.05 * (top - bottom), top + 0.08 * (top - bottom))
    centres = [f["center"][i].to_value(unit, equivalencies=u.spectral()) for i in range(len(f))]
    names, colors = [], []
    for i, c in enumerate(centres):
        other = _other_name(f, i)
        color = "tab:blue" if f["label"][i] else ("tab:purple" if other else "tab:red")
        ax.axvline(c, color=color, lw=0.6, alpha=0.4, ls=":" if _at_z(f, i) else "-")
        names.append(f["label"][i] or other or ("sky" if has_flag(f["flags"][i], Flag.SKY) else "?"))
        colors.append(color)
    _label_row(axl, ax, centres, names, colors)
    if result.z is not None and len(result.lines):
        obs = (result.lines["wavelength_vacuum"] * (1 + result.z))
        if result.meta.get("medium") == "air" and unit.is_equivalent(u.m):
            from ..spectral.medium import vacuum_to_air
            obs = vacuum_to_air(obs)
        pos = obs.to_value(unit, equivalencies=u.spectral())
        lo, hi = ax.get_xlim()
        species = np.asarray(result.lines["species"]).astype(str)
        main = "H I" if "H I" in set(species) else species[0]
        inside = (pos > lo) & (pos < hi)
        # the primary species in green; the others (He II ...) short and grey, so that their
        # dense series do not hide the hydrogen pattern
        for sel, color, ms, label in ((species == main, "tab:green", 10,
                                       f"{main} catalogue at z = {result.z:.5f}"),
                                      (species != main, "0.6", 5, "other species")):
            p_ = pos[inside & sel]
            if len(p_):
                ax.plot(p_, np.full(len(p_), 0.02), "|", color=color, ms=ms,
                        transform=ax.get_xaxis_transform(), label=label)
    medium = result.meta.get("medium")
    axis_name = "wavelength" if unit.is_equivalent(u.m) else "frequency" if unit.is_equivalent(u.Hz) \
        else "energy"
    axr.set_xlabel(f"{axis_name} [{unit}]" + (f" ({medium})" if axis_name == "wavelength" else ""))
    ax.set_ylabel("flux")
    ztxt = f"z = {result.z:.6f} ± {result.z_err:.1e}" if result.z is not None else "no redshift"
    axl.set_title(f"{result.meta.get('source', '')}  {ztxt}  status: {result.status}", fontsize=10)
    from matplotlib.lines import Line2D

    handles, _ = ax.get_legend_handles_labels()
    handles += [Line2D([], [], color=c, lw=1.0, label=t, ls=":" if "at_z" in t else "-")
                for c, t in (
        ("tab:blue", "hydrogenic line"), ("tab:purple", "companion or your line"),
        ("tab:blue", "hydrogenic line measured where z puts it (at_z)"),
        ("tab:red", "unexplained (sky: on a night-sky line)"))]
    ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.005, 1.0),
              borderaxespad=0.0)
    for k, (spn, ser) in enumerate(series):
        sel = [i for i in range(len(f)) if f["species"][i] == spn and f["series"][i] == ser]
        if fr is not None:
            _zoom(fig.add_subplot(gs[2, k]), result, sel, unit, f"{spn} {ser}")
        axz = fig.add_subplot(gs[3, k])
        # lines measured at their predicted position have no residual of their own
        sel = [i for i in sel if not _at_z(f, i)]
        vel = np.array([f["residual_kms"][i] for i in sel])
        labels = [str(f["label"][i]) for i in sel]
        errs = []
        for i in sel:
            c = f["center"][i]
            e = f["center_err"][i]
            errs.append(abs(float((e / c).to_value(u.one))) * C_KMS if np.isfinite(e.value) else 0)
        axz.errorbar(range(len(sel)), vel, yerr=errs, fmt="o", ms=3)
        axz.axhline(0, color="0.5", lw=0.8)
        axz.set_xticks(range(len(sel)))
        axz.set_xticklabels(labels, rotation=90, fontsize=7)
        axz.set_title(f"{spn} {ser}: position residuals", fontsize=8)
        axz.set_ylabel("residual [km/s]", fontsize=7)
    fig.savefig(path_png, dpi=110, bbox_inches="tight")
    fig.savefig(path_svg, bbox_inches="tight")
    plt.close(fig)


def write_report(result, folder, *, force=False, source=""):
    """Write features.csv, features.ecsv, summary.json, spectrum.png/.svg and report.html."""
    folder = Path(folder)
    names = ["features.csv", "features.ecsv", "summary.json", "spectrum.png", "spectrum.svg",
             "report.html"]
    if not force:
        existing = [n for n in names if (folder / n).exists()]
        if existing:
            raise OutputExistsError(f"{folder / existing[0]}: exists; use --force to overwrite")
    folder.mkdir(parents=True, exist_ok=True)
    result.meta["source"] = source
    t = result.features.copy()
    # the row of the feature table (`lyman_break` and the JSON refer to it), then in order
    # along the axis
    t.add_column(np.arange(len(t)), name="feature", index=0)
    t = t[np.argsort(u.Quantity(t["center"]).value, kind="stable")] if len(t) else t
    t.meta = {k: v for k, v in result.meta.items() if k != "catalogue"}
    t.meta["medium"] = result.meta.get("medium")
    t.meta["catalogue"] = {k: v for k, v in result.meta.get("catalogue", {}).items()
                           if isinstance(v, (str, int, float, list, type(None)))}
    from astropy.table import Table

    plain = Table(t)
    plain.meta = {}
    plain.write(folder / "features.csv", format="ascii.csv", overwrite=True)
    t.write(folder / "features.ecsv", format="ascii.ecsv", overwrite=True)
    summ = summary(result)
    (folder / "summary.json").write_text(json.dumps(summ, indent=1, ensure_ascii=False,
                                                    default=json_default))
    _plot(result, folder / "spectrum.png", folder / "spectrum.svg")
    png = base64.b64encode((folder / "spectrum.png").read_bytes()).decode()
    def _row(r):
        resid = "" if r["residual_kms"] is None else f"{r['residual_kms']:.1f}"
        name = r["label"] or r["user_line"] or r["companion"] or "—"
        return (f"<tr><td>{r['center']:.6g}</td><td>{(r['center_err'] or 0):.2g}</td>"
                f"<td>{r['kind']}</td><td>{r['snr']:.1f}</td><td>{name}</td>"
                f"<td>{r['species'] or ''}</td><td>{resid}</td><td>{r['score']:.2f}</td>"
                f"<td>{r['flags']}</td></tr>")

    rows = "\n".join(_row(r) for r in summ["features"])
    ztxt = (f"z = {summ['z']:.6f} ± {summ['z_err']:.1e} (velocity {summ['velocity_kms']:.1f} km/s, "
            f"{summ['velocity_convention']} convention)" if summ["z"] is not None else "no redshift")
    readings = ""
    if summ.get("single_line_readings"):
        readings = ("<p>One clear line only, so no redshift. It could be: " + ", ".join(
            f"{r['label']} at z = {r['z']:.4f} ± {r['z_err']:.1e}" for r in summ["single_line_readings"])
            + " (each reading leaves the other lines of its series outside the window or below"
            " detection; settle it with more data).</p>")
    if summ.get("lyman_break"):
        readings += f"<p>{lyman_break_text(summ['lyman_break'])}</p>"
    if any(has_flag(r["flags"], Flag.AT_Z) for r in summ["features"]):
        readings += ("<p>Rows flagged <i>at_z</i> were not found by the blind search: they are"
                     " lines the solution predicts, measured at their predicted position with"
                     " the width of the identified lines beside them. Their position is the"
                     " prediction, so they have no residual and no say in the redshift.</p>")
    html = f"""<!DOCTYPE html><html><head><meta charset="utf-8"><title>linefinder report</title>
<style>body{{font-family:sans-serif;margin:2em}}table{{border-collapse:collapse}}
td,th{{border:1px solid #ccc;padding:2px 6px;font-size:90%}}</style></head><body>
<h1>linefinder report</h1><p>{source}</p><p><b>{ztxt}</b>, status <b>{summ['status']}</b>;
{summ['n_lines']} lines matched; medium of wavelengths: {summ['medium']}.</p>{readings}
<img src="data:image/png;base64,{png}" style="max-width:100%">
<h2>Features ({summ['unit']})</h2><table><tr><th>center</th><th>±</th><th>kind</th><th>S/N</th>
<th>identification</th><th>species</th><th>residual km/s</th><th>score</th><th>flags</th></tr>
{rows}</table><p>Figures are estimates; for a real plasma device or instrument rely on the
facility's calibrated diagnostics.</p></body></html>"""
    (folder / "report.html").write_text(html)
    return [folder / n for n in names]
