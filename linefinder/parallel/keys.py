"""Keys of batch results: a spectrum's result is reused by ``--resume`` only when the
file's content, the spectrum's index and the options are all unchanged."""

import hashlib
import json
from pathlib import Path

from .._version import __version__

__all__ = ["content_hash", "options_key", "task_key"]

_CHUNK = 1 << 20


def content_hash(path):
    """SHA-256 of a file's bytes (read in chunks); None where it cannot be read."""
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(_CHUNK), b""):
                h.update(block)
    except OSError:
        return None
    return h.hexdigest()


def _defaults():
    import inspect

    from ..identification.pipeline import identify

    sig = inspect.signature(identify)
    out = {k: p.default for k, p in sig.parameters.items()
           if p.default is not inspect.Parameter.empty}
    out.update(hdu=None, medium=None, columns=None, input_unit=None, extra_lines=None)
    return {k: list(v) if isinstance(v, tuple) else v for k, v in out.items()}


def options_key(options):
    """A stable text of the options that change a result (files among them by content);
    an option given at its default value is the same as one not given."""
    defaults = _defaults()
    norm = {}
    for k, v in sorted(options.items()):
        if isinstance(v, tuple):
            v = list(v)
        if k in defaults and v == defaults[k]:
            continue
        if k == "extra_lines" and v is not None:
            v = content_hash(Path(v))
        elif isinstance(v, (list, tuple)):
            v = list(v)
        norm[k] = v
    return json.dumps([__version__, norm], sort_keys=True, default=str)


def task_key(file_hash, index, opts_key):
    """The key of one spectrum's result."""
    text = json.dumps([file_hash, int(index), opts_key])
    return hashlib.sha256(text.encode()).hexdigest()[:32]
