"""``linefinder batch``: many spectra on Dask, results in Parquet."""

import sys

from .identify import add_identify_options, identify_options
from .main import CommandError
from .spectrum import add_reading_options

__all__ = ["register"]


def _cmd_batch(args):
    from ..parallel.run import Terminated, batch

    if args.workers is not None and args.workers < 1:
        raise CommandError("--workers must be at least 1")
    if args.scheduler and args.workers is not None:
        raise CommandError("--workers and --scheduler exclude each other (the scheduler's "
                           "cluster has its own workers)")
    if args.snr is not None and not args.snr > 0:
        raise CommandError("--snr must be positive")
    if args.resolution is not None and not args.resolution > 0:
        raise CommandError("--resolution must be positive")
    options = identify_options(args)
    options.pop("z", None)
    options.update(extra_lines=args.extra_lines, hdu=args.hdu, medium=args.medium,
                   columns=args.columns, input_unit=args.input_unit)
    options = {k: v for k, v in options.items() if v is not None}
    try:
        outcome = batch(args.inputs, args.output, scheduler=args.scheduler, workers=args.workers,
                        resume=args.resume, force=args.force,
                        progress=False if args.quiet else None, **options)
    except Terminated:
        print(f"linefinder: stopped by SIGTERM; finished results are in {args.output}/ "
              "(go on with --resume)", file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print(f"linefinder: interrupted; finished results are in {args.output}/ "
              "(go on with --resume)", file=sys.stderr)
        return 130
    if not args.quiet:
        print(f"results in {outcome.folder}/: summary.parquet, lines.parquet, summary.html",
              file=sys.stderr)
    print(outcome.counts_line())
    return 0


def register(sub):
    p = sub.add_parser("batch", help="identify many spectra on Dask (Parquet results, resumable)",
                       description="Identify the lines of every spectrum of many files (each "
                                   "spectrum of a multi-spectrum file is one task) on a local "
                                   "Dask cluster or a scheduler, into Parquet tables.")
    p.add_argument("inputs", nargs="+", metavar="INPUT",
                   help="spectrum files, folders (searched), glob patterns, or @LIST (a file of paths)")
    p.add_argument("-o", "--output", required=True, metavar="DIR",
                   help="results folder: summary.parquet/, lines.parquet/, summary.html")
    add_reading_options(p)
    add_identify_options(p)
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes of the local cluster (default: one per core)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on an existing Dask scheduler (e.g. tcp://host:8786) instead")
    p.add_argument("--resume", action="store_true",
                   help="go on with DIR: skip spectra whose file and options are unchanged")
    p.add_argument("--force", action="store_true", help="start again in an existing DIR")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=_cmd_batch)
