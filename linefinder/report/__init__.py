"""Reports of an identification: summary, tables, plots and one HTML page.
"""

from .summary import summary, write_report, lyman_break_text

__all__ = ["summary", "write_report", "lyman_break_text"]
