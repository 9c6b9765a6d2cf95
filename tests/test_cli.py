"""The command line, in-process through main(argv) and once as a real subprocess."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from sectionwave.engine.cli import main

SMALL = """
title = "small test"
[wave]
field = "tm"
frequency_hz = 3e8
[[body]]
name = "post"
shape = { kind = "circle", radius_m = 0.2 }
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 90]
[far_field]
angles_deg = { start = 0, stop = 360, count = 73 }
[output]
plots = false
"""


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "case.toml"
    path.write_text(text)
    return path


def test_run_writes_results_and_summary(tmp_path, capsys):
    case = _write(tmp_path, SMALL)
    out = tmp_path / "out"
    assert main(["run", str(case), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["schema"] == "sectionwave.summary/1"
    assert "infinitely long" in summary["caution"]
    header = (out / "farfield.csv").read_text().splitlines()[0]
    for col in ("frequency_hz", "from_deg", "angle_deg", "farfield_re_sqrt_m", "farfield_im_sqrt_m",
                "echo_width_m", "echo_width_db_m", "echo_width_db_lambda"):
        assert col in header.split(",")
    assert (out / "monostatic.csv").exists() and (out / "surface.csv").exists()
    # refuses to overwrite without --force, and keeps the old results
    before = (out / "summary.json").read_text()
    assert main(["run", str(case), "--out", str(out), "--quiet"]) == 2
    assert (out / "summary.json").read_text() == before
    assert main(["run", str(case), "--out", str(out), "--quiet", "--force"]) == 0


def test_physics_convention_is_the_complex_conjugate(tmp_path):
    case = _write(tmp_path, SMALL)
    main(["run", str(case), "--out", str(tmp_path / "a"), "--quiet"])
    main(["run", str(case), "--out", str(tmp_path / "b"), "--quiet", "--time-convention", "physics"])
    from sectionwave.engine.export import read_csv

    a, b = read_csv(tmp_path / "a" / "farfield.csv"), read_csv(tmp_path / "b" / "farfield.csv")
    assert (a["farfield_re_sqrt_m"] == b["farfield_re_sqrt_m"]).all()
    assert (a["farfield_im_sqrt_m"] == -b["farfield_im_sqrt_m"]).all()  # exact conjugate


def test_bad_case_gives_exit_code_2_and_one_line(tmp_path, capsys):
    bad = SMALL.replace('boundary = "pec"', 'boundary = "soft"')
    assert main(["run", str(_write(tmp_path, bad)), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "boundary" in err[0] and "pec" in err[0] and "case.toml" in err[0]
    assert not (tmp_path / "o").exists()


def test_unknown_key_and_bad_toml_are_errors(tmp_path, capsys):
    assert main(["run", str(_write(tmp_path, SMALL + "\n[solver]\ntolerence = 1e-6\n"))]) == 2
    assert "tolerence" in capsys.readouterr().err
    assert main(["run", str(_write(tmp_path, "title = \n"))]) == 2
    assert "line 1" in capsys.readouterr().err


def test_subprocess_run_from_stdin(tmp_path):
    proc = subprocess.run(
        [sys.executable, "-m", "sectionwave.engine.cli", "run", "-", "--out", str(tmp_path / "r")],
        input=SMALL.encode(), capture_output=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr.decode()
    assert (tmp_path / "r" / "summary.json").exists()
    proc = subprocess.run([sys.executable, "-m", "sectionwave.engine.cli", "--version"], capture_output=True)
    assert proc.returncode == 0 and b"sectionwave" in proc.stdout


def test_demo_case_runs(tmp_path):
    # The sample `make demo` runs first: three bodies (PEC, PEC, impedance), 73 incidences,
    # a near-field map; it must run cleanly and meet its own tolerance.
    case = Path(__file__).resolve().parents[1] / "samples" / "signal_mast.toml"
    out = tmp_path / "demo"
    assert main(["run", str(case), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["estimated_error_max"] <= 1e-8
    assert summary["frequencies"][0]["optical_theorem_residual_max"] < 1e-8
    assert (out / "nearfield.csv").exists() and (out / "echo_width_polar.png").exists()


def test_case_validation_refuses_meaningless_input(tmp_path, capsys):
    cases = {
        'position_m = [0.0, 0.0]': SMALL.replace('kind = "plane"\nfrom_deg = [0, 90]', 'kind = "line"\nposition_m = [0.0, 0.0]'),
        "repeats an angle": SMALL.replace("from_deg = [0, 90]", "from_deg = [0, 0]"),
        "finite": SMALL.replace("radius_m = 0.2", "radius_m = 0.2, center_m = [inf, 0]"),
        "incident": SMALL.replace('[[incident]]\nkind = "plane"\nfrom_deg = [0, 90]', "incident = []"),
    }
    for expect, text in cases.items():
        assert main(["run", str(_write(tmp_path, text)), "--out", str(tmp_path / "o")]) == 2, expect
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1
    assert not (tmp_path / "o").exists()


def test_force_never_replaces_a_foreign_folder(tmp_path):
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "thesis.txt").write_text("keep me")
    assert main(["run", str(_write(tmp_path, SMALL)), "--out", str(foreign), "--force", "--quiet"]) == 2
    assert (foreign / "thesis.txt").read_text() == "keep me"
