"""The solver seam: memory plan, dense LU, solve_boundary, and a second solver plugged in.

The second solver is restarted GMRES (Saad & Schultz, SIAM J. Sci. Stat.
Comput. 7, 1986) from scipy on the same dense matrix: an independent way to
solve the same equations, so its far field must agree with dense LU to the
iteration tolerance. Far-field references are the circle series of
``tests/reference.py`` (Balanis, Advanced Engineering Electromagnetics, ch. 11).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
import pytest
import scipy.sparse.linalg as spla
from sectionwave.engine import parse_case, solve_problem
from sectionwave.engine import solve as solve_mod
from sectionwave.engine.fields import far_field, plane_wave
from sectionwave.engine.formulations import Dirichlet, Neumann
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.problem import IncidentWave
from sectionwave.engine.solve import (
    MATRICES_IN_FLIGHT,
    MEMORY_FRACTION,
    PLAN_MARGIN,
    BoundarySolution,
    DenseLU,
    IllConditionedWarning,
    LinearSolver,
    ProblemTooLargeError,
    SolveReport,
    available_memory_bytes,
    check_memory,
    factorise,
    fits_in_memory,
    solve_boundary,
)
from sectionwave.engine.system import BoundarySystem
from sectionwave.importers.curves import Contour, circular_arc
from sectionwave.importers.errors import SectionwaveError

from tests.reference import C0, case, circle_far_field, relative_error

GIB = 2**30
KA = 4.0


def set_memory(monkeypatch, n_bytes: int) -> None:
    monkeypatch.setattr(solve_mod, "available_memory_bytes", lambda: n_bytes)


@pytest.fixture(scope="module")
def circle_system() -> BoundarySystem:
    contour = Contour((circular_arc((0.2, 0.1), 1.0, 0.0, 2 * math.pi),))
    mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / KA)])
    return BoundarySystem(mesh, [Dirichlet()], KA)


WAVES = [
    IncidentWave("a", "plane", from_deg=0.0),
    IncidentWave("a", "plane", from_deg=135.0),
    IncidentWave("ls", "line", position_m=(2.5, -1.0)),
]


# ----------------------------------------------------------------- memory plan


def test_dense_lu_memory_bytes(circle_system):
    lu = DenseLU()
    assert lu.name == "dense LU"
    # Dirichlet: S and D' are assembled, the system is built in place of S and
    # factorised in place, so two complex N x N matrices (16 bytes per entry)
    n = circle_system.n_unknowns
    assert circle_system.dense_peak_matrices() == 2.0
    assert lu.memory_bytes(circle_system) == int(PLAN_MARGIN * 2 * 16 * n**2)
    neumann = BoundarySystem(circle_system.mesh, [Neumann()], KA)
    assert neumann.dense_peak_matrices() == 3.0  # S, D and T (in place of the tangential derivative)


def test_check_memory_refuses_with_the_estimate(monkeypatch):
    set_memory(monkeypatch, 1 * GIB)
    with pytest.raises(ProblemTooLargeError) as info:
        check_memory(10_000)
    msg = str(info.value)
    # 4 * 16 * 1e8 bytes = 6.0 GiB
    assert "needs about 6.0 GiB for 10000 unknowns" in msg
    assert "(4 complex matrices of 16 N^2 bytes)" in msg
    assert "but 1.0 GiB are available" in msg
    assert "lower the frequency, loosen the tolerance, or split the scene" in msg
    assert isinstance(info.value, MemoryError) and isinstance(info.value, SectionwaveError)


def test_check_memory_returns_the_plan(monkeypatch):
    set_memory(monkeypatch, 1 * GIB)
    assert check_memory(100) == MATRICES_IN_FLIGHT * 16 * 100**2
    assert check_memory(100, matrices=2) == 2 * 16 * 100**2
    # the limit is MEMORY_FRACTION of what is available
    n_ok = int(math.sqrt(MEMORY_FRACTION * GIB / (MATRICES_IN_FLIGHT * 16)))
    check_memory(n_ok)
    with pytest.raises(ProblemTooLargeError):
        check_memory(n_ok + 1)


def test_fits_in_memory(monkeypatch):
    set_memory(monkeypatch, 1000)
    assert fits_in_memory(800) and fits_in_memory(0)
    assert not fits_in_memory(801)


def test_available_memory_is_a_positive_integer():
    avail = available_memory_bytes()
    assert isinstance(avail, int) and avail > 0


def test_dense_lu_refuses_before_assembling(circle_system, monkeypatch):
    set_memory(monkeypatch, 1024)

    def no_assembly(self):
        raise AssertionError("assembled although the plan does not fit")

    monkeypatch.setattr(BoundarySystem, "dense_matrix", no_assembly)
    with pytest.raises(ProblemTooLargeError, match=f"for {circle_system.n_unknowns} unknowns"):
        solve_boundary(circle_system, WAVES[:1])


def test_solve_problem_refuses_what_does_not_fit(monkeypatch):
    set_memory(monkeypatch, 1024)
    doc = case("tm", KA * C0 / (2 * math.pi), [{"shape": {"kind": "circle", "radius_m": 1.0}, "boundary": "pec"}])
    with pytest.raises(ProblemTooLargeError, match="GiB are available"):
        solve_problem(parse_case(doc).problem)


# ----------------------------------------------------------------- factorisation


def test_factorise_solves_and_estimates_the_condition():
    rng = np.random.default_rng(0)
    a = rng.standard_normal((60, 60)) + 1j * rng.standard_normal((60, 60)) + 20 * np.eye(60)
    b = rng.standard_normal((60, 3)) + 0j
    f = factorise(a, overwrite=False)
    assert np.allclose(a @ f.solve(b), b, atol=1e-12)
    exact = np.linalg.cond(a, 1)
    # LAPACK gecon estimates the 1-norm condition from below, usually within a small factor
    assert exact / 10 <= f.condition <= exact * (1 + 1e-12)


def test_factorise_of_a_singular_matrix_reports_infinite_condition():
    from scipy.linalg import LinAlgWarning

    with pytest.warns(LinAlgWarning, match="exactly zero"):
        f = factorise(np.ones((4, 4), dtype=complex))
    assert f.condition == math.inf


# ----------------------------------------------------------------- solve_boundary


def test_solve_boundary_solution_and_report(circle_system):
    sol = solve_boundary(circle_system, WAVES)
    n = circle_system.n_unknowns
    assert isinstance(sol, BoundarySolution) and isinstance(sol.report, SolveReport)
    assert sol.system is circle_system
    assert sol.unknowns.shape == sol.u.shape == sol.dudn.shape == (n, 3)
    r = sol.report
    assert (r.method, r.unknowns, r.memory_planned_bytes) == ("dense LU", n, DenseLU().memory_bytes(circle_system))
    assert r.condition_estimate is not None and math.isfinite(r.condition_estimate)
    # a second-kind combined-field equation on a smooth body is well conditioned
    assert 1.0 <= r.condition_estimate < 1e3
    assert set(r.timings_s) == {"assemble_s", "factorise_and_solve_s"}
    assert all(v >= 0 for v in r.timings_s.values())
    # Dirichlet: u = 0 on the body, dudn = |k| x
    assert np.all(sol.u == 0) and np.allclose(sol.dudn, KA * sol.unknowns)


def test_solve_boundary_matches_the_circle_series(circle_system):
    sol = solve_boundary(circle_system, WAVES[:2])
    mesh = circle_system.mesh
    angles = np.linspace(0, 360, 37)
    ff = far_field(mesh, KA, sol.u, sol.dudn, angles)
    for col in range(2):
        ref = circle_far_field(KA, KA, angles, WAVES[col].from_deg, "dirichlet", center=(0.2, 0.1))
        assert relative_error(ff[:, col], ref) < 1e-8


def test_many_right_hand_sides_equal_one_at_a_time(circle_system):
    together = solve_boundary(circle_system, WAVES)
    for col, wave in enumerate(WAVES):
        alone = solve_boundary(circle_system, [wave])
        assert np.allclose(alone.unknowns[:, 0], together.unknowns[:, col], rtol=0,
                           atol=1e-13 * np.abs(together.unknowns[:, col]).max())


def test_incident_values_override(circle_system):
    mesh = circle_system.mesh

    def values(system):
        return plane_wave(system.mesh.nodes, system.mesh.normals, system.k, np.array([0.0, 135.0]))

    plain = solve_boundary(circle_system, WAVES[:2])
    given = solve_boundary(circle_system, WAVES[:2], incident_values=values)
    assert np.allclose(given.unknowns, plain.unknowns, rtol=0, atol=1e-14 * np.abs(plain.unknowns).max())
    assert given.u.shape == (mesh.n_nodes, 2)


# ----------------------------------------------------------------- a second solver through the seam


@dataclass
class _GmresPrepared:
    matrix: np.ndarray
    timings_s: dict[str, float] = field(default_factory=dict)
    iterations: list[int] = field(default_factory=list)

    @property
    def condition_estimate(self) -> float | None:
        return None

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        t0 = time.perf_counter()
        out = np.empty_like(rhs)
        n = self.matrix.shape[0]
        for col in range(rhs.shape[1]):
            count = [0]

            def tick(_res, count=count):
                count[0] += 1

            x, info = spla.gmres(self.matrix, rhs[:, col], rtol=1e-13, atol=0.0, restart=min(n, 200),
                                 maxiter=20, callback=tick, callback_type="pr_norm")
            assert info == 0, f"GMRES did not converge (info {info})"
            out[:, col] = x
            self.iterations.append(count[0])
        self.timings_s["iterate_s"] = self.timings_s.get("iterate_s", 0.0) + time.perf_counter() - t0
        return out


@dataclass
class DenseGmres:
    """Restarted GMRES on the dense system matrix (one matrix, no factors)."""

    name: str = "GMRES (dense products)"
    prepared: list[_GmresPrepared] = field(default_factory=list)

    def memory_bytes(self, system: BoundarySystem) -> int:
        return 2 * 16 * system.n_unknowns**2

    def prepare(self, system: BoundarySystem) -> _GmresPrepared:
        t0 = time.perf_counter()
        p = _GmresPrepared(system.dense_matrix(), {"assemble_s": time.perf_counter() - t0})
        self.prepared.append(p)
        return p


def test_gmres_is_a_linear_solver(circle_system):
    solver: LinearSolver = DenseGmres()
    assert solver.memory_bytes(circle_system) == 32 * circle_system.n_unknowns**2


def test_second_solver_in_solve_boundary(circle_system):
    gm = DenseGmres()
    sol = solve_boundary(circle_system, WAVES, solver=gm)
    ref = solve_boundary(circle_system, WAVES)
    r = sol.report
    assert (r.method, r.condition_estimate) == ("GMRES (dense products)", None)
    assert r.memory_planned_bytes == 2 * 16 * circle_system.n_unknowns**2
    assert set(r.timings_s) == {"assemble_s", "factorise_and_solve_s"}
    # the solver's own stage (iterate_s) is counted in factorise_and_solve_s
    assert r.timings_s["factorise_and_solve_s"] >= gm.prepared[0].timings_s["iterate_s"]
    # a second-kind equation: GMRES needs far fewer iterations than unknowns
    assert max(gm.prepared[0].iterations) < circle_system.n_unknowns / 4
    mesh = circle_system.mesh
    angles = np.linspace(0, 360, 73)
    ff = far_field(mesh, KA, sol.u, sol.dudn, angles)
    ff_lu = far_field(mesh, KA, ref.u, ref.dudn, angles)
    for col in range(3):
        assert relative_error(ff[:, col], ff_lu[:, col]) < 1e-10


@pytest.mark.parametrize("field_kind,boundary", [("tm", "pec"), ("te", "pec")])
def test_second_solver_in_solve_problem(field_kind, boundary):
    doc = case(field_kind, KA * C0 / (2 * math.pi),
               [{"name": "c", "shape": {"kind": "circle", "radius_m": 1.0, "center_m": [0.3, 0.0]},
                 "boundary": boundary}],
               from_deg=20.0, angles={"start": 0, "stop": 360, "count": 73})
    problem = parse_case(doc).problem
    gm = DenseGmres()
    with_gmres = solve_problem(problem, solver=gm).frequencies[0]
    with_lu = solve_problem(problem).frequencies[0]
    assert gm.prepared, "the run did not use the solver it was given"
    assert with_gmres.condition_estimate is None and with_lu.condition_estimate is not None
    assert with_gmres.unknowns == with_lu.unknowns
    assert relative_error(with_gmres.farfield[:, 0], with_lu.farfield[:, 0]) < 1e-10
    kind = "dirichlet" if field_kind == "tm" else "neumann"
    ref = circle_far_field(KA, KA, with_gmres.angles_deg, 20.0, kind, center=(0.3, 0.0))
    assert relative_error(with_gmres.farfield[:, 0], ref) < 1e-8


@dataclass
class _Reporting:
    inner: object
    condition: float

    @property
    def timings_s(self):
        return self.inner.timings_s

    @property
    def condition_estimate(self) -> float | None:
        return self.condition

    def solve(self, rhs):
        return self.inner.solve(rhs)


@dataclass
class PoorlyConditioned:
    """Dense LU that reports a large condition number, to exercise the run's warning."""

    name: str = "dense LU (reporting 1e12)"

    def memory_bytes(self, system: BoundarySystem) -> int:
        return DenseLU().memory_bytes(system)

    def prepare(self, system: BoundarySystem):
        return _Reporting(DenseLU().prepare(system), 1e12)


def test_run_warns_about_a_solver_reporting_a_large_condition_number():
    doc = case("te", 2.0 * C0 / (2 * math.pi), [{"shape": {"kind": "circle", "radius_m": 1.0}, "boundary": "pec"}],
               angles=[0, 180])
    with pytest.warns(IllConditionedWarning, match="condition number is 1.00e\\+12"):
        fr = solve_problem(parse_case(doc).problem, solver=PoorlyConditioned()).frequencies[0]
    assert fr.condition_estimate == 1e12
    assert any("condition number" in w for w in fr.warnings)


def test_neumann_system_through_the_seam_matches_dense_lu():
    contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
    mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / KA)])
    system = BoundarySystem(mesh, [Neumann()], KA)
    a = solve_boundary(system, WAVES, solver=DenseGmres())
    b = solve_boundary(system, WAVES)
    assert np.allclose(a.u, b.u, rtol=0, atol=1e-11 * np.abs(b.u).max())
