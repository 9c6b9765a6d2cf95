"""Numerical guardrails: each finding triggered by a case, recorded in summary.json, exit code 3.

Sources: wavelengths from the SI exact speed of light (299 792 458 m/s);
the interpolation bound ``a^p / (2^(p-1) p!)`` for ``exp(j a t)`` at p
nodes (Davis, *Interpolation and Approximation*, ch. 3, from memory); the
optical theorem for lossless scatterers (Balanis, *Advanced Engineering
Electromagnetics*, ch. 11, from memory).
"""

from __future__ import annotations

import json
import math
import time
from pathlib import Path

import pytest
from sectionwave.engine import parse_case
from sectionwave.engine.cli import EXIT_BAD_INPUT, EXIT_OK, EXIT_WARNINGS, main
from sectionwave.engine.guardrails import (
    CODES,
    check_problem,
    estimate_panels,
    is_lossless,
    panel_resolution,
    panel_settings_finding,
)

C0 = 299_792_458.0


def doc(freq: float = 3e9, radius: float = 0.05, solver: dict | None = None, **body) -> dict:
    entry = {"name": "post", "shape": {"kind": "circle", "radius_m": radius}, "boundary": "pec", **body}
    out: dict = {"title": "t", "wave": {"field": "tm", "frequency_hz": freq}, "body": [entry],
                 "far_field": {"angles_deg": {"start": 0, "stop": 360, "count": 37}}}
    if solver:
        out["solver"] = solver
    return out


def codes(d: dict) -> list[str]:
    return [g.code for g in check_problem(parse_case(d).problem)]


def test_ghz_slip_is_tiny_and_names_the_intended_frequency():
    # 9.4 Hz for a 10 cm square: the wavelength is 31 892 km (c / f)
    d = doc(freq=9.4)
    d["body"][0]["shape"] = {"kind": "rectangle", "width_m": 0.1, "height_m": 0.1}
    (found,) = check_problem(parse_case(d).problem)
    assert found.code == "electrically_tiny"
    assert "9.4 GHz?" in found.message
    assert f"{C0 / 9.4:.3g}" in found.message  # 3.19e+07 m


def test_plain_sizes_raise_nothing():
    assert codes(doc(freq=3e9)) == []
    # acoustics: 9.4 Hz against a 10 cm post in air is low but not a slip (0.003 wavelengths)
    d = doc(freq=9.4)
    d["wave"] = {"field": "acoustic", "frequency_hz": 9.4}
    d["body"][0]["boundary"] = "soft"
    assert codes(d) == []


def test_huge_scene_is_flagged():
    # a 1 m radius post at 300 GHz: 2.83 m / 1 mm = 2830 wavelengths across
    assert codes(doc(freq=3e11, radius=1.0)) == ["electrically_huge"]


def test_panel_estimate_is_perimeter_over_wavelength():
    # 0.5 m radius at 3 GHz: pi m of boundary over 0.0999 m panels (one wavelength each)
    est = estimate_panels(parse_case(doc(freq=3e9, radius=0.5)).problem)
    assert est.panels == pytest.approx(math.pi / (C0 / 3e9), rel=1e-3)
    assert not est.is_absurd


def test_interpolation_bound():
    # the bound at the defaults (16 nodes, one wavelength) matches the 1e-10 measured in run.panel_wavelengths
    assert 1e-11 < panel_resolution(16, 1.0) < 1e-9
    assert panel_resolution(4, 1.0) == pytest.approx(math.pi**4 / (2**3 * 24))
    assert panel_settings_finding(parse_case(doc()).problem) is None  # the defaults
    assert panel_settings_finding(parse_case(doc(solver={"nodes_per_panel": 8})).problem) is not None
    fine = doc(solver={"nodes_per_panel": 8, "max_panel_wavelengths": 0.1, "tolerance": 1e-6})
    assert panel_settings_finding(parse_case(fine).problem) is None


def test_lossless_scenes():
    assert is_lossless(parse_case(doc()).problem)
    assert not is_lossless(parse_case(doc(boundary="impedance", impedance=[0.5, 0.1])).problem)
    assert is_lossless(parse_case(doc(boundary="impedance", impedance=[0.0, 0.3])).problem)
    assert not is_lossless(parse_case(doc(boundary="penetrable", eps_r=4.0, loss_tangent=0.01)).problem)


def _toml(d: dict) -> str:
    """A tiny TOML writer for the cases here (tables of scalars, lists and inline tables)."""

    def value(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, dict):
            return "{ " + ", ".join(f"{k} = {value(x)}" for k, x in v.items()) + " }"
        if isinstance(v, list):
            return "[" + ", ".join(value(x) for x in v) + "]"
        return repr(v)

    lines = []
    for k, v in d.items():
        if not isinstance(v, dict | list) or (isinstance(v, list) and not all(isinstance(x, dict) for x in v)):
            lines.append(f"{k} = {value(v)}")
    for k, v in d.items():
        if isinstance(v, dict) and k not in ("shape",):
            lines.append(f"[{k}]")
            lines += [f"{kk} = {value(vv)}" for kk, vv in v.items()]
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            for item in v:
                lines.append(f"[[{k}]]")
                lines += [f"{kk} = {value(vv)}" for kk, vv in item.items()]
    return "\n".join(lines) + "\n"


