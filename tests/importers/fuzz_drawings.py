"""Mutation fuzzing of the drawing readers: only sectionwave's own errors may escape.

Seeds are the drawings kept in the repository (bad corpus, foreign corpus,
samples). Each round takes a seed, applies one to three random mutations
(byte flips, truncation, deleted, repeated or swapped lines, a number
replaced by NaN, infinity, zero, a huge or negative value, junk inserted),
writes it under the seed's suffix and runs ``read_drawing`` then
``clean_drawing``. A finding is any exception that is not a
``SectionwaveError``, a round slower than ``--slow`` seconds, or a hang
(stopped after ``--hang`` seconds); each is saved with its traceback under
``--out``.

Repeat the recorded run with::

    .venv/bin/python tests/importers/fuzz_drawings.py --minutes 10 --seed 1

Exit code 0 when nothing was found, 1 otherwise.
"""

from __future__ import annotations

import argparse
import logging
import random
import re
import signal
import sys
import tempfile
import time
import traceback
import warnings
from collections.abc import Callable
from pathlib import Path
from types import FrameType

ROOT = Path(__file__).resolve().parents[2]
SEED_DIRS = [ROOT / "tests" / "data" / "bad", ROOT / "tests" / "data" / "foreign",
             ROOT / "samples" / "drawings"]
SUFFIXES = {".dxf", ".svg"}
INTERESTING = [b"nan", b"NaN", b"inf", b"-inf", b"1e400", b"-1e400", b"0", b"-0", b"-1",
               b"1e308", b"-1e308", b"1e-320", b"99999999999999999999", b"", b"-", b"1e",
               b"0x10", b"1,5", b"3.0.0"]
_NUM = re.compile(rb"[-+]?\d+\.?\d*(?:[eE][-+]?\d+)?")


class _Hang(Exception):
    pass


def _alarm(signum: int, frame: FrameType | None) -> None:
    raise _Hang()


def mutate(data: bytes, rng: random.Random) -> bytes:
    """One random mutation of ``data``."""
    kind = rng.randrange(8)
    if not data:
        return bytes(rng.randrange(256) for _ in range(rng.randrange(1, 64)))
    if kind == 0:  # flip bytes
        buf = bytearray(data)
        for _ in range(rng.randrange(1, 8)):
            buf[rng.randrange(len(buf))] = rng.randrange(256)
        return bytes(buf)
    if kind == 1:  # truncate
        return data[: rng.randrange(len(data))]
    lines = data.split(b"\n")
    i, j = sorted(rng.randrange(len(lines) + 1) for _ in range(2))
    if kind == 2:  # delete lines
        return b"\n".join(lines[:i] + lines[j:])
    if kind == 3:  # repeat lines
        return b"\n".join(lines[:j] + lines[i:j] * rng.randrange(1, 4) + lines[j:])
    if kind == 4 and len(lines) > 1:  # swap two lines
        a, b = rng.randrange(len(lines)), rng.randrange(len(lines))
        lines[a], lines[b] = lines[b], lines[a]
        return b"\n".join(lines)
    if kind in (4, 5, 6):  # replace numbers
        nums = list(_NUM.finditer(data))
        if not nums:
            return data + b"0"
        out = data
        for mt in sorted(rng.sample(nums, min(len(nums), rng.randrange(1, 4))),
                         key=lambda m: -m.start()):
            out = out[: mt.start()] + rng.choice(INTERESTING) + out[mt.end():]
        return out
    pos = rng.randrange(len(data))  # insert junk
    junk = rng.choice([b"<g>", b"</g>", b"<use href='#x'/>", b"  0\nLINE\n", b"\x00\xff",
                       b"<!ENTITY a 'b'>", b"&amp;", b"\n  0\nEOF\n"])
    return data[:pos] + junk + data[pos:]


