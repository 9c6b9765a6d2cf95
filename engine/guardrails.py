"""Numerical guardrails: checks that a problem or a solved run deserves a second look.

Glossary
--------
guardrail
    A finding that does not stop the run but may make its numbers wrong
    or meaningless. Each has a stable ``code`` (for scripts reading
    ``summary.json``), a one-line ``message`` and, where it belongs to one
    frequency, that ``frequency_hz``.
codes
    ``electrically_tiny``
        The bodies span less than :data:`TINY_WAVELENGTHS` wavelengths: most
        often a frequency given in GHz or MHz where Hz were meant (the
        message names the likely intended frequency).
    ``electrically_huge``
        The bodies span more than :data:`HUGE_WAVELENGTHS` wavelengths:
        most often a drawing read in the wrong units.
    ``under_resolved``
        The panel settings (``nodes_per_panel``, ``max_panel_wavelengths``)
        resolve a wave only to about :func:`panel_resolution`, coarser than
        the tolerance, and the run missed the tolerance: the likely cause.
    ``ill_conditioned``
        The system's estimated condition number is above
        ``solve.CONDITION_WARN``: digits may be lost.
    ``accuracy_missed``
        The error estimate stayed above the tolerance (refinement or memory
        budget spent).
    ``optical_theorem``
        For a lossless scene the optical theorem (extinction = scattering)
        fails by more than the tolerance.
    ``numerical``
        Any other numerical warning of the engine.
panel estimate
    :func:`estimate_panels` counts panels as perimeter over (panel length
    limit) for every body and its shortest wavelength, before any meshing:
    a run that would need more than ``mesh.MAX_PANELS`` is refused at once.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from sectionwave.importers.errors import SectionwaveWarning

from .adapt import AccuracyWarning
from .mesh import MAX_PANELS
from .problem import Problem, Scatterer
from .results import RunResult
from .solve import IllConditionedWarning

__all__ = [
    "CODES",
    "HUGE_WAVELENGTHS",
    "TINY_WAVELENGTHS",
    "Guardrail",
    "PanelEstimate",
    "check_problem",
    "check_result",
    "electrical_size",
    "estimate_panels",
    "from_warnings",
    "is_lossless",
    "panel_resolution",
    "panel_settings_finding",
]

#: Every guardrail code, in the order the glossary explains them.
CODES = (
    "electrically_tiny", "electrically_huge", "under_resolved", "ill_conditioned",
    "accuracy_missed", "optical_theorem", "numerical",
)
#: Scenes spanning fewer wavelengths than this are flagged (a 10 cm body below about 300 kHz in air).
TINY_WAVELENGTHS = 1e-4
#: Scenes spanning more wavelengths than this are flagged.
HUGE_WAVELENGTHS = 1e3
#: What an engineer usually means: a scene between these sizes in wavelengths.
_PLAUSIBLE = (0.05, 200.0)
_PREFIXES = ((1e3, "kHz"), (1e6, "MHz"), (1e9, "GHz"), (1e12, "THz"))
#: The engine's warnings open with "at <frequency> Hz".
_AT_FREQUENCY = re.compile(r"^at ([-+0-9.eE]+) Hz\b")


@dataclass(frozen=True)
class Guardrail:
    """One finding: a stable code, a message, and the frequency it concerns (None: the whole run)."""

    code: str
    message: str
    frequency_hz: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """The finding as written into ``summary.json``."""
        return {"code": self.code, "message": self.message, "frequency_hz": self.frequency_hz}


@dataclass(frozen=True)
class PanelEstimate:
    """The quick panel count of :func:`estimate_panels` at the worst frequency."""

    panels: float
    frequency_hz: float
    wavelength_m: float
    perimeter_m: float
    size_m: float

    @property
    def is_absurd(self) -> bool:
        """True when the mesh would need more than ``mesh.MAX_PANELS`` panels."""
        return self.panels > MAX_PANELS


def _outline_points(problem: Problem) -> np.ndarray:
    return np.vstack([s.body.outer.sample(64) for s in problem.scatterers])


def electrical_size(problem: Problem) -> tuple[float, float]:
    """The scene's extent (bounding-box diagonal, m) and its perimeter (sum over bodies, m)."""
    pts = _outline_points(problem)
    span = np.ptp(pts, axis=0)
    perimeter = sum(s.body.outer.perimeter() + sum(h.perimeter() for h in s.body.holes) for s in problem.scatterers)
    return float(np.hypot(*span)), float(perimeter)


