"""``python -m linefinder``: the command line."""

from .cli.main import run

run()
