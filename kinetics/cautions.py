"""Caution texts that every process-facing output carries (one place, lowest layer).

Kept here, below every other module, so that analyses, exports, reports and the
CLI all print the same words without importing one another.
"""

from __future__ import annotations

__all__ = ["PROCESS_CAUTION"]

PROCESS_CAUTION = (
    "Caution: these kinetic parameters and predictions are estimates from laboratory DSC "
    "data. Validate them on the real process before using them to set mold temperatures or "
    "cycle times; local codes and qualified engineering practice govern process settings.")
