"""Solve a problem: per frequency, mesh, solve, refine until accurate, evaluate.

One frequency, step by step::

    mesh.build_panels            panels sized for the wavelength and the geometry
    formulations.formulation_for one formulation per contour
    system.BoundarySystem        the boundary equations on the mesh
    solve.solve_boundary         assemble, factorise once, all incident waves
    fields.far_field, ...        far field and cross sections
    adapt.refine_until_accurate  estimate, mark, refine, repeat
    nearfield                    field maps and probes, if asked for
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .adapt import CALIBRATED_MAX_WAVELENGTHS, AccuracyWarning, SolvePass, refine_until_accurate
from .compression import CompressedSystem
from .fields import cross_sections, far_field, far_field_each, incident_field, surface_absorption
from .formulations import formulation_for
from .mesh import LENGTH_SLACK, BoundaryContour, PanelMesh, build_panels
from .plan import AutoSolver, SystemPlan, plan_system
from .problem import NearFieldRequest, Problem
from .rcip_system import coarse_corner_mesh
from .regions import Layout, check_corner_contrast, scene_layout
from .results import FieldSamples, FrequencySolution, NearFieldResult, RunResult, RunSettings, SurfaceTraces
from .solve import (
    CONDITION_WARN,
    IllConditionedWarning,
    LinearSolver,
    fits_in_memory,
    solve_boundary,
)
from .system import BoundarySystem, DiscreteSystem, Region

__all__ = [
    "METHOD", "PANEL_DEFAULT", "PANEL_RULE", "SURFACE_LEVELS", "assemble_result", "default_solver",
    "panel_wavelengths", "plan_problem", "solve_frequency", "solve_problem",
]

#: Refined levels on which the surface files show the density next to a compressed
#: corner (the innermost panel is 2^-8 of the coarse one).
SURFACE_LEVELS = 8

#: What the engine does, in words, for reports.
METHOD = (
    "Nystrom, kernel-split product integration on Gauss-Legendre panels; "
    "combined-field (Dirichlet) and Burton-Miller (Neumann, impedance) equations; dense LU, or GMRES "
    "with fast multipole products for large problems (the cost plan chooses)"
)


def default_solver(problem: Problem) -> LinearSolver:
    """The solver a run uses unless told otherwise: the case's method, chosen per system by the cost plan."""
    s = problem.solver
    return AutoSolver(s.tolerance, s.method, len(problem.incidents))


def plan_problem(problem: Problem) -> list[tuple[float, SystemPlan]]:
    """The cost plan of the first mesh of every frequency (nothing is solved or allocated densely)."""
    layout = scene_layout(problem)
    solver = default_solver(problem)
    out = []
    for freq in problem.frequencies_hz:
        scene = _Scene(problem, layout, freq)
        mesh, _ = _first_mesh(scene, _fits(scene, solver))
        out.append((float(freq), plan_system(scene.system(mesh), problem.solver.method, len(problem.incidents))))
    return out


#: The a-priori panel rule (``panel_wavelengths``) by boundary kind: the
#: factor ``c``, the power ``s`` of the number of panels (the Dirichlet
#: estimate falls like one over the root of the number of panels, see
#: ``adapt.CALIBRATION``) and the orders ``d`` lost to derivatives of the
#: density (Maue's form of the hypersingular operator of the Neumann kind
#: differentiates it: its error falls like L^14, not L^16, with 16 nodes).
#: With these the first mesh of a smooth PEC body lands near the requested
#: tolerance and the estimate accepts it (circles at ka = 50 and 500 against
#: the series of Balanis ch. 11, a 2:1 ellipse against a finer run;
#: benchmarks/bench_mesh_guess.py).
PANEL_RULE: dict[str, tuple[float, float, int]] = {"dirichlet": (1.15, 0.5, 0), "neumann": (1.204, 0.0, 2)}
#: Measured defaults of the other kinds, in wavelengths: impedance surfaces
#: (whose equation differentiates the density) need half a wavelength for 1e-8.
PANEL_DEFAULT = {"impedance": 0.5, "penetrable": 1.0}


