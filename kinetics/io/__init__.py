"""Readers and writers: raw DSC tables, the study file, and safe output.

* :func:`read_trace`: one run from CSV, TSV, delimited text or XLSX, in SI units.
* :func:`read_study`: a TOML study file and every run it names.
* :func:`atomic_output_dir`, :func:`safe_child`, :func:`write_json`, :func:`write_table`:
  outputs written whole or not at all, never over an input.
"""

from .study import read_study
from .tables import read_trace
from .writers import atomic_output_dir, check_safe_name, safe_child, write_json, write_table

__all__ = ["read_trace", "read_study", "atomic_output_dir", "safe_child", "check_safe_name",
           "write_json", "write_table"]
