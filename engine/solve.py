"""Dense LU solution with memory checks and a condition estimate.

One factorisation serves every right-hand side (all incidence angles of
one frequency). The memory needed is estimated before any matrix is
allocated, and a problem that would not fit is refused with the estimate
in the message rather than left to swap.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveError

__all__ = [
    "MATRICES_IN_FLIGHT",
    "ProblemTooLargeError",
    "Factorisation",
    "available_memory_bytes",
    "check_memory",
    "factorise",
]

ComplexArray = NDArray[np.complex128]

#: Dense complex N x N matrices alive at the peak of one solve: S, D, D', T,
#: the system matrix and LAPACK's copy, plus temporaries.
MATRICES_IN_FLIGHT = 7
#: Fraction of the available memory a solve may plan to use.
MEMORY_FRACTION = 0.8


class ProblemTooLargeError(SectionwaveError, MemoryError):
    """The dense system would not fit in memory."""


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


def check_memory(n_unknowns: int, *, matrices: int = MATRICES_IN_FLIGHT) -> int:
    """Estimate the bytes a dense solve of ``n_unknowns`` needs; refuse if too many.

    Raises
    ------
    ProblemTooLargeError
        If ``matrices * 16 N^2`` bytes exceed the usable memory.
    """
    need = int(matrices) * 16 * int(n_unknowns) ** 2
    avail = available_memory_bytes()
    if need > MEMORY_FRACTION * avail:
        raise ProblemTooLargeError(
            f"the dense solve needs about {need / 2**30:.1f} GiB for {n_unknowns} unknowns "
            f"({matrices} complex matrices of 16 N^2 bytes) but {avail / 2**30:.1f} GiB are "
            "available; lower the frequency, loosen [solver] tolerance, or split the scene"
        )
    return need


@dataclass
class Factorisation:
    """LU factors of a system matrix and its estimated condition number."""

    lu: ComplexArray
    piv: NDArray[np.int32]
    condition: float

    def solve(self, rhs: ComplexArray) -> ComplexArray:
        """Solve for one or many right-hand sides (columns)."""
        return la.lu_solve((self.lu, self.piv), rhs, check_finite=False)


def factorise(matrix: ComplexArray, *, overwrite: bool = True) -> Factorisation:
    """LU-factorise ``matrix`` (LAPACK getrf) and estimate its 1-norm condition (gecon)."""
    anorm = float(np.max(np.sum(np.abs(matrix), axis=0)))
    lu, piv = la.lu_factor(matrix, overwrite_a=overwrite, check_finite=False)
    gecon = la.get_lapack_funcs("gecon", (lu,))
    rcond, info = gecon(lu, anorm, norm="1")
    condition = float(1.0 / rcond) if rcond > 0 else float("inf")
    return Factorisation(lu, piv, condition)