def fuzz_rounds(
    blobs: list[tuple[Path, bytes]],
    rng: random.Random,
    minutes: float,
    out: Path,
    slow: float,
    hang: float,
    *,
    mutate_fn: Callable[[bytes, random.Random], bytes],
    attempt: Callable[[Path, bytes, random.Random], tuple[Callable[[], object], str, str]],
    ours: type[BaseException],
    prefix: str,
) -> tuple[int, int, tuple[float, str]]:
    """Mutate seeds and run ``attempt`` until the time is up; keep what is not one of ``ours`` errors.

    ``attempt(seed_path, data, rng)`` writes ``data`` where the reader will
    find it and returns the call to make, a note for the finding and the
    suffix its file gets. Anything but ``ours`` raised, a hang (SIGALRM
    after ``hang`` s) or a round slower than ``slow`` s is a finding, kept
    in ``out`` as ``PREFIXnnn`` with the input and a ``.txt`` report.
    Returns the rounds, the findings and the slowest round (seconds, seed).
    """
    signal.signal(signal.SIGALRM, _alarm)
    deadline = time.monotonic() + 60.0 * minutes
    rounds = findings = 0
    worst = (0.0, "")
    while time.monotonic() < deadline:
        src, data = rng.choice(blobs)
        for _ in range(rng.randrange(1, 4)):
            data = mutate_fn(data, rng)
        call, note, suffix = attempt(src, data, rng)
        problem = ""
        t0 = time.perf_counter()
        signal.setitimer(signal.ITIMER_REAL, hang)
        try:
            call()
        except ours:
            pass
        except _Hang:
            problem = f"hang (stopped after {hang:g} s)"
        except Exception:  # noqa: BLE001 - the point of fuzzing
            problem = traceback.format_exc()
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
        dt = time.perf_counter() - t0
        rounds += 1
        if dt > worst[0]:
            worst = (dt, src.name)
        if not problem and dt > slow:
            problem = f"slow: {dt:.2f} s"
        if problem:
            findings += 1
            stem = out / f"{prefix}{findings:03d}"
            stem.with_suffix(suffix).write_bytes(data)
            stem.with_suffix(".txt").write_text(f"seed file {src.name}{note}, round {rounds}\n{problem}\n")
    return rounds, findings, worst


def run(minutes: float, seed: int, out: Path, slow: float, hang: float) -> int:
    from sectionwave.importers import SectionwaveError, clean_drawing, read_drawing

    logging.disable(logging.CRITICAL)
    warnings.simplefilter("ignore")
    seeds = [p for d in SEED_DIRS if d.is_dir() for p in sorted(d.iterdir())
             if p.suffix.lower() in SUFFIXES and p.stat().st_size < 1_000_000]
    blobs = [(p, p.read_bytes()) for p in seeds]
    rng = random.Random(seed)
    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:

        def attempt(src: Path, data: bytes, rng: random.Random) -> tuple[Callable[[], object], str, str]:
            path = Path(tmp) / f"case{src.suffix}"
            path.write_bytes(data)
            units = "mm" if rng.random() < 0.5 else None
            return (lambda: clean_drawing(read_drawing(path, units=units))), f", units={units!r}", src.suffix

        rounds, findings, worst = fuzz_rounds(blobs, rng, minutes, out, slow, hang, mutate_fn=mutate,
                                              attempt=attempt, ours=SectionwaveError, prefix="finding")
    print(f"{rounds} rounds from {len(blobs)} seed files in {minutes:g} min (seed {seed}): "
          f"{findings} finding(s); slowest round {worst[0]:.2f} s (from {worst[1]})")
    return 1 if findings else 0


def command_line(run_fn: Callable[[float, int, Path, float, float], int], doc: str,
                 argv: list[str] | None = None) -> int:
    """Command line shared by the fuzzers: --minutes, --seed, --out, --slow, --hang."""
    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=1.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--out", type=Path, default=Path("fuzz-findings"))
    ap.add_argument("--slow", type=float, default=2.0)
    ap.add_argument("--hang", type=float, default=30.0)
    args = ap.parse_args(argv)
    return run_fn(args.minutes, args.seed, args.out, args.slow, args.hang)


def main(argv: list[str] | None = None) -> int:
    """Command line of the fuzzer."""
    return command_line(run, __doc__ or "", argv)


if __name__ == "__main__":
    sys.exit(main())