def panel_wavelengths(problem: Problem, frequency_hz: float | None = None) -> float:
    """Longest panel in wavelengths: the problem's setting, or the a-priori rule.

    On a panel of ``L`` wavelengths the density varies like
    ``exp(j pi L t)`` in the panel parameter ``t``, whose Legendre
    coefficient of degree ``p`` is about ``(e pi L / (2 p))^p`` (the
    large-order form ``J_p(x) ~ (e x / (2 p))^p / sqrt(2 pi p)``, DLMF
    10.19.1, from memory). Hence the rule
    ``L = c (2 p / (e pi)) (tolerance n^s)^(1 / (p - d))`` with ``c``, ``s``
    and ``d`` calibrated per boundary kind (``PANEL_RULE``) and ``n`` the
    number of panels it gives on the scene at ``frequency_hz`` (the first
    frequency when not given), never longer than the meshes the estimate
    is calibrated on (``adapt.CALIBRATED_MAX_WAVELENGTHS``). Impedance and
    penetrable boundaries keep their measured defaults (``PANEL_DEFAULT``);
    a scene takes the shortest panels any of its bodies asks for.
    """
    s = problem.solver
    if s.max_panel_wavelengths is not None:
        return s.max_panel_wavelengths
    p = s.nodes_per_panel
    freq = problem.frequencies_hz[0] if frequency_hz is None else frequency_hz
    wavelengths = sum(body.body.perimeter() for body in problem.scatterers) / problem.wavelength(freq)
    scale = 2.0 * p / (math.e * math.pi)
    longest = CALIBRATED_MAX_WAVELENGTHS / LENGTH_SLACK
    lengths = []
    for body in problem.scatterers:
        kind = body.boundary
        if kind in PANEL_DEFAULT:
            lengths.append(PANEL_DEFAULT[kind])
            continue
        neumann = kind == "hard" or (kind == "pec" and problem.field == "te")
        c, power, lost = PANEL_RULE["neumann" if neumann else "dirichlet"]
        order = max(p - lost, 1)
        length = c * scale * s.tolerance ** (1.0 / order)
        for _ in range(2):  # the number of panels depends on their length: two fixed-point steps
            n = max(1.0, wavelengths / length)
            length = c * scale * (s.tolerance * n**power) ** (1.0 / order)
        lengths.append(min(length, longest))
    return min(lengths, default=1.0)


def solve_problem(
    problem: Problem,
    *,
    progress: Callable[[str], None] | None = None,
    solver: LinearSolver | None = None,
) -> RunResult:
    """Solve every frequency of ``problem``.

    Parameters
    ----------
    problem
        The physics problem.
    progress
        Called with a short message as each frequency starts (with an
        estimate of the time left) and after each adaptive refinement.
    solver
        The linear solver (default dense LU).

    Returns
    -------
    RunResult
    """
    start = time.perf_counter()
    active: LinearSolver = solver if solver is not None else default_solver(problem)
    layout = scene_layout(problem)
    results = []
    total = len(problem.frequencies_hz)
    for n, freq in enumerate(problem.frequencies_hz):
        if progress is not None:
            spent = time.perf_counter() - start
            left = f" (about {spent / n * (total - n):.0f} s left)" if n else ""
            progress(f"frequency {n + 1}/{total}: {freq:.6g} Hz{left}")
        results.append(_solve_frequency(_Scene(problem, layout, freq), active, progress))
    return assemble_result(problem, results, time.perf_counter() - start)


def solve_frequency(
    problem: Problem, frequency_hz: float, *, solver: LinearSolver | None = None,
    progress: Callable[[str], None] | None = None,
) -> FrequencySolution:
    """Solve ``problem`` at one frequency (any frequency, listed in the problem or not).

    Frequencies are independent of each other: a sweep may solve them in any
    order, in other processes or on other machines, and assemble them with
    :func:`assemble_result`.
    """
    active: LinearSolver = solver if solver is not None else default_solver(problem)
    return _solve_frequency(_Scene(problem, scene_layout(problem), float(frequency_hz)), active, progress)


def assemble_result(problem: Problem, frequencies: list[FrequencySolution], elapsed_s: float) -> RunResult:
    """A ``RunResult`` from solutions of ``problem`` (in the order given) and the time taken."""
    s = problem.solver
    settings = RunSettings(s.tolerance, s.nodes_per_panel, panel_wavelengths(problem), s.max_refinements, METHOD)
    return RunResult(problem, list(frequencies), settings, elapsed_s)


