"""The face in the wild: messages, units, starter case, locks, signals, broken pipes, determinism.

Sources: exact unit factors of the SI and of the inch (25.4 mm, exact by
definition); the rest is common practice of command-line programs (exit
130 after an interrupt, quiet exit on a closed pipe, one writer per folder).
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from sectionwave.engine import load_case, parse_case
from sectionwave.engine.case import CaseError
from sectionwave.engine.cli import main

from tests.test_cli import SMALL


def _main(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def _case(tmp_path: Path, text: str, name: str = "case.toml") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def _dxf(path: Path, layer: str = "Hull", insunits: int | None = 6) -> Path:
    import ezdxf

    doc = ezdxf.new()
    if insunits is not None:
        doc.header["$INSUNITS"] = insunits
    doc.layers.add(layer)
    doc.modelspace().add_circle((0, 0), 0.2, dxfattribs={"layer": layer})
    doc.saveas(path)
    return path


# --- messages ----------------------------------------------------------------------------


def test_misspelt_key_is_named_with_its_near_match(tmp_path):
    code, _, err = _main("run", str(_case(tmp_path, SMALL.replace("frequency_hz", "frequncy_hz"))))
    assert code == 2
    (line,) = err.strip().splitlines()
    assert "[wave.frequncy_hz]" in line and "did you mean 'frequency_hz'?" in line
    assert "is required" not in line


@pytest.mark.parametrize("table,bad,near,listed", [
    ("output", "surface_cvs = false", "surface_csv", ["plots", "vtk", "surface_csv", "vtk_per_incidence"]),
    ("run", "accept_warning = true", "accept_warnings", ["accept_warnings"]),
    ("solver", "tolerence = 1e-6", "tolerance", ["nodes_per_panel", "max_panel_wavelengths", "corners"]),
])
def test_known_keys_are_complete(tmp_path, table, bad, near, listed):
    text = SMALL.replace("[output]\nplots = false", "") + f"\n[{table}]\n{bad}\n"
    code, _, err = _main("run", str(_case(tmp_path, text)))
    assert code == 2
    assert f"did you mean '{near}'?" in err
    for key in listed:
        assert key in err


def test_misspelt_table_and_incident_key(tmp_path):
    with pytest.raises(CaseError, match="did you mean 'wave'"):
        parse_case({"wav": {"field": "tm", "frequency_hz": 1e9}})
    doc = {"wave": {"field": "tm", "frequency_hz": 1e9},
           "body": [{"shape": {"kind": "circle", "radius_m": 0.1}, "boundary": "pec"}],
           "incident": [{"kind": "plane", "from_dg": 0}]}
    with pytest.raises(CaseError, match=r"\[incident.0.from_dg\].*did you mean 'from_deg'"):
        parse_case(doc)


def test_inspect_on_a_case_file_says_what_to_do(tmp_path):
    case = _case(tmp_path, SMALL + '\n[geometry]\nfile = "part.dxf"\n')
    code, _, err = _main("inspect", str(case))
    assert code == 2
    (line,) = err.strip().splitlines()
    assert f"sectionwave run {case}" in line and "part.dxf" in line and "format=" not in line


def test_preview_into_a_missing_folder(tmp_path):
    drawing = _dxf(tmp_path / "post.dxf")
    png = tmp_path / "new" / "folder" / "preview.png"
    code, _, err = _main("inspect", str(drawing), "--preview", str(png))
    assert code == 0, err
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


class _ClosedPipe(io.StringIO):
    def write(self, s):
        raise BrokenPipeError(32, "Broken pipe")

    def flush(self):
        raise BrokenPipeError(32, "Broken pipe")


def test_inspect_into_a_closed_pipe_ends_quietly(tmp_path):
    drawing = _dxf(tmp_path / "post.dxf")
    err = io.StringIO()
    with contextlib.redirect_stdout(_ClosedPipe()), contextlib.redirect_stderr(err):
        code = main(["inspect", str(drawing)])
    assert code == 0 and err.getvalue() == ""


def test_inspect_piped_into_head_as_a_process(tmp_path):
    drawing = _dxf(tmp_path / "post.dxf")
    exe = Path(sys.executable).with_name("sectionwave")
    proc = subprocess.run(f"'{exe}' inspect --json '{drawing}' | head -c 10", shell=True,
                          capture_output=True, text=True, timeout=60)
    assert "Traceback" not in proc.stderr and "BrokenPipe" not in proc.stderr


def test_layers_match_the_same_way_in_a_case_and_in_inspect(tmp_path):
    _dxf(tmp_path / "post.dxf", layer="Hull")
    code, out, _ = _main("inspect", str(tmp_path / "post.dxf"), "--layer", "HULL")
    assert code == 0 and "perimeter 1.25664 m" in out
    text = SMALL.replace('shape = { kind = "circle", radius_m = 0.2 }', 'layer = "HULL"') + (
        '\n[geometry]\nfile = "post.dxf"\n')
    case = load_case(_case(tmp_path, text))
    assert case.problem.scatterers[0].source == "layer HULL"


def test_units_override_prints_a_note(tmp_path):
    drawing = _dxf(tmp_path / "post.dxf", insunits=4)  # the file says mm
    code, _, err = _main("inspect", str(drawing), "--units", "m")
    assert code == 0
    assert err.startswith("note: ") and "overridden by units='m'" in err
    code, _, err = _main("inspect", str(drawing))
    assert err == ""


def test_missing_drawing_names_case_and_key(tmp_path):
    text = SMALL.replace('shape = { kind = "circle", radius_m = 0.2 }', 'layer = "HULL"') + (
        '\n[geometry]\nfile = "absent.dxf"\n')
    case = _case(tmp_path, text)
    code, _, err = _main("run", str(case))
    assert code == 2
    assert str(case) in err and "[geometry.file]" in err and "absent.dxf" in err


# --- numbers with units, starter case ----------------------------------------------------------


def test_numbers_with_units_match_the_si_keys(tmp_path):
    si = load_case(_case(tmp_path, SMALL.replace("frequency_hz = 3e8", "frequency_hz = 9.4e9"), "a.toml"))
    text = SMALL.replace("frequency_hz = 3e8", 'frequency = "9.4 GHz"').replace(
        "radius_m = 0.2", 'radius_m = "200 mm"').replace("from_deg = [0, 90]", 'from_deg = [0, "90 deg"]')
    units = load_case(_case(tmp_path, text, "b.toml"))
    assert units.problem.frequencies_hz == si.problem.frequencies_hz == (9.4e9,)
    assert units.problem.scatterers[0].body.area() == pytest.approx(si.problem.scatterers[0].body.area(), rel=1e-15)
    assert [w.from_deg for w in units.problem.incidents] == [0.0, 90.0]
    inch = load_case(_case(tmp_path, SMALL.replace("radius_m = 0.2", 'radius_m = "1 in"'), "c.toml"))
    assert inch.problem.scatterers[0].body.outer.perimeter() == pytest.approx(2 * 3.141592653589793 * 0.0254)


def test_units_of_the_wrong_kind_are_refused(tmp_path):
    code, _, err = _main("run", str(_case(tmp_path, SMALL.replace("radius_m = 0.2", 'radius_m = "2 GHz"'))))
    assert code == 2 and "[body.0.shape.radius_m]" in err and "25 mm" in err


def test_new_writes_a_starter_that_runs_as_written(tmp_path):
    case = tmp_path / "starter.toml"
    assert _main("new", str(case))[0] == 0
    text = case.read_text()
    assert text.count("#") > 20  # commented
    assert _main("new", str(case))[0] == 2  # never replaced without --force
    code, _, err = _main("run", str(case), "--out", str(tmp_path / "out"), "--quiet")
    assert code == 0, err
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    assert summary["inputs"]["frequencies_hz"] == [9.4e9] and summary["warnings"] == []


# --- locks, signals ----------------------------------------------------------------------------

SLOW = """
title = "slow"
[wave]
field = "tm"
frequency_hz = { start = 3e9, stop = 4e9, count = 40 }
[[body]]
shape = { kind = "circle", radius_m = 0.5 }
boundary = "pec"
[far_field]
angles_deg = { start = 0, stop = 360, count = 37 }
[output]
plots = false
vtk = false
"""


def _start_slow(tmp_path: Path, out: Path) -> subprocess.Popen[str]:
    case = _case(tmp_path, SLOW, "slow.toml")
    exe = Path(sys.executable).with_name("sectionwave")
    proc = subprocess.Popen([str(exe), "run", str(case), "--out", str(out)],
                            stderr=subprocess.PIPE, stdout=subprocess.DEVNULL, text=True)
    assert proc.stderr is not None
    line = proc.stderr.readline()  # progress is printed as plain lines when stderr is a pipe
    assert line.startswith("frequency 1/40"), line
    return proc


def test_second_run_into_one_folder_is_refused_and_sigterm_acts_like_ctrl_c(tmp_path):
    out = tmp_path / "results"
    proc = _start_slow(tmp_path, out)
    try:
        code, _, err = _main("run", str(_case(tmp_path, SMALL)), "--out", str(out), "--quiet")
        assert code == 2
        (line,) = err.strip().splitlines()
        assert "another sectionwave run is writing into this folder" in line
        time.sleep(0.5)
        proc.send_signal(signal.SIGTERM)
        _, rest = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 130, rest
    # a sweep stops after the frequency under way and keeps what it solved (for --resume)
    assert ("interrupted" in rest or "stopped:" in rest) and "Traceback" not in rest
    assert not out.exists()
    # no staging, no lock left; only the solved frequencies, kept for --resume
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == [".results.sweep"]
    # the folder is free again (a fresh run over the kept frequencies needs --force)
    assert _main("run", str(_case(tmp_path, SMALL)), "--out", str(out), "--quiet", "--force")[0] == 0


def test_output_folder_that_cannot_be_made(tmp_path):
    blocker = tmp_path / "plain-file"
    blocker.write_text("x")
    code, _, err = _main("run", str(_case(tmp_path, SMALL)), "--out", str(blocker / "out"))
    assert code == 2 and "cannot create the folder" in err and "choose another --out" in err
    assert len(err.strip().splitlines()) == 1


def test_unwritable_output_folder(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("the superuser writes anywhere")
    locked = tmp_path / "ro"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        code, _, err = _main("run", str(_case(tmp_path, SMALL)), "--out", str(locked / "out"))
    finally:
        locked.chmod(0o700)
    assert code == 2 and "not writable" in err


# --- determinism -------------------------------------------------------------------------------


def test_the_same_case_twice_gives_identical_csv(tmp_path):
    case = _case(tmp_path, SMALL)
    for name in ("a", "b"):
        assert _main("run", str(case), "--out", str(tmp_path / name), "--quiet")[0] == 0
    csvs = sorted(p.name for p in (tmp_path / "a").glob("*.csv"))
    assert "farfield.csv" in csvs and "surface.csv" in csvs
    for name in csvs:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name


def test_progress_lines_per_frequency_and_nothing_when_quiet(tmp_path):
    text = SMALL.replace("frequency_hz = 3e8", "frequency_hz = [3e8, 4e8, 5e8]")
    case = _case(tmp_path, text)
    code, _, err = _main("run", str(case), "--out", str(tmp_path / "a"))
    assert code == 0
    lines = err.splitlines()
    assert lines[0] == "frequency 1/3: 3e+08 Hz"
    assert lines[1].startswith("frequency 2/3: 4e+08 Hz (about ") and lines[1].endswith(" s left)")
    code, _, err = _main("run", str(case), "--out", str(tmp_path / "b"), "--quiet")
    assert code == 0 and err == ""
