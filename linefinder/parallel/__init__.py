"""Many spectra at once on Dask: `batch` runs the identification of every spectrum of
many files as one task each, on a local cluster or any Dask scheduler, and writes the
results as partitioned Parquet (`store`), resumable (`keys`), with a summary page
(`report`).  `inputs` expands files, folders, globs and list files into tasks; `task`
is what a worker runs.
"""

from .run import BatchOutcome, batch

__all__ = ["batch", "BatchOutcome"]
