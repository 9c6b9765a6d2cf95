"""The case-file entries of the bad-input corpus (tests/data/bad) through the API.

``tests/importers/test_bad_corpus.py`` runs every entry through the command
line (exit 2, one line naming file, place and fix, nothing written, < 2 s);
here the case entries must raise the named error from ``load_case`` with the
message fragments of the manifest (the unwritable output folder is a command
line matter: the case itself is valid).
"""

from __future__ import annotations

import json
import time
from pathlib import Path

import pytest
from sectionwave.engine import load_case
from sectionwave.importers import SectionwaveError

BAD = Path(__file__).parents[1] / "data" / "bad"
CASES = [c for c in json.loads((BAD / "manifest.json").read_text())["cases"] if c["kind"] == "case"]
API = [c for c in CASES if "--out" not in c["argv"] or "{file}/out" not in c["argv"]]


def test_at_least_fifteen_case_entries():
    assert len(CASES) >= 15
    assert all(c["outcome"] == "refused" for c in CASES)


@pytest.mark.parametrize("case", API, ids=[c["name"] for c in API])
def test_load_case_raises_the_named_error(case):
    path = BAD / case["file"]
    t0 = time.perf_counter()
    with pytest.raises(SectionwaveError) as info:
        load_case(path)
    assert time.perf_counter() - t0 < 2.0
    assert type(info.value).__name__ == case["error"]
    msg = str(info.value)
    assert msg.startswith(str(path)), msg
    for key in ("match", "place", "fix"):
        if case[key]:
            assert case[key] in msg, (key, msg)
