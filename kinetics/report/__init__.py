"""Figures, rendered tables and report files (the only layer that imports matplotlib)."""
