"""Per-run result cache, so an interrupted batch resumes without redoing finished runs.

Each finished fit is pickled to ``<folder>/<run_id>-<key>.pkl``, written to a
temporary name and renamed, so a killed process never leaves a half-written
entry.  The key hashes everything the result depends on: the run's data and
metadata, the options, the seed and the crystkin version; change any of them and
the run is fitted again.

Loading a pickle runs code, so an entry is used only when it and its folder
belong to the current user and nobody else may write them (the folder is made
with mode 0700); anything else is ignored and the run fitted again.
"""

from __future__ import annotations

import hashlib
import os
import pickle
from pathlib import Path

import numpy as np

from .. import __version__

__all__ = ["ResultCache", "run_key"]


def run_key(trace, seed: int, options: dict) -> str:
    """Hex digest identifying one run's fit (data, metadata, seed, options, version)."""
    h = hashlib.sha256()
    for a in (trace.time, trace.temperature, trace.heat_flow):
        h.update(np.ascontiguousarray(a).tobytes())
    info = {k: v for k, v in trace.info.__dict__.items() if k not in ("extra",)}
    h.update(repr(sorted(info.items())).encode())
    h.update(repr((seed, sorted(options.items()), __version__, trace.specific)).encode())
    return h.hexdigest()[:20]


def _trusted(path: Path) -> bool:
    """Owned by this user and writable by nobody else (always true where there are no uids)."""
    if not hasattr(os, "getuid"):
        return True
    try:
        st = path.stat()
    except OSError:
        return False
    return st.st_uid == os.getuid() and not st.st_mode & 0o022


class ResultCache:
    """A folder of pickled per-run results (None disables caching)."""

    def __init__(self, folder):
        self.folder = None if folder is None else Path(folder)
        if self.folder is not None:
            self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)

    def _path(self, run_id: str, key: str) -> Path:
        safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in run_id)
        return self.folder / f"{safe}-{key}.pkl"

    def get(self, run_id: str, key: str):
        if self.folder is None:
            return None
        p = self._path(run_id, key)
        if not p.exists() or not (_trusted(self.folder) and _trusted(p)):
            return None
        try:
            with open(p, "rb") as fh:
                return pickle.load(fh)
        except (OSError, pickle.UnpicklingError, EOFError, AttributeError):
            return None

    def put(self, run_id: str, key: str, value) -> None:
        if self.folder is None:
            return
        p = self._path(run_id, key)
        tmp = p.with_suffix(f".tmp{os.getpid()}")
        with open(os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600), "wb") as fh:
            pickle.dump(value, fh, protocol=pickle.HIGHEST_PROTOCOL)
        os.replace(tmp, p)

    def __len__(self) -> int:
        return 0 if self.folder is None else len(list(self.folder.glob("*.pkl")))
