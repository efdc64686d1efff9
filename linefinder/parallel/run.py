"""`batch`: identify the lines of many spectra on Dask, results written as they come.

The client expands the inputs into tasks (`inputs`), gives each a key from the file's
content, the index and the options (`keys`), leaves out those already in the output
folder when resuming, and submits the rest to the cluster a few per worker thread at a
time (memory stays bounded whatever the number of spectra).  Workers read their own
spectra (`task`); the client collects the rows and writes them in parts (`store`) every
`FLUSH_SECONDS` or `FLUSH_ROWS` rows, and on an interruption (Ctrl-C, SIGTERM), so an
interrupted run loses at most the spectra in flight and those finished in the last few
seconds before a hard kill.  pyarrow, dask.distributed and tqdm (the ``dask`` extra)
are imported only when a batch runs.
"""

import logging
import os
import shutil
import signal
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import LinefinderError, OutputExistsError
from .inputs import expand_inputs, make_tasks
from .keys import content_hash, options_key, task_key
from .task import run_task

__all__ = ["batch", "BatchOutcome", "Terminated", "IDENTIFY_OPTIONS"]

FLUSH_SECONDS = 2.0
FLUSH_ROWS = 200
#: tasks in flight per worker thread
QUEUE_PER_THREAD = 4
#: the options a batch passes on to every spectrum
IDENTIFY_OPTIONS = ("species", "zmin", "zmax", "series", "kinds", "snr", "resolution",
                    "mask_sky", "mask_telluric", "detector", "companions", "extra_lines",
                    "hdu", "medium", "columns", "input_unit", "z")
REPORT = "summary.html"


class Terminated(KeyboardInterrupt):
    """The batch was stopped by SIGTERM (its finished results are on disk)."""


@dataclass
class BatchOutcome:
    """What a batch did."""
    folder: Path
    counts: dict = field(default_factory=dict)   #: status -> spectra of this batch
    n_spectra: int = 0
    n_run: int = 0          #: computed in this run
    n_reused: int = 0       #: found in the folder (``resume``)
    seconds: float = 0.0

    def counts_line(self):
        c = self.counts
        return (f"{self.n_spectra} spectra: {c.get('secure', 0)} secure, "
                f"{c.get('tentative', 0)} tentative, {c.get('none', 0)} none, "
                f"{c.get('failed', 0)} failed")


def _check_options(options):
    unknown = sorted(set(options) - set(IDENTIFY_OPTIONS))
    if unknown:
        raise TypeError(f"batch got unknown option(s) {', '.join(unknown)}; identify options are "
                        f"{', '.join(IDENTIFY_OPTIONS)}")
    zmin, zmax = options.get("zmin"), options.get("zmax")
    if zmin is not None and zmax is not None and not zmin < zmax:
        raise ValueError(f"zmin ({zmin}) must be below zmax ({zmax})")


def _prepare_folder(folder, resume, force):
    from .store import LINES, SUMMARY

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputExistsError(f"{folder}: exists and is not a folder")
    if folder.exists() and any(folder.iterdir()) and not resume:
        if not force:
            raise OutputExistsError(f"{folder}: exists; use --resume to go on with it or "
                                    "--force to start again")
        for name in (SUMMARY, LINES):
            shutil.rmtree(folder / name, ignore_errors=True)
        (folder / REPORT).unlink(missing_ok=True)
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def _keyed(tasks, options):
    opts = options_key(options)
    hashes = {}
    out = []
    for t in tasks:
        if t.path not in hashes:
            hashes[t.path] = content_hash(t.path)
        out.append((t, task_key([str(Path(t.path).resolve()), hashes[t.path]], t.index, opts)))
    return out


def _quiet_cluster_logs():
    """Dask's own INFO chatter (and its tracebacks of connections closed at shutdown) stay
    out of the user's terminal unless linefinder logs at DEBUG (``--debug``)."""
    if logging.getLogger("linefinder").getEffectiveLevel() <= logging.DEBUG:
        return
    for name in ("distributed", "tornado", "bokeh"):
        logging.getLogger(name).setLevel(logging.CRITICAL)


def _client(client, scheduler, workers, quiet):
    """(client, whether we own it)."""
    if client is not None:
        return client, False
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise LinefinderError("batch needs dask.distributed: pip install 'linefinder[dask]'") from None
    _quiet_cluster_logs()
    if scheduler:
        return Client(scheduler, timeout="30s"), True
    # (a free port: several clusters may run on one machine)
    cluster = LocalCluster(n_workers=int(workers or os.cpu_count() or 1), threads_per_worker=1,
                           processes=True, dashboard_address=":0",
                           silence_logs=logging.ERROR)
    return Client(cluster), True


