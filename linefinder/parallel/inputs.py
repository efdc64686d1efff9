"""What a batch runs on: files, folders, glob patterns and @LIST files, expanded into
one task per spectrum (a multi-spectrum file gives one task per index)."""

import glob
from dataclasses import dataclass
from pathlib import Path

from ..errors import LinefinderError
from ..io.read import count_spectra

__all__ = ["Task", "expand_inputs", "make_tasks", "SPECTRUM_SUFFIXES"]

#: file names a folder is searched for
SPECTRUM_SUFFIXES = (".fits", ".fit", ".fts", ".fz", ".fits.gz", ".csv", ".tsv", ".txt",
                     ".dat", ".ecsv")


class BatchInputError(LinefinderError, ValueError):
    """An input of a batch that names nothing to read."""


@dataclass(frozen=True)
class Task:
    """One spectrum of a batch: a file and the index of the spectrum in it."""
    path: str
    index: int
    count_error: str = None     #: why the file's spectra could not be counted (read in the task)


def _is_spectrum_name(p):
    name = p.name.lower()
    return not name.startswith(".") and name.endswith(SPECTRUM_SUFFIXES)


def expand_inputs(inputs):
    """The files named by `inputs` (paths, folders searched recursively, glob patterns,
    ``@LIST`` text files of paths), each once, in the order given."""
    out, seen = [], set()

    def add(p):
        key = str(Path(p).resolve())
        if key not in seen:
            seen.add(key)
            out.append(Path(p))

    for item in inputs:
        item = str(item)
        if item.startswith("@"):
            listing = Path(item[1:])
            if not listing.is_file():
                raise BatchInputError(f"{listing}: no such list file")
            names = [ln.strip() for ln in listing.read_text(errors="replace").splitlines()]
            for name in names:
                if name and not name.startswith("#"):
                    p = Path(name)
                    add(p if p.is_absolute() else listing.parent / p)
        elif Path(item).is_dir():
            for p in sorted(Path(item).rglob("*")):
                if p.is_file() and _is_spectrum_name(p):
                    add(p)
        elif Path(item).exists():
            add(Path(item))
        elif glob.has_magic(item):
            matches = sorted(glob.glob(item, recursive=True))
            if not matches:
                raise BatchInputError(f"{item}: the pattern matches no file")
            for m in matches:
                if Path(m).is_file():
                    add(Path(m))
        else:
            raise BatchInputError(f"{item}: no such file or folder")
    return out


def make_tasks(paths):
    """One `Task` per spectrum of each file; a file whose spectra cannot be counted is one
    task that will fail and record why."""
    tasks = []
    for p in paths:
        try:
            n = count_spectra(p)
        except (LinefinderError, OSError, ValueError, TypeError) as exc:
            tasks.append(Task(str(p), 0, f"{exc}".splitlines()[0] if str(exc) else type(exc).__name__))
            continue
        tasks.extend(Task(str(p), i) for i in range(n))
    return tasks
