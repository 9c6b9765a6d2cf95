"""CSV tables, complex splitting and the time-convention option."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sectionwave.engine.export import (
    ExportError,
    conjugate_for_convention,
    read_csv,
    split_complex,
    write_csv,
)


def test_csv_round_trip_is_exact(tmp_path: Path) -> None:
    rng = np.random.default_rng(20261)
    angle = np.linspace(0.0, 360.0, 721)
    echo = rng.normal(size=angle.size) * 1e-7 + 1.0 / 3.0
    echo[5] = np.nan
    echo[6] = np.inf
    echo[7] = -np.inf
    lit = rng.random(angle.size) > 0.5
    out = write_csv(
        tmp_path / "echo_width.csv",
        {"angle_deg": angle, "echo_width_db_m": echo, "is_lit": lit, "body": np.arange(721)},
        header_comment="case: circle\nfrequency_hz = 1e9",
    )
    back = read_csv(out)
    assert list(back) == ["angle_deg", "echo_width_db_m", "is_lit", "body"]  # order kept
    np.testing.assert_array_equal(back["angle_deg"], angle)  # round trip, exact (repr)
    np.testing.assert_array_equal(back["echo_width_db_m"], echo)  # exact, nan/inf included
    np.testing.assert_array_equal(back["is_lit"], lit.astype(int))  # booleans as 0/1
    assert back["body"].dtype == np.int64  # integers stay integers


def test_csv_layout(tmp_path: Path) -> None:
    out = write_csv(
        tmp_path / "t.csv",
        {"x_m": [0.1, 1e-300], "ok": [True, False]},
        header_comment="two\nlines",
    )
    assert out.read_text() == "# two\n# lines\nx_m,ok\n0.1,1\n1e-300,0\n"  # exact layout


def test_complex_column_becomes_re_and_im(tmp_path: Path) -> None:
    values = np.array([1 + 2j, -0.5 - 1e-17j])
    back = read_csv(write_csv(tmp_path / "f.csv", {"f_far": values}))
    assert list(back) == ["f_far_re", "f_far_im"]
    np.testing.assert_array_equal(back["f_far_re"] + 1j * back["f_far_im"], values)  # exact


def test_string_column_and_quoting(tmp_path: Path) -> None:
    back = read_csv(write_csv(tmp_path / "s.csv", {"label": ["a,b", 'say "hi"'], "n": [1, 2]}))
    assert back["label"].tolist() == ["a,b", 'say "hi"']  # csv quoting, exact


@pytest.mark.parametrize(
    ("columns", "match"),
    [
        ({}, "no columns"),
        ({"a": [1, 2], "b": [1]}, "differ in length"),
        ({"a": [[1, 2]]}, "one-dimensional"),
        ({"a\nb": [1]}, "bad CSV column name"),
        ({"z": [1j], "z_re": [1.0]}, "appears twice"),
        ({"o": np.array([object()])}, "unsupported type"),
    ],
)
def test_csv_rejects_bad_columns(tmp_path: Path, columns: dict, match: str) -> None:
    with pytest.raises(ExportError, match=match):
        write_csv(tmp_path / "bad.csv", columns)
    assert not (tmp_path / "bad.csv").exists()  # nothing written


def test_read_csv_reports_ragged_rows(tmp_path: Path) -> None:
    (tmp_path / "r.csv").write_text("a,b\n1,2\n3\n")
    with pytest.raises(ExportError, match="row 3 has 1 fields"):
        read_csv(tmp_path / "r.csv")


def test_physics_convention_is_the_complex_conjugate() -> None:
    # exp(+j w t) phasor u <-> exp(-i w t) phasor conj(u): both describe the
    # real field Re(u exp(j w t)) = Re(conj(u) exp(-j w t)) (identity).
    rng = np.random.default_rng(7)
    u = rng.normal(size=(3, 4)) + 1j * rng.normal(size=(3, 4))
    phys = conjugate_for_convention(u, "physics")
    np.testing.assert_array_equal(phys, np.conj(u))  # definition, exact
    wt = 0.83
    np.testing.assert_allclose(
        (phys * np.exp(-1j * wt)).real, (u * np.exp(1j * wt)).real, rtol=0, atol=1e-15
    )  # same real-time field, identity, atol 1e-15
    eng = conjugate_for_convention(u)
    np.testing.assert_array_equal(eng, u)  # default engineering: unchanged, exact
    eng[0, 0] = 0
    assert u[0, 0] != 0  # a copy, the input is not modified


def test_unknown_convention_is_refused() -> None:
    with pytest.raises(ExportError, match="engineering, physics"):
        conjugate_for_convention([1j], "exp(-iwt)")  # type: ignore[arg-type]


def test_split_complex_parts() -> None:
    u = np.array([3 + 4j, -1.0 + 0j, 0.0, np.nan + 0j, -1j])
    parts = split_complex("u", u)
    assert list(parts) == ["u_re", "u_im", "u_abs", "u_phase_deg", "u_db"]
    np.testing.assert_allclose(parts["u_abs"][:3], [5.0, 1.0, 0.0], atol=0)  # exact
    np.testing.assert_allclose(parts["u_phase_deg"][[1, 4]], [180.0, -90.0], atol=1e-12)
    np.testing.assert_allclose(parts["u_db"][:3], [20 * np.log10(5.0), 0.0, -400.0], atol=1e-12)
    assert np.isnan(parts["u_db"][3]) and np.isnan(parts["u_abs"][3])  # NaN stays NaN