class _Scene:
    """A problem at one frequency: the media of every region and the contours to mesh."""

    def __init__(self, problem: Problem, layout: Layout, frequency_hz: float) -> None:
        self.problem = problem
        self.layout = layout
        self.frequency_hz = frequency_hz
        field = problem.field
        self.k = problem.wavenumber(frequency_hz)
        self.wavenumbers: list[complex] = []
        self.betas: list[complex] = []
        for region in layout.regions:
            if region.body is None:
                self.wavenumbers.append(self.k)
                self.betas.append(problem.medium.beta(field))
            else:
                material = problem.scatterers[region.body].material
                assert material is not None
                self.wavenumbers.append(material.wavenumber(field, frequency_hz))
                self.betas.append(material.beta(field, frequency_hz))
        contours = layout.contours
        self.compressed = problem.solver.corners == "compressed" and any(
            bool(c.contour.corner_flags().any()) for c in contours
        )
        self.cache: dict[Any, Any] = {}
        if not layout.is_simple:
            check_corner_contrast(layout, self.betas, [s.name for s in problem.scatterers])
        self.exterior = layout.exterior_contours()
        self.all_exterior = len(self.exterior) == len(contours)

    def boundaries(self) -> list[BoundaryContour]:
        """Contours to mesh, each limited by the shorter wavelength of its two sides."""
        out = []
        for c in self.layout.contours:
            ks = [self.wavenumbers[c.outside]] + ([] if c.inside is None else [self.wavenumbers[c.inside]])
            ratio = None if c.inside is None else self.betas[c.outside] / self.betas[c.inside]
            out.append(BoundaryContour(c.contour, c.body, min(2 * math.pi / abs(k) for k in ks), ratio))
        return out

    def system(self, mesh: PanelMesh) -> BoundarySystem | CompressedSystem:
        """The boundary system on ``mesh``; compressed at the corners when the mesh has corner zones."""
        base = self._base_system(mesh)
        if not mesh.corner_zones:
            return base
        return CompressedSystem(base, self._local_system(base), self.problem.solver.tolerance, self.cache)

    def _base_system(self, mesh: PanelMesh) -> BoundarySystem:
        problem, layout = self.problem, self.layout
        balanced = not self.compressed
        if layout.is_simple:
            formulations = [
                formulation_for(problem.field, problem.scatterers[int(b)], self.k, balanced=balanced)
                for b in mesh.body_of_contour
            ]
            return BoundarySystem(mesh, formulations, self.k)
        formulations = []
        for c in layout.contours:
            ratio = None if c.inside is None else self.betas[c.outside] / self.betas[c.inside]
            formulations.append(formulation_for(
                problem.field, problem.scatterers[c.body], self.wavenumbers[c.outside], flux_ratio=ratio,
                balanced=balanced,
            ))
        regions = [
            Region(self.wavenumbers[r], layout.region_contours(r), is_unbounded=info.is_unbounded)
            for r, info in enumerate(layout.regions)
        ]
        return BoundarySystem(mesh, formulations, self.k, regions)

    def _local_system(self, base: BoundarySystem) -> Callable[[int, PanelMesh], BoundarySystem]:
        """Systems of one contour's formulation and media on a local corner mesh."""

        def build(contour: int, local: PanelMesh) -> BoundarySystem:
            f = base.formulations[contour]
            if self.layout.is_simple:
                return BoundarySystem(local, [f], self.k)
            spec = self.layout.contours[contour]
            k_out = self.wavenumbers[spec.outside]
            regions = [Region(k_out, ((0, 1),))]
            if spec.inside is not None:
                regions.append(Region(self.wavenumbers[spec.inside], ((0, -1),)))
            return BoundarySystem(local, [f], k_out, regions)

        return build

    def exterior_part(self, mesh: PanelMesh) -> tuple[PanelMesh, NDArray[np.int64] | None]:
        """The mesh of the contours around the unbounded region and their node indices (None: all)."""
        if self.all_exterior:
            return mesh, None
        nodes = np.concatenate([np.flatnonzero(mesh.contour_of_node == c) for c in self.exterior])
        return mesh.subset(self.exterior), nodes


def _fits(scene: _Scene, solver: LinearSolver) -> Callable[[PanelMesh], bool]:
    def fits(mesh: PanelMesh) -> bool:
        return fits_in_memory(solver.memory_bytes(scene.system(mesh)))

    return fits


