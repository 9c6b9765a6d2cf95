"""Atomic files and staged output folders: nothing half-written survives."""

from __future__ import annotations

import importlib
import os
from pathlib import Path

import pytest
import sectionwave.engine.export as export
from sectionwave.engine.export import (
    OutputExistsError,
    atomic_path,
    atomic_write,
    atomic_write_bytes,
    atomic_write_text,
    prepare_output_dir,
    staged_output_dir,
)
from sectionwave.engine.export.atomic import OUTPUT_MARKER
from sectionwave.importers.errors import SectionwaveError


class Boom(Exception):
    pass


def _names(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


@pytest.mark.parametrize(
    "module",
    [
        "sectionwave.engine.export",
        "sectionwave.engine.export.atomic",
        "sectionwave.engine.export.errors",
        "sectionwave.engine.export.plots",
        "sectionwave.engine.export.tables",
        "sectionwave.engine.export.vtk",
    ],
)
def test_every_name_in_all_resolves(module: str) -> None:
    mod = importlib.import_module(module)
    for name in mod.__all__:
        assert hasattr(mod, name), f"{module}.{name}"  # public surface, STYLE.md rule


def test_importing_the_package_does_not_import_matplotlib_or_meshio() -> None:
    import subprocess
    import sys

    code = (
        "import sys, sectionwave.engine.export;"
        "print('matplotlib' in sys.modules, 'meshio' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False"]  # lazy imports, exact


def test_text_and_bytes_written(tmp_path: Path) -> None:
    atomic_write_text(tmp_path / "a.txt", "line 1\nline 2\n")
    atomic_write_bytes(tmp_path / "b.bin", b"\x00\x01")
    assert (tmp_path / "a.txt").read_bytes() == b"line 1\nline 2\n"  # exact, LF kept
    assert (tmp_path / "b.bin").read_bytes() == b"\x00\x01"  # exact
    assert _names(tmp_path) == ["a.txt", "b.bin"]  # no temporary left


def test_new_file_has_ordinary_permissions(tmp_path: Path) -> None:
    if os.name != "posix":
        pytest.skip("POSIX permissions only")
    umask = os.umask(0o022)
    try:
        atomic_write_text(tmp_path / "a.txt", "x")
    finally:
        os.umask(umask)
    assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o644  # 0o666 minus umask, exact


@pytest.mark.parametrize("error", [Boom, KeyboardInterrupt])
def test_failed_write_keeps_old_file_and_leaves_no_temporary(
    tmp_path: Path, error: type[BaseException]
) -> None:
    target = tmp_path / "result.csv"
    target.write_text("old\n")
    with pytest.raises(error):
        with atomic_write(target) as handle:
            handle.write("new, half")
            raise error()
    assert target.read_text() == "old\n"  # old content untouched, exact
    assert _names(tmp_path) == ["result.csv"]  # temporary removed


@pytest.mark.parametrize("error", [Boom, KeyboardInterrupt])
def test_failed_atomic_path_leaves_nothing(tmp_path: Path, error: type[BaseException]) -> None:
    with pytest.raises(error):
        with atomic_path(tmp_path / "grid.vtu") as temp:
            assert temp.suffix == ".vtu"  # suffix kept for format guessing
            temp.write_bytes(b"partial")
            raise error()
    assert _names(tmp_path) == []  # nothing written, nothing left


def test_atomic_write_rejects_append_mode(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="'w' or 'wb'"):
        atomic_write(tmp_path / "a", "a")  # type: ignore[call-overload]


def test_prepare_output_dir(tmp_path: Path) -> None:
    new = prepare_output_dir(tmp_path / "a" / "b", force=False)
    assert new.is_dir() and new.is_absolute()  # created with parents
    (new / "x.csv").write_text("1")
    with pytest.raises(OutputExistsError) as info:
        prepare_output_dir(new, force=False)
    message = str(info.value)
    assert str(new) in message and "--force" in message and "another folder" in message
    assert isinstance(info.value, SectionwaveError) and isinstance(info.value, FileExistsError)
    assert prepare_output_dir(new, force=True) == new  # accepted with force
    assert (new / "x.csv").read_text() == "1"  # existing files kept
    assert (new / OUTPUT_MARKER).is_file()  # created by us: marked
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine")
    prepare_output_dir(foreign, force=True)
    assert _names(foreign) == ["notes.txt"]  # accepted with force, not marked as ours


def test_prepared_folder_can_be_replaced_by_a_staged_run(tmp_path: Path) -> None:
    out = prepare_output_dir(tmp_path / "results", force=False)
    atomic_write_text(out / "old.csv", "old")
    with staged_output_dir(out, force=True) as stage:
        atomic_write_text(stage / "new.csv", "new")
    assert _names(out) == [OUTPUT_MARKER, "new.csv"]


def test_staged_run_through_a_symlink_replaces_the_real_folder(tmp_path: Path) -> None:
    if os.name != "posix":
        pytest.skip("symbolic links need privileges elsewhere")
    real = tmp_path / "real"
    with staged_output_dir(real, force=False) as stage:
        atomic_write_text(stage / "a.csv", "old")
    (tmp_path / "link").symlink_to(real)
    with staged_output_dir(tmp_path / "link", force=True) as stage:
        assert stage.parent == tmp_path  # staged beside the real folder
        atomic_write_text(stage / "a.csv", "new")
    assert (tmp_path / "link").is_symlink()  # link kept
    assert (tmp_path / "link" / "a.csv").read_text() == "new"  # real folder replaced
    assert _names(tmp_path) == ["link", "real"]  # no staging or backup left


def test_prepare_output_dir_refuses_a_file(tmp_path: Path) -> None:
    (tmp_path / "f").write_text("")
    with pytest.raises(OutputExistsError, match="not a folder"):
        prepare_output_dir(tmp_path / "f", force=True)


def test_staged_output_dir_moves_into_place(tmp_path: Path) -> None:
    out = tmp_path / "results"
    with staged_output_dir(out, force=False) as stage:
        assert stage.parent == tmp_path and stage.name.startswith(".results.staging-")
        assert not out.exists()  # nothing at the destination during the run
        atomic_write_text(stage / "echo_width.csv", "a\n1\n")
    assert _names(out) == [OUTPUT_MARKER, "echo_width.csv"]
    assert _names(tmp_path) == ["results"]  # no staging folder left


@pytest.mark.parametrize("error", [Boom, KeyboardInterrupt])
def test_interrupted_run_leaves_old_results_untouched(
    tmp_path: Path, error: type[BaseException]
) -> None:
    out = tmp_path / "results"
    with staged_output_dir(out, force=False) as stage:
        atomic_write_text(stage / "echo_width.csv", "old\n")
    with pytest.raises(error):
        with staged_output_dir(out, force=True) as stage:
            atomic_write_text(stage / "echo_width.csv", "new\n")
            with atomic_write(stage / "field.vtu") as handle:
                handle.write("half a grid")
                raise error()
    assert (out / "echo_width.csv").read_text() == "old\n"  # old results untouched, exact
    assert _names(out) == [OUTPUT_MARKER, "echo_width.csv"]  # no new, no half file
    assert _names(tmp_path) == ["results"]  # staging folder removed


def test_interrupted_first_run_leaves_nothing(tmp_path: Path) -> None:
    with pytest.raises(KeyboardInterrupt):
        with staged_output_dir(tmp_path / "results", force=False) as stage:
            atomic_write_text(stage / "a.csv", "1")
            raise KeyboardInterrupt
    assert _names(tmp_path) == []  # no destination, no staging


def test_force_replaces_previous_output(tmp_path: Path) -> None:
    out = tmp_path / "results"
    with staged_output_dir(out, force=False) as stage:
        atomic_write_text(stage / "old_only.csv", "old")
    with pytest.raises(OutputExistsError, match="--force"):
        with staged_output_dir(out, force=False):
            pytest.fail("the block must not run when the folder cannot be replaced")
    with staged_output_dir(out, force=True) as stage:
        atomic_write_text(stage / "new.csv", "new")
    assert _names(out) == [OUTPUT_MARKER, "new.csv"]  # replaced wholesale
    assert _names(tmp_path) == ["results"]  # backup removed


def test_force_never_deletes_a_foreign_folder(tmp_path: Path) -> None:
    out = tmp_path / "my_documents"
    out.mkdir()
    (out / "thesis.tex").write_text("precious")
    with pytest.raises(OutputExistsError, match="not written by sectionwave"):
        with staged_output_dir(out, force=True):
            pytest.fail("the block must not run")
    assert (out / "thesis.tex").read_text() == "precious"  # untouched, exact


def test_empty_existing_folder_is_used(tmp_path: Path) -> None:
    out = tmp_path / "results"
    out.mkdir()
    with staged_output_dir(out, force=False) as stage:
        atomic_write_text(stage / "a.csv", "1")
    assert _names(out) == [OUTPUT_MARKER, "a.csv"]


def test_folder_filled_during_run_keeps_this_runs_results(tmp_path: Path) -> None:
    out = tmp_path / "results"
    with pytest.raises(OutputExistsError, match="kept in") as info:
        with staged_output_dir(out, force=False) as stage:
            atomic_write_text(stage / "a.csv", "mine")
            out.mkdir()
            (out / "other.csv").write_text("theirs")
    assert (out / "other.csv").read_text() == "theirs"  # the other process's file untouched
    kept = [p for p in tmp_path.iterdir() if p.name.startswith(".results.staging-")]
    assert len(kept) == 1 and (kept[0] / "a.csv").read_text() == "mine"
    assert str(kept[0]) in str(info.value)


def test_reexported_names_are_the_module_objects() -> None:
    from sectionwave.engine.export import atomic

    assert export.staged_output_dir is atomic.staged_output_dir  # re-export, identity


@pytest.mark.parametrize("module", ["atomic", "tables"])
def test_docstring_examples_run(module: str) -> None:
    import doctest

    mod = importlib.import_module(f"sectionwave.engine.export.{module}")
    result = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0 and result.failed == 0  # STYLE.md: examples run