def _run(tmp_path: Path, d: dict, *extra: str) -> tuple[int, dict, str, Path]:
    d = {**d, "output": {"plots": False, "vtk": False, **d.get("output", {})}}
    case = tmp_path / "case.toml"
    case.write_text(_toml(d))
    out = tmp_path / "out"
    import contextlib
    import io

    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["run", str(case), "--out", str(out), "--force", *extra])
    summary = json.loads((out / "summary.json").read_text()) if (out / "summary.json").exists() else {}
    return code, summary, err.getvalue(), out


def test_slip_through_the_command_line_exits_3_even_when_quiet(tmp_path):
    d = doc(freq=9.4)
    d["body"][0]["shape"] = {"kind": "rectangle", "width_m": 0.1, "height_m": 0.1}
    code, summary, err, _ = _run(tmp_path, d, "--quiet")
    assert code == EXIT_WARNINGS == 3
    got = {w["code"] for w in summary["warnings"]}
    assert "electrically_tiny" in got and got <= set(CODES)
    assert "9.4 GHz?" in err  # --quiet never hides a guardrail
    assert "exit code 3" in err


def test_missed_tolerance_with_coarse_panels(tmp_path):
    # 8 nodes on panels of two wavelengths around 31 wavelengths of boundary, no refinement:
    # the interpolation bound (0.47) is far above 1e-8, and so is the result
    d = doc(radius=0.5, solver={"nodes_per_panel": 8, "max_panel_wavelengths": 2.0, "max_refinements": 0})
    code, summary, err, _ = _run(tmp_path, d)
    got = [w["code"] for w in summary["warnings"]]
    assert code == 3
    assert got == ["accuracy_missed", "under_resolved"], got
    assert summary["frequencies"][0]["estimated_error"] > 1e-8
    assert [w["frequency_hz"] for w in summary["warnings"]] == [3e9, None]
    assert "max_panel_wavelengths <=" in err
    # accepted by the flag, or by the case: exit 0, the findings still recorded
    code, summary, _, _ = _run(tmp_path, d, "--accept-warnings")
    assert code == EXIT_OK and summary["warnings"]
    code, summary, _, _ = _run(tmp_path, {**d, "run": {"accept_warnings": True}})
    assert code == EXIT_OK and summary["warnings"]


def test_optical_theorem_residual_above_the_tolerance(tmp_path):
    # a 10 cm PEC square at 500 kHz (2.4e-4 wavelengths across, not flagged as tiny): the low-frequency
    # cancellation leaves an optical-theorem residual near 1e-8, above a tolerance of 1e-9
    d = doc(freq=5e5, solver={"tolerance": 1e-9})
    d["body"][0]["shape"] = {"kind": "rectangle", "width_m": 0.1, "height_m": 0.1}
    code, summary, _, _ = _run(tmp_path, d)
    got = {w["code"] for w in summary["warnings"]}
    assert code == 3 and "optical_theorem" in got and "electrically_tiny" not in got
    assert summary["frequencies"][0]["optical_theorem_residual_max"] > 1e-9


def test_ill_conditioning_is_recorded(tmp_path, monkeypatch):
    # the threshold lowered so that an ordinary system counts as ill-conditioned: the path is what is tested
    import sectionwave.engine.run as run

    monkeypatch.setattr(run, "CONDITION_WARN", 1.0)
    code, summary, _, _ = _run(tmp_path, doc())
    assert code == 3
    assert [w["code"] for w in summary["warnings"]] == ["ill_conditioned"]


def test_a_clean_run_has_no_findings(tmp_path):
    code, summary, err, _ = _run(tmp_path, doc(), "--quiet")
    assert code == 0 and summary["warnings"] == [] and err == ""


def test_absurd_frequency_refused_at_once(tmp_path):
    d = doc(freq=9.4e15)
    case = tmp_path / "case.toml"
    case.write_text(_toml(d))
    import contextlib
    import io

    err = io.StringIO()
    t0 = time.perf_counter()
    with contextlib.redirect_stderr(err):
        code = main(["run", str(case), "--out", str(tmp_path / "o")])
    assert time.perf_counter() - t0 < 2.0
    assert code == EXIT_BAD_INPUT
    line = err.getvalue().strip()
    assert "[wave] frequency_hz" in line and "absurd" in line and "check units" not in line
    assert not (tmp_path / "o").exists()


def test_absurd_size_names_the_size(tmp_path):
    d = doc(freq=1e9, radius=1e6)
    case = tmp_path / "case.toml"
    case.write_text(_toml(d))
    import contextlib
    import io

    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        assert main(["run", str(case), "--out", str(tmp_path / "o")]) == EXIT_BAD_INPUT
    assert "the bodies span" in err.getvalue() and "units" in err.getvalue()
