"""A-posteriori error estimate, marking and the refinement loop.

Glossary
--------
estimated error
    On each panel, the size of the last two Legendre coefficients of the
    boundary unknowns, times the panel length, relative to the unknowns'
    integral over the whole boundary, summed over panels (worst over the
    incident waves); on one smooth contour of a calibrated boundary kind,
    meshed uniformly and finely enough, that sum calibrated against measured
    errors (``CALIBRATION``, ``global_estimate``); once a
    refinement has happened, the smaller of that
    and the far-field change under the last refinement (which measures the
    error of the coarser mesh, so it bounds the finer one as well); never
    less than the optical-theorem residual (necessary, not sufficient: a
    residual above the estimate proves the estimate too optimistic).
marking
    Doerfler marking: the fewest panels carrying ``MARK_FRACTION`` of the
    estimate are halved, the mesh regraded and the system solved again, at
    most ``max_refinements`` times, and never into a mesh that would not fit.
    A calibrated mesh that misses the tolerance is instead remeshed
    uniformly with shorter panels (the orchestrator's ``remesh``), so that
    its estimate stays calibrated.
"""

from __future__ import annotations

import logging
import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveWarning

from .fields import CrossSections
from .mesh import PanelMesh, regrade
from .solve import BoundarySolution

__all__ = [
    "MARK_FRACTION",
    "AccuracyWarning",
    "AdaptiveResult",
    "Calibration",
    "CALIBRATED_MAX_WAVELENGTHS",
    "CALIBRATED_NODES",
    "CALIBRATED_SPREAD",
    "CALIBRATION",
    "SolvePass",
    "global_estimate",
    "is_calibrated",
    "mark_panels",
    "panel_estimates",
    "refine_until_accurate",
]

log = logging.getLogger(__name__)
ComplexArray = NDArray[np.complex128]

#: Doerfler marking: refine the fewest panels that carry this share of the estimate.
MARK_FRACTION = 0.8


@dataclass(frozen=True)
class Calibration:
    """How the summed panel estimates of one boundary kind relate to the far-field error.

    On a calibrated mesh the estimate is ``factor * sum / n_panels**panel_power``.
    """

    factor: float
    panel_power: float
    min_panels: int


#: Calibrations by boundary kind (``Formulation.name``), valid on one smooth
#: contour meshed uniformly (``is_calibrated``). The plain sum over-states the
#: far-field error by 80 to 9000 times there: the Nystrom nodes and the
#: far-field quadrature are far more accurate than the Legendre tail of the
#: density suggests, and more so the more panels there are for the Dirichlet
#: kind. Measured on PEC circles at ka = 10 to 500 against the series of
#: Balanis ch. 11 and on a 2:1 ellipse at ka = 50 and 500 against a finer run
#: (benchmarks/bench_mesh_guess.py --raw writes the measurements); the
#: factors keep the estimate at least 1.9 times the error in every one of them.
#: Other kinds, corners, several contours, other node counts, coarse or
#: locally refined meshes keep the plain sum.
CALIBRATION: dict[str, Calibration] = {
    "dirichlet": Calibration(factor=1.0 / 40.0, panel_power=0.5, min_panels=12),
    "neumann": Calibration(factor=1.0 / 40.0, panel_power=0.0, min_panels=20),
}
#: Nodes per panel the calibrations were measured with.
CALIBRATED_NODES = 16
#: Longest over shortest panel of the meshes the calibrations were measured on.
CALIBRATED_SPREAD = 1.25
#: Longest panel, in wavelengths, of the meshes the calibrations were measured on
#: (longer panels resolve the density too poorly for the tails to follow the error).
CALIBRATED_MAX_WAVELENGTHS = 2.0

#: Refinement stops when this many refinements in a row each failed to halve the
#: estimate: it is then held up by rounding (or by what refining cannot reach).
STALLED_AFTER = 2


class AccuracyWarning(SectionwaveWarning):
    """The requested tolerance was not reached within the refinement or memory budget."""


