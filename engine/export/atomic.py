"""Write files and whole output folders so that no half-written result survives.

Glossary
--------
atomic write
    The bytes go to a temporary file in the destination folder, are flushed
    to disk (``fsync``) and the temporary file is renamed over the
    destination with :func:`os.replace`. A reader sees either the old file
    or the complete new one. On any exception, ``KeyboardInterrupt``
    included, the temporary file is removed and the destination is left as
    it was.
staged output folder
    A run writes everything into a hidden sibling folder
    (``.<name>.staging-XXXX``) and the folder is renamed into place when the
    run ends without error. An interrupted or failed run removes the staging
    folder and leaves earlier results untouched.
output marker
    A small file, :data:`OUTPUT_MARKER`, that :func:`staged_output_dir`
    places in every folder it produces (and :func:`prepare_output_dir` in a
    folder it creates or finds empty). With ``force=True`` an existing
    non-empty folder is replaced only when it carries this marker, so a
    mistyped ``--force`` pointing at a home or source folder deletes nothing.
"""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import IO, Literal, cast, overload

from .errors import OutputExistsError

__all__ = [
    "OUTPUT_MARKER",
    "atomic_path",
    "atomic_write",
    "atomic_write_bytes",
    "atomic_write_text",
    "prepare_output_dir",
    "staged_output_dir",
]

#: Name of the marker file written into every staged output folder.
OUTPUT_MARKER = ".sectionwave-output"

_TEMP_TAG = ".tmp"


def _fsync_dir(folder: Path) -> None:
    """Flush a folder's entry table so a rename survives a power cut (POSIX only)."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        # Some file systems (network mounts) refuse fsync on a folder; the
        # rename itself has still happened.
        pass
    finally:
        os.close(fd)


def _remove_quietly(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        path.unlink()


def _create_temp_file(target: Path) -> tuple[Path, int]:
    """Create an empty, exclusively opened temporary file beside ``target``.

    The temporary name keeps the target's suffix so that writers which guess
    the format from the name (meshio) still recognise it. The file is created
    with mode 0o666 minus the umask, like an ordinary new file, unlike
    :func:`tempfile.mkstemp` whose files are private (0o600).
    """
    folder = target.parent
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    while True:
        name = f".{target.stem}.{secrets.token_hex(6)}{_TEMP_TAG}{target.suffix}"
        candidate = folder / name
        try:
            fd = os.open(candidate, flags, 0o666)
        except FileExistsError:
            continue
        return candidate, fd


@contextlib.contextmanager
def _replace_on_success(temp: Path, target: Path) -> Iterator[None]:
    """Rename ``temp`` onto ``target`` when the block succeeds, else remove it.

    The block writes and flushes ``temp``; on any exception raised inside
    it, ``KeyboardInterrupt`` included, ``temp`` is removed, the exception
    propagates and ``target`` is untouched.
    """
    try:
        yield
        os.replace(temp, target)
    except BaseException:
        _remove_quietly(temp)
        raise
    _fsync_dir(target.parent)


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path to write to; move it onto ``path`` on success.

    Use this for writers that want a file name rather than a file object
    (meshio, matplotlib). The temporary file exists, empty, when the block
    starts; the block may overwrite it.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file. Its folder must exist.

    Yields
    ------
    pathlib.Path
        Temporary file in the same folder, with the same suffix.

    Raises
    ------
    FileNotFoundError
        If the destination folder does not exist.

    Notes
    -----
    On any exception raised inside the block, ``KeyboardInterrupt`` included,
    the temporary file is removed and the destination is untouched.
    """
    target = Path(path)
    temp, fd = _create_temp_file(target)
    os.close(fd)
    with _replace_on_success(temp, target):
        yield temp
        # Flush what the writer left in the file before the rename, so the
        # destination never names a file whose data is still in a cache.
        with open(temp, "rb+") as handle:
            os.fsync(handle.fileno())


