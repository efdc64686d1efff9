"""``linefinder identify``, ``linefinder redshift`` and ``linefinder demo``."""

import json
import sys

from ..features.flags import Flag, has_flag
from ..identification.pipeline import identify
from ..io.line_lists import read_line_list
from ..io.tables import json_default
from ..report.summary import lyman_break_text, summary, write_report
from .spectrum import add_spectrum_options, kinds_from_args, list_input, load_input

__all__ = ["register", "add_identify_options", "identify_options"]


def identify_options(args):
    """The identification options of a parsed command line, as `identify` keywords."""
    return dict(species=args.species, z=getattr(args, "z", None), zmin=args.zmin,
                zmax=args.zmax, series=args.series, kinds=kinds_from_args(args), snr=args.snr,
                resolution=args.resolution, mask_sky=args.mask_sky,
                detector=getattr(args, "detector", "auto"), mask_telluric=args.mask_telluric,
                companions=not getattr(args, "no_companions", False))


def _run(args):
    extra = read_line_list(args.extra_lines) if getattr(args, "extra_lines", None) else None
    data = load_input(args)
    return identify(data, extra_lines=extra, **identify_options(args))


def _print_summary(res, s, source):
    z = "none" if s["z"] is None else f"{s['z']:.6f} ± {s['z_err']:.1e}"
    print(f"{source}: z = {z}  status {s['status']}  velocity "
          f"{'—' if s['velocity_kms'] is None else format(s['velocity_kms'], '.1f')} km/s "
          f"({s['velocity_convention']})")
    print(f"matched lines: {', '.join(s['lines']) or 'none'}"
          + (f"; companion lines: {', '.join(s['companion_lines'])}" if s["companion_lines"] else ""))
    for a in s["alternatives"][:3]:
        print(f"  alternative z = {a['z']:.6f} ({a['n_lines']} lines, score lower by {a['delta_score']:.1f})")
    if s["single_line_readings"]:
        print("one clear line only, so no redshift; it could be " + ", ".join(
            f"{r['label']} at z = {r['z']:.4f}" for r in s["single_line_readings"][:8])
            + (" ..." if len(s["single_line_readings"]) > 8 else "")
            + " (other lines of each series would fall outside the window or below detection)")
    if s["lyman_break"]:
        print(lyman_break_text(s["lyman_break"]))
    for r in s["features"]:
        name = r["label"] or (f"[user] {r['user_line']}" if r["user_line"] else
                              (f"[companion] {r['companion']}" if r["companion"] else "unidentified"))
        res_txt = "" if r["residual_kms"] is None else f"{r['residual_kms']:+7.1f} km/s"
        if r["label"] and has_flag(r["flags"], Flag.AT_Z):
            res_txt = f"{'at z':>12}"
        print(f"  {r['center']:12.6g} {s['unit']:<8} {r['kind']:<10} S/N {r['snr']:6.1f}  "
              f"{r['species'] or '':<6} {name:<14} {res_txt}  {r['flags']}")


def _cmd_identify(args):
    if list_input(args):
        return 0
    res = _run(args)
    s = summary(res)
    if args.output:
        paths = write_report(res, args.output, force=args.force, source=str(args.spectrum))
        print(f"report written to {paths[-1].parent}/ (report.html, spectrum.png, features.csv, "
              f"summary.json)", file=sys.stderr)
    if args.format == "json":
        json.dump({k: s[k] for k in s}, sys.stdout, indent=1, ensure_ascii=False, default=json_default)
        sys.stdout.write("\n")
    else:
        _print_summary(res, s, args.spectrum)
    return 0


def _cmd_redshift(args):
    if list_input(args):
        return 0
    res = _run(args)
    s = summary(res)
    out = {"z": s["z"], "z_err": s["z_err"], "status": s["status"], "velocity_kms": s["velocity_kms"],
           "velocity_err_kms": s["velocity_err_kms"], "velocity_convention": s["velocity_convention"],
           "lines": s["lines"], "companion_lines": s["companion_lines"],
           "alternatives": s["alternatives"], "systems": s["systems"],
           "single_line_readings": s["single_line_readings"], "lyman_break": s["lyman_break"]}
    if args.format == "json":
        json.dump(out, sys.stdout, indent=1, ensure_ascii=False, default=json_default)
        sys.stdout.write("\n")
    else:
        _print_summary(res, s, args.spectrum)
    return 0


def _cmd_demo(args):
    from ..simulate.scenarios import sample_path

    path = sample_path("emission_galaxy.fits")
    extra = sample_path("nebular_lines.csv")

    class A:  # the same options identify would get
        pass

    a = A()
    for k, v in dict(spectrum=str(path), index=None, hdu=None, medium=None, columns=None,
                     input_unit=None, snr=5.0, resolution=None, emission=False, absorption=False,
                     species=None, zmin=None, zmax=None, series=None, mask_sky=True, mask_telluric=False,
                     extra_lines=str(extra), z=None).items():
        setattr(a, k, v)
    res = _run(a)
    write_report(res, args.output, force=args.force, source=f"bundled sample {path.name}")
    _print_summary(res, summary(res), path.name)
    print(f"\nreport written to {args.output}/ — open {args.output}/report.html "
          f"(plot: {args.output}/spectrum.png)")
    return 0


def _options(p):
    add_spectrum_options(p)
    add_identify_options(p)
    p.add_argument("--format", choices=["text", "json"], default="text")


def add_identify_options(p):
    """What identification looks for (identify, redshift and batch)."""
    p.add_argument("--species", nargs="+", metavar="NAME", help="species to consider (default by regime)")
    p.add_argument("--series", nargs="+", metavar="NAME", help="only these series (Balmer, Lyman, ...)")
    p.add_argument("--zmin", type=float, help="lowest redshift searched (default 0; radio -0.005)")
    p.add_argument("--zmax", type=float, help="highest redshift searched (default 7; radio 0.005)")
    p.add_argument("--extra-lines", metavar="FILE", help="your own line list (CSV/ECSV)")
    p.add_argument("--mask-sky", action="store_true",
                   help="leave features on night-sky emission lines out (either sign)")
    p.add_argument("--mask-telluric", action="store_true",
                   help="leave absorption features inside telluric bands out")
    p.add_argument("--no-companions", action="store_true",
                   help="do not use the strong nebular lines ([O III], [N II], C IV ...) as "
                        "evidence for the redshift in emission spectra")


def register(sub):
    p = sub.add_parser("identify", help="identify lines, find the redshift, list what is left")
    _options(p)
    p.add_argument("--z", type=float, help="fix the redshift instead of searching")
    p.add_argument("-o", "--output", metavar="DIR", help="write the report into DIR")
    p.add_argument("--force", action="store_true", help="overwrite an existing report")
    p.set_defaults(func=_cmd_identify)
    q = sub.add_parser("redshift", help="redshift or velocity from the features alone")
    _options(q)
    q.set_defaults(func=_cmd_redshift)
    d = sub.add_parser("demo", help="identify the lines of a bundled sample spectrum")
    d.add_argument("-o", "--output", default="linefinder-demo", metavar="DIR")
    d.add_argument("--force", action="store_true")
    d.set_defaults(func=_cmd_demo)
