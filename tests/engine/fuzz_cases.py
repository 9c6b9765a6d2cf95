"""Mutation fuzzing of the case loader: only sectionwave's own errors may escape.

Seeds are the case files kept in the repository (samples, the bad-input
corpus, the starter case of ``sectionwave new``). Each round takes a seed,
applies one to three random mutations (a number replaced by NaN, infinity,
zero, a negative, huge or tiny value or a text with units; a line deleted,
repeated or swapped; a known key inserted with a random value; a key
misspelt; bytes flipped; junk inserted), writes it beside the seed's
drawings (so relative drawing paths still resolve) and runs ``load_case``
(validation, drawing, the absurd-size refusal). A finding is any exception
that is not a ``SectionwaveError``, a round slower than ``--slow`` seconds,
or a hang (stopped after ``--hang`` seconds); each is saved with its
traceback under ``--out``.

Repeat the recorded run with::

    .venv/bin/python tests/engine/fuzz_cases.py --minutes 5 --seed 1

Exit code 0 when nothing was found, 1 otherwise.
"""

from __future__ import annotations

import logging
import random
import re
import shutil
import sys
import tempfile
import warnings
from collections.abc import Callable
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests" / "importers"))
from fuzz_drawings import command_line, fuzz_rounds  # noqa: E402 - the drawing fuzzer's loop, shared

SEED_DIRS = [ROOT / "samples", ROOT / "tests" / "data" / "bad"]
VALUES = [b"nan", b"inf", b"-inf", b"0", b"-0", b"-1", b"1e308", b"-1e308", b"1e-320", b"1e400",
          b"99999999999999999999", b'"9.4 GHz"', b'"25 mm"', b'"2 GHz"', b'"abc"', b'""', b"true",
          b"[]", b"[1, 2]", b"[[1, 2], [3]]", b"{}", b"{ start = 0, stop = 1, count = 0 }",
          b'{ kind = "circle" }', b'"-5 m"', b'"1e400 Hz"', b'"nan deg"']
KEYS = [b"frequency_hz", b"frequency", b"radius_m", b"from_deg", b"angles_deg", b"tolerance",
        b"nodes_per_panel", b"max_panel_wavelengths", b"max_refinements", b"corners", b"x_m", b"y_m",
        b"spacing_m", b"count", b"probes_csv", b"file", b"units", b"layer", b"point_m", b"boundary",
        b"impedance", b"material", b"eps_r", b"loss_tangent", b"sound_speed_m_s", b"accept_warnings",
        b"plot_from_deg", b"field_map", b"surface_csv", b"time_convention", b"shape", b"kind"]
_NUM = re.compile(rb"[-+]?\d+\.?\d*(?:[eE][-+]?\d+)?")


def mutate(data: bytes, rng: random.Random) -> bytes:
    """One random mutation of a case file's bytes."""
    lines = data.split(b"\n")
    kind = rng.randrange(8)
    if kind == 0:  # a number replaced
        nums = list(_NUM.finditer(data))
        if nums:
            m = rng.choice(nums)
            return data[: m.start()] + rng.choice(VALUES) + data[m.end():]
    if kind == 1 and lines:  # a line deleted
        del lines[rng.randrange(len(lines))]
        return b"\n".join(lines)
    if kind == 2 and lines:  # a line repeated
        i = rng.randrange(len(lines))
        lines.insert(i, lines[i])
        return b"\n".join(lines)
    if kind == 3 and len(lines) > 1:  # two lines swapped
        i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
        return b"\n".join(lines)
    if kind == 4:  # a known key with a random value, somewhere
        lines.insert(rng.randrange(len(lines) + 1), rng.choice(KEYS) + b" = " + rng.choice(VALUES))
        return b"\n".join(lines)
    if kind == 5:  # a key misspelt
        keys = [k for k in KEYS if k in data]
        if keys:
            k = rng.choice(keys)
            i = rng.randrange(len(k))
            return data.replace(k, k[:i] + k[i + 1:], 1)
    if kind == 6 and data:  # bytes flipped
        buf = bytearray(data)
        for _ in range(rng.randrange(1, 4)):
            buf[rng.randrange(len(buf))] = rng.randrange(256)
        return bytes(buf)
    pos = rng.randrange(len(data) + 1)
    junk = rng.choice([b"[", b"]]", b"[[body]]\n", b"[wave]\n", b"=", b"\x00", b'"', b"\n[solver]\n",
                       b"\n[[incident]]\nkind = \"line\"\n"])
    return data[:pos] + junk + data[pos:]


def _seeds() -> list[tuple[Path, bytes]]:
    from sectionwave.engine.starter import STARTER_CASE

    seeds = [(p, p.read_bytes()) for d in SEED_DIRS if d.is_dir() for p in sorted(d.glob("*.toml"))]
    seeds.append((ROOT / "starter.toml", STARTER_CASE.encode()))
    return seeds


def run(minutes: float, seed: int, out: Path, slow: float, hang: float) -> int:
    from sectionwave.engine.case import load_case, refuse_absurd  # noqa: F401 - load_case refuses too
    from sectionwave.importers import SectionwaveError

    logging.disable(logging.CRITICAL)
    warnings.simplefilter("ignore")
    blobs = _seeds()
    rng = random.Random(seed)
    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        # the seeds' drawings and probe files, so that relative paths resolve
        for d in SEED_DIRS + [ROOT / "samples" / "drawings"]:
            for p in d.glob("*"):
                if p.is_file() and p.suffix.lower() in {".dxf", ".svg", ".csv"} and p.stat().st_size < 2_000_000:
                    shutil.copy(p, Path(tmp) / p.name)
        (Path(tmp) / "drawings").mkdir()
        for p in (ROOT / "samples" / "drawings").glob("*"):
            if p.suffix.lower() in {".dxf", ".svg"}:
                shutil.copy(p, Path(tmp) / "drawings" / p.name)
        path = Path(tmp) / "case.toml"

        def attempt(src: Path, data: bytes, rng: random.Random) -> tuple[Callable[[], object], str, str]:
            path.write_bytes(data)
            return (lambda: load_case(path)), "", ".toml"

        rounds, findings, worst = fuzz_rounds(blobs, rng, minutes, out, slow, hang, mutate_fn=mutate,
                                              attempt=attempt, ours=SectionwaveError, prefix="case-finding")
    print(f"{rounds} rounds from {len(blobs)} seed case files in {minutes:g} min (seed {seed}): "
          f"{findings} finding(s); slowest round {worst[0]:.2f} s (from {worst[1]})")
    return 1 if findings else 0


def main(argv: list[str] | None = None) -> int:
    """Command line of the fuzzer."""
    return command_line(run, __doc__ or "", argv)


if __name__ == "__main__":
    sys.exit(main())
