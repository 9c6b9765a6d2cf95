"""The physics problem the engine solves: bodies, media, waves, requests.

Glossary
--------
problem
    Everything the engine needs and nothing more: the field kind, the
    surrounding medium, the bodies (exact contours plus what each boundary
    is), the incident waves, the frequencies, the far-field angles, an
    optional near-field request and the solver options. SI units
    throughout. It knows nothing of case files, command lines, output
    switches or drawing audits; the face (``case``, ``cli``) builds it.
field kind
    ``tm`` (u = E_z), ``te`` (u = H_z) or ``acoustic`` (u = pressure p).
boundary
    ``pec`` (TM: u = 0; TE: du/dn = 0), ``soft`` (u = 0), ``hard``
    (du/dn = 0) or ``impedance`` (a Robin condition, see ``formulations``).
incident wave
    One right-hand side: a plane wave arriving from ``from_deg`` or a unit
    line source at ``position_m``. Waves given together share a ``name``.

Physical constants used by every part of the engine live here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from dataclasses import field as dc_field
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from sectionwave.importers.curves import Body
from sectionwave.importers.errors import SectionwaveError

__all__ = [
    "BOUNDARIES",
    "DENSITY_AIR_KG_M3",
    "FIELDS",
    "MU0_H_M",
    "SOUND_SPEED_AIR_M_S",
    "SPEED_OF_LIGHT_M_S",
    "BoundaryKind",
    "FieldKind",
    "IncidentWave",
    "Medium",
    "NearFieldRequest",
    "Problem",
    "ProblemError",
    "Scatterer",
    "SolverOptions",
]

#: Speed of light in vacuum (exact, SI).
SPEED_OF_LIGHT_M_S = 299_792_458.0
#: Air at 20 degC, 1 atm (common practice values).
SOUND_SPEED_AIR_M_S = 343.0
DENSITY_AIR_KG_M3 = 1.204
#: Permeability of free space (SI 2019 value, to 10 digits).
MU0_H_M = 1.25663706212e-6

FieldKind = Literal["tm", "te", "acoustic"]
BoundaryKind = Literal["pec", "soft", "hard", "impedance"]

FIELDS: tuple[FieldKind, ...] = ("tm", "te", "acoustic")
#: Boundary kinds each field kind accepts.
BOUNDARIES: dict[str, tuple[BoundaryKind, ...]] = {
    "tm": ("pec", "impedance"),
    "te": ("pec", "impedance"),
    "acoustic": ("soft", "hard", "impedance"),
}


class ProblemError(SectionwaveError, ValueError):
    """A problem handed to the engine is inconsistent (wrong kind, bad value)."""


@dataclass(frozen=True)
class Medium:
    """A homogeneous, lossless medium: its wave speed and (for sound) density."""

    wave_speed_m_s: float
    density_kg_m3: float = 0.0

    def wavenumber(self, frequency_hz: float) -> float:
        """``k = 2 pi f / c`` in rad/m."""
        return 2 * math.pi * frequency_hz / self.wave_speed_m_s

    def wavelength(self, frequency_hz: float) -> float:
        """``c / f`` in metres."""
        return self.wave_speed_m_s / frequency_hz


@dataclass(frozen=True)
class Scatterer:
    """One body and what its boundary is.

    ``impedance`` is normalised to the surrounding medium's wave impedance
    (eta0 for EM, rho c for sound) and is set only for ``impedance``.
    ``source`` says where the body came from, for reports.
    """

    name: str
    body: Body
    boundary: BoundaryKind
    impedance: complex | None = None
    source: str = "inline shape"


@dataclass(frozen=True)
class IncidentWave:
    """One incident wave (one right-hand side of the boundary equations).

    Attributes
    ----------
    name
        The label of the group it was given in (``incident`` in the files).
    kind
        ``plane`` or ``line``.
    from_deg
        Arrival direction of a plane wave (counter-clockwise from +x); NaN
        for a line source.
    position_m
        Position of a line source; None for a plane wave.
    """

    name: str
    kind: Literal["plane", "line"]
    from_deg: float = math.nan
    position_m: tuple[float, float] | None = None

    @property
    def is_plane(self) -> bool:
        """True for a plane wave."""
        return self.kind == "plane"

    def label(self) -> str:
        """Short text for plots and messages."""
        return f"from {self.from_deg:g} deg" if self.is_plane else self.name


@dataclass(frozen=True)
class NearFieldRequest:
    """Field maps on a grid and/or at probe points, for some incident waves.

    ``incidents`` are indices into ``Problem.incidents``.
    """

    incidents: tuple[int, ...]
    x_m: NDArray[np.float64] | None = None
    y_m: NDArray[np.float64] | None = None
    probes_m: NDArray[np.float64] | None = None


@dataclass(frozen=True)
class SolverOptions:
    """Accuracy target and discretisation settings.

    ``max_panel_wavelengths`` None lets the engine choose (see
    ``run.panel_wavelengths``).
    """

    tolerance: float = 1e-8
    nodes_per_panel: int = 16
    max_panel_wavelengths: float | None = None
    max_refinements: int = 10


@dataclass(frozen=True)
class Problem:
    """A scattering problem in SI units, ready for ``run.solve``."""

    field: FieldKind
    medium: Medium
    scatterers: tuple[Scatterer, ...]
    incidents: tuple[IncidentWave, ...]
    frequencies_hz: tuple[float, ...]
    far_field_deg: NDArray[np.float64] = dc_field(default_factory=lambda: np.linspace(0.0, 360.0, 721))
    near_field: NearFieldRequest | None = None
    solver: SolverOptions = dc_field(default_factory=SolverOptions)

    def __post_init__(self) -> None:
        if self.field not in FIELDS:
            raise ProblemError(f"unknown field kind {self.field!r}; expected one of {', '.join(FIELDS)}")
        if not self.scatterers:
            raise ProblemError("a problem needs at least one body")
        if not self.incidents:
            raise ProblemError("a problem needs at least one incident wave")
        if not self.frequencies_hz or any(not (f > 0 and math.isfinite(f)) for f in self.frequencies_hz):
            raise ProblemError(f"frequencies must be positive and finite, got {list(self.frequencies_hz)}")
        for s in self.scatterers:
            if s.boundary not in BOUNDARIES[self.field]:
                raise ProblemError(
                    f"body {s.name!r}: boundary {s.boundary!r} is not available for {self.field}; "
                    f"allowed: {', '.join(BOUNDARIES[self.field])}"
                )
            if (s.boundary == "impedance") != (s.impedance is not None):
                raise ProblemError(f"body {s.name!r}: an impedance is given exactly for impedance boundaries")
        if self.near_field is not None and any(
            not 0 <= i < len(self.incidents) for i in self.near_field.incidents
        ):
            raise ProblemError("near-field request names an incident wave that does not exist")

    @property
    def plane_waves(self) -> list[int]:
        """Indices of the plane-wave incidents."""
        return [i for i, w in enumerate(self.incidents) if w.is_plane]

    def wavenumber(self, frequency_hz: float) -> float:
        """Wavenumber of the surrounding medium (rad/m)."""
        return self.medium.wavenumber(frequency_hz)

    def wavelength(self, frequency_hz: float) -> float:
        """Wavelength in the surrounding medium (m)."""
        return self.medium.wavelength(frequency_hz)
