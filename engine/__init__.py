"""Mesh, solve and evaluate 2D time-harmonic scattering."""

from __future__ import annotations

__all__: list[str] = []
