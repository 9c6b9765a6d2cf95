"""Adaptive frequency sampling against the series of a dielectric circle (eps_r = 10).

Reference: the series solution of a penetrable circular cylinder
(tests/reference.py, layered_circle_coefficients; Balanis, Advanced
Engineering Electromagnetics, ch. 11), evaluated at every fitted frequency:
a dense uniform reference sweep computed independently of the solver.
For a lossless cylinder each order's coefficient obeys |1 + 2 c_n| = 1
(energy conservation, exact identity) and |c_n| reaches 1 at that order's
resonance (from memory).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from sectionwave.engine import load_case
from sectionwave.engine.adaptive_frequency import DYNAMIC_RANGE_DB, AdaptiveBand, FarFieldFit
from sectionwave.engine.case import CaseError
from sectionwave.engine.cli import main
from sectionwave.engine.export import read_csv
from sectionwave.engine.problem import SPEED_OF_LIGHT_M_S

from tests.reference import coefficients_far_field, layered_circle_coefficients

EPS = 10.0
RADIUS = 0.0477464829  # ka = 1 at 1 GHz
ANGLES = [0.0, 60.0, 120.0, 180.0]
CASE = f"""
title = "dielectric rod, adaptive"
[wave]
field = "tm"
frequency_hz = {{ start = 0.5e9, stop = 2.0e9, adaptive_db = 0.1, fit_points = 300 }}
[[body]]
name = "rod"
shape = {{ kind = "circle", radius_m = {RADIUS} }}
boundary = "penetrable"
eps_r = {EPS}
[[incident]]
kind = "plane"
from_deg = 0
[far_field]
angles_deg = {ANGLES}
[output]
plots = false
vtk = false
"""


def _ka(f: float) -> float:
    return 2 * math.pi * f / SPEED_OF_LIGHT_M_S * RADIUS


def _coefficients(f: float):
    ka = _ka(f)
    return layered_circle_coefficients(ka, 1.0, [(1.0, ka * math.sqrt(EPS), 1.0)], "medium", 30)


def _series(f: float) -> np.ndarray:
    n, c, _ = _coefficients(f)
    # the series is written for a unit radius; the far field scales with sqrt(radius)
    return coefficients_far_field(n, c, _ka(f), np.array(ANGLES), 0.0) * math.sqrt(RADIUS)


@pytest.fixture(scope="module")
def adaptive_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("adaptive")
    case = tmp / "rod.toml"
    case.write_text(CASE)
    assert main(["run", str(case), "--out", str(tmp / "out"), "--quiet"]) == 0
    return tmp / "out"


def test_fitted_echo_width_within_a_tenth_of_a_db_of_the_dense_series(adaptive_run):
    table = read_csv(adaptive_run / "fitted_sweep.csv")
    assert list(table)[:6] == ["frequency_hz", "from_deg", "angle_deg", "farfield_re", "farfield_im",
                               "echo_width_db_m"]
    freqs = np.unique(table["frequency_hz"])
    assert freqs.size == 300
    fitted = (table["farfield_re"] + 1j * table["farfield_im"]).reshape(freqs.size, len(ANGLES))
    reference = np.array([_series(f) for f in freqs])
    peak = np.max(np.abs(reference), axis=0)
    # the far field itself, everywhere: within 1e-3 of each angle's peak amplitude
    assert np.max(np.abs(fitted - reference) / peak) < 1e-3
    db_fit = 10 * np.log10(2 * np.pi * np.abs(fitted) ** 2)
    db_ref = 10 * np.log10(2 * np.pi * np.abs(reference) ** 2)
    # the echo width within 0.1 dB wherever it is within DYNAMIC_RANGE_DB (40 dB) of its peak at that angle
    shown = db_ref >= 10 * np.log10(2 * np.pi * peak**2) - DYNAMIC_RANGE_DB
    assert shown.mean() > 0.95
    assert np.max(np.abs(db_fit - db_ref)[shown]) < 0.1
    assert np.allclose(table["echo_width_db_m"].reshape(freqs.size, len(ANGLES)), db_fit, atol=1e-9)
    summary = json.loads((adaptive_run / "summary.json").read_text())
    solves = summary["sweep"]["adaptive"]["solves"]
    assert solves == len(summary["frequencies"]) <= 40  # against 300 for the uniform sweep of the same points
    assert summary["sweep"]["adaptive"]["converged"]
    assert "fitted_sweep.csv" in summary["files"]


def test_narrow_resonances_are_those_of_the_series(adaptive_run):
    summary = json.loads((adaptive_run / "summary.json").read_text())
    found = summary["sweep"]["adaptive"]["resonances"]
    band = 1.5e9
    narrow = [r for r in found if r["width_hz"] < 0.05 * band]
    assert len(narrow) >= 2
    for r in narrow:
        n, c, _ = _coefficients(r["frequency_hz"])
        assert np.allclose(np.abs(1 + 2 * c), 1.0, atol=1e-10)  # lossless: an exact identity
        assert np.max(np.abs(c)) > 0.95, r  # some order is at its resonance


def test_the_fit_reproduces_a_rational_function_and_its_poles():
    # exact identity: a rational function of type (2, 2) is its own best fit
    x = np.linspace(-1, 1, 15)
    poles = np.array([0.3 + 0.02j, -0.5 + 0.1j])
    values = np.column_stack([1 / (x - poles[0]) + 2 / (x - poles[1]), 0.5 / (x - poles[0]) - 1j / (x - poles[1])])
    fit = FarFieldFit(x, values, 1e-13)
    xs = np.linspace(-1, 1, 101)
    exact = np.column_stack([1 / (xs - poles[0]) + 2 / (xs - poles[1]), 0.5 / (xs - poles[0]) - 1j / (xs - poles[1])])
    assert np.max(np.abs(fit(xs) - exact)) < 1e-9 * np.max(np.abs(exact))
    found = fit.poles()
    for p in poles:
        assert np.min(np.abs(found - p)) < 1e-8


def test_case_reads_the_band_and_refuses_a_bad_one(tmp_path):
    path = tmp_path / "rod.toml"
    path.write_text(CASE)
    case = load_case(path)
    assert case.adaptive == AdaptiveBand(0.5e9, 2.0e9, 0.1, 300)
    assert case.problem.frequencies_hz == case.adaptive.initial_hz()
    for bad, words in (("adaptive_db = 0.1, count = 3", "adaptive band takes"),
                       ("adaptive_db = -1", "positive"), ("adaptive_db = 0.1, fit_points = 1", "fit_points")):
        path.write_text(CASE.replace("adaptive_db = 0.1, fit_points = 300", bad))
        with pytest.raises(CaseError, match=words):
            load_case(path)
    path.write_text(CASE.replace(f"angles_deg = {ANGLES}", "angles_deg = { start = 0, stop = 360, count = 7201 }"))
    with pytest.raises(CaseError, match="fewer"):
        load_case(path)
