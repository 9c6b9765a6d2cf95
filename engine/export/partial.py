"""The sweep folder: each frequency's solution on disk as soon as it is solved.

Glossary
--------
sweep folder
    A hidden sibling of the results folder, ``.<name>.sweep``, that a run
    fills while it solves: ``manifest.json`` (the case hash, the program
    version, the frequencies asked for) and one file per solved frequency,
    ``<frequency>Hz.pickle`` (the ``FrequencySolution`` exactly as solved,
    in Python's pickle format, each written atomically). When the run ends
    the results folder is written from these solutions and the sweep
    folder is removed; after a crash, a kill or a stop request it stays,
    and ``--resume`` continues from it.
case hash
    SHA-256 over the case file's bytes and the bytes of every file the case
    reads (drawings, probe lists), each with its name. A resume refuses a
    sweep folder whose hash differs.

The pickle files are this program's own cache: they are read back only
from a sweep folder this program created beside the results folder, and
only by the same version of the program.
"""

from __future__ import annotations

import hashlib
import json
import pickle
import shutil
from collections.abc import Iterable
from pathlib import Path
from typing import Any

from ..results import FrequencySolution
from .atomic import atomic_write_bytes, atomic_write_text
from .errors import ExportError

__all__ = ["MANIFEST", "SWEEP_SCHEMA", "SweepFolder", "SweepMismatchError", "case_hash", "sweep_folder_for"]

SWEEP_SCHEMA = "sectionwave.sweep/1"
MANIFEST = "manifest.json"
_SUFFIX = "Hz.pickle"


class SweepMismatchError(ExportError):
    """A sweep folder belongs to another case (or another version of the program)."""


def case_hash(case_bytes: bytes, files: Iterable[str | Path] = ()) -> str:
    """SHA-256 (hex) over the case's bytes and each named file's name and bytes.

    Parameters
    ----------
    case_bytes
        The case file as read.
    files
        Files the case reads (drawings, probe lists); missing ones hash as absent.
    """
    h = hashlib.sha256()
    h.update(b"case\0")
    h.update(case_bytes)
    for name in sorted(str(f) for f in files):
        path = Path(name)
        h.update(b"\0file\0" + name.encode("utf-8") + b"\0")
        h.update(path.read_bytes() if path.is_file() else b"<absent>")
    return h.hexdigest()


def sweep_folder_for(results_folder: str | Path) -> Path:
    """The sweep folder that belongs to ``results_folder`` (a hidden sibling)."""
    target = Path(results_folder).resolve()
    return target.parent / f".{target.name}.sweep"


def _file_name(frequency_hz: float) -> str:
    return f"{float(frequency_hz)!r}{_SUFFIX}"


class SweepFolder:
    """The solutions of one run's frequencies, kept on disk as they are solved.

    Parameters
    ----------
    folder
        The sweep folder (see :func:`sweep_folder_for`).
    """

    def __init__(self, folder: str | Path) -> None:
        self.folder = Path(folder)

    @property
    def exists(self) -> bool:
        """True when the folder holds a manifest."""
        return (self.folder / MANIFEST).is_file()

    def manifest(self) -> dict[str, Any]:
        """The manifest as written."""
        try:
            data = json.loads((self.folder / MANIFEST).read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise SweepMismatchError(f"{self.folder}: unreadable sweep manifest ({exc})") from None
        if not isinstance(data, dict) or data.get("schema") != SWEEP_SCHEMA:
            raise SweepMismatchError(f"{self.folder}: not a sweep folder of this program ({MANIFEST})")
        return data

    def start(self, case_digest: str, version: str, frequencies_hz: Iterable[float], **extra: Any) -> None:
        """Create the folder (emptied) and write its manifest."""
        if self.folder.exists():
            shutil.rmtree(self.folder)
        self.folder.mkdir(parents=True)
        manifest = {
            "schema": SWEEP_SCHEMA,
            "case_hash": case_digest,
            "version": version,
            "frequencies_hz": [float(f) for f in frequencies_hz],
            **extra,
        }
        atomic_write_text(self.folder / MANIFEST, json.dumps(manifest, indent=2) + "\n")

    def check(self, case_digest: str, version: str) -> None:
        """Raise :class:`SweepMismatchError` unless the folder belongs to this case and version."""
        data = self.manifest()
        if data.get("case_hash") != case_digest:
            raise SweepMismatchError(
                f"{self.folder}: the case or a file it reads changed since the interrupted run; "
                "run without --resume (with --force) to start over"
            )
        if data.get("version") != version:
            raise SweepMismatchError(
                f"{self.folder}: written by sectionwave {data.get('version')}, this is {version}; "
                "run without --resume (with --force) to start over"
            )

    def save(self, solution: FrequencySolution) -> Path:
        """Write one frequency's solution (atomically: a kill leaves it whole or absent)."""
        data = pickle.dumps(solution, protocol=pickle.HIGHEST_PROTOCOL)
        return atomic_write_bytes(self.folder / _file_name(solution.frequency_hz), data)

    def frequencies(self) -> list[float]:
        """Frequencies whose solution is on disk."""
        out = []
        for path in self.folder.glob("*" + _SUFFIX):
            try:
                out.append(float(path.name[: -len(_SUFFIX)]))
            except ValueError:
                continue
        return sorted(out)

    def load(self, frequencies_hz: Iterable[float] | None = None) -> dict[float, FrequencySolution]:
        """Solutions on disk, keyed by frequency (only ``frequencies_hz`` when given).

        A file that does not read back (cut short by a full disk) is skipped,
        so that frequency is solved again.
        """
        wanted = None if frequencies_hz is None else {float(f) for f in frequencies_hz}
        out: dict[float, FrequencySolution] = {}
        for freq in self.frequencies():
            if wanted is not None and freq not in wanted:
                continue
            try:
                with open(self.folder / _file_name(freq), "rb") as fh:
                    solution = pickle.load(fh)  # noqa: S301 - our own cache, checked by the manifest
            except (OSError, EOFError, pickle.UnpicklingError, AttributeError, ImportError):
                continue
            if isinstance(solution, FrequencySolution) and solution.frequency_hz == freq:
                out[freq] = solution
        return out

    def remove(self) -> None:
        """Delete the folder and everything in it."""
        shutil.rmtree(self.folder, ignore_errors=True)
