"""Cost plan: the unknowns, memory and time of each solver before anything is allocated, and the choice.

Glossary
--------
cost plan
    For one boundary system: per method (``dense``: assembly and LAPACK
    LU; ``fast``: GMRES with fast multipole products), the peak memory and
    the time estimated from the system's size alone, and whether it fits.
machine speed
    Time estimates scale with one 1000 x 1000 complex LU timed once in this
    process (the fastest of three, about 0.02 s each), so they follow the machine they run on.
auto
    The default method: the cheaper of the two in estimated time among those
    that fit in memory; a system that fits neither is refused with both
    estimates in the message.

The models' constants were measured on a two-core machine (PEC circles,
ellipses and polygons, ka = 5 to 1000) and are checked by tests
(``tests/engine/test_plan.py``: memory within 20 % of the measured peak)
and by ``benchmarks/bench_fast.py``.
"""

from __future__ import annotations

import math
import time
import weakref
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Literal

import numpy as np

from . import solve as _solve
from .compression import CompressedSystem
from .fast import CYCLE_LENGTH, RECYCLE_MEMORY_SHARE, FastMultipole, near_pattern_size
from .multipole import fmm_seconds
from .solve import PLAN_MARGIN, DenseLU, PreparedSolver, ProblemTooLargeError
from .system import BoundarySystem, DiscreteSystem

__all__ = [
    "AutoSolver",
    "MethodCost",
    "SystemPlan",
    "dense_cost",
    "fast_cost",
    "fast_memory_bytes",
    "plan_system",
]

Method = Literal["auto", "dense", "fast"]

#: Seconds per matrix entry and operator of dense assembly (measured: N = 4000, TM and TE).
DENSE_ENTRY_S = 1.4e-8
#: Near-pattern seconds per entry (assembly of the sparse corrections, all four operators).
NEAR_ENTRY_S = 2.0e-6
#: Bytes per near-pattern entry at the peak of the fast set-up (indices, dense-path and plain
#: values, sparse corrections, near system and its LU), and per unknown besides the Krylov
#: vectors (FMM, mesh, work arrays). Measured peaks (circles, N = 4096 and 16 384, TM and TE,
#: one and four incident waves) are 0.90 to 0.95 of this model.
NEAR_ENTRY_BYTES = 300.0
FAST_UNKNOWN_BYTES = 1000.0
#: Iterations of the first right-hand side, and the share later ones need with recycling.
FIRST_ITERATIONS = 40
#: Iterations with radiation-condition rows on every contour (measured 7 to 11, ka = 10 to 1000).
RADIATION_ITERATIONS = 12
LATER_SHARE = 0.3
#: LAPACK LU time of the reference 1000 x 1000 complex matrix on the development machine.
REFERENCE_LU_S = 0.02


@dataclass(frozen=True)
class MethodCost:
    """What one method would take on one system."""

    method: str
    memory_bytes: int
    time_s: float
    fits: bool


@dataclass(frozen=True)
class SystemPlan:
    """Both methods' costs on one system and the method chosen (None: neither fits)."""

    unknowns: int
    costs: tuple[MethodCost, ...]
    chosen: str | None
    reason: str

    def cost(self, method: str) -> MethodCost:
        return next(c for c in self.costs if c.method == method)


@lru_cache(maxsize=1)
def machine_factor() -> float:
    """The LU time of this machine relative to the development machine (1.0 there)."""
    rng = np.random.default_rng(0)
    a = rng.standard_normal((1000, 1000)) + 1j * rng.standard_normal((1000, 1000))
    import scipy.linalg as la

    best = math.inf
    for _ in range(3):  # the fastest of three: other work on the machine only slows a run down
        b = a.copy()
        t0 = time.perf_counter()
        la.lu_factor(b, overwrite_a=True, check_finite=False)
        best = min(best, time.perf_counter() - t0)
    return max(best / REFERENCE_LU_S, 0.05)


def _base(system: DiscreteSystem) -> BoundarySystem:
    base = system.base if isinstance(system, CompressedSystem) else system
    assert isinstance(base, BoundarySystem)
    return base


def dense_cost(system: DiscreteSystem, n_rhs: int = 1) -> MethodCost:
    """Dense assembly and LU: memory as ``DenseLU`` plans it; time from the LU of ``N^3`` and the entries."""
    n = system.n_unknowns
    memory = DenseLU().memory_bytes(system)
    ops = max(system.dense_peak_matrices(), 1.0)
    lu_s = REFERENCE_LU_S * (n / 1000.0) ** 3
    seconds = machine_factor() * (lu_s + DENSE_ENTRY_S * ops * n * n + 4e-9 * n * n * n_rhs)
    return MethodCost("dense", memory, seconds, _solve.fits_in_memory(memory))


def _near_entries(system: DiscreteSystem) -> list[tuple[int, int, float]]:
    """Per region: nodes, near-pattern entries and diameter times wavenumber."""
    base = _base(system)
    out = []
    for region in base.regions:
        sub = base.mesh.subset([c for c, _ in region.contours])
        span = np.ptp(sub.nodes, axis=0)
        out.append((sub.n_nodes, near_pattern_size(sub), float(abs(region.wavenumber) * math.hypot(*span))))
    return out


