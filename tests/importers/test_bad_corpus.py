"""Bad-input corpus (tests/data/bad): every case refused cleanly, quickly, in one line.

Each case in ``manifest.json`` (written by ``make_corpus.py`` beside it)
names the error class and fragments of the message: what is wrong, where,
and what to do. Through the command line (in-process ``main``) a case must
give exit code 2, exactly one line on stderr naming the file, no traceback,
no file written, in under 2 s; through the importer API it must raise the
named subclass of ``SectionwaveError``.
"""

from __future__ import annotations

import contextlib
import importlib.util
import io
import json
import time
from pathlib import Path
from typing import Any

import pytest
from sectionwave.importers import SectionwaveError, clean_drawing, read_drawing

BAD = Path(__file__).parents[1] / "data" / "bad"

#: Every rejection must take less than this (seconds), command line included.
MAX_SECONDS = 2.0


def _corpus_module() -> Any:
    spec = importlib.util.spec_from_file_location("make_corpus", BAD / "make_corpus.py")
    assert spec is not None and spec.loader is not None
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


CORPUS = _corpus_module()
MANIFEST = json.loads((BAD / "manifest.json").read_text())
CASES = [c for c in MANIFEST["cases"] if c["outcome"] == "refused"]
READ = [c for c in MANIFEST["cases"] if c["outcome"] == "read"]


def test_manifest_is_current_and_large_enough():
    assert MANIFEST == json.loads(json.dumps(CORPUS.manifest()))
    drawings = [c for c in CASES if c["kind"] == "drawing"]
    assert len(drawings) >= 25
    everything = MANIFEST["cases"]
    assert len({c["name"] for c in everything}) == len(everything)
    for c in everything:
        on_disk = (BAD / c["file"]).is_file()
        assert on_disk != c["made_at_test_time"], c["name"]


def _path_of(case: dict[str, Any], tmp_path: Path) -> Path:
    if case["made_at_test_time"]:
        return CORPUS.write_case(case["name"], tmp_path)
    return BAD / case["file"]


@pytest.mark.parametrize("case", CASES, ids=[c["name"] for c in CASES])
def test_cli_refuses_in_one_line(case, tmp_path, monkeypatch):
    from sectionwave.engine.cli import main

    src = tmp_path / "src"
    src.mkdir()
    path = _path_of(case, src)
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    argv = [a.replace("{file}", str(path)) for a in case["argv"]]
    err, out = io.StringIO(), io.StringIO()
    t0 = time.perf_counter()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        code = main(argv)
    elapsed = time.perf_counter() - t0
    lines = [ln for ln in err.getvalue().splitlines() if ln.strip()]
    assert code == 2, (code, lines)
    assert len(lines) == 1, lines
    (line,) = lines
    assert "Traceback" not in err.getvalue() + out.getvalue()
    assert line.startswith("sectionwave: error: ")
    assert str(path) in line
    assert case["match"] in line, line
    if case["place"]:
        assert case["place"] in line, line
    assert case["fix"] in line, line
    assert not list(work.iterdir()), "no file may be written for a bad input"
    assert elapsed < MAX_SECONDS, f"{case['name']}: {elapsed:.2f} s"


@pytest.mark.parametrize("case", [c for c in CASES if c["kind"] == "drawing"],
                         ids=[c["name"] for c in CASES if c["kind"] == "drawing"])
def test_api_raises_the_named_error(case, tmp_path):
    path = _path_of(case, tmp_path)
    with pytest.raises(SectionwaveError) as info:
        clean_drawing(read_drawing(path, **case["api"])).raise_for_errors()
    assert type(info.value).__name__ == case["error"]
    assert case["match"] in str(info.value)


@pytest.mark.parametrize("case", READ, ids=[c["name"] for c in READ])
def test_damaged_but_readable(case, tmp_path, monkeypatch):
    from sectionwave.engine.cli import main

    path = BAD / case["file"]
    monkeypatch.chdir(tmp_path)
    err, out = io.StringIO(), io.StringIO()
    t0 = time.perf_counter()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        code = main(["inspect", str(path)])
    assert code == 0, err.getvalue()
    assert not err.getvalue().strip()
    assert case["note"] in out.getvalue()
    assert time.perf_counter() - t0 < MAX_SECONDS
    assert not list(tmp_path.iterdir())
    res = clean_drawing(read_drawing(path))
    assert res.is_ok and len(res.bodies) == case["bodies"]
