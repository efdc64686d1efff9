"""Reading spectra, peak lists and line lists; writing tables.

`read` is the one entry point for every input file; `fits` and `text` read
the two families of layouts, with the column-role vocabulary shared in
`columns` and the header units parsed in `units`; `line_lists` reads a
user's own lines; `tables` writes CSV, ECSV, JSON and Parquet without ever
overwriting unasked.
"""

from .line_lists import read_line_list
from .read import describe_input, is_peak_list, read_input, read_spectrum
from .tables import table_to_records, write_table

__all__ = ["read_input", "read_spectrum", "describe_input", "is_peak_list", "read_line_list",
           "write_table", "table_to_records"]
