"""Benchmarks: scripts that print figures and ratios (``python -m render.bench``)."""

__all__: list[str] = []
