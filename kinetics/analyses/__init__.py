"""Analyses: per-run fits and tables across runs, built on prep, models and estimate."""
