"""Boundary equations of each kind of boundary, as objects.

Glossary
--------
u, dudn
    The total field on the boundary and its normal derivative along the
    contour's normal (out of the body, into the surrounding region).
region equations
    For a region R with wavenumber k_R bounded by contours whose normals
    point into R (sign s = +1) or out of it (s = -1), Green's
    representation ``u = u_inc + sum s int (u dG/dn_y - G dudn) ds`` (the
    incident wave only in the unbounded region) has the boundary limits
    (jump relations in ``operators``)
    ``(E1)  u/2 - sum s (D u - S dudn) = u_inc`` and
    ``(E2)  dudn/2 - sum s (T u - D' dudn) = du_inc/dn``
    at every node of R's boundary, with R's operators.
formulation
    What one boundary contributes to the system: how many unknowns it
    carries per node, how those unknowns give the traces ``u`` and
    ``dudn`` seen from each side (``SideMap.u``, ``SideMap.dudn``), and
    with which weights each side's ``E1`` and ``E2`` enter the node's rows
    (``SideMap.e1``, ``SideMap.e2``). The assembler in ``system`` needs
    nothing else; an interface between two media carries two unknowns and
    two sides.
combined equations (impenetrable bodies, one side)
    ``dirichlet`` (u = 0: TM PEC, sound-soft) uses ``E2 + beta E1`` (the
    direct combined-field equation) for the unknown ``dudn / |k|``;
    ``neumann`` (dudn = 0: TE PEC, sound-hard) and ``robin`` (dudn = lam u:
    impedance surfaces) use ``E1 + alpha E2`` (Burton & Miller, Proc. R.
    Soc. A 323, 1971) for the unknown ``u``. A non-zero solution of the
    homogeneous system would give an interior field with
    ``dw/dn = -beta w`` (or ``w = -alpha dw/dn``) on the boundary; Green's
    first identity makes its imaginary part force ``w = 0`` whenever the
    coupling is not real, so no frequency is resonant. The circle's
    interior eigenfrequencies (zeros of J0 and J1') are checked in the tests.
interface between two media (penetrable bodies)
    u and ``beta du/dn`` are continuous; the unknowns are ``u`` and the
    outside ``dudn / |k_out|`` (the inside one is ``beta_out / beta_in``
    times the outside one). The rows are ``E1_out + E1_in`` and
    ``(E2_out + E2_in) / |k_out|``: the hypersingular parts of the two
    regions' ``T`` cancel in the sum, leaving a second-kind system
    (Mueller's formulation, C. Mueller, Foundations of the Mathematical
    Theory of Electromagnetic Waves, 1969; its unique solvability at every
    real frequency: R. Kress and G. F. Roach, J. Math. Phys. 19, 1978).
impedance (Leontovich / normal acoustic impedance)
    ``du/dn = lam u`` with ``lam = j k / z`` (TM and sound) or ``j k z``
    (TE), z normalised to the surrounding medium, n out of the body,
    exp(+j w t); a passive surface has Re z >= 0.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .problem import FieldKind, ProblemError, Scatterer

__all__ = [
    "Dirichlet",
    "Formulation",
    "Neumann",
    "Penetrable",
    "Robin",
    "SideMap",
    "coupling_constants",
    "formulation_for",
    "robin_factor",
]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class SideMap:
    """How ``m`` unknowns per node enter the equations of one side's region.

    All arrays have shape ``(n_nodes, m)``: ``u[i, a]`` and ``dudn[i, a]``
    are the traces at node ``i`` per unit of its unknown ``a``; ``e1[i, r]``
    and ``e2[i, r]`` weigh the region's equations E1 and E2 at node ``i`` in
    the node's row ``r``.
    """

    u: ComplexArray
    dudn: ComplexArray
    e1: ComplexArray
    e2: ComplexArray


def coupling_constants(k: complex) -> tuple[complex, complex]:
    """``(alpha, beta)`` for the combined equations; both have non-zero imaginary parts.

    The scaling with ``k`` balances the two equations: ``dudn ~ k u``.

    Examples
    --------
    >>> coupling_constants(2.0)
    (-0.5j, -2j)
    """
    kr = abs(k)
    return (-1j / kr, -1j * kr)


def robin_factor(field: FieldKind, k: complex, impedance: complex) -> complex:
    """``lam`` of the impedance condition ``du/dn = lam u`` (n out of the body, exp(+j w t)).

    TM and sound: ``lam = j k / z``; TE: ``lam = j k z``; ``z`` normalised
    to the surrounding medium's wave impedance.

    Examples
    --------
    >>> robin_factor("tm", 2.0, 1.0), robin_factor("te", 2.0, 0.5)
    (2j, 1j)
    """
    z = complex(impedance)
    return 1j * k * z if field == "te" else 1j * k / z


class Formulation(ABC):
    """The boundary equations of one contour (see the module glossary)."""

    #: Name used in reports.
    name: str = "formulation"
    #: Unknowns (and rows) per node.
    unknowns_per_node: int = 1
    #: True when the contour is an interface with a second, inner region.
    has_inside: bool = False

    @abstractmethod
    def outside(self, k: complex, panel_length: FloatArray) -> SideMap:
        """Map for the region the normal points into, wavenumber ``k``.

        ``panel_length`` is the length of each node's panel.
        """

    def inside(self, k: complex, panel_length: FloatArray) -> SideMap:
        """Map for the region behind the contour (interfaces only)."""
        raise NotImplementedError(f"{self.name} has no inner region")


def _column(values: NDArray[Any]) -> ComplexArray:
    return np.asarray(values, dtype=complex).reshape(-1, 1)


def _balance(k: complex, panel_length: FloatArray) -> FloatArray:
    """Row balance ``h / (h + 1/|k|)`` of the Burton-Miller rows on a panel of length ``h``.

    The hypersingular part scales like ``1/h`` on the tiny panels next to
    corners; this pure scaling of each row keeps the condition number near
    its smooth-body value however deep the corner refinement (measured on
    the square: 3.6e12 -> 7e4 at 32 levels).
    """
    return panel_length / (panel_length + 1.0 / abs(k))


class Dirichlet(Formulation):
    """``u = 0`` (TM PEC, sound-soft): unknown ``dudn / |k|``, rows ``(E2 + beta E1) / |k|``.

    The unknown is scaled by ``|k|`` so that every unknown has the size of
    the field itself, which balances the columns of mixed scenes.
    """

    name = "dirichlet"

    def outside(self, k: complex, panel_length: FloatArray) -> SideMap:
        n = panel_length.size
        _, beta = coupling_constants(k)
        kr = abs(k)
        return SideMap(
            u=np.zeros((n, 1), dtype=complex),
            dudn=np.full((n, 1), kr, dtype=complex),
            e1=np.full((n, 1), beta / kr, dtype=complex),
            e2=np.full((n, 1), 1.0 / kr, dtype=complex),
        )


class Neumann(Formulation):
    """``dudn = 0`` (TE PEC, sound-hard): unknown ``u``, rows ``E1 + alpha E2``.

    With ``balanced`` the rows are scaled by ``_balance`` (for graded corner
    meshes); compressed corners (RCIP) need the plain rows, since their
    scaling must not depend on the panel size.
    """

    name = "neumann"

    def __init__(self, balanced: bool = True) -> None:
        self.balanced = balanced

    def _factor(self, k: complex) -> complex:
        return 0.0

    def outside(self, k: complex, panel_length: FloatArray) -> SideMap:
        n = panel_length.size
        alpha, _ = coupling_constants(k)
        balance = _balance(k, panel_length) if self.balanced else np.ones(n)
        return SideMap(
            u=np.ones((n, 1), dtype=complex),
            dudn=np.full((n, 1), self._factor(k), dtype=complex),
            e1=_column(balance),
            e2=_column(alpha * balance),
        )


class Robin(Neumann):
    """``dudn = lam u`` (impedance surfaces): unknown ``u``, rows as for ``Neumann``."""

    name = "robin"

    def __init__(self, lam: complex, balanced: bool = True) -> None:
        super().__init__(balanced)
        self.lam = complex(lam)

    def _factor(self, k: complex) -> complex:
        return self.lam


class Penetrable(Formulation):
    """Interface between two media: unknowns ``u`` and ``dudn / |k_out|``, Mueller's rows.

    ``ratio`` is ``beta_out / beta_in``, so that the inside normal
    derivative is ``ratio`` times the outside one.
    """

    name = "penetrable"
    unknowns_per_node = 2
    has_inside = True

    def __init__(self, ratio: complex, k_out: complex) -> None:
        self.ratio = complex(ratio)
        self.scale = abs(k_out)

    def _map(self, n: int, factor: complex) -> SideMap:
        u = np.zeros((n, 2), dtype=complex)
        dudn = np.zeros((n, 2), dtype=complex)
        e1 = np.zeros((n, 2), dtype=complex)
        e2 = np.zeros((n, 2), dtype=complex)
        u[:, 0] = 1.0
        dudn[:, 1] = factor * self.scale
        e1[:, 0] = 1.0
        e2[:, 1] = 1.0 / self.scale
        return SideMap(u, dudn, e1, e2)

    def outside(self, k: complex, panel_length: FloatArray) -> SideMap:
        return self._map(panel_length.size, 1.0)

    def inside(self, k: complex, panel_length: FloatArray) -> SideMap:
        return self._map(panel_length.size, self.ratio)


def formulation_for(
    field: FieldKind, scatterer: Scatterer, k: complex, *, flux_ratio: complex | None = None,
    balanced: bool = True,
) -> Formulation:
    """The formulation of a boundary at wavenumber ``k`` of the region its normal points into.

    ``flux_ratio`` (``beta_out / beta_in``) is needed for penetrable bodies;
    ``balanced`` False gives the plain rows that compressed corners need.

    Raises
    ------
    ProblemError
        If the boundary kind does not exist for ``field``.
    """
    kind = scatterer.boundary
    if kind == "penetrable":
        if flux_ratio is None:
            raise ProblemError(f"body {scatterer.name!r}: a penetrable boundary needs both media")
        return Penetrable(flux_ratio, k)
    if kind == "impedance":
        if scatterer.impedance is None:
            raise ProblemError(f"body {scatterer.name!r}: impedance boundary without an impedance")
        return Robin(robin_factor(field, k, scatterer.impedance), balanced)
    if kind == "hard" or (kind == "pec" and field == "te"):
        return Neumann(balanced)
    if kind == "soft" or (kind == "pec" and field == "tm"):
        return Dirichlet()
    raise ProblemError(f"body {scatterer.name!r}: boundary {kind!r} is not available for {field}")