@overload
def atomic_write(
    path: str | os.PathLike[str], mode: Literal["w"] = ..., *, encoding: str = ...
) -> contextlib.AbstractContextManager[IO[str]]: ...
@overload
def atomic_write(
    path: str | os.PathLike[str], mode: Literal["wb"], *, encoding: str = ...
) -> contextlib.AbstractContextManager[IO[bytes]]: ...
def atomic_write(
    path: str | os.PathLike[str], mode: str = "w", *, encoding: str = "utf-8"
) -> contextlib.AbstractContextManager[IO[str]] | contextlib.AbstractContextManager[IO[bytes]]:
    """Open a file for writing that appears at ``path`` only when complete.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file. Its folder must exist.
    mode : {"w", "wb"}
        Text (UTF-8 by default, bare line-feed line endings on every
        platform) or binary.
    encoding : str
        Text encoding, ignored in binary mode.

    Returns
    -------
    contextlib.AbstractContextManager
        Context manager yielding the open file object.

    Raises
    ------
    ValueError
        If ``mode`` is not ``"w"`` or ``"wb"``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_write(folder / "a.txt") as f:
    ...     _ = f.write("hello")
    >>> (folder / "a.txt").read_text()
    'hello'
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"atomic_write mode must be 'w' or 'wb', not {mode!r}")
    return cast(
        "contextlib.AbstractContextManager[IO[str]]",
        _atomic_write(Path(path), mode, encoding),
    )


@contextlib.contextmanager
def _atomic_write(path: Path, mode: str, encoding: str) -> Iterator[IO[str] | IO[bytes]]:
    temp, fd = _create_temp_file(path)
    with _replace_on_success(temp, path):
        handle: IO[str] | IO[bytes]
        if mode == "wb":
            handle = os.fdopen(fd, "wb")
        else:
            handle = os.fdopen(fd, "w", encoding=encoding, newline="\n")
        with handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())


def atomic_write_text(path: str | os.PathLike[str], text: str, *, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file. Its folder must exist.
    text : str
        Content; line feeds are written as they are on every platform.
    encoding : str
        Text encoding.

    Returns
    -------
    pathlib.Path
        The destination.
    """
    with atomic_write(path, "w", encoding=encoding) as handle:
        handle.write(text)
    return Path(path)


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file. Its folder must exist.
    data : bytes
        Content.

    Returns
    -------
    pathlib.Path
        The destination.
    """
    with atomic_write(path, "wb") as handle:
        handle.write(data)
    return Path(path)


def _write_marker(folder: Path) -> None:
    (folder / OUTPUT_MARKER).write_text(
        "This folder was written by sectionwave; --force may replace it.\n",
        encoding="utf-8",
    )


def _refusal(folder: Path, why: str) -> OutputExistsError:
    return OutputExistsError(
        f"output folder {str(folder)!r} {why}; pass --force to replace it or choose another folder"
    )


def _is_nonempty_dir(folder: Path) -> bool:
    with os.scandir(folder) as entries:
        return any(True for _ in entries)


def prepare_output_dir(path: str | os.PathLike[str], *, force: bool) -> Path:
    """Create an output folder, refusing one that already holds files.

    Parameters
    ----------
    path : str or os.PathLike
        Output folder; missing parents are created.
    force : bool
        Accept an existing non-empty folder. Its files are kept; files the
        run writes replace those of the same name (each atomically).

    Returns
    -------
    pathlib.Path
        The folder, as an absolute path. A folder that was missing or empty
        receives the :data:`OUTPUT_MARKER` file.

    Raises
    ------
    OutputExistsError
        If ``path`` is an existing non-empty folder and ``force`` is false,
        or if ``path`` exists and is not a folder (whatever ``force``).

    See Also
    --------
    staged_output_dir : all-or-nothing variant for a whole run.
    """
    folder = Path(path).absolute()
    if folder.exists() and not folder.is_dir():
        raise OutputExistsError(
            f"output folder {str(folder)!r} exists and is not a folder; choose another folder"
        )
    is_fresh = not folder.is_dir() or not _is_nonempty_dir(folder)
    if not is_fresh and not force:
        raise _refusal(folder, "already exists and is not empty")
    folder.mkdir(parents=True, exist_ok=True)
    if is_fresh:
        # Only a folder this run starts empty is marked as ours, so a later
        # staged run with --force may replace it; a foreign folder accepted
        # with --force stays unmarked.
        _write_marker(folder)
    return folder


def _check_replaceable(folder: Path, *, force: bool) -> None:
    """Raise unless ``folder`` is absent, empty, or an output we may replace."""
    if not folder.exists():
        return
    if not folder.is_dir():
        raise OutputExistsError(
            f"output folder {str(folder)!r} exists and is not a folder; choose another folder"
        )
    if not _is_nonempty_dir(folder):
        return
    if not force:
        raise _refusal(folder, "already exists and is not empty")
    if not (folder / OUTPUT_MARKER).is_file():
        raise OutputExistsError(
            f"output folder {str(folder)!r} is not empty and was not written by "
            f"sectionwave (no {OUTPUT_MARKER} file), so it is not replaced even with "
            "--force; choose another folder or empty it yourself"
        )


@contextlib.contextmanager
def staged_output_dir(path: str | os.PathLike[str], *, force: bool) -> Iterator[Path]:
    """Collect a run's files in a staging folder and move it into place at the end.

    Parameters
    ----------
    path : str or os.PathLike
        Final output folder; missing parents are created.
    force : bool
        Replace an existing non-empty output folder, but only one produced by
        this function earlier (it carries :data:`OUTPUT_MARKER`).

    Yields
    ------
    pathlib.Path
        Empty staging folder, a hidden sibling of ``path``. Write every output
        file into it.

    Raises
    ------
    OutputExistsError
        Before the block runs, if ``path`` cannot be replaced (see
        ``force``); after it, if another process filled ``path`` in the
        meantime, in which case the staging folder is kept and named in the
        message so that the run's results are not lost.

    Notes
    -----
    The check is made before the block runs, so a run fails early instead of
    after an hour of solving. When the block raises, ``KeyboardInterrupt``
    included, the staging folder is removed and ``path`` is untouched. When
    it succeeds, the old folder (if any) is renamed aside, the staging folder
    renamed to ``path`` and the old folder deleted; if the second rename
    fails the old folder is put back. Both renames stay within one parent
    folder, so they are atomic on one file system.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "results"
    >>> with staged_output_dir(out, force=False) as stage:
    ...     _ = (stage / "echo_width.csv").write_text("x")
    >>> sorted(p.name for p in out.iterdir())
    ['.sectionwave-output', 'echo_width.csv']
    """
    # Resolved, so that for a symbolic link the real folder is replaced and
    # the staging folder sits beside it, on the same file system.
    target = Path(path).resolve()
    _check_replaceable(target, force=force)
    target.parent.mkdir(parents=True, exist_ok=True)
    stage = _make_sibling_dir(target, "staging")
    try:
        yield stage
        _write_marker(stage)
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    try:
        _check_replaceable(target, force=force)
    except OutputExistsError as exc:
        raise OutputExistsError(f"{exc}; this run's results were kept in {str(stage)!r}") from None
    _move_into_place(stage, target)


def _unused_sibling(target: Path, tag: str) -> Path:
    while True:
        candidate = target.parent / f".{target.name}.{tag}-{secrets.token_hex(6)}"
        if not os.path.lexists(candidate):
            return candidate


def _make_sibling_dir(target: Path, tag: str) -> Path:
    """Create a hidden, uniquely named sibling folder of ``target``.

    ``os.mkdir`` with mode 0o777 honours the umask, so the finished output
    folder gets ordinary permissions (``tempfile.mkdtemp`` would make it
    private to the user).
    """
    while True:
        candidate = _unused_sibling(target, tag)
        try:
            os.mkdir(candidate, 0o777)
        except FileExistsError:
            continue
        return candidate


def _move_into_place(stage: Path, target: Path) -> None:
    """Rename ``stage`` to ``target``, replacing an existing ``target``."""
    if not target.exists():
        os.replace(stage, target)
        _fsync_dir(target.parent)
        return
    backup = _unused_sibling(target, "old")
    # The old results sit under the backup name until the new ones are in
    # place, so a failure between the two renames can put them back.
    os.replace(target, backup)
    try:
        os.replace(stage, target)
    except BaseException:
        os.replace(backup, target)
        raise
    _fsync_dir(target.parent)
    shutil.rmtree(backup, ignore_errors=True)
