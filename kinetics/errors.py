"""Exception and warning types of crystkin.

User mistakes (bad files, bad options) raise :class:`CrystkinInputError`, a
``ValueError`` subclass whose message names the file, row or column and the fix.
Data-quality findings that do not stop an analysis are :class:`DataQualityWarning`
and are also recorded in the result objects, so nothing is only printed.
"""

from __future__ import annotations


class CrystkinInputError(ValueError):
    """A user-facing input problem: the message says where and what to do.

    Parameters
    ----------
    message : str
        What is wrong and how to fix it.
    source : str, optional
        File (or other origin) concerned; prefixed to the message.
    row, column : optional
        Location inside the source, 1-based data row and column name.
    """

    def __init__(self, message: str, *, source: str | None = None, row: int | None = None,
                 column: str | None = None):
        self.source = source
        self.row = row
        self.column = column
        where = []
        if source:
            where.append(str(source))
        if row is not None:
            where.append(f"row {row}")
        if column is not None:
            where.append(f"column '{column}'")
        prefix = (", ".join(where) + ": ") if where else ""
        super().__init__(prefix + message)


class ConvergenceWarning(UserWarning):
    """An estimate whose sampler or optimiser did not meet its convergence criterion."""


class DataQualityWarning(UserWarning):
    """A finding about the data (early start, cut-off event, low signal-to-noise)."""


def check_option(name: str, value, allowed, where: str):
    """Validate an option against a set of allowed values (one message form).

    Raises
    ------
    CrystkinInputError
        "The 'name' parameter of where must be one of [...]. Got ... instead."
    """
    if value not in allowed:
        raise CrystkinInputError(
            f"The '{name}' parameter of {where} must be one of {sorted(map(str, allowed))}. "
            f"Got {value!r} instead."
        )
    return value


def check_range(name: str, value: float, where: str, *, lower=None, upper=None,
                inclusive: bool = True):
    """Validate a number against bounds, with the same message form as :func:`check_option`."""
    ok = True
    if lower is not None:
        ok &= value >= lower if inclusive else value > lower
    if upper is not None:
        ok &= value <= upper if inclusive else value < upper
    if not ok:
        lo = "-inf" if lower is None else lower
        hi = "inf" if upper is None else upper
        brackets = "[]" if inclusive else "()"
        raise CrystkinInputError(
            f"The '{name}' parameter of {where} must be in {brackets[0]}{lo}, {hi}{brackets[1]}. "
            f"Got {value!r} instead."
        )
    return value
