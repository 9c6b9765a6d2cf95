"""Solve the boundary system for every incident wave: the solver seam.

Glossary
--------
linear solver
    Anything with ``name``, ``memory_bytes(system)`` and
    ``prepare(system) -> PreparedSolver`` (see ``LinearSolver``). A prepared
    solver solves for many right-hand sides and reports its condition
    estimate. Dense LU (``DenseLU``) is the first implementation: one
    factorisation serves every incident wave of a frequency.
memory plan
    The bytes a solve needs, estimated before anything is allocated; a
    problem that would not fit is refused with the estimate in the
    message rather than left to swap.

``solve_boundary`` is the one public call that solves a boundary system
for a set of incident waves and reports what it cost.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Protocol

import numpy as np
import scipy.linalg as la
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveError, SectionwaveWarning

from .fields import incident_field
from .problem import IncidentWave
from .system import DiscreteSystem

__all__ = [
    "CONDITION_WARN",
    "MATRICES_IN_FLIGHT",
    "PLAN_MARGIN",
    "BoundarySolution",
    "DenseLU",
    "Factorisation",
    "IllConditionedWarning",
    "LinearSolver",
    "PreparedSolver",
    "ProblemTooLargeError",
    "SolveReport",
    "available_memory_bytes",
    "check_memory",
    "factorise",
    "fits_in_memory",
    "solve_boundary",
]

ComplexArray = NDArray[np.complex128]

#: Default count of dense complex N x N matrices planned for when the system is
#: not known (``check_memory``); a ``DiscreteSystem`` states its own count.
MATRICES_IN_FLIGHT = 4
#: Allowance for what the plan does not count (per-panel work arrays, the
#: mesh, right-hand sides): 5 % of the planned matrices.
PLAN_MARGIN = 1.05
#: Fraction of the available memory a solve may plan to use.
MEMORY_FRACTION = 0.8
#: Condition numbers above this are flagged (digits lost ~ log10(cond)).
CONDITION_WARN = 1e10


class ProblemTooLargeError(SectionwaveError, MemoryError):
    """The system would not fit in memory."""


class IllConditionedWarning(SectionwaveWarning):
    """The system matrix is badly conditioned; digits may be lost."""


def available_memory_bytes() -> int:
    """Memory available to this process (``MemAvailable``; a cgroup limit if lower)."""
    avail = None
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    avail = int(line.split()[1]) * 1024
    except OSError:
        pass
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            with open(path, encoding="ascii") as fh:
                text = fh.read().strip()
            if text.isdigit():
                limit = int(text)
                avail = limit if avail is None else min(avail, limit)
        except OSError:
            continue
    if avail is None:
        pages = os.sysconf("SC_AVPHYS_PAGES") if hasattr(os, "sysconf") else 0
        avail = int(pages * os.sysconf("SC_PAGE_SIZE")) if pages else 8 << 30
    return int(avail)


def fits_in_memory(n_bytes: int) -> bool:
    """True when ``n_bytes`` fit in the share of the available memory a solve may use."""
    return n_bytes <= MEMORY_FRACTION * available_memory_bytes()


def check_memory(n_unknowns: int, *, matrices: float = MATRICES_IN_FLIGHT) -> int:
    """Estimate the bytes a dense solve of ``n_unknowns`` needs; refuse if too many.

    Raises
    ------
    ProblemTooLargeError
        If ``matrices * 16 N^2`` bytes exceed the usable memory.
    """
    need = int(matrices * 16 * int(n_unknowns) ** 2)
    avail = available_memory_bytes()
    if need > MEMORY_FRACTION * avail:
        raise ProblemTooLargeError(
            f"the dense solve needs about {need / 2**30:.1f} GiB for {n_unknowns} unknowns "
            f"({matrices:g} complex matrices of 16 N^2 bytes) but {avail / 2**30:.1f} GiB are "
            "available; lower the frequency, loosen the tolerance, or split the scene"
        )
    return need


@dataclass
class Factorisation:
    """LU factors of a system matrix (or of its transpose) and its estimated condition number."""

    lu: ComplexArray
    piv: NDArray[np.int32]
    condition: float
    transposed: bool = False

    def solve(self, rhs: ComplexArray) -> ComplexArray:
        """Solve for one or many right-hand sides (columns)."""
        return la.lu_solve((self.lu, self.piv), rhs, trans=1 if self.transposed else 0, check_finite=False)


def _abs_sums(matrix: ComplexArray, axis: int, chunk: int = 512) -> float:
    """Largest sum of absolute values along ``axis``, in slabs (no N x N temporary)."""
    n = matrix.shape[1 - axis]
    best = 0.0
    for lo in range(0, n, chunk):
        part = matrix[:, lo : lo + chunk] if axis == 0 else matrix[lo : lo + chunk]
        best = max(best, float(np.max(np.sum(np.abs(part), axis=axis))))
    return best


def factorise(matrix: ComplexArray, *, overwrite: bool = True) -> Factorisation:
    """LU-factorise ``matrix`` (LAPACK getrf) and estimate its condition (gecon).

    A C-ordered matrix is factorised as its transpose, which LAPACK sees in
    Fortran order, so with ``overwrite`` no copy is made; ``solve`` then
    solves with the transposed factors. The estimate is the 1-norm condition
    of whichever matrix was factorised.
    """
    transposed = matrix.flags.c_contiguous and not matrix.flags.f_contiguous
    target = matrix.T if transposed else matrix
    anorm = _abs_sums(target, axis=0)
    lu, piv = la.lu_factor(target, overwrite_a=overwrite, check_finite=False)
    gecon = la.get_lapack_funcs("gecon", (lu,))
    rcond, info = gecon(lu, anorm, norm="1")
    condition = float(1.0 / rcond) if rcond > 0 else float("inf")
    return Factorisation(lu, piv, condition, transposed)


class PreparedSolver(Protocol):
    """A system made ready to solve (factorised, or preconditioned)."""

    #: Seconds spent preparing, by stage (``assemble_s``, ``factorise_s``, ...).
    timings_s: dict[str, float]

    @property
    def condition_estimate(self) -> float | None:
        """Estimated condition number of the system, if the solver knows it."""
        ...

    def solve(self, rhs: ComplexArray) -> ComplexArray:
        """Unknowns for each column of ``rhs``."""
        ...


class LinearSolver(Protocol):
    """A way to solve boundary systems (dense LU today; an iterative fast solver may join it)."""

    @property
    def name(self) -> str:
        """Name used in reports."""
        ...

    def memory_bytes(self, system: DiscreteSystem) -> int:
        """Bytes a solve of ``system`` needs at its peak (nothing is allocated)."""
        ...

    def prepare(self, system: DiscreteSystem) -> PreparedSolver:
        """Assemble and factorise (or precondition) ``system``."""
        ...


@dataclass
class _DenseFactors:
    factors: Factorisation
    timings_s: dict[str, float]
    method_name: str = "dense LU"

    @property
    def condition_estimate(self) -> float | None:
        return self.factors.condition

    def solve(self, rhs: ComplexArray) -> ComplexArray:
        return self.factors.solve(rhs)


@dataclass(frozen=True)
class DenseLU:
    """Dense assembly and LAPACK LU; every right-hand side shares one factorisation."""

    name: str = "dense LU"

    def memory_bytes(self, system: DiscreteSystem) -> int:
        return int(PLAN_MARGIN * system.dense_peak_matrices() * 16 * system.n_unknowns**2)

    def prepare(self, system: DiscreteSystem) -> PreparedSolver:
        t0 = time.perf_counter()
        check_memory(system.n_unknowns, matrices=PLAN_MARGIN * system.dense_peak_matrices())
        matrix = system.dense_matrix()
        t1 = time.perf_counter()
        factors = factorise(matrix)
        del matrix
        return _DenseFactors(factors, {"assemble_s": t1 - t0, "factorise_s": time.perf_counter() - t1})


@dataclass
class SolveReport:
    """What a boundary solve cost and how well posed it was."""

    method: str
    unknowns: int
    condition_estimate: float | None
    memory_planned_bytes: int
    timings_s: dict[str, float] = field(default_factory=dict)
    #: Iterations per right-hand side, for iterative solvers.
    iterations: list[int] | None = None


@dataclass
class BoundarySolution:
    """Boundary traces for every incident wave (columns) and the raw unknowns."""

    system: DiscreteSystem
    unknowns: ComplexArray
    u: ComplexArray
    dudn: ComplexArray
    report: SolveReport


def solve_boundary(
    system: DiscreteSystem,
    incidents: Sequence[IncidentWave],
    *,
    solver: LinearSolver | None = None,
    incident_values: Callable[[DiscreteSystem], tuple[ComplexArray, ComplexArray]] | None = None,
) -> BoundarySolution:
    """Solve ``system`` for each incident wave and recover the surface traces.

    Parameters
    ----------
    system
        The boundary equations on a mesh at one frequency.
    incidents
        The incident waves (one right-hand side each), in the unbounded
        region of wavenumber ``system.k``.
    solver
        Default ``DenseLU()``.
    incident_values
        Optional override giving the incident field and its normal
        derivative at the nodes, ``(n_nodes, n_incidents)`` each.

    Returns
    -------
    BoundarySolution
        ``u`` and ``dudn`` (normal out of the body), ``(n_nodes, n_incidents)``.

    Raises
    ------
    ProblemTooLargeError
        If the solver's memory plan does not fit.
    """
    active: LinearSolver = solver if solver is not None else DenseLU()
    planned = active.memory_bytes(system)
    prepared = active.prepare(system)
    t1 = time.perf_counter()
    mesh = system.mesh
    if incident_values is None:
        u_inc, dn_inc = incident_field(incidents, mesh.nodes, mesh.normals, system.k)
    else:
        u_inc, dn_inc = incident_values(system)
    # a solver may iterate on its own combination of the boundary equations
    # (same unknowns); it then builds the right-hand sides itself
    own_rhs = getattr(prepared, "right_hand_sides", None)
    rhs = own_rhs(u_inc, dn_inc) if own_rhs is not None else system.right_hand_sides(u_inc, dn_inc)
    x = prepared.solve(rhs)
    t2 = time.perf_counter()
    u, dudn = system.traces(x)
    stages = prepared.timings_s
    timings = {
        "assemble_s": stages.get("assemble_s", 0.0),
        "factorise_and_solve_s": sum(v for key, v in stages.items() if key != "assemble_s") + (t2 - t1),
    }
    method = str(getattr(prepared, "method_name", active.name))
    report = SolveReport(method, system.n_unknowns, prepared.condition_estimate, planned, timings,
                         list(getattr(prepared, "iterations", []) or []) or None)
    return BoundarySolution(system, x, u, dudn, report)