def _first_mesh(scene: _Scene, fits: Callable[[PanelMesh], bool]) -> tuple[PanelMesh, list[str]]:
    """The first mesh; when deep corner refinement would not fit, corners are refined less."""
    problem, freq = scene.problem, scene.frequency_hz
    boundaries = scene.boundaries()
    tol = problem.solver.tolerance
    if scene.compressed:
        mesh, zones = coarse_corner_mesh(
            boundaries, p=problem.solver.nodes_per_panel, tolerance=tol,
            max_panel_wavelengths=panel_wavelengths(problem, freq),
        )
        mesh.corner_zones = tuple(zones)
        return mesh, []
    corner_tol = tol
    while True:
        mesh = build_panels(
            boundaries,
            p=problem.solver.nodes_per_panel,
            tolerance=tol,
            max_panel_wavelengths=panel_wavelengths(problem, freq),
            corner_tolerance=corner_tol,
        )
        if fits(mesh) or corner_tol >= 1e-2 or not mesh.corner_at_start.any():
            break
        # Deep corner refinement would not fit in memory: refine the corners
        # less (an answer with an honest error estimate beats a refusal).
        corner_tol *= 10.0
    notes = []
    if corner_tol > tol:
        msg = (
            f"at {freq:.6g} Hz the corners were refined for a tolerance of {corner_tol:.0e} "
            f"only, so that the {mesh.n_nodes} unknowns fit in memory"
        )
        warnings.warn(msg, AccuracyWarning, stacklevel=4)
        notes.append(msg)
    return mesh, notes


#: A uniform remesh aims at this share of the tolerance.
REMESH_TARGET = 0.5


def _uniform_remesh(scene: _Scene) -> Callable[[PanelMesh, float], PanelMesh | None]:
    """Remeshing with shorter panels, sized by the law of ``panel_wavelengths``.

    An estimate ``ratio`` times the tolerance asks for panels
    ``(REMESH_TARGET / ratio)^(1/p)`` times as long (at least 5 % shorter).
    """
    s = scene.problem.solver
    state = {"mpw": panel_wavelengths(scene.problem, scene.frequency_hz)}

    def remesh(mesh: PanelMesh, ratio: float) -> PanelMesh | None:
        shrink = min(0.95, (REMESH_TARGET / max(ratio, 1e-300)) ** (1.0 / s.nodes_per_panel))
        mpw = state["mpw"] * shrink
        finer = build_panels(scene.boundaries(), p=s.nodes_per_panel, tolerance=s.tolerance, max_panel_wavelengths=mpw)
        if finer.n_nodes <= mesh.n_nodes:
            return None
        state["mpw"] = mpw
        return finer

    return remesh


