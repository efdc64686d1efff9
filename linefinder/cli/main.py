"""The ``linefinder`` command line.

``main(argv)`` returns an exit status so that tests can call it in-process:
0 on success, 2 on bad input (one line on stderr naming the file or option
and the problem; ``--debug`` adds the traceback).
"""

import argparse
import logging
import sys
import traceback

from .._version import __version__
from ..errors import LinefinderError

__all__ = ["main", "run", "CommandError"]

log = logging.getLogger("linefinder")


class CommandError(LinefinderError, ValueError):
    """A problem with the command line itself."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit status 2
        raise CommandError(f"{message} (see '{self.prog} --help')")


def _subcommands():
    from . import batch as cli_batch
    from . import catalogue as cli_catalogue
    from . import identify as cli_identify
    from . import spectrum as cli_spectrum

    return [cli_catalogue, cli_spectrum, cli_identify, cli_batch]


def build_parser():
    parser = _Parser(prog="linefinder",
                     description="Identify hydrogen and hydrogen-like lines: catalogues from "
                                 "atomic theory, spectrum features, redshifts, reports.")
    parser.add_argument("--version", action="version", version=f"linefinder {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks and debug logging")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in _subcommands():
        module.register(sub)
    return parser


def main(argv=None):
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    logging.basicConfig(level=logging.DEBUG if debug else logging.WARNING,
                        format="linefinder: %(levelname)s: %(message)s")
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 0
        return int(args.func(args) or 0)
    except SystemExit as exc:  # --help / --version
        return int(exc.code or 0) if not isinstance(exc.code, str) else 2
    except KeyboardInterrupt:
        print("linefinder: interrupted", file=sys.stderr)
        return 130
    except (LinefinderError, OSError, ValueError, KeyError, TypeError) as exc:
        if debug:
            traceback.print_exc()
        message = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        if isinstance(exc, OSError) and getattr(exc, "filename", None) and exc.strerror:
            message = f"{exc.filename}: {exc.strerror}"
        print(f"linefinder: error: {message}", file=sys.stderr)
        return 2


def run():
    sys.exit(main())
