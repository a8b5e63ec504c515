"""Spectrometer exports read as a stream: samples handed on one at a time, memory independent of the
file's size, and the same results as reading the whole file."""

from __future__ import annotations

import gc
import random
import tracemalloc
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.readers.spectro import iter_samples, parse_export, read_export

ELEMENTS = "C Si Mn P S Cr Ni Mo Cu Al V Nb Ti B N Sn".split()


def _write_export(path: Path, megabytes: float) -> None:
    """An invented export: samples of two or three burns, 16 elements, decimal commas, two in ppm."""
    rng = random.Random(7)
    header = "Sample;Burn;Grade;" + ";".join(f"{s} ppm" if s in ("B", "N") else s for s in ELEMENTS)
    lines = [header]
    size, sample = len(header), 0
    while size < megabytes * 1_000_000:
        sample += 1
        base = [rng.uniform(0.001, 1.5) for _ in ELEMENTS]
        for burn in range(1, rng.choice((2, 3)) + 1):
            cells = ";".join(f"{v * rng.uniform(0.998, 1.002):.4f}".replace(".", ",") for v in base)
            lines.append(f"KB-{sample};{burn};S355J2;{cells}")
            size += len(lines[-1]) + 1
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _peak_bytes(path: Path) -> int:
    """Peak memory traced while every sample of the export is read and let go."""
    gc.collect()
    tracemalloc.start()
    try:
        count = sum(1 for _ in iter_samples(path))
        assert count > 100
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.slow  # writes and reads exports of several MB
def test_reading_memory_does_not_grow_with_the_file(tmp_path: Path) -> None:
    # A memory property, not a timing: four times the rows may not need even twice the memory,
    # because only the samples still being read (and one batch being averaged) are held.
    warm, small, large = tmp_path / "warm.csv", tmp_path / "small.csv", tmp_path / "large.csv"
    _write_export(warm, 0.1)
    _write_export(small, 0.5)
    _write_export(large, 2)
    _peak_bytes(warm)  # first use fills caches (regular expressions, imports) that are not the reader's
    assert _peak_bytes(large) < 2 * _peak_bytes(small)


def test_samples_arrive_before_the_file_is_read_to_its_end(tmp_path: Path) -> None:
    path = tmp_path / "export.csv"
    rows = "".join(f"KB-{n};1;0,{n:03d}\nKB-{n};2;0,{n:03d}\n" for n in range(1, 600))
    path.write_text("Sample;Burn;C\n" + rows + "KB-x;1;oops\n", encoding="utf-8")
    first = next(iter(iter_samples(path)))
    assert first.sample_id == "KB-1" and first.analysis.pct["C"] == pytest.approx(0.001)
    # Read whole, the bad last row still rejects the file.
    with pytest.raises(InputError, match=r"row 1200, column 'C'"):
        read_export(path)


def test_a_sample_sparked_again_hundreds_of_samples_later_is_still_one_sample() -> None:
    rows = "".join(f"KB-{n};1;0,{n:03d}\nKB-{n};2;0,{n:03d}\n" for n in range(1, 600))
    body = "Sample;Burn;C\nKB-0;1;0,300\n" + rows + "KB-0;2;0,302\n"
    result = parse_export(body, "x.csv")
    assert [s.sample_id for s in result.samples[:2]] == ["KB-0", "KB-1"]
    first = result.samples[0]
    assert [b.row for b in first.burns] == [2, 1201]
    assert first.analysis.pct["C"] == pytest.approx(0.301)
    assert len(result.samples) == 600


def test_the_quick_path_and_the_careful_one_agree() -> None:
    # The same burns, once as plain numbers (averaged a batch at a time) and once with a blank
    # column that sends every row through the careful per-cell parser: the same means to the digit.
    plain = "Sample;Burn;C;Mn;N ppm\n" + "".join(
        f"KB-{n};{b};0,{300 + n + b:03d};0,{850 - n - 3 * b:03d};{40 + b},5\n" for n in range(300) for b in (1, 2, 3))
    careful = plain.replace("Sample;Burn;C;Mn;N ppm\n", "Sample;Burn;C;Mn;N ppm;Sn\n").replace(",5\n", ",5;-\n")
    quick = parse_export(plain, "a.csv").samples
    slow = parse_export(careful, "b.csv").samples
    assert [s.analysis.pct for s in quick] == [s.analysis.pct for s in slow]
    assert [s.flags for s in quick] == [s.flags for s in slow]
    assert dict(quick[0].burns[0].readings) == dict(slow[0].burns[0].readings)