def _solve_frequency(
    scene: _Scene, solver: LinearSolver, progress: Callable[[str], None] | None = None
) -> FrequencySolution:
    problem, freq = scene.problem, scene.frequency_hz
    k = scene.k
    lam = problem.wavelength(freq)
    t_mesh = time.perf_counter()
    fits = _fits(scene, solver)
    mesh, notes = _first_mesh(scene, fits)
    mesh_s = time.perf_counter() - t_mesh
    incidents = problem.incidents
    plane = problem.plane_waves
    plane_from = np.array([incidents[i].from_deg for i in plane])
    angles = np.asarray(problem.far_field_deg, dtype=float)

    def evaluate(current: PanelMesh) -> SolvePass:
        system = scene.system(current)
        ext_mesh, ext_nodes = scene.exterior_part(current)
        solution = solve_boundary(system, incidents, solver=solver)
        t_ff = time.perf_counter()
        u, dudn = solution.u, solution.dudn
        if ext_nodes is not None:
            u, dudn = u[ext_nodes], dudn[ext_nodes]
        ff = far_field(ext_mesh, k, u, dudn, angles)
        widths = None
        if plane:
            widths = cross_sections(ext_mesh, k, u[:, plane], dudn[:, plane], plane_from)
            absorbs = np.any(np.abs(widths.surface_absorption_m) > 1e-6 * np.abs(widths.extinction_width_m))
            if absorbs and isinstance(system, CompressedSystem):
                # a product of weighted values is not the weighted product: take the
                # surface flux from the density rebuilt on the refined levels
                fine, x_fine = system.fine_system(solution.unknowns[:, plane])
                fu, fd = fine.traces(x_fine)
                f_ext, f_nodes = scene.exterior_part(fine.mesh)
                if f_nodes is not None:
                    fu, fd = fu[f_nodes], fd[f_nodes]
                widths = widths.with_surface_absorption(surface_absorption(f_ext, k, fu, fd))
        return SolvePass(solution, ff, widths, time.perf_counter() - t_ff)

    adaptive = refine_until_accurate(
        mesh, evaluate,
        tolerance=problem.solver.tolerance,
        max_refinements=problem.solver.max_refinements,
        fits=fits,
        where=f"at {freq:.6g} Hz",
        progress=progress,
        remesh=None if scene.compressed else _uniform_remesh(scene),
    )
    mesh = adaptive.mesh
    solution = adaptive.last.solution
    u, dudn = solution.u, solution.dudn
    timings = {"mesh_s": mesh_s, **adaptive.timings_s}
    t_post = time.perf_counter()
    mono = np.full(len(incidents), np.nan + 0j)
    if plane:
        ext_mesh, ext_nodes = scene.exterior_part(mesh)
        ue, de = (u, dudn) if ext_nodes is None else (u[ext_nodes], dudn[ext_nodes])
        mono[plane] = far_field_each(ext_mesh, k, ue[:, plane], de[:, plane], plane_from)
    timings["far_field_s"] += time.perf_counter() - t_post
    notes += adaptive.notes
    condition = solution.report.condition_estimate
    if condition is not None and condition > CONDITION_WARN:
        msg = f"at {freq:.6g} Hz the system condition number is {condition:.2e}"
        warnings.warn(msg, IllConditionedWarning, stacklevel=3)
        notes.append(msg)
    inside = solution.system.inside_traces(solution.unknowns)
    rebuilt = None
    near_system: DiscreteSystem = solution.system
    if isinstance(solution.system, CompressedSystem):
        # Next to a corner the weighted values are not the density: rebuild it once on
        # the refined levels, for the surface files and as deep as the closest field
        # point of the near-field request needs.
        depths = [SURFACE_LEVELS] * len(mesh.corner_zones)
        if problem.near_field is not None:
            depths = [max(a, b) for a, b in zip(depths, _depths(solution.system, problem.near_field))]
        near_system, x_f = solution.system.fine_system(solution.unknowns, depths)
        fu, fd = near_system.traces(x_f)
        fi = near_system.inside_traces(x_f)
        rebuilt = SurfaceTraces(near_system.mesh, fu, fd, None if fi is None else fi[1])
    near = None
    if problem.near_field is not None:
        t_near = time.perf_counter()
        traces = rebuilt or SurfaceTraces(mesh, u, dudn, None if inside is None else inside[1])
        near = _near_fields(scene, near_system, traces.u, traces.dudn, traces.dudn_inside)
        timings["near_field_s"] = time.perf_counter() - t_near
    return FrequencySolution(
        frequency_hz=freq,
        wavenumber_rad_per_m=k,
        wavelength_m=lam,
        mesh=mesh,
        incidents=incidents,
        unknowns=solution.report.unknowns,
        u=u,
        dudn=dudn,
        angles_deg=angles,
        farfield=adaptive.last.farfield,
        monostatic=mono,
        cross_sections=adaptive.last.cross_sections,
        condition_estimate=condition,
        estimated_error=adaptive.estimated_error,
        refinement_change=adaptive.refinement_change,
        refinements=adaptive.refinements,
        solver_method=solution.report.method,
        iterations=solution.report.iterations,
        timings_s=timings,
        warnings=notes,
        near_field=near,
        dudn_inside=None if inside is None else inside[1],
        rebuilt=rebuilt,
    )


def _depths(system: CompressedSystem, request: NearFieldRequest) -> list[int]:
    """Levels to rebuild at each corner (at most 20).

    Deep enough that the innermost panel is below 0.4 of the distance from
    the tip to the closest requested point.
    """
    pts = []
    if request.x_m is not None and request.y_m is not None:
        gx, gy = np.meshgrid(request.x_m, request.y_m)
        pts.append(np.column_stack([gx.ravel(), gy.ravel()]))
    if request.probes_m is not None:
        pts.append(np.asarray(request.probes_m, dtype=float))
    allp = np.vstack(pts) if pts else np.zeros((0, 2))
    out = []
    for zone in system.zones:
        size = 2.0 * max(zone.outer) * max(
            float(np.hypot(*zone.incoming.segment.derivative(np.array([zone.incoming.t_corner]))[0])),
            float(np.hypot(*zone.outgoing.segment.derivative(np.array([zone.outgoing.t_corner]))[0])),
        )
        if allp.shape[0] == 0:
            out.append(0)
            continue
        dmin = float(np.min(np.hypot(*(allp - zone.point).T)))
        need = math.ceil(math.log2(size / max(0.4 * dmin, 1e-300))) if dmin < size else 0
        out.append(int(min(20, max(0, need))))
    return out