def batch(inputs, out_dir, *, client=None, scheduler=None, workers=None, resume=False,
          force=False, progress=None, **identify_options):
    """Identify every spectrum of `inputs` (files, folders, glob patterns, ``@LIST`` files)
    into the folder `out_dir`; returns a `BatchOutcome`.

    ``client``: an existing ``dask.distributed.Client``; else ``scheduler`` (an address)
    or a local cluster of ``workers`` processes (default: one per core).  ``resume``
    reuses the results already in `out_dir` for unchanged spectra and options; without
    it an existing folder is refused unless ``force``.  ``progress``: a progress bar
    (default: when stderr is a terminal).  The other keywords are `identify` options,
    applied to every spectrum.
    """
    from .store import ResultStore  # (pyarrow: imported where a batch runs)

    _check_options(identify_options)
    t0 = time.perf_counter()
    if isinstance(inputs, (str, os.PathLike)):
        inputs = [inputs]
    paths = expand_inputs(inputs)
    folder = _prepare_folder(out_dir, resume, force)
    tasks = _keyed(make_tasks(paths), identify_options)
    store = ResultStore(folder, meta={"linefinder.options": options_key(identify_options)})
    done = store.done_keys() if resume else set()
    todo = [(t, k) for t, k in tasks if k not in done]
    outcome = BatchOutcome(folder=folder, n_spectra=len(tasks), n_reused=len(tasks) - len(todo))
    if progress is None:
        progress = sys.stderr.isatty()
    if todo:
        _run(todo, store, identify_options, client, scheduler, workers, progress, outcome)
    _finish(outcome, tasks, t0)
    return outcome


def _run(todo, store, options, client, scheduler, workers, progress, outcome):
    from distributed import as_completed
    from tqdm import tqdm

    client, owned = _client(client, scheduler, workers, not progress)
    previous = signal.getsignal(signal.SIGTERM)

    def _terminate(signum, frame):
        raise Terminated()

    bar = None
    try:
        signal.signal(signal.SIGTERM, _terminate)
    except ValueError:          # not the main thread: no handler, nothing else changes
        previous = None
    try:
        link = getattr(client, "dashboard_link", None) if _has_bokeh() else None
        if progress and link:
            print(f"Dask dashboard: {link}", file=sys.stderr)
        bar = tqdm(total=len(todo), unit="spectrum", disable=not progress, file=sys.stderr,
                   dynamic_ncols=True)
        window = max(2, QUEUE_PER_THREAD * max(1, sum(client.nthreads().values())))
        queue = iter(todo)
        ac = as_completed()
        pending = {}

        def submit():
            for t, k in queue:
                fut = client.submit(run_task, t.path, t.index, options, k, t.count_error,
                                    key=f"linefinder-{k}", pure=False)
                pending[fut.key] = (t, k)
                ac.add(fut)
                return True
            return False

        for _ in range(window):
            if not submit():
                break
        last = time.monotonic()
        for fut in ac:
            t, k = pending.pop(fut.key)
            try:
                row, lines = fut.result()
            except Exception as exc:        # a lost worker or a task killed by the cluster
                from .task import failed_row
                row, lines = failed_row(t.path, t.index, k, f"{t.path}: task lost: {exc}"), []
            fut.release()
            store.add(row, lines)
            outcome.n_run += 1
            bar.update(1)
            if store.pending >= FLUSH_ROWS or time.monotonic() - last > FLUSH_SECONDS:
                store.flush()
                last = time.monotonic()
            submit()
    finally:
        store.flush()           # whatever finished is kept, interrupted or not
        if bar is not None:
            bar.close()
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        if owned:
            _close(client)


def _has_bokeh():
    try:
        import bokeh  # noqa: F401   (the dashboard's pages need it)
    except ImportError:
        return False
    return True


def _close(client):
    cluster = getattr(client, "cluster", None)
    try:
        client.close()
        if cluster is not None:
            cluster.close()
    except Exception:       # closing a cluster that is going away anyway
        logging.getLogger("linefinder").debug("closing the cluster failed", exc_info=True)


def _finish(outcome, tasks, t0):
    from .report import write_summary_page
    from .store import SUMMARY, read_table

    summary = read_table(outcome.folder, SUMMARY)
    wanted = {k for _, k in tasks}
    keys = summary.column("key").to_pylist()
    statuses = summary.column("status").to_pylist()
    counts = {}
    seen = set()
    for k, s in zip(keys, statuses):
        if k in wanted and k not in seen:
            seen.add(k)
            counts[s] = counts.get(s, 0) + 1
    outcome.counts = counts
    outcome.seconds = time.perf_counter() - t0
    write_summary_page(outcome.folder, summary, outcome)
