"""crystkin: polymer crystallization kinetics from raw DSC runs, with honest uncertainty.

The library is layered; lower layers never import higher ones::

    dataset, units, errors      data model and conversions at the edges (SI inside)
    io                          readers and writers
    prep                        event window, baseline, induction time, conversion
    models                      pure vectorised model functions and their parameter descriptions
    estimate                    least squares and the emcee engine, shared by every model
    analyses                    tables across runs
    report, export              figures, tables, report files, simulation export
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("crystkin")
except PackageNotFoundError:  # running from a source tree that was not installed
    __version__ = "0+unknown"

__all__ = ["__version__"]
