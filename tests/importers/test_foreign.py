"""Drawings written by other programs (tests/data/foreign) read back right.

Each file has ``NAME.json`` beside it (written by ``make_foreign.py``): the
writer, its version and command, and the area, perimeter, hole count and
body count computed by shapely from the coordinates the file was made
from, with a tolerance that states how the writer approximates curves.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sectionwave.importers import clean_drawing, read_drawing

FOREIGN = Path(__file__).parents[1] / "data" / "foreign"
RECORDS = sorted(FOREIGN.glob("*.json"))


def test_corpus_size():
    writers = {json.loads(p.read_text())["writer"].split(" (")[0] for p in RECORDS}
    assert len(RECORDS) >= 8 and len(writers) >= 5


@pytest.mark.parametrize("record", RECORDS, ids=[p.stem for p in RECORDS])
def test_foreign_drawing_reads_right(record):
    meta = json.loads(record.read_text())
    res = clean_drawing(read_drawing(FOREIGN / meta["file"], **meta["reader_options"]))
    assert res.is_ok, [e.message for e in res.audit.errors]
    exp = meta["expected"]
    area = sum(b.area() for b in res.bodies)
    perimeter = sum(b.perimeter() for b in res.bodies)
    assert len(res.bodies) == exp["bodies"]
    assert sum(len(b.holes) for b in res.bodies) == exp["holes"]
    assert area == pytest.approx(exp["area_m2"], rel=meta["rel_tol"])
    assert perimeter == pytest.approx(exp["perimeter_m"], rel=meta["rel_tol"])
