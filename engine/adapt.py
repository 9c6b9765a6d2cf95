"""A-posteriori error estimate, marking and the refinement loop.

Glossary
--------
estimated error
    On each panel, the size of the last two Legendre coefficients of the
    boundary unknowns, times the panel length, relative to the unknowns'
    integral over the whole boundary, summed over panels (worst over the
    incident waves); once a refinement has happened, the smaller of that
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
from collections.abc import Callable
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
    "SolvePass",
    "mark_panels",
    "panel_estimates",
    "refine_until_accurate",
]

log = logging.getLogger(__name__)
ComplexArray = NDArray[np.complex128]

#: Doerfler marking: refine the fewest panels that carry this share of the estimate.
MARK_FRACTION = 0.8
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
        tail_estimate = float(np.sum(est))
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
        refined = regrade(mesh.split(sorted(bad.tolist())))
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
