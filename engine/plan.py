"""Cost plan: unknowns, memory and time of each solver before anything is allocated."""

from __future__ import annotations

from .system import DiscreteSystem

__all__ = ["fast_memory_bytes"]


def fast_memory_bytes(system: DiscreteSystem) -> int:
    """Peak bytes of the fast solver on ``system`` (placeholder until calibrated)."""
    n = system.n_unknowns
    return int(n * 20_000)
