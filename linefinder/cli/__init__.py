"""The ``linefinder`` command line: one module per group of commands.

`main` builds the parser and turns every package error into one line on
stderr and exit status 2; `catalogue` holds ``lines`` and ``levels``,
`spectrum` ``peaks``, and `identify` ``identify``, ``redshift`` and ``demo``.
"""

from .main import main, run

__all__ = ["main", "run"]
