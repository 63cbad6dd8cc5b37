"""Exports: tidy tables and posterior draws on disk, and the simulation input."""