@dataclass
class SolvePass:
    """One solve on one mesh: the traces, the far field and (for plane waves) the cross sections."""

    solution: BoundarySolution
    farfield: ComplexArray
    cross_sections: CrossSections | None
    far_field_s: float = 0.0


@dataclass
class AdaptiveResult:
    """The last (accepted) pass and how it was reached."""

    mesh: PanelMesh
    last: SolvePass
    estimated_error: float
    refinement_change: float | None
    refinements: int
    timings_s: dict[str, float] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def panel_estimates(mesh: PanelMesh, unknowns: list[ComplexArray]) -> NDArray[np.float64]:
    """Relative error estimate of every panel, worst over the right-hand sides and unknown slots."""
    est = np.zeros(mesh.n_panels)
    for x in unknowns:
        norm = np.sum(np.abs(x) * mesh.weights[:, None], axis=0)
        norm = np.where(norm > 0, norm, 1.0)
        for m in range(x.shape[1]):
            est = np.maximum(est, mesh.legendre_tails(x[:, m]) * mesh.lengths / norm[m])
    return est


def global_estimate(
    mesh: PanelMesh, estimates: NDArray[np.float64], kinds: Sequence[str], wavenumber: complex | None = None,
) -> float:
    """The relative far-field error estimate of the whole mesh from its panel estimates.

    Parameters
    ----------
    mesh
        The mesh the estimates belong to.
    estimates
        ``panel_estimates`` of the mesh.
    kinds
        Names of the formulations of its contours (``Formulation.name``).
    wavenumber
        Wavenumber of the medium around the contour (None: not known).

    Returns
    -------
    float
        The sum of the estimates, calibrated (``CALIBRATION``) where
        ``is_calibrated`` holds.
    """
    total = float(np.sum(estimates))
    if not is_calibrated(mesh, kinds, wavenumber):
        return total
    cal = CALIBRATION[kinds[0]]
    return cal.factor * total / mesh.n_panels**cal.panel_power


def is_calibrated(mesh: PanelMesh, kinds: Sequence[str], wavenumber: complex | None) -> bool:
    """Whether ``CALIBRATION`` holds on ``mesh``.

    One smooth contour of a calibrated kind in a medium of real wavenumber,
    ``CALIBRATED_NODES`` nodes per panel, at least the kind's ``min_panels``,
    all of nearly equal length (within ``CALIBRATED_SPREAD``) and at most
    ``CALIBRATED_MAX_WAVELENGTHS`` long, as the a-priori rule makes them.
    After local refinement the error no longer follows the tails the same way
    (measured on the ellipse), so refined meshes keep the plain sum.
    """
    if len(kinds) != 1 or kinds[0] not in CALIBRATION or mesh.p != CALIBRATED_NODES:
        return False
    if wavenumber is None or abs(complex(wavenumber).imag) > 0.0 or complex(wavenumber).real <= 0.0:
        return False
    if mesh.n_panels < CALIBRATION[kinds[0]].min_panels or mesh.corner_zones or bool(np.any(mesh.corner_at_start)):
        return False
    longest, shortest = float(np.max(mesh.lengths)), float(np.min(mesh.lengths))
    wavelength = 2.0 * np.pi / complex(wavenumber).real
    return longest <= CALIBRATED_SPREAD * shortest and longest <= CALIBRATED_MAX_WAVELENGTHS * wavelength


def mark_panels(estimates: NDArray[np.float64], fraction: float = MARK_FRACTION) -> NDArray[np.int64]:
    """The fewest panels whose estimates add up to ``fraction`` of the total (Doerfler)."""
    order = np.argsort(estimates)[::-1]
    total = float(np.sum(estimates))
    count = int(np.searchsorted(np.cumsum(estimates[order]), fraction * total)) + 1
    return order[:count]


