"""Reports of an identification: summary, tables, plots and one HTML page.
"""

from .summary import lyman_break_text, summary, write_report

__all__ = ["summary", "write_report", "lyman_break_text"]
