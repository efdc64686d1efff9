"""Batch results on disk: two partitioned Parquet datasets in the output folder,
``summary.parquet/`` (one row per spectrum) and ``lines.parquet/`` (one row per
identified feature), each a folder of ``part-*.parquet`` files that pandas and pyarrow
read as one table.

Parts are written under a hidden temporary name and renamed into place once complete,
so a part that is there is whole; Parquet readers skip hidden files, and a new run
removes those an interrupted one left.  A spectrum's summary part is written after its
lines part, so a spectrum found in the summary has all its lines on disk.
"""

import os
import uuid
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq

__all__ = ["ResultStore", "SUMMARY_SCHEMA", "LINES_SCHEMA", "read_table"]

SUMMARY_SCHEMA = pa.schema([
    ("source", pa.string()), ("index", pa.int64()), ("z", pa.float64()),
    ("z_err", pa.float64()), ("status", pa.string()), ("velocity_kms", pa.float64()),
    ("velocity_err_kms", pa.float64()), ("velocity_convention", pa.string()),
    ("n_lines", pa.int64()), ("lines", pa.string()), ("seconds", pa.float64()),
    ("error", pa.string()), ("key", pa.string()),
])
LINES_SCHEMA = pa.schema([
    ("source", pa.string()), ("index", pa.int64()), ("center", pa.float64()),
    ("center_err", pa.float64()), ("fwhm", pa.float64()), ("unit", pa.string()),
    ("flux", pa.float64()), ("snr", pa.float64()), ("kind", pa.string()),
    ("flags", pa.string()), ("label", pa.string()), ("species", pa.string()),
    ("series", pa.string()), ("n_lower", pa.int64()), ("n_upper", pa.int64()),
    ("rest_wavelength_vacuum_nm", pa.float64()), ("residual_kms", pa.float64()),
    ("score", pa.float64()), ("system", pa.int64()), ("companion", pa.string()),
    ("user_line", pa.string()), ("key", pa.string()),
])
_UNITS = {b"velocity_kms": b"km/s", b"velocity_err_kms": b"km/s", b"seconds": b"s",
          b"rest_wavelength_vacuum_nm": b"nm", b"residual_kms": b"km/s"}
SUMMARY, LINES = "summary.parquet", "lines.parquet"


def _with_units(schema, extra):
    meta = {b"linefinder.units": repr(_UNITS).encode(), **extra}
    return schema.with_metadata(meta)


def read_table(folder, name=SUMMARY):
    """One dataset of a batch folder as a pyarrow Table (empty where nothing is written)."""
    path = Path(folder) / name
    schema = SUMMARY_SCHEMA if name == SUMMARY else LINES_SCHEMA
    parts = sorted(path.glob("part-*.parquet")) if path.is_dir() else []
    if not parts:
        return schema.empty_table()
    return pa.concat_tables([pq.read_table(p, schema=schema) for p in parts])


class ResultStore:
    """The output folder of a batch: finished keys, and rows added and flushed in parts."""

    def __init__(self, folder, meta=None):
        self.folder = Path(folder)
        self.meta = {k.encode(): str(v).encode() for k, v in (meta or {}).items()}
        self._summary, self._lines = [], []
        for name in (SUMMARY, LINES):
            d = self.folder / name
            d.mkdir(parents=True, exist_ok=True)
            for stale in d.glob(".tmp-*"):      # left by an interrupted run: never whole
                stale.unlink(missing_ok=True)

    def done_keys(self):
        """Keys of the spectra whose results are on disk."""
        table = read_table(self.folder, SUMMARY)
        return set(table.column("key").to_pylist())

    def add(self, row, lines):
        self._summary.append(row)
        self._lines.extend(lines)

    @property
    def pending(self):
        return len(self._summary)

    def flush(self):
        """Write the rows added since the last flush as one part per dataset."""
        if not self._summary:
            return
        stem = f"part-{uuid.uuid4().hex[:16]}"
        if self._lines:
            self._write(LINES, LINES_SCHEMA, self._lines, stem)
        self._write(SUMMARY, SUMMARY_SCHEMA, self._summary, stem)
        self._summary, self._lines = [], []

    def _write(self, name, schema, rows, stem):
        table = pa.Table.from_pylist(rows, schema=_with_units(schema, self.meta))
        final = self.folder / name / f"{stem}.parquet"
        tmp = final.with_name(f".tmp-{stem}.parquet")
        try:
            pq.write_table(table, tmp)
            os.replace(tmp, final)
        finally:
            tmp.unlink(missing_ok=True)
