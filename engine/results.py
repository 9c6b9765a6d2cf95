"""Typed results of a run: what every writer and caller reads.

Field names match the files: ``u`` and ``dudn`` (total field and its
normal derivative, normal out of the body), ``incidents``,
``cross_sections``, ``near_field``. Complex values are phasors in the
exp(+j w t) convention, per unit incident amplitude.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .fields import CrossSections
from .mesh import PanelMesh
from .problem import IncidentWave, Problem

__all__ = ["FieldSamples", "FrequencySolution", "NearFieldResult", "RunResult", "RunSettings", "SurfaceTraces"]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class FieldSamples:
    """Fields at sample points: complex ``(..., n_incidents)``, NaN where ``inside``.

    On a grid the leading shape is ``(ny, nx)``; at probes ``(n_points,)``.
    ``inside`` marks points inside an impenetrable body.
    """

    total: ComplexArray
    scattered: ComplexArray
    incident: ComplexArray
    inside: NDArray[np.bool_]


@dataclass(frozen=True)
class NearFieldResult:
    """Near fields of some incident waves (``incidents`` index ``FrequencySolution.incidents``)."""

    incidents: tuple[int, ...]
    grid: FieldSamples | None = None
    x_m: FloatArray | None = None
    y_m: FloatArray | None = None
    probes: FieldSamples | None = None
    probes_m: FloatArray | None = None


@dataclass(frozen=True)
class SurfaceTraces:
    """Boundary values for the surface files: nodes of ``mesh``, ``(n_nodes, n_incidents)``."""

    mesh: PanelMesh
    u: ComplexArray
    dudn: ComplexArray
    dudn_inside: ComplexArray | None


@dataclass
class FrequencySolution:
    """Everything computed at one frequency.

    Attributes
    ----------
    farfield
        ``(n_angles, n_incidents)`` at ``angles_deg``.
    monostatic
        Backscatter far field per incident wave (NaN for line sources).
    cross_sections
        Widths per plane-wave incidence, or None without plane waves.
    estimated_error
        The a-posteriori estimate (see ``adapt``).
    dudn_inside
        On penetrable bodies, the normal derivative (same normal) just
        behind the boundary; NaN on impenetrable ones; None without
        penetrable bodies. ``u`` is the same on both sides.
    rebuilt
        With compressed corners, the boundary values on a mesh refined
        toward every corner (point values there, where ``u`` and ``dudn``
        hold weighted values); None otherwise.
    """

    frequency_hz: float
    wavenumber_rad_per_m: float
    wavelength_m: float
    mesh: PanelMesh
    incidents: tuple[IncidentWave, ...]
    unknowns: int
    u: ComplexArray
    dudn: ComplexArray
    angles_deg: FloatArray
    farfield: ComplexArray
    monostatic: ComplexArray
    cross_sections: CrossSections | None
    condition_estimate: float | None
    estimated_error: float
    refinement_change: float | None
    refinements: int
    timings_s: dict[str, float]
    warnings: list[str] = field(default_factory=list)
    near_field: NearFieldResult | None = None
    dudn_inside: ComplexArray | None = None
    rebuilt: SurfaceTraces | None = None
    #: The linear solver of the last pass (``dense LU`` or ``fast multipole + GMRES``).
    solver_method: str = "dense LU"
    #: GMRES iterations per incident wave (fast solver), else None.
    iterations: list[int] | None = None

    def surface(self) -> SurfaceTraces:
        """Point values on the boundary for the surface files (rebuilt next to corners)."""
        if self.rebuilt is not None:
            return self.rebuilt
        return SurfaceTraces(self.mesh, self.u, self.dudn, self.dudn_inside)

    @property
    def k(self) -> float:
        """Wavenumber (rad/m)."""
        return self.wavenumber_rad_per_m


@dataclass(frozen=True)
class RunSettings:
    """Solver settings as the engine resolved them (defaults filled in)."""

    tolerance: float
    nodes_per_panel: int
    max_panel_wavelengths: float
    max_refinements: int
    method: str


@dataclass
class RunResult:
    """A solved problem: one ``FrequencySolution`` per frequency."""

    problem: Problem
    frequencies: list[FrequencySolution]
    settings: RunSettings
    elapsed_s: float
