"""Benchmarks, and the independent model and judge plans are measured against (not installed)."""
