"""Reading big spectrometer exports: time and peak memory, as ratios to a floor run in the same run.

    python3 bench/import_speed.py [--sizes 1 10 50] [--repeat 1]

For each size [MB] an invented export is written (samples of two or three burns, 16 element
columns, semicolon separated, decimal comma, as the demo shop's stands write them). Each reading is a
fresh process, so its peak resident memory (ru_maxrss of the child) is its own:

1. `meltfix import FILE --json` (to /dev/null): read, check every burn, average, print the JSON.
2. The floor: `csv.reader` over the same file, counting the cells (no checking, no averaging).

Goal (issue 12): a 50 MB export under 30 s and under 300 MB. Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import os
import random
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ELEMENTS = "C Si Mn P S Cr Ni Mo Cu Al V Nb Ti B N Sn".split()
CLI = "import sys; from meltfix.cli import program; sys.exit(program())"
FLOOR = ("import csv, sys\n"
         "with open(sys.argv[1], newline='', encoding='utf-8') as f:\n"
         "    print(sum(len(row) for row in csv.reader(f, delimiter=';')))")


def write_export(path: Path, megabytes: float) -> int:
    """An invented export of about ``megabytes`` MB; returns its number of rows."""
    rng = random.Random(12)
    target = int(megabytes * 1_000_000)
    rows = 0
    with path.open("w", encoding="utf-8", newline="") as out:
        out.write("Sample;Burn;Grade;" + ";".join(f"{s} ppm" if s in "NB" else s for s in ELEMENTS) + "\n")
        sample = 0
        while out.tell() < target:
            sample += 1
            base = [rng.uniform(0.001, 1.5) for _ in ELEMENTS]
            for burn in range(1, rng.choice((2, 2, 3)) + 1):
                cells = [f"{v * rng.uniform(0.995, 1.005):.4f}".replace(".", ",") for v in base]
                out.write(f"KB-{sample};{burn};S355J2;" + ";".join(cells) + "\n")
                rows += 1
    return rows


def measure(argv: list[str]) -> tuple[float, float]:
    """Wall time [s] and peak resident memory [MB] of one child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    start = time.perf_counter()
    with open(os.devnull, "w") as null:
        done = subprocess.run(argv, stdout=null, stderr=subprocess.PIPE, text=True, check=False)
    elapsed = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv[:4])}... failed: {done.stderr.strip()[:300]}")
    peak_kb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    # ru_maxrss of children is the largest child so far: run the bigger reading last within a size.
    return elapsed, max(peak_kb, before) / 1024


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=float, nargs="+", default=[1, 10, 50], help="export sizes [MB]")
    args = parser.parse_args()
    print(f"{'size':>6} {'rows':>9} | {'import s':>9} {'floor s':>8} {'ratio':>6} | {'import MB':>9} "
          f"{'floor MB':>8} {'x file':>6}")
    with tempfile.TemporaryDirectory() as folder:
        for size in args.sizes:
            path = Path(folder) / f"export-{size:g}MB.csv"
            rows = write_export(path, size)
            file_mb = path.stat().st_size / 1e6
            # Each in its own grandchild so ru_maxrss is that reading's alone.
            floor_s, floor_mb = _isolated([sys.executable, "-c", FLOOR, str(path)])
            import_s, import_mb = _isolated([sys.executable, "-c", CLI, "import", str(path), "--json"])
            print(f"{file_mb:5.1f}M {rows:9,} | {import_s:9.2f} {floor_s:8.2f} {import_s / floor_s:6.1f} | "
                  f"{import_mb:9.0f} {floor_mb:8.0f} {import_mb / file_mb:6.1f}")


def _isolated(argv: list[str]) -> tuple[float, float]:
    """measure() in a fresh Python, so the peak memory of one reading is not another's."""
    code = ("import sys, json; sys.path.insert(0, %r); from import_speed import measure; "
            "print(json.dumps(measure(json.loads(sys.argv[1]))))") % str(Path(__file__).parent)
    import json

    done = subprocess.run([sys.executable, "-c", code, json.dumps(argv)], capture_output=True, text=True, check=True)
    seconds, megabytes = json.loads(done.stdout)
    return seconds, megabytes


if __name__ == "__main__":
    main()
