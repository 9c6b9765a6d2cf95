"""Property-based checks of the case loader (hypothesis, derandomised).

Random case documents, built from the schema's own keys with values of
every TOML type (NaN, infinities, huge integers, texts with and without
units, nested tables) and from random bytes, raise nothing but the
project's own errors; when they are accepted, the absurd-size refusal and
the guardrails run on them without other errors. Source: the schema in
``engine/case.py`` (common practice for loaders of user files).
"""

from __future__ import annotations

import math
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sectionwave.engine.case import KNOWN_KEYS, SHAPE_KEYS, load_case, parse_case, refuse_absurd
from sectionwave.importers import SectionwaveError

SETTINGS = settings(max_examples=300, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

SCALARS = st.one_of(
    st.integers(-10**30, 10**30),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0, 1, -1, 1e-320, 1e308, 3e9, 0.05, 90, 16, 1e-8]),
    st.booleans(),
    st.text(max_size=12),
    st.sampled_from(["tm", "te", "acoustic", "pec", "soft", "hard", "impedance", "penetrable", "circle",
                     "rectangle", "polygon", "ellipse", "plane", "line", "9.4 GHz", "25 mm", "30 deg",
                     "-5 m", "2 GHz", "1e400 Hz", "mm", "engineering", "db", "graded"]),
)
VALUES = st.recursive(
    SCALARS,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.sampled_from(["start", "stop", "count", "kind", "x"]), inner,
                                            max_size=3)),
    max_leaves=8,
)
ALL_KEYS = sorted({k for keys in KNOWN_KEYS.values() for k in keys} | {k for keys in SHAPE_KEYS.values() for k in keys})


def tables(keys):
    return st.dictionaries(st.sampled_from(sorted(keys)) | st.text(max_size=6), VALUES, max_size=5)


@st.composite
def documents(draw):
    shape = draw(st.one_of(
        st.fixed_dictionaries({"kind": st.sampled_from(sorted(SHAPE_KEYS))},
                              optional={k: VALUES for k in ALL_KEYS if k.endswith("_m") or k.endswith("_deg")}),
        VALUES,
    ))
    body = draw(tables(KNOWN_KEYS["body"]))
    if draw(st.booleans()):
        body["shape"] = shape
    doc = {
        "wave": draw(st.one_of(st.fixed_dictionaries(
            {"field": st.sampled_from(["tm", "te", "acoustic"]), "frequency_hz": VALUES}),
            tables(KNOWN_KEYS["wave"]))),
        "body": draw(st.one_of(st.just([body]), st.lists(tables(KNOWN_KEYS["body"]), max_size=2), VALUES)),
    }
    for table in ("incident", "far_field", "near_field", "solver", "output", "run"):
        if draw(st.booleans()):
            t = draw(tables(KNOWN_KEYS[table]))
            doc[table] = [t] if table == "incident" else t
    if draw(st.booleans()):
        doc[draw(st.text(max_size=6))] = draw(VALUES)
    return doc


@SETTINGS
@given(documents())
def test_random_documents_raise_only_our_errors(doc):
    try:
        case = parse_case(doc, source="random.toml", base_dir=Path("/nonexistent"))
    except SectionwaveError as exc:
        assert str(exc).startswith("random.toml: "), exc
        return
    try:
        refuse_absurd(case)
    except SectionwaveError:
        return
    from sectionwave.engine.guardrails import check_problem, estimate_panels

    check_problem(case.problem)
    assert not math.isnan(estimate_panels(case.problem).panels)


@settings(max_examples=300, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=200) | st.text(max_size=200).map(str.encode))
def test_random_bytes_raise_only_our_errors(tmp_path, data):
    path = tmp_path / "random.toml"
    path.write_bytes(data)
    try:
        load_case(path)
    except SectionwaveError as exc:
        assert str(path) in str(exc)
