"""The page a person reads after a batch: status counts, the redshifts found, time per
spectrum and the failures, in one self-contained HTML file (``summary.html``)."""

import base64
import html
import io
import os
from pathlib import Path

import numpy as np

__all__ = ["write_summary_page"]

STATUSES = ("secure", "tentative", "none", "failed")
_MAX_FAILURES = 200


def _figure(summary):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    status = np.array(summary.column("status").to_pylist(), dtype=object)
    z = np.array([np.nan if v is None else v for v in summary.column("z").to_pylist()], float)
    secs = np.array([np.nan if v is None else v for v in summary.column("seconds").to_pylist()],
                    float)
    fig, axes = plt.subplots(1, 3, figsize=(12, 3.4), constrained_layout=True)
    counts = [int(np.sum(status == s)) for s in STATUSES]
    axes[0].bar(STATUSES, counts, color=["#2a7", "#db3", "#999", "#c33"])
    axes[0].set_ylabel("spectra")
    axes[0].set_title("status")
    for s, colour in (("secure", "#2a7"), ("tentative", "#db3")):
        vals = z[(status == s) & np.isfinite(z)]
        if len(vals):
            axes[1].hist(vals, bins=min(50, max(5, len(vals) // 3)), color=colour, alpha=0.7,
                         label=s)
    axes[1].set_xlabel("z")
    axes[1].set_title("redshifts")
    if axes[1].get_legend_handles_labels()[0]:
        axes[1].legend()
    ok = secs[np.isfinite(secs)]
    if len(ok):
        axes[2].hist(ok, bins=min(40, max(5, len(ok) // 3)), color="#47a")
    axes[2].set_xlabel("seconds per spectrum")
    axes[2].set_title("time")
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90)
    plt.close(fig)
    return base64.b64encode(buf.getvalue()).decode()


def write_summary_page(folder, summary, outcome):
    """Write ``summary.html`` into `folder` (atomically)."""
    esc = html.escape
    failed = [(s, i, e) for s, i, e, st in zip(summary.column("source").to_pylist(),
                                                summary.column("index").to_pylist(),
                                                summary.column("error").to_pylist(),
                                                summary.column("status").to_pylist())
              if st == "failed"]
    rows = "".join(f"<tr><td>{esc(str(s))}</td><td>{i}</td><td>{esc(str(e))}</td></tr>"
                   for s, i, e in failed[:_MAX_FAILURES])
    more = f"<p>… and {len(failed) - _MAX_FAILURES} more.</p>" if len(failed) > _MAX_FAILURES else ""
    png = _figure(summary) if summary.num_rows else ""
    img = f'<img alt="status counts, redshifts and time per spectrum" src="data:image/png;base64,{png}">' \
        if png else ""
    page = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>linefinder batch summary</title>
<style>body{{font-family:sans-serif;margin:2em;max-width:1200px}}td,th{{padding:2px 8px;
text-align:left;border-bottom:1px solid #ddd}}img{{max-width:100%}}</style></head><body>
<h1>Batch summary</h1>
<p>{esc(outcome.counts_line())}. Computed in this run: {outcome.n_run}; reused from the
folder: {outcome.n_reused}; {outcome.seconds:.1f} s.</p>
{img}
<h2>Failures ({len(failed)})</h2>
<table><tr><th>source</th><th>index</th><th>error</th></tr>{rows}</table>{more}
<p>Tables: <code>summary.parquet/</code> (one row per spectrum) and <code>lines.parquet/</code>
(one row per identified feature), Parquet datasets readable with pandas or pyarrow.</p>
</body></html>
"""
    path = Path(folder) / "summary.html"
    tmp = path.with_name(f".tmp-{os.getpid()}-summary.html")
    tmp.write_text(page, encoding="utf-8")
    os.replace(tmp, path)
    return path
