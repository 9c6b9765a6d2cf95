"""Streamed sweeps: killed, stopped and resumed runs give the files of an uninterrupted run.

The reference in every check is an uninterrupted run of the same case in
the same way (exact identity: a frequency's solution does not depend on
which run solved it), compared byte for byte on the CSV tables.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from sectionwave.engine.cli import main
from sectionwave.engine.export.partial import SweepFolder, case_hash, sweep_folder_for

CASE = """
title = "sweep test"
[wave]
field = "tm"
frequency_hz = { start = 1e9, stop = 2e10, count = 10 }
[[body]]
name = "post"
shape = { kind = "circle", radius_m = 0.1 }
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 90]
[far_field]
angles_deg = { start = 0, stop = 360, count = 37 }
[output]
plots = false
vtk = false
"""
TABLES = ("farfield.csv", "monostatic.csv", "surface.csv")


def _case(tmp_path: Path, text: str = CASE) -> Path:
    path = tmp_path / "case.toml"
    path.write_text(text)
    return path


def _start(case: Path, out: Path, *extra: str) -> subprocess.Popen[str]:
    cmd = [sys.executable, "-m", "sectionwave.engine.cli", "run", str(case), "--out", str(out), *extra]
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _wait_for_solved(proc: subprocess.Popen[str], out: Path, count: int, timeout_s: float = 120) -> None:
    folder = sweep_folder_for(out)
    end = time.monotonic() + timeout_s
    while len(list(folder.glob("*Hz.pickle"))) < count:
        assert proc.poll() is None, f"the run ended before {count} frequencies were stored"
        assert time.monotonic() < end, "the run stored nothing in time"
        time.sleep(0.02)


def _same_tables(a: Path, b: Path) -> None:
    for name in TABLES:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name


@pytest.fixture(scope="module")
def reference(tmp_path_factory) -> Path:
    """An uninterrupted run (in a subprocess, with the thread settings of the killed run)."""
    tmp = tmp_path_factory.mktemp("reference")
    case = _case(tmp)
    proc = _start(case, tmp / "ref", "--quiet")
    assert proc.wait(timeout=300) == 0, proc.stderr.read() if proc.stderr else ""
    return tmp / "ref"


def test_killed_sweep_resumes_to_identical_files(tmp_path, reference, capsys):
    case = _case(tmp_path)
    out = tmp_path / "out"
    proc = _start(case, out)
    _wait_for_solved(proc, out, 3)
    proc.kill()  # SIGKILL: no handler runs, nothing is cleaned up
    proc.wait(timeout=30)
    assert not out.exists()
    kept = SweepFolder(sweep_folder_for(out)).frequencies()
    assert 3 <= len(kept) < 10
    # a fresh run does not silently throw the solved frequencies away
    assert main(["run", str(case), "--out", str(out)]) == 2
    assert "--resume" in capsys.readouterr().err
    assert main(["run", str(case), "--out", str(out), "--resume"]) == 0
    err = capsys.readouterr().err
    assert f"kept {len(kept)} frequencies, solved {10 - len(kept)}" in err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["sweep"]["kept_from_earlier_run"] == len(kept)
    assert summary["sweep"]["solved_now"] == 10 - len(kept)
    assert not set(summary["sweep"]["solved_now_hz"]) & set(kept)
    _same_tables(reference, out)
    assert not sweep_folder_for(out).exists()


def test_sigterm_stops_after_the_frequency_under_way(tmp_path, reference, capsys):
    case = _case(tmp_path)
    out = tmp_path / "out"
    proc = _start(case, out)
    _wait_for_solved(proc, out, 2)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "SIGTERM" in err and "finish with --resume" in err
    kept = SweepFolder(sweep_folder_for(out)).frequencies()
    assert f"stopped: {len(kept)} of 10 frequencies" in err
    assert not out.exists()
    assert main(["run", str(case), "--out", str(out), "--resume", "--quiet"]) == 0
    _same_tables(reference, out)


def test_resume_refuses_a_changed_case_in_one_line(tmp_path, capsys):
    case = _case(tmp_path)
    out = tmp_path / "out"
    proc = _start(case, out)
    _wait_for_solved(proc, out, 1)
    proc.send_signal(signal.SIGINT)
    assert proc.wait(timeout=120) == 130
    case.write_text(CASE.replace("radius_m = 0.1", "radius_m = 0.11"))
    assert main(["run", str(case), "--out", str(out), "--resume"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "changed" in err
    # --force starts over, and the run completes
    assert main(["run", str(case), "--out", str(out), "--force", "--quiet"]) == 0
    assert not sweep_folder_for(out).exists()


def test_case_hash_follows_the_drawing(tmp_path):
    drawing = tmp_path / "part.svg"
    drawing.write_text("<svg/>")
    one = case_hash(b"case", [drawing])
    assert one == case_hash(b"case", [drawing])
    drawing.write_text("<svg />")
    assert case_hash(b"case", [drawing]) != one
    assert case_hash(b"case2", [drawing]) != case_hash(b"case", [drawing])


def test_sweep_folder_skips_a_cut_short_file(tmp_path):
    from sectionwave.engine import load_case
    from sectionwave.engine.run import solve_frequency

    problem = load_case(_case(tmp_path)).problem
    folder = SweepFolder(tmp_path / ".out.sweep")
    folder.start("abc", "0", problem.frequencies_hz)
    solution = solve_frequency(problem, problem.frequencies_hz[0])
    folder.save(solution)
    (folder.folder / "2000000000.0Hz.pickle").write_bytes(b"\x80\x05cut")
    loaded = folder.load()
    assert list(loaded) == [problem.frequencies_hz[0]]
    assert (loaded[problem.frequencies_hz[0]].farfield == solution.farfield).all()
    assert os.path.isfile(folder.folder / "manifest.json")


def test_a_stopped_adaptive_band_resumes_to_identical_files(tmp_path):
    from tests.engine.test_adaptive_frequency import CASE as BAND

    case = _case(tmp_path, BAND)
    ref = tmp_path / "ref"
    assert main(["run", str(case), "--out", str(ref), "--quiet"]) == 0
    out = tmp_path / "out"
    proc = _start(case, out)
    _wait_for_solved(proc, out, 12)  # past the 9 equally spaced ones: inside the adaptive rounds
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert main(["run", str(case), "--out", str(out), "--resume", "--quiet"]) == 0
    _same_tables(ref, out)
    assert (ref / "fitted_sweep.csv").read_bytes() == (out / "fitted_sweep.csv").read_bytes()
    summary = json.loads((out / "summary.json").read_text())
    assert summary["sweep"]["kept_from_earlier_run"] >= 12
    assert summary["sweep"]["solved_now"] + summary["sweep"]["kept_from_earlier_run"] == \
        summary["sweep"]["adaptive"]["solves"]


def test_tm_and_te_in_one_run_labelled_and_resumed(tmp_path):
    # Reference: the PEC circle's series, TM (u = 0, "dirichlet") and TE (du/dn = 0, "neumann")
    # (tests/reference.py, circle_far_field; Balanis, Advanced Engineering Electromagnetics, ch. 11).
    import numpy as np
    from sectionwave.engine.export import read_csv
    from sectionwave.engine.problem import SPEED_OF_LIGHT_M_S

    from tests.reference import circle_far_field, relative_error

    case = _case(tmp_path, CASE.replace('field = "tm"', 'field = ["tm", "te"]').replace("count = 10", "count = 4"))
    ref = tmp_path / "ref"
    assert main(["run", str(case), "--out", str(ref), "--quiet"]) == 0
    table = read_csv(ref / "farfield.csv")
    assert list(table)[0] == "field"
    for field, kind in (("tm", "dirichlet"), ("te", "neumann")):
        rows = (table["field"] == field) & (table["frequency_hz"] == 1e9) & (table["from_deg"] == 0.0)
        k = 2 * np.pi * 1e9 / SPEED_OF_LIGHT_M_S
        series = circle_far_field(0.1 * k, k, table["angle_deg"][rows], 0.0, kind)
        assert relative_error(table["farfield_re_sqrt_m"][rows] + 1j * table["farfield_im_sqrt_m"][rows], series) < 1e-7
        own = (ref / field / "farfield.csv").read_text().splitlines()
        top = [line.split(",", 1)[1] for line in (ref / "farfield.csv").read_text().splitlines()[1:]
               if line.startswith(field + ",")]
        assert top == own[1:]  # the same rows, labelled
    surface = (ref / "surface.csv").read_text().splitlines()[0].split(",")
    assert "current_z_re_a_per_m" in surface and "current_t_re_a_per_m" in surface
    summary = json.loads((ref / "summary.json").read_text())
    assert summary["fields"] == ["tm", "te"]
    assert json.loads((ref / "te" / "summary.json").read_text())["inputs"]["field"] == "te"
    # killed while solving TE, resumed: the same files
    out = tmp_path / "out"
    proc = _start(case, out)
    end = time.monotonic() + 120
    while len(list(sweep_folder_for(out).glob("*/*Hz.pickle"))) < 5:
        assert proc.poll() is None and time.monotonic() < end
        time.sleep(0.02)
    proc.kill()
    proc.wait(timeout=30)
    assert main(["run", str(case), "--out", str(out), "--resume", "--quiet"]) == 0
    for name in ("farfield.csv", "monostatic.csv", "surface.csv", "tm/farfield.csv", "te/surface.csv"):
        assert (ref / name).read_bytes() == (out / name).read_bytes(), name
