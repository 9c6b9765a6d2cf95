"""Time and peak memory of reading and cleaning large generated DXF drawings.

Two drawings of the same geometry: N segments as LINE entities in model
space (N/100 regular 100-gons on a grid), and the same as N/100 INSERTs of
one 100-line block. Run: ``python benchmarks/bench_import.py [N ...]``
(default 10 000 and 100 000 segments). Peak memory is measured by
tracemalloc in a second pass, so the timings are not slowed by it.
"""

from __future__ import annotations

import math
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import ezdxf
from sectionwave.importers.clean import clean_drawing
from sectionwave.importers.dxf import read_dxf

SIDES = 100
RADIUS_MM = 4.0
PITCH_MM = 10.0


def polygon(cx: float, cy: float) -> list[tuple[float, float]]:
    return [(cx + RADIUS_MM * math.cos(2 * math.pi * k / SIDES),
             cy + RADIUS_MM * math.sin(2 * math.pi * k / SIDES)) for k in range(SIDES)]


def centres(count: int) -> list[tuple[float, float]]:
    side = math.ceil(math.sqrt(count))
    return [(PITCH_MM * (i % side), PITCH_MM * (i // side)) for i in range(count)]


def write_flat(path: Path, n_segments: int) -> Path:
    doc = ezdxf.new(units=4)
    msp = doc.modelspace()
    for cx, cy in centres(n_segments // SIDES):
        pts = polygon(cx, cy)
        for k in range(SIDES):
            msp.add_line(pts[k], pts[(k + 1) % SIDES])
    doc.saveas(path)
    return path


def write_blocks(path: Path, n_segments: int) -> Path:
    doc = ezdxf.new(units=4)
    blk = doc.blocks.new("POLY")
    pts = polygon(0.0, 0.0)
    for k in range(SIDES):
        blk.add_line(pts[k], pts[(k + 1) % SIDES])
    msp = doc.modelspace()
    for cx, cy in centres(n_segments // SIDES):
        msp.add_blockref("POLY", (cx, cy))
    doc.saveas(path)
    return path


def run(path: Path) -> tuple[float, float, int]:
    t0 = time.perf_counter()
    drawing = read_dxf(path)
    t1 = time.perf_counter()
    result = clean_drawing(drawing)
    t2 = time.perf_counter()
    assert result.is_ok, result.audit.errors[:3]
    return t1 - t0, t2 - t1, len(result.bodies)


def peak_mib(path: Path) -> float:
    tracemalloc.start()
    clean_drawing(read_dxf(path))
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 2**20


def main(sizes: list[int]) -> None:
    print(f"{'drawing':>10} {'segments':>9} {'read s':>8} {'clean s':>8} {'total s':>8} "
          f"{'us/seg':>7} {'peak MiB':>9} {'bodies':>7}")
    rows = {}
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            for kind, writer in (("lines", write_flat), ("blocks", write_blocks)):
                path = writer(Path(tmp) / f"{kind}_{n}.dxf", n)
                t_read, t_clean, bodies = run(path)
                peak = peak_mib(path)
                total = t_read + t_clean
                rows[kind, n] = total
                print(f"{kind:>10} {n:>9} {t_read:8.2f} {t_clean:8.2f} {total:8.2f} "
                      f"{1e6 * total / n:7.1f} {peak:9.1f} {bodies:>7}")
    big = max(sizes)
    print(f"blocks / lines time at {big} segments: "
          f"{rows['blocks', big] / rows['lines', big]:.2f}")
    if len(sizes) > 1:
        small = min(sizes)
        print(f"time ratio {big} / {small} segments (lines): "
              f"{rows['lines', big] / rows['lines', small]:.1f} for {big / small:.0f}x the size")


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [10_000, 100_000])