def refine_until_accurate(
    mesh: PanelMesh,
    evaluate: Callable[[PanelMesh], SolvePass],
    *,
    tolerance: float,
    max_refinements: int,
    fits: Callable[[PanelMesh], bool],
    where: str = "",
    progress: Callable[[str], None] | None = None,
    remesh: Callable[[PanelMesh, float], PanelMesh | None] | None = None,
) -> AdaptiveResult:
    """Solve on ``mesh``, estimate, refine the marked panels, repeat until accurate.

    Parameters
    ----------
    mesh
        The first mesh.
    evaluate
        Solves on a mesh and returns the pass (traces, far field, cross sections).
    tolerance, max_refinements
        Accuracy target and refinement budget.
    fits
        Whether a mesh's solve fits in memory; refinement stops before one that does not.
    where
        Prefix for messages, such as ``"at 9.4e+09 Hz"``.
    progress
        Called with a short message after each solve that leads to a refinement.
    remesh
        Called with a calibrated mesh (``is_calibrated``) and the ratio of its
        estimate to the tolerance; returns a uniformly finer mesh (or None).
        When given, a calibrated mesh that misses the tolerance is replaced
        by that mesh instead of being refined locally.

    Returns
    -------
    AdaptiveResult
        Warnings (``AccuracyWarning``) are issued and also kept in ``notes``.
    """
    timings = {"assemble_s": 0.0, "factorise_and_solve_s": 0.0, "far_field_s": 0.0}
    notes: list[str] = []
    previous_ff = None
    change = None
    refinements = 0
    history: list[float] = []

    def note(message: str) -> None:
        warnings.warn(message.strip(), AccuracyWarning, stacklevel=5)
        notes.append(message.strip())

    while True:
        current = evaluate(mesh)
        for key, val in current.solution.report.timings_s.items():
            timings[key] = timings.get(key, 0.0) + val
        t_est = time.perf_counter()
        ff = current.farfield
        if previous_ff is not None:
            change = float(np.max(np.abs(ff - previous_ff)) / max(np.max(np.abs(ff)), 1e-300))
        est = panel_estimates(mesh, current.solution.system.node_unknowns(current.solution.unknowns))
        kinds = [f.name for f in getattr(current.solution.system, "formulations", ())]
        wavenumber = getattr(current.solution.system, "k", None)
        tail_estimate = global_estimate(mesh, est, kinds, wavenumber)
        estimated = tail_estimate if change is None else min(tail_estimate, change)
        if current.cross_sections is not None:
            estimated = max(estimated, float(np.max(current.cross_sections.optical_residual)))
        timings["far_field_s"] += current.far_field_s + time.perf_counter() - t_est
        history.append(estimated)
        if estimated <= tolerance or refinements >= max_refinements:
            break
        if len(history) > STALLED_AFTER and all(
            history[-i] > 0.5 * history[-i - 1] for i in range(1, STALLED_AFTER + 1)
        ):
            note(
                f"{where} refinement stopped after {refinements} refinements: the estimate "
                f"({estimated:.2e}) no longer falls, which rounding or the conditioning of the system sets"
            )
            break
        bad = mark_panels(est)
        finer = remesh(mesh, estimated / tolerance) if remesh is not None and is_calibrated(mesh, kinds, wavenumber) else None
        refined = finer if finer is not None else regrade(mesh.split(sorted(bad.tolist())))
        if not fits(refined):
            note(
                f"{where} refinement stopped at {current.solution.report.unknowns} unknowns: "
                f"the next mesh ({refined.n_nodes} nodes) would not fit in memory"
            )
            break
        previous_ff = ff
        refinements += 1
        log.info("refining %d of %d panels (estimate %.2e)", bad.size, mesh.n_panels, estimated)
        if progress is not None:
            progress(f"  refinement {refinements}: estimate {estimated:.1e} above {tolerance:.0e} with "
                     f"{current.solution.report.unknowns} unknowns; halving {bad.size} of {mesh.n_panels} panels")
        mesh = refined
    if estimated > tolerance:
        note(
            f"{where} the estimated error {estimated:.2e} is above the tolerance "
            f"{tolerance:.1e} after {refinements} refinements"
            + ("; raise the refinement budget (max_refinements)" if refinements >= max_refinements else "")
        )
    return AdaptiveResult(mesh, current, estimated, change, refinements, timings, notes)