def _shortest_wavelength(problem: Problem, s: Scatterer, frequency_hz: float) -> float:
    lam = problem.wavelength(frequency_hz)
    if s.material is not None:
        k = abs(s.material.wavenumber(problem.field, frequency_hz))
        if k > 0:
            lam = min(lam, 2 * math.pi / k)
    return lam


def _panel_wavelengths(problem: Problem) -> float:
    if problem.solver.max_panel_wavelengths is not None:
        return problem.solver.max_panel_wavelengths
    return 0.5 if any(s.boundary == "impedance" for s in problem.scatterers) else 1.0


def estimate_panels(problem: Problem) -> PanelEstimate:
    """Panels the wavelength alone asks for, at the highest frequency (no meshing).

    Each body needs at least its perimeter over the longest panel
    (``max_panel_wavelengths`` times the shortest wavelength on either side
    of its boundary); geometry and corners only add panels, so this is a
    lower bound.

    Examples
    --------
    >>> from sectionwave.engine.case import parse_case
    >>> doc = {"wave": {"field": "tm", "frequency_hz": 3e9},
    ...        "body": [{"shape": {"kind": "circle", "radius_m": 0.5}, "boundary": "pec"}]}
    >>> round(estimate_panels(parse_case(doc).problem).panels)  # pi wavelengths of 0.1 m
    31
    """
    size, _ = electrical_size(problem)
    h = _panel_wavelengths(problem)
    best: PanelEstimate | None = None
    for f in problem.frequencies_hz:
        count = 0.0
        lam_min = math.inf
        perimeter = 0.0
        for s in problem.scatterers:
            lam = _shortest_wavelength(problem, s, f)
            per = s.body.outer.perimeter() + sum(c.perimeter() for c in s.body.holes)
            step = h * lam
            count += per / step if step > 0 else math.inf
            lam_min = min(lam_min, lam)
            perimeter += per
        if best is None or count > best.panels:
            best = PanelEstimate(count, f, lam_min, perimeter, size)
    assert best is not None
    return best


def panel_resolution(nodes_per_panel: int, panel_wavelengths: float) -> float:
    """Relative error of interpolating one wave on one panel, ``a^p / (2^(p-1) p!)`` with ``a = pi h``.

    The bound for polynomial interpolation at ``p`` Gauss-Legendre nodes of
    ``exp(j a t)`` on ``[-1, 1]`` (the Chebyshev-type remainder, Davis,
    *Interpolation and Approximation*, ch. 3, from memory), where a panel of
    ``h`` wavelengths has half-length ``a = pi h`` in units of ``1/k``.

    Examples
    --------
    >>> f"{panel_resolution(16, 1.0):.1e}"  # the engine's default: 16 nodes, one wavelength
    '1.3e-10'
    """
    a = math.pi * panel_wavelengths
    p = nodes_per_panel
    return float(math.exp(p * math.log(a) - (p - 1) * math.log(2.0) - math.lgamma(p + 1)))


def _likely_frequency(problem: Problem, size_m: float, frequency_hz: float) -> str | None:
    """The frequency an SI-prefix slip most likely hid, as text (``"9.4 GHz"``), or None."""
    lam = problem.wavelength(frequency_hz)
    for factor, unit in _PREFIXES:
        if _PLAUSIBLE[0] <= size_m * factor / lam <= _PLAUSIBLE[1]:
            return f"{frequency_hz:g} {unit}"
    return None


