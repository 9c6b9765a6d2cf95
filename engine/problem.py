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
    (du/dn = 0), ``impedance`` (a Robin condition, see ``formulations``)
    or ``penetrable`` (the wave enters a body of another ``Material``;
    u and beta du/dn are continuous across its boundary).
beta
    The coefficient of the continuous flux ``beta du/dn``: ``1 / mu_r``
    for TM (u = E_z), ``1 / eps_r`` for TE (u = H_z), ``1 / density`` for
    sound (DESIGN.md's one-scalar-field table).
losses
    exp(+j w t): a lossy permittivity is ``eps' (1 - j tan d) - j sigma /
    (w eps0)``, and wavenumbers have a negative imaginary part so that
    outgoing waves ``exp(-j k r)`` decay.
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
    "EPS0_F_M",
    "FIELDS",
    "MU0_H_M",
    "SOUND_SPEED_AIR_M_S",
    "SPEED_OF_LIGHT_M_S",
    "BoundaryKind",
    "FieldKind",
    "IncidentWave",
    "Material",
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
#: Permittivity of free space, 1 / (mu0 c^2).
EPS0_F_M = 1.0 / (MU0_H_M * SPEED_OF_LIGHT_M_S**2)

FieldKind = Literal["tm", "te", "acoustic"]
BoundaryKind = Literal["pec", "soft", "hard", "impedance", "penetrable"]

FIELDS: tuple[FieldKind, ...] = ("tm", "te", "acoustic")
#: Boundary kinds each field kind accepts.
BOUNDARIES: dict[str, tuple[BoundaryKind, ...]] = {
    "tm": ("pec", "impedance", "penetrable"),
    "te": ("pec", "impedance", "penetrable"),
    "acoustic": ("soft", "hard", "impedance", "penetrable"),
}


class ProblemError(SectionwaveError, ValueError):
    """A problem handed to the engine is inconsistent (wrong kind, bad value)."""


@dataclass(frozen=True)
class Medium:
    """The surrounding medium (lossless): its wave speed and (for sound) density.

    For EM it is vacuum (or air): ``beta = 1``; for sound ``beta = 1 / density``.
    """

    wave_speed_m_s: float
    density_kg_m3: float = 0.0

    def beta(self, field: FieldKind) -> float:
        """Coefficient of the continuous flux ``beta du/dn`` in the surrounding medium."""
        return 1.0 / self.density_kg_m3 if field == "acoustic" else 1.0

    def wavenumber(self, frequency_hz: float) -> float:
        """``k = 2 pi f / c`` in rad/m."""
        return 2 * math.pi * frequency_hz / self.wave_speed_m_s

    def wavelength(self, frequency_hz: float) -> float:
        """``c / f`` in metres."""
        return self.wave_speed_m_s / frequency_hz


@dataclass(frozen=True)
class Material:
    """The filling of a penetrable body.

    EM: relative permittivity and permeability (complex allowed), with an
    optional loss tangent (of the permittivity) and conductivity (S/m,
    converted at each frequency). Sound: sound speed (complex allowed) and
    density, with an optional attenuation in dB per wavelength.
    """

    name: str = "material"
    eps_r: complex = 1.0
    mu_r: complex = 1.0
    loss_tangent: float = 0.0
    conductivity_s_m: float = 0.0
    sound_speed_m_s: complex | None = None
    density_kg_m3: float | None = None
    attenuation_db_per_wavelength: float = 0.0

    @property
    def has_sound(self) -> bool:
        """True when the material has the values sound needs (speed and density)."""
        return self.sound_speed_m_s is not None and self.density_kg_m3 is not None

    @property
    def has_em(self) -> bool:
        """False for a fluid given only by its acoustic values (every EM value at vacuum's)."""
        vacuum = (self.eps_r == 1.0 and self.mu_r == 1.0 and self.loss_tangent == 0.0
                  and self.conductivity_s_m == 0.0)
        return not (vacuum and self.sound_speed_m_s is not None)

    def permittivity(self, frequency_hz: float) -> complex:
        """Complex relative permittivity at ``frequency_hz`` (exp(+j w t))."""
        omega = 2 * math.pi * frequency_hz
        eps = complex(self.eps_r) * (1 - 1j * self.loss_tangent)
        return eps - 1j * self.conductivity_s_m / (omega * EPS0_F_M)

    def sound_speed(self) -> complex:
        """Complex sound speed (attenuation folded in: alpha = dB / (20 log10 e) per wavelength)."""
        if self.sound_speed_m_s is None:
            raise ProblemError(f"material {self.name!r} has no sound speed")
        c = complex(self.sound_speed_m_s)
        if self.attenuation_db_per_wavelength:
            # k = (w / c) (1 - j delta) with delta = ln(10) dB / (40 pi): the field
            # drops by that many dB over one wavelength.
            delta = math.log(10.0) * self.attenuation_db_per_wavelength / (40.0 * math.pi)
            c = c / (1 - 1j * delta)
        return c

    def wavenumber(self, field: FieldKind, frequency_hz: float) -> complex:
        """Wavenumber inside the material; its imaginary part is never positive."""
        omega = 2 * math.pi * frequency_hz
        if field == "acoustic":
            k = omega / self.sound_speed()
        else:
            k = omega / SPEED_OF_LIGHT_M_S * np.sqrt(complex(self.mu_r) * self.permittivity(frequency_hz))
        return complex(k)

    def beta(self, field: FieldKind, frequency_hz: float) -> complex:
        """Coefficient of the continuous flux ``beta du/dn``."""
        if field == "tm":
            return 1.0 / complex(self.mu_r)
        if field == "te":
            return 1.0 / self.permittivity(frequency_hz)
        if self.density_kg_m3 is None:
            raise ProblemError(f"material {self.name!r} has no density")
        return 1.0 / self.density_kg_m3


@dataclass(frozen=True)
class Scatterer:
    """One body and what its boundary is.

    ``impedance`` is normalised to the surrounding medium's wave impedance
    (eta0 for EM, rho c for sound) and is set only for ``impedance``;
    ``material`` is set only for ``penetrable`` bodies. ``source`` says
    where the body came from, for reports.
    """

    name: str
    body: Body
    boundary: BoundaryKind
    impedance: complex | None = None
    source: str = "inline shape"
    material: Material | None = None

    @property
    def is_penetrable(self) -> bool:
        """True when the wave enters the body."""
        return self.boundary == "penetrable"


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
    ``run.panel_wavelengths``). ``corners``: ``compressed`` (RCIP: a
    corner costs no more unknowns than the coarse panels next to it) or
    ``graded`` (dyadic refinement toward each corner).
    """

    tolerance: float = 1e-8
    nodes_per_panel: int = 16
    max_panel_wavelengths: float | None = None
    max_refinements: int = 10
    corners: Literal["compressed", "graded"] = "compressed"
    method: Literal["auto", "dense", "fast"] = "auto"


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
            if s.is_penetrable != (s.material is not None):
                raise ProblemError(f"body {s.name!r}: a material is given exactly for penetrable bodies")
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
