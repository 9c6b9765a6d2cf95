"""A-posteriori error estimate, marking and the refinement loop.

Glossary
--------
estimated error
    On each panel, the size of the last two Legendre coefficients of the
    boundary unknowns, times the panel length, relative to the unknowns'
    integral over the whole boundary, summed over panels (worst over the
    incident waves); on smooth contours of a calibrated boundary kind
    (``CALIBRATED_SCALE``) the panels' estimates add in quadrature instead,
    times that kind's calibrated factor (``global_estimate``); once a
    refinement has happened, the smaller of that
    and the far-field change under the last refinement (which measures the
    error of the coarser mesh, so it bounds the finer one as well); never
    less than the optical-theorem residual (necessary, not sufficient: a
    residual above the estimate proves the estimate too optimistic).
marking
    Doerfler marking: the fewest panels carrying ``MARK_FRACTION`` of the
    estimate are halved, the mesh regraded and the system solved again, at
    most ``max_refinements`` times, and never into a mesh that would not fit.
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
    "CALIBRATED_MIN_PANELS",
    "CALIBRATED_NODES",
    "CALIBRATED_SCALE",
    "CALIBRATED_SPREAD",
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
#: Calibrated factors of the summed panel estimates, by boundary kind, on one
#: smooth contour with 16 nodes per panel and at least ``CALIBRATED_MIN_PANELS``
#: panels. The plain sum over-states the far-field error by 90 to 7000 times
#: there (PEC circles at ka = 20 to 500 against the series of Balanis ch. 11,
#: and a 2:1 ellipse at ka = 50 against a finer run): the Nystrom nodes and the
#: far-field quadrature are far more accurate than the Legendre tail of the
#: density suggests. The factors keep the estimate at least 2.5 times the error
#: measured in all those runs. Other kinds, meshes with corners or several
#: contours, other node counts and coarse meshes keep the plain sum.
CALIBRATED_SCALE: dict[str, float] = {"dirichlet": 1.0 / 250.0, "neumann": 1.0 / 40.0}
#: Fewest panels for the calibrated factors (few panels, as on a circle of ka = 3,
#: see errors near the plain sum).
CALIBRATED_MIN_PANELS = 24
#: Nodes per panel the factors were measured with.
CALIBRATED_NODES = 16
#: Longest over shortest panel of the meshes the factors were measured on.
CALIBRATED_SPREAD = 1.25
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


def global_estimate(mesh: PanelMesh, estimates: NDArray[np.float64], kinds: Sequence[str]) -> float:
    """The relative far-field error estimate of the whole mesh from its panel estimates.

    Parameters
    ----------
    mesh
        The mesh the estimates belong to.
    estimates
        ``panel_estimates`` of the mesh.
    kinds
        Names of the formulations of its contours (``Formulation.name``).

    Returns
    -------
    float
        The sum of the estimates, times ``CALIBRATED_SCALE[kind]`` where that
        factor was measured: one smooth contour of a calibrated kind, with
        ``CALIBRATED_NODES`` nodes and at least ``CALIBRATED_MIN_PANELS`` panels.
    """
    total = float(np.sum(estimates))
    return CALIBRATED_SCALE[kinds[0]] * total if is_calibrated(mesh, kinds) else total


def is_calibrated(mesh: PanelMesh, kinds: Sequence[str]) -> bool:
    """Whether ``CALIBRATED_SCALE`` holds on ``mesh``.

    One smooth contour of a calibrated kind, ``CALIBRATED_NODES`` nodes per
    panel, at least ``CALIBRATED_MIN_PANELS`` panels of nearly equal length
    (within ``CALIBRATED_SPREAD``), as the a-priori rule makes them. After
    local refinement the error no longer follows the tails the same way
    (measured on the ellipse), so refined meshes keep the plain sum.
    """
    if len(kinds) != 1 or kinds[0] not in CALIBRATED_SCALE or mesh.p != CALIBRATED_NODES:
        return False
    if mesh.n_panels < CALIBRATED_MIN_PANELS or mesh.corner_zones or bool(np.any(mesh.corner_at_start)):
        return False
    return float(np.max(mesh.lengths)) <= CALIBRATED_SPREAD * float(np.min(mesh.lengths))


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
        tail_estimate = global_estimate(mesh, est, kinds)
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
        finer = remesh(mesh, estimated / tolerance) if remesh is not None and is_calibrated(mesh, kinds) else None
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
        mesh = refined
    if estimated > tolerance:
        note(
            f"{where} the estimated error {estimated:.2e} is above the tolerance "
            f"{tolerance:.1e} after {refinements} refinements"
            + ("; raise the refinement budget (max_refinements)" if refinements >= max_refinements else "")
        )
    return AdaptiveResult(mesh, current, estimated, change, refinements, timings, notes)