def check_problem(problem: Problem) -> list[Guardrail]:
    """Findings about a problem before it is solved (its electrical size)."""
    found: list[Guardrail] = []
    size, _ = electrical_size(problem)
    for f in problem.frequencies_hz:
        waves = size / problem.wavelength(f)
        if waves < TINY_WAVELENGTHS:
            guess = _likely_frequency(problem, size, f)
            hint = (f"; frequency_hz is in Hz: {guess}?" if guess
                    else "; check the frequency (in Hz) and the drawing's units")
            found.append(Guardrail(
                "electrically_tiny",
                f"at {f:g} Hz the bodies span {size:.3g} m, only {waves:.2g} wavelengths "
                f"(wavelength {problem.wavelength(f):.3g} m){hint}",
                f,
            ))
        elif waves > HUGE_WAVELENGTHS:
            found.append(Guardrail(
                "electrically_huge",
                f"at {f:g} Hz the bodies span {size:.3g} m, {waves:.3g} wavelengths; check the drawing's "
                "units (mm read as m?) and that frequency_hz is in Hz",
                f,
            ))
    return found


def panel_settings_finding(problem: Problem) -> Guardrail | None:
    """An ``under_resolved`` finding when user-set panel settings resolve a wave more coarsely than the tolerance."""
    s = problem.solver
    if s.max_panel_wavelengths is None and s.nodes_per_panel == 16:
        return None  # the engine's own defaults are sized for the tolerance
    h = _panel_wavelengths(problem)
    err = panel_resolution(s.nodes_per_panel, h)
    if err <= s.tolerance:
        return None
    fit = h
    while fit > 1e-3 and panel_resolution(s.nodes_per_panel, fit) > s.tolerance:
        fit *= 0.5
    return Guardrail(
        "under_resolved",
        f"{s.nodes_per_panel} nodes per panel of up to {h:g} wavelengths resolve a wave to about {err:.1e}, "
        f"coarser than the tolerance {s.tolerance:.1e}, and the tolerance was missed; set [solver] "
        f"max_panel_wavelengths <= {fit:.3g} or raise nodes_per_panel",
    )


def is_lossless(problem: Problem) -> bool:
    """True when no boundary or material absorbs power (the optical theorem then has no absorption term)."""
    for s in problem.scatterers:
        if s.boundary == "impedance" and s.impedance is not None and s.impedance.real != 0:
            return False
        m = s.material
        if m is None:
            continue
        if (complex(m.eps_r).imag or complex(m.mu_r).imag or m.loss_tangent or m.conductivity_s_m
                or m.attenuation_db_per_wavelength
                or (m.sound_speed_m_s is not None and complex(m.sound_speed_m_s).imag)):
            return False
    return True


def check_result(result: RunResult) -> list[Guardrail]:
    """Findings about a solved run that the engine's warnings do not already carry.

    User-set panel settings too coarse for the tolerance, when the tolerance
    was missed (``under_resolved``: the likely cause, and the fix).

    The optical theorem: for a lossless scene the extinction width equals
    the scattering width (Balanis, *Advanced Engineering Electromagnetics*,
    ch. 11, from memory); a residual above the tolerance is reported.
    """
    found: list[Guardrail] = []
    tol = result.settings.tolerance
    if any(fr.estimated_error > tol for fr in result.frequencies):
        coarse = panel_settings_finding(result.problem)
        if coarse is not None:
            found.append(coarse)
    if not is_lossless(result.problem):
        return found
    for fr in result.frequencies:
        if fr.cross_sections is None:
            continue
        worst = float(np.max(fr.cross_sections.optical_residual))
        if worst > tol:
            found.append(Guardrail(
                "optical_theorem",
                f"at {fr.frequency_hz:g} Hz the optical theorem fails by {worst:.1e} (relative) for a lossless "
                f"scene, above the tolerance {tol:.1e}: the far field is not accurate to the tolerance",
                fr.frequency_hz,
            ))
    return found


def from_warnings(caught: list[warnings.WarningMessage]) -> list[Guardrail]:
    """Guardrails from the numerical warnings the engine issued (other warnings are left out)."""
    found: list[Guardrail] = []
    for w in caught:
        if not issubclass(w.category, SectionwaveWarning):
            continue
        if issubclass(w.category, AccuracyWarning):
            code = "accuracy_missed"
        elif issubclass(w.category, IllConditionedWarning):
            code = "ill_conditioned"
        else:
            code = "numerical"
        text = str(w.message)
        m = _AT_FREQUENCY.match(text)
        item = Guardrail(code, text, float(m.group(1)) if m else None)
        if item not in found:
            found.append(item)
    return found
