"""Fast multipole sums of the Helmholtz Green's function (pyfmmlib), in our convention.

pyfmmlib sums ``(i/4) H0^(1)(k r)`` (``exp(-i w t)``); ours is
``G = -(j/4) H0^(2)(k r) = conj((i/4) H0^(1)(conj(k) r))`` for real ``r``,
so every call is made with ``conj(k)`` and conjugated strengths, and its
results are conjugated back.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveError

__all__ = ["FMM_ERRORS", "MultipoleError", "fmm_at_targets", "fmm_precision", "fmm_seconds", "fmm_sums"]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]

#: pyfmmlib precision flag and the relative error of its sums measured here
#: (3000 points on an ellipse, k = 200, charges and dipoles, against direct
#: summation): 1.7e-6, 1.2e-7, 1.2e-10, 3.1e-14, 9e-16; kept with a margin.
FMM_ERRORS: tuple[tuple[int, float], ...] = ((0, 1e-5), (1, 1e-6), (2, 1e-9), (3, 1e-13), (4, 1e-15))

#: Cost model of one call (two cores): seconds per point (sources plus targets) and per
#: (k D)^2, D the diameter of all points (measured: 20 000 and 100 000 points at k D = 200,
#: 2000 and 10 000).
FMM_POINT_S = 1.7e-5
FMM_KD2_S = 5.5e-8


def fmm_seconds(n_points: int, kd: float) -> float:
    """Estimated seconds of one FMM call on ``n_points`` points spanning ``kd`` radians."""
    return FMM_POINT_S * n_points + FMM_KD2_S * kd * kd


class MultipoleError(SectionwaveError):
    """The fast multipole library reported an error."""


def fmm_precision(relative_error: float) -> int:
    """The cheapest pyfmmlib precision flag whose error is below ``relative_error``."""
    for flag, err in FMM_ERRORS:
        if err <= relative_error:
            return flag
    return FMM_ERRORS[-1][0]


def fmm_sums(
    points: FloatArray, normals: FloatArray, k: complex, charge: ComplexArray | None,
    dipole: ComplexArray | None, precision: int, gradient: bool,
) -> tuple[ComplexArray, ComplexArray | None]:
    """``sum_j G(x_i, y_j) q_j + dG/dn_y(x_i, y_j) d_j`` over ``j != i`` at every point, and its gradient.

    ``points`` and ``normals`` are ``(2, n)``; returns the potential ``(n,)``
    and, with ``gradient``, its gradient ``(2, n)`` in our convention.
    """
    out = _call(points, normals, k, charge, dipole, precision, gradient, None)
    return out[0], out[1]


def fmm_at_targets(
    points: FloatArray, normals: FloatArray, k: complex, charge: ComplexArray | None,
    dipole: ComplexArray | None, precision: int, targets: FloatArray,
) -> ComplexArray:
    """The same sums at other points ``targets`` ``(2, m)`` (field points off the boundary)."""
    return _call(points, normals, k, charge, dipole, precision, False, targets)[2]


def _call(
    points: FloatArray, normals: FloatArray, k: complex, charge: ComplexArray | None,
    dipole: ComplexArray | None, precision: int, gradient: bool, targets: FloatArray | None,
) -> tuple[ComplexArray, ComplexArray | None, ComplexArray]:
    import pyfmmlib

    n = points.shape[1]
    zero = np.zeros(n, dtype=complex)
    tgt = np.zeros((2, 0)) if targets is None else np.asfortranarray(targets)
    m = tgt.shape[1]
    out = pyfmmlib.hfmm2dparttarg(
        iprec=precision, zk=complex(np.conj(k)), source=points,
        ifcharge=int(charge is not None), charge=zero if charge is None else np.conj(charge),
        ifdipole=int(dipole is not None), dipstr=zero if dipole is None else np.conj(dipole),
        dipvec=normals, ifpot=int(targets is None), iffld=int(gradient), ifhess=0,
        ntarget=m, target=tgt, ifpottarg=int(targets is not None),
        pottarg=np.zeros(max(m, 1), dtype=complex),
        iffldtarg=0, fldtarg=np.zeros((2, max(m, 1)), dtype=complex), ifhesstarg=0,
        hesstarg=np.zeros((3, max(m, 1)), dtype=complex),
    )
    ier, pot, fld, pottarg = out[0], out[1], out[2], out[4]
    if ier != 0:
        raise MultipoleError(f"the fast multipole method failed (code {ier}) on {n} points")
    return np.conj(pot), (np.conj(fld) if gradient else None), np.conj(pottarg[:m])