def _iterations(system: DiscreteSystem, n_rhs: int) -> float:
    base = _base(system)
    radiation = (base.is_simple and not base.mesh.corner_zones and not base.mesh.open_chain
                 and all(f.name == "dirichlet" for f in base.formulations))
    if radiation:  # radiation-condition rows everywhere: about ten iterations at any frequency
        first = RADIATION_ITERATIONS
    else:
        first = FIRST_ITERATIONS * (2 if isinstance(system, CompressedSystem) else 1)
    return first * (1 + LATER_SHARE * max(n_rhs - 1, 0))


def fast_memory_bytes(system: DiscreteSystem, n_rhs: int = 1) -> int:
    """Peak bytes of the fast solver: near pattern and its preconditioner, Krylov vectors, FMM.

    Krylov vectors cost two complex vectors per iteration (the Arnoldi basis
    and its preconditioned image, both kept for recycling), up to the
    recycling budget.
    """
    n = system.n_unknowns
    near = sum(entries for _, entries, _ in _near_entries(system))
    budget = RECYCLE_MEMORY_SHARE * _solve.available_memory_bytes() / (32 * max(n, 1))
    vectors = min(_iterations(system, n_rhs), budget)
    total = NEAR_ENTRY_BYTES * near + FAST_UNKNOWN_BYTES * n + 32 * n * vectors
    return int(PLAN_MARGIN * total)


def fast_cost(system: DiscreteSystem, n_rhs: int = 1) -> MethodCost:
    """GMRES with FMM products: time from the iterations, the FMM model and the near pattern."""
    regions = _near_entries(system)
    fmm = sum(fmm_seconds(m, kd) for m, _, kd in regions)
    near = sum(entries for _, entries, _ in regions)
    iterations = _iterations(system, n_rhs)
    n = system.n_unknowns
    arnoldi = 16e-9 * n * iterations * min(iterations, CYCLE_LENGTH)
    seconds = machine_factor() * (iterations * fmm + NEAR_ENTRY_S * near + arnoldi)
    memory = fast_memory_bytes(system, n_rhs)
    return MethodCost("fast", memory, seconds, _solve.fits_in_memory(memory))


#: Plans already made, per system (a solve asks for the memory, then prepares: one plan).
_PLANS: weakref.WeakKeyDictionary[Any, dict[tuple[str, int], SystemPlan]] = weakref.WeakKeyDictionary()


def plan_system(system: DiscreteSystem, method: Method = "auto", n_rhs: int = 1) -> SystemPlan:
    """Both methods' costs on ``system`` and the one to use (made once per system and request)."""
    known = _PLANS.setdefault(system, {})
    key = (method, n_rhs)
    if key not in known:
        known[key] = _plan(system, method, n_rhs)
    return known[key]


def _plan(system: DiscreteSystem, method: Method, n_rhs: int) -> SystemPlan:
    costs = (dense_cost(system, n_rhs), fast_cost(system, n_rhs))
    dense, fast = costs
    if method != "auto":
        pick = dense if method == "dense" else fast
        chosen = pick.method if pick.fits else None
        reason = f"{method} asked for in the case"
    else:
        fitting = [c for c in costs if c.fits]
        chosen = min(fitting, key=lambda c: c.time_s).method if fitting else None
        reason = "the faster of the methods that fit" if len(fitting) == 2 else "the only method that fits"
    if chosen is None:
        reason = "does not fit in memory"
    return SystemPlan(system.n_unknowns, costs, chosen, reason)


@dataclass(frozen=True)
class AutoSolver:
    """The solver seam's default: dense LU or the fast solver, per system, from the cost plan."""

    tolerance: float = 1e-8
    method: Method = "auto"
    n_rhs: int = 1

    @property
    def name(self) -> str:
        return f"{self.method} (dense LU or fast multipole + GMRES)"

    def memory_bytes(self, system: DiscreteSystem) -> int:
        plan = plan_system(system, self.method, self.n_rhs)
        if plan.chosen is None:
            if self.method != "auto":
                return plan.cost(self.method).memory_bytes
            return min(c.memory_bytes for c in plan.costs)
        return plan.cost(plan.chosen).memory_bytes

    def prepare(self, system: DiscreteSystem) -> PreparedSolver:
        plan = plan_system(system, self.method, self.n_rhs)
        if plan.chosen is None:
            d, f = plan.cost("dense"), plan.cost("fast")
            raise ProblemTooLargeError(
                f"{system.n_unknowns} unknowns fit neither method: dense LU needs about "
                f"{d.memory_bytes / 2**30:.1f} GiB, the fast solver about {f.memory_bytes / 2**30:.1f} GiB, "
                f"and {_solve.available_memory_bytes() / 2**30:.1f} GiB are available; lower the frequency, "
                "loosen the tolerance, or split the scene"
            )
        if plan.chosen == "dense":
            return DenseLU().prepare(system)
        return FastMultipole(self.tolerance).prepare(system)

    def chosen(self, system: DiscreteSystem) -> str | None:
        return plan_system(system, self.method, self.n_rhs).chosen
