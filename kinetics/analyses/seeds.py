"""Per-run seeds that do not depend on the order in which runs are processed."""

from __future__ import annotations

import hashlib

__all__ = ["run_seed"]


def run_seed(base_seed: int, run_id: str) -> int:
    """A 32-bit seed from the study seed and the run's name (stable across versions)."""
    h = hashlib.sha256(f"{int(base_seed)}:{run_id}".encode()).digest()
    return int.from_bytes(h[:4], "little")