def _near_fields(
    scene: _Scene, system: DiscreteSystem, u: np.ndarray, dudn: np.ndarray, dudn_inside: np.ndarray | None
) -> NearFieldResult:
    """Fields on the requested grid and at the probes for the selected incident waves."""
    from .nearfield import field_at_points, field_on_grid

    problem = scene.problem
    mesh = system.mesh
    k = scene.k
    request = problem.near_field
    assert request is not None
    chosen = list(request.incidents)
    waves = [problem.incidents[i] for i in chosen]

    def incident(points: np.ndarray) -> np.ndarray:
        return incident_field(waves, points, np.zeros_like(points), k)[0]

    grid = probes = None
    if scene.layout.is_simple:
        if request.x_m is not None and request.y_m is not None:
            grid = FieldSamples(**field_on_grid(mesh, k, u[:, chosen], dudn[:, chosen], incident, request.x_m, request.y_m))
        if request.probes_m is not None:
            probes = FieldSamples(**field_at_points(mesh, k, u[:, chosen], dudn[:, chosen], incident, request.probes_m))
        return NearFieldResult(tuple(chosen), grid, request.x_m, request.y_m, probes, request.probes_m)
    traces = (u[:, chosen], dudn[:, chosen], None if dudn_inside is None else dudn_inside[:, chosen])
    if request.x_m is not None and request.y_m is not None:
        gx, gy = np.meshgrid(request.x_m, request.y_m)
        pts = np.column_stack([gx.ravel(), gy.ravel()])
        shape = gx.shape
        res = _layered_fields(scene, mesh, traces, pts, incident)
        grid = FieldSamples(**{key: val.reshape(shape + val.shape[1:]) for key, val in res.items()})
    if request.probes_m is not None:
        probes = FieldSamples(**_layered_fields(scene, mesh, traces, request.probes_m, incident))
    return NearFieldResult(tuple(chosen), grid, request.x_m, request.y_m, probes, request.probes_m)


def _point_regions(scene: _Scene, mesh: PanelMesh, pts: np.ndarray) -> np.ndarray:
    """Region of every point; -1 inside an impenetrable body."""
    from .nearfield import inside_mask

    layout = scene.layout
    region = np.zeros(pts.shape[0], dtype=np.int64)
    for i in layout.bodies_outside_in():
        own = [n for n, c in enumerate(layout.contours) if c.body == i]
        outer = next(n for n in own if not layout.contours[n].is_hole)
        holes = [n for n in own if layout.contours[n].is_hole]
        in_outer = inside_mask(mesh.subset([outer]), pts)
        spec = layout.contours[outer]
        if spec.inside is None:
            region[in_outer] = -1
            continue
        region[inside_mask(mesh.subset([outer, *holes]), pts)] = spec.inside
        for h in holes:
            in_hole = in_outer & ~inside_mask(mesh.subset([outer, h]), pts)
            region[in_hole] = layout.contours[h].outside
    return region


def _layered_fields(
    scene: _Scene,
    mesh: PanelMesh,
    traces: tuple[np.ndarray, np.ndarray, np.ndarray | None],
    pts: np.ndarray,
    incident: Callable[[np.ndarray], np.ndarray],
) -> dict[str, np.ndarray]:
    """Fields of nested bodies: each point from the representation of its own region.

    In region R, ``u = sum s int (u dG_R/dn_y - G_R dudn_R) ds`` over R's
    contours (s = +1 where the normal points into R), plus the incident
    wave in the unbounded region. Inside penetrable bodies the reported
    ``scattered`` field is ``total - incident``.
    """
    from .nearfield import scattered_field

    u, dudn, dudn_in = traces
    n_rhs = u.shape[1]
    where = _point_regions(scene, mesh, pts)
    total = np.full((pts.shape[0], n_rhs), np.nan + 1j * np.nan)
    inc = total.copy()
    for r in range(len(scene.layout.regions)):
        sel = np.flatnonzero(where == r)
        if sel.size == 0:
            continue
        members = scene.layout.region_contours(r)
        sub = mesh.subset([c for c, _ in members])
        nodes = [np.flatnonzero(mesh.contour_of_node == c) for c, _ in members]
        su = np.concatenate([s * u[idx] for (_, s), idx in zip(members, nodes)])
        sd = []
        for (_, s), idx in zip(members, nodes):
            side = dudn if s > 0 else dudn_in
            assert side is not None
            sd.append(s * side[idx])
        field = scattered_field(sub, scene.wavenumbers[r], su, np.concatenate(sd), pts[sel])
        inc[sel] = np.asarray(incident(pts[sel]), dtype=complex).reshape(sel.size, n_rhs)
        total[sel] = field + inc[sel] if r == 0 else field
    return {"total": total, "scattered": total - inc, "incident": inc, "inside": where < 0}
